"""The fit table: a model's whole description, readable and editable in cells (DESIGN.md).

:func:`encode` lays a :class:`~xlfuncs.core.estimate.FitResult` out as rows; :func:`decode`
reads rows back (header optional, names case-insensitive, unknown rows ignored, trailing
blank rows of an oversized range ignored, ``alpha0``/``alpha1`` accepted) into a
:class:`TableFit` that the other worksheet functions use.

Regressors: the rows ``x[k]`` (mean) and ``v[k]`` (variance) say which column k of the
regressors range each regressor is; a table with them needs the regressors wherever it is used.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, replace

import numpy as np

from ..core.distributions import get_distribution
from ..core.errors import InputError
from ..core.estimate import FitResult, check_params
from ..core.spec import normalise_param_name, parse_model, parse_options
from .cells import CHAINED_ERROR_CHARS, SheetError, as_rows, describe, excerpt, is_blank, is_error_text

__all__ = ["HEADER", "encode", "decode", "TableFit"]

HEADER = ["parameter", "estimate", "std_error", "t_stat", "p_value"]
#: the word a parameter row shows where it has no standard error (the fit table, volcast batch)
STATUS_TEXT = {"fixed": "fixed", "implied": "implied", "target": "targeted", "bound": "at bound", "given": None}
_STATUS_OF_TEXT = {text: key for key, text in STATUS_TEXT.items() if text}


def _num(x):
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def encode(fit: FitResult) -> list:
    rows = [list(HEADER)]
    blank = [None, None, None]
    rows.append(["model", fit.spec.canonical] + blank)
    rows.append(["dist", fit.dist.name] + blank)
    rows.append(["options", fit.options.canonical] + blank)
    t, pv = fit.t_stats, fit.p_values
    for i, name in enumerate(fit.names):
        se = _num(fit.std_errors[i])
        if se is None:
            rows.append([name, _num(fit.params[i]), STATUS_TEXT.get(fit.status[i]), None, None])
        else:
            rows.append([name, _num(fit.params[i]), se, _num(t[i]), _num(pv[i])])
    rows.append(["loglik", _num(fit.loglik)] + blank)
    rows.append(["aic", _num(fit.aic)] + blank)
    rows.append(["bic", _num(fit.bic)] + blank)
    rows.append(["nobs", int(fit.nobs)] + blank)
    rows.append(["persistence", _num(fit.persistence)] + blank)
    rows.append(["uncond_variance", _num(fit.uncond_variance)] + blank)
    rows.append(["half_life", _num(fit.half_life)] + blank)
    rows.append(["converged", bool(fit.converged), fit.message, None, None])
    return rows


def _regressor_layout(spec, options, params):
    """The model with the regressor columns its rows x[k] and v[k] name; the options' xvar=
    must agree with the v rows (a table typed without it gets it from them)."""
    xs = [int(n[2:-1]) for n in params if n.startswith("x[")]
    vs = [int(n[2:-1]) for n in params if n.startswith("v[")]
    if options.xvar and tuple(options.xvar) != tuple(sorted(vs)):
        have = ", ".join(f"v[{k}]" for k in sorted(vs)) or "none"
        raise InputError(f"the options row says xvar={','.join(map(str, options.xvar))}, but the table's variance "
                         f"regressor rows are {have}")
    if not xs and not vs:
        return spec, options
    spec = spec.with_columns(xs, vs)
    return spec, replace(options, xvar=spec.xvar)


@dataclass
class TableFit:
    """What a fit table says: model, distribution, options and parameter values."""

    spec: object
    dist: object
    options: object
    names: tuple
    params: np.ndarray
    std_errors: dict
    converged: object = None
    status: dict = dataclasses.field(default_factory=dict)  # name -> fixed, implied, target, bound (the std_error texts)

    @property
    def estimated(self) -> bool:
        """The table says it was estimated: a converged row holding TRUE or FALSE (VOLFIT's)."""
        return isinstance(self.converged, (bool, np.bool_))

    def statuses(self) -> tuple:
        """Per parameter, as the estimator words it: the table's std_error texts, else free
        (an estimated table) or given (a typed one)."""
        other = "free" if self.estimated else "given"
        return tuple(self.status.get(n, other) for n in self.names)

    def as_fit_result(self, r=None) -> FitResult:
        """A FitResult (no estimation) for forecasting and scoring; without returns ``r``, the
        parameters alone (no log-likelihood), as the news-impact curve needs them."""
        from ..core.estimate import evaluate

        if r is None:
            k = len(self.names)
            return FitResult(spec=self.spec, dist=self.dist, options=self.options, names=self.names,
                             params=self.params, std_errors=np.full(k, np.nan), status=tuple(["given"] * k),
                             loglik=math.nan, nobs=0, n_free=k, converged=True,
                             message="parameters given, not estimated", estimated=False)
        return evaluate(r, self.spec, self.dist, self.names, self.params, self.options)


def decode(value, arg: str = "fit") -> TableFit:
    if is_error_text(value):
        raise SheetError(f"{arg} holds an error from another cell: "
                         f"{excerpt(str(value).strip()[6:].strip(), CHAINED_ERROR_CHARS)}")
    rows = as_rows(value)
    fields = {}
    params = {}
    ses = {}
    status = {}
    for row in rows:
        if not row or is_blank(row[0]):
            continue
        key = row[0]
        if is_error_text(key):
            raise SheetError(f"{arg} holds an error from another cell: "
                             f"{excerpt(str(key).strip()[6:].strip(), CHAINED_ERROR_CHARS)}")
        if not isinstance(key, str):
            continue
        k = key.strip().lower()
        val = row[1] if len(row) > 1 else None
        if k in ("model", "dist", "options", "converged"):
            fields[k] = val
            continue
        name = normalise_param_name(k)
        if name is None:
            continue  # header, statistics and unknown rows
        row_name = excerpt(key.strip())
        if is_blank(val):
            raise SheetError(f"{arg}: the row {row_name} has no value in its second column")
        if isinstance(val, bool) or isinstance(val, str) and is_error_text(val):
            raise SheetError(f"{arg}: the row {row_name} must hold a number, got {describe(val)}")
        try:
            x = float(val)
        except (TypeError, ValueError):
            raise SheetError(f"{arg}: the row {row_name} must hold a number, got {describe(val)}") from None
        if name in params:
            raise SheetError(f"{arg}: the parameter {name} appears twice")
        params[name] = x
        se = row[2] if len(row) > 2 else None
        if isinstance(se, (int, float)) and not isinstance(se, bool):
            ses[name] = float(se)
        elif isinstance(se, str) and se.strip().lower() in _STATUS_OF_TEXT:
            status[name] = _STATUS_OF_TEXT[se.strip().lower()]
    if "model" not in fields or is_blank(fields.get("model")):
        if not params:
            cells = [c for row in rows for c in row if not is_blank(c)]
            if len(cells) == 1 and isinstance(cells[0], str) and cells[0].strip().lower() == "parameter":
                raise SheetError(  # the anchor cell alone, as a plain reference to a spilled table gives
                    f"{arg} is only the top-left cell of a fit table; pass the whole table (A1# where VOLFIT "
                    f"spills from A1, or a range such as A1:E20)")
            raise SheetError(
                f"{arg} is not a fit table; pass the range VOLFIT returns, or a table with rows model, dist and the parameters"
            )
        raise SheetError(f"{arg} has no model row; add a row with model in the first column and e.g. GARCH(1,1) beside it")
    try:
        spec = parse_model(fields["model"])
        dist = get_distribution(fields.get("dist") if not is_blank(fields.get("dist")) else "normal")
        options = parse_options(fields.get("options") if not is_blank(fields.get("options")) else None)
        spec, options = _regressor_layout(spec, options, params)
    except InputError as exc:
        raise SheetError(f"{arg}: {exc}") from None
    names = tuple(spec.param_names) + tuple(dist.param_names)
    extra = [n for n in params if n not in names]
    if extra:
        raise SheetError(
            f"{arg} has the parameter{'s' if len(extra) > 1 else ''} {', '.join(extra)}, which {spec.canonical} with "
            f"{dist.name} shocks does not have; fix the model row or delete the row{'s' if len(extra) > 1 else ''}"
        )
    fixed = options.fixed_dict
    stray = [n for n in fixed if n not in names]
    if stray:
        raise SheetError(f"{arg}: the options row fixes {', '.join(stray)}, which {spec.canonical} with {dist.name} shocks does not have")
    missing = [n for n in names if n not in params]
    for n in list(missing):
        if n in fixed:
            params[n] = fixed[n]
            missing.remove(n)
    if missing:
        raise SheetError(f"{arg} lacks the parameter{'s' if len(missing) > 1 else ''} {', '.join(missing)} that {spec.canonical} with {dist.name} shocks needs")
    vals = np.array([params[n] for n in names], dtype=float)
    try:
        check_params(spec, dist, names, vals)
    except InputError as exc:
        raise SheetError(f"{arg}: {exc}") from None
    return TableFit(spec=spec, dist=dist, options=options, names=names, params=vals, std_errors=ses,
                    converged=fields.get("converged"), status=status)
