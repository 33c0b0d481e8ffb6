"""GARCH(p,q) (Bollerslev 1986): sigma2[t] = omega + sum_i alpha_i e2[t-i] + sum_j beta_j sigma2[t-j]."""

from __future__ import annotations

from ._linear import LinearFamily


class Garch(LinearFamily):
    key = "garch"
    words = ("GARCH",)
    stems = ("omega", "alpha", "beta")
    indexed = ("alpha", "beta")
    holds_at_bound = True
    targeted = "omega"
    min_arch_terms = 1

    @classmethod
    def _resolve(cls, word, p, q):
        if q == 0:  # GARCH(p,0) is ARCH(p)
            from .arch import Arch

            return Arch.key, p, 0
        return cls.key, p, q
