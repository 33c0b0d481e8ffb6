"""ARCH(p) (Engle 1982): sigma2[t] = omega + sum_i alpha_i e2[t-i]."""

from __future__ import annotations

from ._linear import LinearFamily


class Arch(LinearFamily):
    key = "arch"
    words = ("ARCH",)
    n_orders = 1
    default_orders = (1,)
    stems = ("omega", "alpha")
    indexed = ("alpha",)
    holds_at_bound = True
    targeted = "omega"

    @classmethod
    def _resolve(cls, word, p, q):
        if p < 1:
            raise ValueError("ARCH needs at least one lag, ARCH(1) or more")
        return cls.key, p, 0

    def _grid(self):
        return [(a, 0.0, 0.0) for a in (0.1, 0.3, 0.6)]
