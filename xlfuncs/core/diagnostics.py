"""Tests of a fitted model on its standardised residuals z (the core of ``VOLTESTS``).

| row | statistic | reference distribution | reference |
| --- | --- | --- | --- |
| ``Ljung-Box z`` | Q = n(n+2) sum_{k=1..L} rho_k^2 / (n-k), rho_k the sample autocorrelations of z | chi2(L - ARMA order) | Ljung and Box (1978) |
| ``Ljung-Box z^2`` | the same Q on z^2 | chi2(L - ARCH order - GARCH order) | McLeod and Li (1983) |
| ``ARCH-LM`` | n R^2 of z_t^2 on a constant and z_{t-1}^2 .. z_{t-L}^2 (n = rows used) | chi2(L) | Engle (1982) |
| ``Jarque-Bera`` | n/6 (S^2 + (K-3)^2/4), S and K from the population moments | chi2(2) | Jarque and Bera (1980) |
| ``Sign bias`` | t of b in z_t^2 = a + b S-_{t-1} | Student t(n-2) | Engle and Ng (1993) |
| ``Negative size bias`` | t of b in z_t^2 = a + b S-_{t-1} z_{t-1} | Student t(n-2) | Engle and Ng (1993) |
| ``Positive size bias`` | t of b in z_t^2 = a + b S+_{t-1} z_{t-1} | Student t(n-2) | Engle and Ng (1993) |
| ``Joint sign bias`` | n R^2 of z_t^2 on a constant and the three regressors above | chi2(3) | Engle and Ng (1993) |

Here S-_{t-1} = 1 if z_{t-1} < 0 and 0 otherwise, S+_{t-1} = 1 - S-_{t-1}; the sign-bias
regressions use the n - 1 rows t = 2..n and conventional OLS standard errors, and their
two-sided p-values come from Student t with (rows - 2) degrees of freedom.

Every p-value is an upper-tail probability (two-sided for the t statistics).  A statistic
that is undefined for the data (a series with no variation, a regression whose regressor is
constant because every residual has the same sign) is ``nan`` with a ``nan`` p-value; bad
arguments raise :class:`~xlfuncs.core.errors.InputError`.

>>> z = [0.3, -1.1, 0.8, 1.9, -0.4, -0.7, 0.1, 1.2, -1.6, 0.5, -0.2, 0.9]
>>> [row.label for row in run_tests(z, lags=3, arma_order=0, variance_order=2)][:3]
['Ljung-Box z', 'Ljung-Box z^2', 'ARCH-LM']
>>> default_lags(1974)
10
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InputError, describe_value, value_words
from .tails import chi2_sf, t_sf

__all__ = [
    "LABELS",
    "MIN_OBS",
    "TestResult",
    "ljung_box",
    "arch_lm",
    "jarque_bera",
    "sign_bias",
    "run_tests",
    "default_lags",
    "max_lags",
]

LABELS = (
    "Ljung-Box z",
    "Ljung-Box z^2",
    "ARCH-LM",
    "Jarque-Bera",
    "Sign bias",
    "Negative size bias",
    "Positive size bias",
    "Joint sign bias",
)

MIN_OBS = 10  # fewest residuals the tests accept (a practical floor, not a recommendation)


@dataclass
class TestResult:
    """One row of the test table."""

    __test__ = False  # not a pytest test class, despite the name

    label: str
    statistic: float
    df: float | None
    p_value: float
    note: str | None = None  # why the row is blank (a test that cannot run with these lags)


# ----------------------------------------------------------------------------------------
# validation
def max_lags(n: int) -> int:
    """Largest lag count accepted for n residuals: (n - 2) // 2.

    It keeps the ARCH-LM regression (n - L rows, L + 1 coefficients) with at least one
    residual degree of freedom, and every autocorrelation on at least half the sample.
    """
    return max(0, (int(n) - 2) // 2)


def _series(x, what: str = "z") -> np.ndarray:
    try:
        a = np.asarray(x, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{what} must be a list of numbers") from None
    if a.ndim == 2 and 1 in a.shape:
        a = a.ravel()
    if a.ndim != 1:
        raise InputError(f"{what} must be one column or one row of numbers, got shape {a.shape}")
    if not np.all(np.isfinite(a)):
        bad = int(np.flatnonzero(~np.isfinite(a))[0]) + 1
        raise InputError(f"{what} must be finite numbers; value {bad} is {value_words(a[bad - 1])} (drop undefined values first)")
    if len(a) < MIN_OBS:
        raise InputError(f"the tests need at least {MIN_OBS} residuals, got {len(a)}")
    return a


def _whole(value, name: str, lo: int, hi: int | None = None) -> int:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, np.integer, float, np.floating)):
        raise InputError(f"{name} must be a whole number, got {describe_value(value)}")
    x = float(value)
    ok = math.isfinite(x) and x.is_integer() and x >= lo and (hi is None or x <= hi)
    if not ok:
        shown = value_words(x)
        if hi is None:
            raise InputError(f"{name} must be a whole number of at least {lo}, got {shown}")
        raise InputError(f"{name} must be a whole number from {lo} to {hi}, got {shown}")
    return int(x)


def _lags(value, n: int) -> int:
    hi = max_lags(n)
    try:
        return _whole(value, "lags", 1, hi)
    except InputError as exc:
        raise InputError(f"{exc} (at most {hi} for {n} residuals: half of them less one)") from None


# ----------------------------------------------------------------------------------------
# shared maths
def _chi2_p(stat: float, df: float) -> float:
    return float(chi2_sf(stat, df)) if math.isfinite(stat) else math.nan


def _ols(y: np.ndarray, X: np.ndarray):
    """OLS by QR: coefficients, conventional standard errors and R^2 (about the mean of y).

    Returns ``None`` when X is rank-deficient or y has no variation.
    """
    m, k = X.shape
    Q, R = np.linalg.qr(X)
    d = np.abs(np.diag(R))
    if m <= k or not d.min() > 1e-10 * d.max():
        return None
    yc = y - y.mean()
    tss = float(yc @ yc)
    if not tss > 0.0:
        return None
    beta = np.linalg.solve(R, Q.T @ y)
    resid = y - X @ beta
    rss = float(resid @ resid)
    Rinv = np.linalg.solve(R, np.eye(k))
    se = np.sqrt(rss / (m - k) * np.sum(Rinv ** 2, axis=1))  # diag of s^2 (X'X)^-1
    return beta, se, 1.0 - rss / tss


# ----------------------------------------------------------------------------------------
# the tests
def _ljung_box(a: np.ndarray, lags: int, dof_used: int, why: str):
    n = len(a)
    df = lags - dof_used
    if df < 1:
        raise InputError(
            f"lags must be at least {dof_used + 1}, one more than {why} = {dof_used}, "
            f"so the Ljung-Box test keeps a degree of freedom; got {lags}"
        )
    c = a - a.mean()
    denom = float(c @ c)
    if not denom > 0.0:
        return math.nan, float(df), math.nan
    rho = np.array([c[k:] @ c[:-k] for k in range(1, lags + 1)]) / denom
    q = float(n * (n + 2) * np.sum(rho ** 2 / (n - np.arange(1, lags + 1))))
    return q, float(df), _chi2_p(q, df)


def ljung_box(x, lags, dof_used=0):
    """Ljung-Box Q of ``x`` over ``lags`` autocorrelations: (Q, df, p), df = lags - dof_used.

    The autocorrelations are taken about the sample mean.  ``dof_used`` is the number of
    fitted parameters the test should allow for; df must stay at least 1.
    """
    a = _series(x, "x")
    L = _lags(lags, len(a))
    m = _whole(dof_used, "dof_used", 0)
    return _ljung_box(a, L, m, "dof_used")


def arch_lm(z, lags):
    """Engle's (1982) ARCH-LM test: (n R^2, lags, p).

    z^2 is regressed on a constant and its own ``lags`` lags over the n = len(z) - lags rows
    that have every lag; z is not demeaned (pass demeaned returns to test raw returns).
    """
    a = _series(z)
    L = _lags(lags, len(a))
    y2 = a ** 2
    n = len(a) - L
    lagged = np.lib.stride_tricks.sliding_window_view(y2[:-1], L)[:, ::-1]  # row t: z2[t+L-1] .. z2[t]
    X = np.column_stack([np.ones(n), lagged])
    res = _ols(y2[L:], X)
    if res is None:
        return math.nan, float(L), math.nan
    stat = n * float(res[2])
    return stat, float(L), _chi2_p(stat, L)


def jarque_bera(z):
    """Jarque-Bera normality test: (JB, 2, p), JB = n/6 (S^2 + (K-3)^2/4), population moments."""
    a = _series(z)
    n = len(a)
    c = a - a.mean()
    m2 = float(np.mean(c ** 2))
    if not m2 > 0.0:
        return math.nan, 2.0, math.nan
    skew = float(np.mean(c ** 3)) / m2 ** 1.5
    kurt = float(np.mean(c ** 4)) / m2 ** 2
    jb = n / 6.0 * (skew ** 2 + (kurt - 3.0) ** 2 / 4.0)
    return jb, 2.0, _chi2_p(jb, 2)


def sign_bias(z):
    """Engle and Ng's (1993) sign and size bias tests: four (statistic, df, p) tuples.

    In order: sign bias, negative size bias, positive size bias (t statistics, df = rows - 2,
    two-sided Student t p-values) and the joint test (rows x R^2, chi2(3)); rows = len(z) - 1.
    """
    a = _series(z)
    y = a[1:] ** 2
    prev = a[:-1]
    m = len(y)
    neg = (prev < 0).astype(float)
    pos = 1.0 - neg
    regressors = (neg, neg * prev, pos * prev)
    ones = np.ones(m)
    out = []
    df_t = float(m - 2)
    for x in regressors:
        res = _ols(y, np.column_stack([ones, x]))
        if res is None:
            out.append((math.nan, df_t, math.nan))
            continue
        t = float(res[0][1] / res[1][1])
        out.append((t, df_t, float(2.0 * t_sf(abs(t), df_t))))
    res = _ols(y, np.column_stack([ones, *regressors]))
    if res is None:
        out.append((math.nan, 3.0, math.nan))
    else:
        stat = m * float(res[2])
        out.append((stat, 3.0, _chi2_p(stat, 3)))
    return out


def _undefined_reason(a: np.ndarray, label: str) -> str:
    """Why a row's statistic is undefined for the residuals ``a`` (its regression or
    autocorrelation has nothing that varies)."""
    if np.ptp(a) == 0:
        return "not computed: the standardised residuals are all the same number, so there is nothing to test"
    if label != LABELS[0] and label != LABELS[3] and np.ptp(a ** 2) == 0:
        return "not computed: every squared standardised residual is the same number, so there is no variation to test"
    if label in LABELS[4:] and (np.all(a[:-1] < 0) or np.all(a[:-1] >= 0)):
        return "not computed: every residual has the same sign, so the sign regressors do not vary"
    return "not computed: the test's regression is singular for these residuals (a regressor does not vary)"


def run_tests(z, lags: int, arma_order: int, variance_order: int) -> list[TestResult]:
    """The eight tests of :data:`LABELS`, in that order, on standardised residuals ``z``.

    ``z`` must be finite: the caller drops the leading values the model leaves undefined.
    Ljung-Box on z allows for ``arma_order`` (AR order + MA order) degrees of freedom;
    Ljung-Box on z^2 allows for ``variance_order`` (ARCH order + GARCH order, 0 for a
    constant variance).  Reducing the z^2 degrees of freedom by the variance order is
    common practice rather than an exact result.  A Ljung-Box test whose ``lags`` do not
    exceed its order has no degree of freedom left: its row is ``nan`` with a ``note``
    saying what it needs, and the other rows are computed as usual.  Every row that is
    ``nan`` has a ``note`` saying why: fewer than :data:`MIN_OBS` residuals (every row),
    residuals or squared residuals that do not vary, residuals all of one sign.
    """
    try:
        a = np.asarray(z, dtype=float)
    except (TypeError, ValueError):
        a = None
    if a is not None and a.ndim == 1 and len(a) < MIN_OBS and np.all(np.isfinite(a)):
        _whole(lags, "lags", 1)
        _whole(arma_order, "arma_order", 0)
        _whole(variance_order, "variance_order", 0)
        why = f"not computed: the tests need at least {MIN_OBS} standardised residuals, got {len(a)}"
        return [TestResult(label, math.nan, None, math.nan, why) for label in LABELS]
    a = _series(z)
    n = len(a)
    L = _lags(lags, n)
    p = _whole(arma_order, "arma_order", 0)
    v = _whole(variance_order, "variance_order", 0)
    notes = {}

    def lb(x, order, what, label):
        if L - order < 1:
            notes[label] = f"not computed: needs lags of at least {order + 1} ({what} {order} plus one), got {L}"
            return math.nan, math.nan, math.nan
        return _ljung_box(x, L, order, what)

    rows = [
        lb(a, p, "the ARMA order", LABELS[0]),
        lb(a ** 2, v, "the variance order", LABELS[1]),
        arch_lm(a, L),
        jarque_bera(a),
        *sign_bias(a),
    ]
    out = []
    for label, (s, df, pv) in zip(LABELS, rows):
        note = notes.get(label)
        if note is None and not (math.isfinite(s) and math.isfinite(pv)):
            note = _undefined_reason(a, label)
        if note is not None:  # a row not computed is blank throughout, its reason in the note
            s, df, pv = math.nan, None, math.nan
        out.append(TestResult(label, float(s), None if df is None or not math.isfinite(df) else float(df), float(pv),
                              note))
    return out


def default_lags(n, order: int = 0) -> int:
    """Lags to use when the user gives none: min(10, n // 5), at least 1 (common practice).

    ``order`` (optional) is the larger of the model orders the Ljung-Box tests allow for;
    the result is raised to ``order + 1`` so both tests keep a degree of freedom, as long
    as that stays within :func:`max_lags`.
    """
    n = int(n)
    lags = max(1, min(10, n // 5))
    if order and lags <= order:
        lags = min(int(order) + 1, max(max_lags(n), 1))
    return lags
