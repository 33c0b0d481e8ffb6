"""GARCH(p,q) (Bollerslev 1986): sigma2[t] = omega + sum_i alpha_i e2[t-i] + sum_j beta_j sigma2[t-j]."""

from __future__ import annotations

from ._linear import LinearFamily


def need_arch_term(word: str, p: int) -> None:
    """The first order of a (p,q) family counts ARCH terms; at least one is needed."""
    if p < 1:
        raise ValueError(f"{word} needs at least one ARCH term (its first order must be 1 or more)")


class Garch(LinearFamily):
    key = "garch"
    words = ("GARCH",)
    stems = ("omega", "alpha", "beta")
    indexed = ("alpha", "beta")
    holds_at_bound = True
    targeted = "omega"

    @classmethod
    def _resolve(cls, word, p, q):
        need_arch_term(word, p)
        if q == 0:  # GARCH(p,0) is ARCH(p)
            from .arch import Arch

            return Arch.key, p, 0
        return cls.key, p, q
