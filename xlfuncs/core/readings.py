"""Plain-language readings of the tests, one short phrase beside each result.

A reading depends on the test's outcome at the 5% level (:data:`LEVEL`) and on the fit: the
same Jarque-Bera rejection means "expected" under fat-tailed shocks and "try t shocks" under
normal ones.  The worksheet layer only places these texts; what they say is decided here.

| function | reads |
| --- | --- |
| :func:`diagnostics` | the rows of ``VOLTESTS`` (:mod:`xlfuncs.core.diagnostics`) |
| :func:`stability` | the Nyblom-Hansen rows of ``VOLSTABILITY`` (:mod:`xlfuncs.core.stability`) |
| :func:`diebold_mariano` | ``VOLDM`` (:mod:`xlfuncs.core.comparison`) |
| :func:`coverage` | the VaR coverage tests of ``VOLCOVERAGE`` and ``VOLBACKTEST`` |
| :func:`expected_shortfall` | their ES tests (:mod:`xlfuncs.core.esbacktest`) |

Facts about the model come from its parameter names (DESIGN.md: ``gamma[i]`` is an asymmetry
term, ``nu`` a shape parameter of the tails, ``lambda`` the skewed t's asymmetry), never from
a family's name.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["LEVEL", "diagnostics", "stability", "diebold_mariano", "coverage", "expected_shortfall"]

LEVEL = 0.05  # the size every reading judges at
_FEW_EXCEPTIONS = 5  # below this many exceptions the ES tests have little power (common practice)


def _finite(x) -> bool:
    return x is not None and isinstance(x, (int, float, np.floating)) and math.isfinite(float(x))


def _rejects(p) -> bool:
    return _finite(p) and p < LEVEL


# ----------------------------------------------------------------------------------------
# VOLTESTS
def _has_asymmetry(spec) -> bool:
    return any(n.startswith("gamma") for n in spec.variance_names)


def _tails(z):
    """(skewness, kurtosis) of z with population moments, as Jarque-Bera uses them."""
    c = np.asarray(z, dtype=float)
    c = c - c.mean()
    m2 = float(np.mean(c * c))
    if not m2 > 0:
        return math.nan, math.nan
    return float(np.mean(c ** 3)) / m2 ** 1.5, float(np.mean(c ** 4)) / m2 ** 2


def _jarque_bera(p, spec, dist, z) -> str:
    fat_ok = "nu" in dist.param_names
    skew_ok = "lambda" in dist.param_names
    if not _rejects(p):
        if fat_ok:
            return "no evidence against normal shocks: compare with normal shocks by BIC"
        return "no evidence against normal shocks"
    skew, kurt = _tails(z)
    if not (_finite(skew) and _finite(kurt)):
        return "non-normal residuals"
    tail_part = (kurt - 3.0) ** 2 / 4.0
    if skew * skew > tail_part:
        side = "left" if skew < 0 else "right"
        if skew_ok:
            return f"skewed residuals ({side}): expected with {dist.name} shocks"
        return f"skewed residuals ({side}): try skewt shocks"
    if kurt > 3.0:
        if fat_ok:
            return f"fat tails: expected with {dist.name} shocks"
        return "fat tails, fatter than normal: try t shocks"
    if fat_ok:
        return f"thin tails, thinner than normal: check the fitted {dist.name} shape"
    return "thin tails, thinner than normal: try ged shocks"


def _sign_bias(label, stat, p, spec) -> str:
    asym = _has_asymmetry(spec)
    plain = {"Sign bias": "no sign bias left", "Negative size bias": "no negative size bias left",
             "Positive size bias": "no positive size bias left", "Joint sign bias": "no asymmetry left"}[label]
    if not _rejects(p):
        return plain
    if label == "Joint sign bias":
        what = "sign or size asymmetry left"
        more_negative = True
    elif label == "Sign bias":
        more_negative = stat > 0
        what = ("negative shocks raise the variance more than the model allows" if more_negative
                else "negative shocks raise the variance less than the model allows")
    elif label == "Negative size bias":
        more_negative = stat < 0  # the regressor S- z is <= 0: a negative slope means large falls matter more
        what = ("large negative shocks raise the variance more than the model allows" if more_negative
                else "large negative shocks raise the variance less than the model allows")
    else:
        more_negative = stat < 0
        what = ("large positive shocks raise the variance less than the model allows" if more_negative
                else "large positive shocks raise the variance more than the model allows")
    if more_negative and not asym:
        return f"{what}: try an asymmetric model (GJR-GARCH, EGARCH)"
    if asym:
        return f"{what}, beyond the model's asymmetry term"
    return what


def diagnostics(results, spec, dist, z) -> list[str]:
    """One reading per :class:`~xlfuncs.core.diagnostics.TestResult` of ``run_tests``.

    ``spec`` and ``dist`` are the fit's model and distribution, ``z`` its standardised residuals.
    """
    arma = spec.ar + spec.ma
    varies = spec.family.varies
    out = []
    for t in results:
        note = getattr(t, "note", None)
        if note:
            out.append(note)
            continue
        if not _finite(t.statistic) or not _finite(t.p_value):
            out.append("not computed: undefined for these residuals (no variation to test)")
            continue
        p = t.p_value
        if t.label == "Ljung-Box z":
            if _rejects(p):
                out.append("residual autocorrelation left: consider " + ("more AR or MA terms" if arma else "AR terms in the mean"))
            else:
                out.append("no residual autocorrelation left")
        elif t.label in ("Ljung-Box z^2", "ARCH-LM"):
            if not varies:
                out.append("volatility clustering: model the variance, e.g. GARCH(1,1)" if _rejects(p)
                           else "no volatility clustering found")
            elif _rejects(p):
                out.append("ARCH effects left: consider higher orders or another variance model")
            else:
                out.append("no ARCH effects left")
        elif t.label == "Jarque-Bera":
            out.append(_jarque_bera(p, spec, dist, z))
        else:
            out.append(_sign_bias(t.label, t.statistic, p, spec))
    return out


# ----------------------------------------------------------------------------------------
# VOLSTABILITY
def stability(st) -> tuple[list[str], str]:
    """(reading per parameter, reading of the joint test) of a :class:`~xlfuncs.core.stability.Stability`."""
    rows = []
    for name, L in zip(st.names, st.statistics):
        if not _finite(L):
            rows.append(f"undefined: the scores of {name} do not vary")
        elif L > st.crit_individual:
            rows.append(f"{name} unstable at 5%")
        else:
            rows.append(f"{name} looks stable")
    if not _finite(st.joint):
        joint = "undefined: the scores are collinear (a parameter is not identified)"
    elif st.crit_joint is None:
        joint = f"no tabulated 5% value for {len(st.names)} parameters (Hansen 1992 stops at 20)"
    elif st.joint > st.crit_joint:
        bad = [n for n, L in zip(st.names, st.statistics) if _finite(L) and L > st.crit_individual]
        joint = "parameters unstable at 5%: " + ("mostly " + ", ".join(bad) + "; " if bad else "") \
            + "consider a shorter sample or a break"
    else:
        joint = "parameters look stable"
    if not st.estimated:
        joint += "; parameters given, not estimated: the test assumes they are the maximum-likelihood estimate"
    return rows, joint


# ----------------------------------------------------------------------------------------
# VOLDM
def diebold_mariano(res, first: str = "a", second: str = "b") -> str:
    if not _finite(res.statistic):
        if _finite(res.mean_diff) and res.mean_diff == 0:
            return "identical losses: nothing to compare"
        return "the loss difference does not vary: the test is undefined"
    if not _rejects(res.p_value):
        return "no significant difference in forecast loss at 5%"
    better = second if res.mean_diff > 0 else first
    return f"{better} forecasts better (lower mean loss) at 5%"


# ----------------------------------------------------------------------------------------
# VOLCOVERAGE, VOLBACKTEST
def coverage(cov) -> str:
    parts = []
    if _rejects(cov.p_uc):
        parts.append("too many exceptions: VaR too low" if cov.rate > cov.expected_rate
                     else "too few exceptions: VaR too high (conservative)")
    if _rejects(cov.p_ind):
        parts.append("exceptions cluster: the VaR reacts too slowly")
    if not parts:
        if cov.exceptions == 0 and cov.forecasts * cov.expected_rate < 3:
            return "no exceptions; too few forecasts to judge the coverage"
        return "exceptions in line with the level, no clustering"
    return "; ".join(parts)


def expected_shortfall(tests) -> str:
    k = tests.exceptions
    if k == 0:
        return "no exceptions: the ES is not tested"
    mf, z2 = _rejects(tests.mf_p), _rejects(tests.z2_p)
    if mf and z2:
        text = "ES understated: losses beyond the VaR exceed the ES forecasts"
    elif mf:
        text = "losses beyond the VaR exceed the ES forecasts (exceedance residuals)"
    elif z2:
        text = "ES too low for the tail losses seen (Z2 weighs their number and size)"
    else:
        text = "ES consistent with the losses beyond the VaR"
    if k < _FEW_EXCEPTIONS:
        text += f"; only {k} exception{'s' if k != 1 else ''}, a weak test"
    return text
