"""The conditional mean: its parts, their parameters, residuals, start values and forecasts.

    r[t] = mu + sum_i phi[i] r[t-i] + sum_j theta[j] e[t-j] + sum_k x[k] X[t,k] + lambda_m sigma[t] + e[t]

| part | parameters | what it adds to the mean of r[t] |
| --- | --- | --- |
| :class:`Intercept` | ``mu`` | mu (absent in a ``ZERO`` mean) |
| :class:`AutoRegression` | ``phi[i]`` | sum phi[i] r[t-i] |
| :class:`MovingAverage` | ``theta[j]`` | sum theta[j] e[t-j] |
| :class:`Regression` | ``x[k]`` | sum x[k] X[t,k], the mean regressors in the row of r[t] |
| :class:`InMean` | ``lambda_m`` | lambda_m sigma[t] (GARCH-in-mean, Engle, Lilien & Robins 1987) |

The intercept, the autoregression and the regressors are *linear* parts: each gives a design
row per parameter (1, r[t-i], X[t,k]) and adds coefficient x row.  The moving average filters
what the linear parts leave, and the in-mean term reads the conditional variance, so a model
with it computes residuals and variances together one observation at a time (the variance
family's :meth:`~xlfuncs.core.families.VarianceFamily.filter`).

:class:`MeanModel` puts the parts of one model together on one sample.  Parameter order: mu,
phi[1..p], theta[1..q], x[k] (mean regressor columns, ascending), lambda_m.

Regressors are contemporaneous: the value in row t of the regressors range enters the mean (and,
with ``xvar=``, the variance) of the return in row t.  A value known only later must be lagged
by whoever fills the range (a rate that predicts the next return goes in that return's row).

Presample (option ``presample``): AR lags before the first observation take the sample mean of
the returns under ``mean``, while ``drop`` keeps the first p observations as lags only; MA
residuals and the in-mean term's filtered volatilities before the start are zero.
"""

from __future__ import annotations

import math

import numpy as np
from ._lazy import lfilter

from .errors import InputError

__all__ = ["MeanModel", "Intercept", "AutoRegression", "MovingAverage", "Regression", "InMean",
           "check_regressors", "regressor_list", "layout"]


def regressor_list(spec) -> str:
    """``x[1], v[2]``: the regressors of a model in column order."""
    return ", ".join(spec.regressor_names)


def check_regressors(X, T: int, spec, what: str = "regressors") -> np.ndarray | None:
    """The regressors as a (T x K) array of finite numbers for a model with K regressor columns.

    None for a model without regressors given none.  Raises :class:`InputError` saying what is
    wrong: regressors missing or not wanted, a wrong count of rows or columns, a value that is
    not a finite number, a column that cannot be told apart from the intercept.
    """
    K = spec.n_regressors
    if X is None:
        if K:
            s = "s" if K > 1 else ""
            raise InputError(f"this fit has {K} regressor{s} ({regressor_list(spec)}); their values are needed, one "
                             f"column per regressor and one row per return")
        return None
    X = np.asarray(X, dtype=float)
    if X.ndim == 1:
        X = X[:, None]
    if X.ndim != 2:
        raise InputError(f"{what} must be a table of numbers, one column per regressor")
    if not K:
        raise InputError(f"{what} are given but the model has none; leave them out, or estimate the model with them")
    if X.shape[1] != K:
        raise InputError(f"{what} have {X.shape[1]} column{'s' if X.shape[1] != 1 else ''} but the model has {K} "
                         f"regressor{'s' if K > 1 else ''} ({regressor_list(spec)}); give one column per regressor")
    if X.shape[0] != T:
        raise InputError(f"{what} have {X.shape[0]} rows but there are {T} returns; give one row per return")
    bad = ~np.isfinite(X)
    if bad.any():
        i, k = map(int, np.argwhere(bad)[0])
        raise InputError(f"{what} row {i + 1}, column {k + 1} is not a finite number")
    for k in range(1, K + 1):
        if T > 1 and np.ptp(X[:, k - 1]) == 0 and (k in spec.xvar or spec.has_mu):
            other = "omega" if k in spec.xvar else "mu"
            raise InputError(f"{what} column {k} holds the same number in every row; with {other} in the model it "
                             "cannot be told apart: leave the column out")
    # columns that are a combination of each other (two copies of one series): their coefficients
    # cannot be told apart, and the optimiser stopped with its own words, standard errors blank
    for cols, const in (([k for k in range(1, K + 1) if k not in spec.xvar], spec.has_mu), (list(spec.xvar), True)):
        if len(cols) < 2 and not (cols and const):
            continue
        M = X[:, [k - 1 for k in cols]]
        if const:
            M = np.column_stack([np.ones(T), M])
        if T > M.shape[1] and np.linalg.matrix_rank(M) < M.shape[1]:
            listed = ", ".join(map(str, cols))
            raise InputError(f"{what} columns {listed} are collinear (one is a combination of the others"
                             f"{' and the constant' if const else ''}), so their coefficients cannot be told apart; "
                             "leave one out")
    return X


def layout(spec, X, xvar=()):
    """The model with its regressors laid out: of the columns of ``X``, ``xvar`` enter the
    variance and the rest the mean.  A model already laid out (read from a fit table) is kept,
    and :func:`check_regressors` later checks ``X`` against it."""
    if X is None:
        if xvar:
            raise InputError(f"options: xvar={','.join(map(str, xvar))} sends regressor columns to the variance, but no "
                             "regressors are given")
        return spec
    if spec.n_regressors:
        if xvar and tuple(sorted(xvar)) != tuple(spec.xvar):
            raise InputError(f"options: xvar={','.join(map(str, xvar))} does not match the model's variance regressors "
                             f"({', '.join(spec.shift_names) or 'none'})")
        return spec
    X = np.asarray(X, dtype=float)
    n_cols = 1 if X.ndim == 1 else X.shape[1]
    return spec.with_regressors(n_cols, xvar)


# ---------------------------------------------------------------------------------------- parts
class Intercept:
    """mu: a design row of ones."""

    def __init__(self):
        self.names = ("mu",)

    def design(self, r, X, a: int, presample: str) -> np.ndarray:
        return np.ones((1, len(r) - a))

    def future(self, path: list, Xf, h: int) -> np.ndarray:
        return np.ones(1)


class AutoRegression:
    """phi[1..p]: design rows of lagged returns (the sample mean before the start under
    ``presample=mean``)."""

    def __init__(self, order: int):
        self.order = order
        self.names = tuple(f"phi[{i}]" for i in range(1, order + 1))

    def design(self, r, X, a: int, presample: str) -> np.ndarray:
        p, T = self.order, len(r)
        rbar = float(r.mean())
        padded = np.concatenate([np.full(p, rbar), r])
        return np.vstack([padded[p + a - i: p + T - i] for i in range(1, p + 1)])

    def future(self, path: list, Xf, h: int) -> np.ndarray:
        """The lagged returns of step h (observed, then forecast) from ``path`` (newest last)."""
        n = len(path)
        return np.array([path[n - i] for i in range(1, self.order + 1)])


class Regression:
    """x[k]: design rows of the mean regressors' columns, in the row of each return."""

    def __init__(self, columns: tuple):
        self.columns = tuple(columns)
        self.names = tuple(f"x[{k}]" for k in self.columns)
        self._idx = [k - 1 for k in self.columns]

    def design(self, r, X, a: int, presample: str) -> np.ndarray:
        return X[a:, self._idx].T

    def future(self, path: list, Xf, h: int) -> np.ndarray:
        return Xf[h, self._idx]


class MovingAverage:
    """theta[1..q]: the residual filter e[t] = w[t] - sum theta[j] e[t-j] (zero before the start)."""

    def __init__(self, order: int):
        self.order = order
        self.names = tuple(f"theta[{j}]" for j in range(1, order + 1))

    def den(self, tht) -> np.ndarray:
        return np.concatenate([[1.0], tht])


class InMean:
    """lambda_m: the risk premium lambda_m sigma[t] (Engle, Lilien & Robins 1987)."""

    names = ("lambda_m",)


# ---------------------------------------------------------------------------------------- model
class MeanModel:
    """The mean of one model on one sample: residuals on the positions [a, T) and their
    derivatives, start values, bounds, admissibility and forecasts.

    ``X`` holds every regressor column of the model (mean and variance ones, in column order);
    the mean reads its own columns.
    """

    def __init__(self, spec, r, X=None, presample: str = "mean"):
        self.spec = spec
        self.r = r = np.ascontiguousarray(r, dtype=float)
        T = len(r)
        self.a = spec.ar if presample == "drop" else 0
        self.n = T - self.a
        self.y = r[self.a:]
        self.X = X
        linear = ([Intercept()] if spec.has_mu else []) + ([AutoRegression(spec.ar)] if spec.ar else [])
        self.ma = MovingAverage(spec.ma) if spec.ma else None
        self.regression = Regression(spec.xmean) if spec.xmean else None
        if self.regression is not None:
            linear.append(self.regression)
        self.linear = linear
        self.in_mean = InMean() if spec.in_mean else None
        parts = [p for p in linear if not isinstance(p, Regression)] + ([self.ma] if self.ma else []) \
            + ([self.regression] if self.regression else []) + ([self.in_mean] if self.in_mean else [])
        self.parts = parts
        self.names = tuple(n for part in parts for n in part.names)
        self.k = len(self.names)
        idx = {n: i for i, n in enumerate(self.names)}
        self.idx = idx
        # the linear parts' design rows and where their coefficients sit in the mean vector
        rows = [part.design(r, X, self.a, presample) for part in linear]
        self.R = np.vstack(rows) if rows else np.zeros((0, self.n))
        self.R.setflags(write=False)
        self.lin_idx = np.array([idx[n] for part in linear for n in part.names], dtype=int)
        self.ma_idx = np.array([idx[n] for n in self.ma.names], dtype=int) if self.ma else np.zeros(0, dtype=int)
        self.lam_idx = idx["lambda_m"] if self.in_mean else None
        de = np.zeros((self.k, self.n))
        de[self.lin_idx] = -self.R
        self._de_const = de
        self._de_const.setflags(write=False)
        # the intercept alone (a constant mean): the residuals are y - mu, which the product with
        # the design row of ones gives exactly, without the product's cost on every evaluation
        self._mu_only = len(linear) == 1 and isinstance(linear[0], Intercept) and self.lin_idx.tolist() == [0]

    # ------------------------------------------------------------------ pieces of the vector
    def mu_phi_theta(self, tm):
        """(mu, phi, theta) of a mean parameter vector (mu 0 in a ZERO mean)."""
        s = self.spec
        mu = tm[0] if s.has_mu else 0.0
        i = 1 if s.has_mu else 0
        return mu, tm[i: i + s.ar], tm[self.ma_idx] if self.ma else tm[0:0]

    def lam(self, tm) -> float:
        return float(tm[self.lam_idx]) if self.in_mean else 0.0

    def xcoef(self, tm):
        if self.regression is None:
            return np.zeros(0)
        return tm[[self.idx[n] for n in self.regression.names]]

    # ------------------------------------------------------------------ windows of one series
    @property
    def window_free(self) -> bool:
        """A residual depends only on its own return's row, not on where the sample starts: no
        moving-average filter (zero before the start), no in-mean term, and no lagged return set
        at the sample's mean before the start (``presample=drop`` drops those returns instead).
        Then the residuals of any window of the returns are the whole series' residuals there."""
        return self.ma is None and self.in_mean is None and self.a == self.spec.ar

    def fitted(self, tm, positions) -> np.ndarray:
        """The linear parts' mean at residual positions (the return less its residual, for a
        :attr:`window_free` mean), as the one-step mean forecast after the returns before it."""
        positions = np.asarray(positions, dtype=int)
        if not len(self.lin_idx):
            return np.zeros(len(positions))
        return tm[self.lin_idx] @ self.R[:, positions]

    # ------------------------------------------------------------------ residuals
    def residuals(self, tm, derivs: bool = False):
        """Residuals u on [a, T) of every part but the in-mean term, and if asked their
        derivatives (one row per mean parameter; the in-mean row is left at zero)."""
        if self._mu_only:
            w = self.y - tm[0]
        else:
            w = self.y - tm[self.lin_idx] @ self.R if len(self.lin_idx) else self.y
        if self.ma is None:
            return w, (self._de_const if derivs else None)
        den = self.ma.den(tm[self.ma_idx])
        e = lfilter([1.0], den, w)
        if not derivs:
            return e, None
        rows = np.array(self._de_const)
        for j, i in enumerate(self.ma_idx, start=1):
            rows[i, j:] = -e[:-j]
        return e, lfilter([1.0], den, rows, axis=1)

    def in_mean_step(self, tm, u):
        """``step(t, s2)`` for :meth:`VarianceFamily.filter`: the residual at position t given its
        variance, e[t] = u[t] - lambda_m c[t], where c is the conditional volatility passed
        through the MA filter (c[t] = sigma[t] - sum theta[j] c[t-j]), so that
        e[t] = w[t] - sum theta[j] e[t-j] - lambda_m sigma[t]."""
        lam = self.lam(tm)
        uu = u.tolist()
        sqrt = math.sqrt
        if self.ma is None:
            def step(t, s2):
                return uu[t] - lam * sqrt(s2)
            return step
        tht = [float(x) for x in tm[self.ma_idx]]
        if len(tht) == 1:
            th1, last = tht[0], [0.0]

            def step(t, s2):
                ct = sqrt(s2) - th1 * last[0]
                last[0] = ct
                return uu[t] - lam * ct
            return step
        c = []

        def step(t, s2):
            ct = sqrt(s2)
            for j in range(1, min(len(tht), t) + 1):
                ct -= tht[j - 1] * c[t - j]
            c.append(ct)
            return uu[t] - lam * ct
        return step

    # ------------------------------------------------------------------ for the estimator
    def admissible(self, tm) -> bool:
        """AR part stationary, MA part invertible."""
        from .families import stationary

        _, phi, tht = self.mu_phi_theta(tm)
        if self.spec.ar and not stationary(phi):
            return False
        if self.spec.ma and not stationary(-np.asarray(tht)):
            return False
        return True

    def check_fixed(self, fixed: dict) -> None:
        """Raise InputError if AR or MA coefficients fixed in the options (``fixed``: name ->
        value) make the AR part non-stationary or the MA part non-invertible: the roots of the lag
        polynomial when all of a part's coefficients are fixed, else the last lag's, whose size is
        the product of the inverse roots' and so must stay below 1."""
        from .families import stationary

        s = self.spec
        for prefix, order, sign, poly, word in (("phi", s.ar, 1.0, "1 - phi[1] L - ...", "stationary"),
                                                 ("theta", s.ma, -1.0, "1 + theta[1] L + ...", "invertible")):
            names = [f"{prefix}[{i}]" for i in range(1, order + 1)]
            given = [n for n in names if n in fixed]
            if not given:
                continue
            part = "AR" if prefix == "phi" else "MA"
            shown = ", ".join(f"{n}={float(fixed[n]):g}" for n in given)
            if len(given) == order:
                if not stationary(sign * np.array([float(fixed[n]) for n in names])):
                    why = ("a fixed coefficient must be between -1 and 1, not -1 or 1" if order == 1 else
                           f"its lag polynomial {poly} has a root on or inside the unit circle")
                    raise InputError(f"options: {shown} makes the {part} part not {word} ({why}); fix values that "
                                     f"keep it {word}, or leave them free")
            elif names[-1] in fixed and not abs(float(fixed[names[-1]])) < 1.0:
                raise InputError(f"options: {names[-1]}={float(fixed[names[-1]]):g} makes the {part} part not {word} "
                                 f"(the last coefficient of a {word} {part} part is between -1 and 1, not -1 or 1)")

    def box(self) -> list:
        """(scale, (lower, upper)) per mean parameter (the optimiser's scaling and box)."""
        s, X = self.spec, self.X
        sd = float(np.std(self.r)) or 1.0
        out = []
        for n in self.names:
            if n == "mu":
                out.append((0.1 * sd, (None, None)))
            elif n.startswith("phi") or n.startswith("theta"):
                order = s.ar if n.startswith("phi") else s.ma
                out.append((0.1, (-0.9999, 0.9999) if order == 1 else (None, None)))
            elif n.startswith("x["):
                k = int(n[2:-1])
                sx = float(np.std(X[:, k - 1])) if X is not None else 1.0
                out.append((0.1 * sd / (sx or 1.0), (None, None)))
            else:  # lambda_m: the premium per unit of volatility
                out.append((0.1, (None, None)))
        return out

    def start(self, tm_fixed: dict) -> np.ndarray:
        """Start values: the linear parts by least squares (AR coefficients at zero if that is
        not stationary), MA and in-mean terms at zero; fixed values kept."""
        from .families import stationary

        s = self.spec
        tm = np.zeros(self.k)
        only_mu = len(self.lin_idx) == (1 if s.has_mu else 0)
        i0 = 1 if s.has_mu else 0
        if only_mu:
            if s.has_mu:
                tm[0] = float(np.mean(self.r))
        else:
            coef = np.linalg.lstsq(self.R.T, self.y, rcond=None)[0]
            i0 = 1 if s.has_mu else 0
            phis = coef[i0: i0 + s.ar]
            if s.ar and not stationary(phis):
                keep = np.ones(len(coef), dtype=bool)
                keep[i0: i0 + s.ar] = False
                coef = np.zeros(len(coef))
                coef[keep] = np.linalg.lstsq(self.R[keep].T, self.y, rcond=None)[0]
                if s.has_mu and not self.regression:
                    coef[0] = float(np.mean(self.r))
            elif s.has_mu and s.ar and not self.regression and not np.any(phis):
                coef[0] = float(np.mean(self.r))
            tm[self.lin_idx] = coef
        for n, v in tm_fixed.items():
            if n in self.idx:
                tm[self.idx[n]] = v
        if s.ar and not stationary(tm[i0: i0 + s.ar] if not only_mu else tm[0:0]):
            # fixed AR coefficients beside least-squares ones that together are not stationary:
            # the free ones start at zero (a start outside the region is no start)
            for k in range(s.ar):
                if f"phi[{k + 1}]" not in tm_fixed:
                    tm[i0 + k] = 0.0
        return tm

    # ------------------------------------------------------------------ forecasts
    def forecast(self, tm, r, e, H: int, sigma, Xf=None) -> np.ndarray:
        """Mean forecasts for steps 1..H after the returns ``r`` with residuals ``e`` (aligned
        with ``r``; nan where undefined is read as zero), given the volatility forecasts
        ``sigma`` (used by the in-mean term) and the regressors' future rows ``Xf`` (H x K).

        The in-mean term at step h is lambda_m times ``sigma[h]``.  At h = 1 that is the exact
        sigma[T+1]; beyond, the caller passes the square root of the variance forecast, the
        usual plug-in for E[sigma[T+h]] (by Jensen's inequality it is an upper bound).
        """
        lin = tm[self.lin_idx]
        tht = tm[self.ma_idx]
        lam = self.lam(tm)
        T = len(r)
        path = list(r)
        ee = list(np.nan_to_num(e))
        out = np.zeros(H)
        for h in range(H):
            # the linear parts' rows at step h (1, lagged returns observed or forecast, regressors)
            v = 0.0
            if len(lin):
                v = float(lin @ np.concatenate([part.future(path, Xf, h) for part in self.linear]))
            for j in range(1, len(tht) + 1):  # shocks after T are at their mean, zero
                if h + 1 - j <= 0:
                    v += tht[j - 1] * ee[T + h - j]
            if self.in_mean is not None and lam != 0.0:  # (0 x an infinite sigma forecast is no term)
                v += lam * float(sigma[h])
            path.append(v)
            out[h] = v
        return out
