"""Model strings and options strings.

A model string is ``[MEAN-]VARIANCE`` in the literature's own notation, case-insensitive,
spaces ignored (see DESIGN.md):

>>> parse_model("ar(1) - gjr-garch(1,1)").canonical
'AR(1)-GJR-GARCH(1,1)'
>>> parse_model("GARCH").canonical
'GARCH(1,1)'
>>> parse_model("ZERO-ARCH").canonical
'ZERO-ARCH(1)'
>>> parse_model("AR(1)").param_names
('mu', 'phi[1]', 'omega')
>>> parse_model("ar(1)-garch-m").canonical
'AR(1)-GARCH(1,1)-M'
>>> parse_model("GARCH(1,1)-M").with_regressors(2, xvar=(2,)).param_names
('mu', 'x[1]', 'lambda_m', 'omega', 'alpha[1]', 'beta[1]', 'v[2]')

``GARCH(p,q)`` has p ARCH terms (alpha) and q GARCH terms (beta).  The options string is
``key=value`` pairs separated by ``;``:

>>> parse_options("se=hessian; nu=8").canonical
'presample=mean; se=hessian; nu=8'
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace

from .errors import InputError, describe_value, excerpt, number_words
from .families import FAMILIES, WORDS, family_for

__all__ = [
    "ModelSpec",
    "Options",
    "parse_model",
    "parse_options",
    "normalise_param_name",
    "MEAN_KINDS",
    "VARIANCE_KINDS",
    "MAX_ORDER",
    "MAX_REGRESSORS",
    "RETURN_DEFINITIONS",
    "FRACTION_SD_LIMIT",
    "check_return_units",
    "IN_MEAN_WORD",
]

MEAN_KINDS = ("zero", "const", "arma")
VARIANCE_KINDS = tuple(FAMILIES)
MAX_ORDER = 12  # highest lag order accepted in any part of a model string
MAX_REGRESSORS = 50  # most columns a regressors range may have

_MEAN_WORDS = ("ZERO", "CONST", "AR", "MA", "ARMA")
# words with a dash inside (GJR-GARCH) first, longest first, so that the dash is not read as a separator
_DASHED = sorted((w for w in WORDS if "-" in w), key=len, reverse=True)
_TOKEN = re.compile("(" + "".join(re.escape(w) + "|" for w in _DASHED) + r"[A-Z]+)(?:\(([^()]*)\))?")


def _variance_list() -> str:
    words = [cls.words[0] for cls in FAMILIES.values() if cls.words]
    return ", ".join(words[:-1]) + " or " + words[-1] if len(words) > 1 else "".join(words)


_EXAMPLES = "e.g. GARCH(1,1), AR(1)-GJR-GARCH(1,1), ZERO-EGARCH(1,1), GARCH(1,1)-M or CONST"
#: the model-string word after the variance part that adds lambda_m * sigma[t] to the mean
IN_MEAN_WORD = "M"


@dataclass(frozen=True)
class ModelSpec:
    """A parsed model: mean kind and orders, variance kind and orders, the in-mean term and the
    layout of the regressors.

    ``p`` counts ARCH terms (alpha, and gamma for GJR/EGARCH); ``q`` counts GARCH terms (beta).
    ``in_mean`` adds lambda_m * sigma[t] to the mean (``-M``).  ``xmean`` and ``xvar`` are the
    columns (1-based) of the regressors range that enter the mean (parameters ``x[k]``) and the
    variance (``v[k]``, option ``xvar=``); they are not part of the model string but of the data
    given with it (:meth:`with_regressors`).
    """

    mean: str = "const"  # 'zero', 'const' or 'arma'
    ar: int = 0
    ma: int = 0
    variance: str = "constant"  # one of VARIANCE_KINDS
    p: int = 0
    q: int = 0
    in_mean: bool = False
    xmean: tuple = ()
    xvar: tuple = ()

    # ----- names -------------------------------------------------------------------------
    @property
    def mean_canonical(self) -> str:
        if self.mean == "zero":
            return "ZERO"
        if self.mean == "const" or (self.ar == 0 and self.ma == 0):
            return "CONST"
        if self.ma == 0:
            return f"AR({self.ar})"
        if self.ar == 0:
            return f"MA({self.ma})"
        return f"ARMA({self.ar},{self.ma})"

    @property
    def family(self):
        """The variance family at this model's orders (:mod:`xlfuncs.core.families`)."""
        return family_for(self.variance, self.p, self.q)

    @property
    def variance_canonical(self) -> str:
        return self.family.canonical

    @property
    def canonical(self) -> str:
        """The model string: ``[MEAN-]VARIANCE[-M]`` (the regressors are not part of it)."""
        mean, var = self.mean_canonical, self.variance_canonical
        if not var:
            return mean
        text = var if mean == "CONST" else f"{mean}-{var}"
        return f"{text}-{IN_MEAN_WORD}" if self.in_mean else text

    def __str__(self) -> str:  # pragma: no cover - convenience
        return self.canonical

    # ----- regressors ----------------------------------------------------------------------
    @property
    def n_regressors(self) -> int:
        """Columns of the regressors range the model reads (0 without regressors)."""
        return len(self.xmean) + len(self.xvar)

    @property
    def regressor_names(self) -> tuple:
        """The regressors' parameter names in column order: ``x[k]`` (mean) or ``v[k]`` (variance)."""
        return tuple(f"x[{k}]" if k in self.xmean else f"v[{k}]" for k in range(1, self.n_regressors + 1))

    def with_regressors(self, n_columns: int, xvar=()) -> "ModelSpec":
        """This model with ``n_columns`` regressors, columns ``xvar`` in the variance, the rest in
        the mean; :class:`InputError` if the columns do not fit the model."""
        n = int(n_columns)
        xvar = tuple(sorted(set(int(k) for k in xvar)))
        bad = [k for k in xvar if not 1 <= k <= n]
        if bad:
            have = f"has {n} column{'s' if n != 1 else ''}" if n else "is not given"
            raise InputError(f"options: xvar={','.join(map(str, xvar))} names column {bad[0]}, but the regressors "
                             f"range {have}")
        if xvar and not self.family.takes_shift:
            raise InputError(f"options: xvar= adds variance regressors to omega, which {self.variance_canonical or 'a constant variance'} "
                             f"does not take; use a model with omega, e.g. GARCH(1,1), or send the columns to the mean")
        xmean = tuple(k for k in range(1, n + 1) if k not in xvar)
        return replace(self, xmean=xmean, xvar=xvar)

    def with_columns(self, xmean=(), xvar=()) -> "ModelSpec":
        """This model with mean regressors in columns ``xmean`` and variance regressors in
        ``xvar`` (as a fit table's rows ``x[k]`` and ``v[k]`` say); every column from 1 to the
        last must be one or the other."""
        xmean, xvar = tuple(sorted(set(xmean))), tuple(sorted(set(xvar)))
        both = sorted(set(xmean) & set(xvar))
        if both:
            raise InputError(f"column {both[0]} cannot be both a mean regressor x[{both[0]}] and a variance regressor "
                             f"v[{both[0]}]; keep one")
        cols = set(xmean) | set(xvar)
        gap = [k for k in range(1, max(cols, default=0) + 1) if k not in cols]
        if gap:
            raise InputError(f"the regressors are numbered by their column: there is no x[{gap[0]}] or v[{gap[0]}] for "
                             f"column {gap[0]}")
        if xvar and not self.family.takes_shift:
            raise InputError(f"variance regressors (v[k]) add to omega, which {self.variance_canonical or 'a constant variance'} "
                             "does not take")
        return replace(self, xmean=xmean, xvar=xvar)

    # ----- parameters --------------------------------------------------------------------
    @property
    def has_mu(self) -> bool:
        return self.mean != "zero"

    @property
    def mean_names(self) -> tuple:
        """mu, phi[i], theta[j], x[k] (mean regressors), lambda_m (in-mean), in that order."""
        names = ["mu"] if self.has_mu else []
        names += [f"phi[{i}]" for i in range(1, self.ar + 1)]
        names += [f"theta[{j}]" for j in range(1, self.ma + 1)]
        names += [f"x[{k}]" for k in self.xmean]
        if self.in_mean:
            names.append("lambda_m")
        return tuple(names)

    @property
    def variance_names(self) -> tuple:
        """The variance family's own parameters (the variance regressors come after them)."""
        return self.family.param_names

    @property
    def shift_names(self) -> tuple:
        """The variance regressors' parameters ``v[k]``, added to the variance intercept."""
        return tuple(f"v[{k}]" for k in self.xvar)

    @property
    def param_names(self) -> tuple:
        """Mean, variance family, then variance-regressor parameter names (distribution shape
        parameters come after)."""
        return self.mean_names + self.variance_names + self.shift_names

    @property
    def arch_lags(self) -> int:
        return self.family.arch_lags

    @property
    def min_obs(self) -> int:
        """Smallest sample the model can be estimated on (a practical floor, not a recommendation)."""
        k = len(self.param_names) + 2
        return max(10, self.ar + self.arch_lags + 3 * k)


def _bad_model(text: str, why: str) -> InputError:
    return InputError(f'model "{excerpt(text)}" is not understood: {why}; {_EXAMPLES}')


def _orders(text: str, word: str, args: str | None, n_args: int, default: tuple) -> tuple:
    if args is None:
        return default
    parts = [a for a in args.split(",")]
    if len(parts) != n_args or any(not re.fullmatch(r"\d+", a) for a in parts):
        shape = "(p)" if n_args == 1 else "(p,q)"
        raise _bad_model(text, f"{word} takes {n_args} whole-number order{'s' if n_args > 1 else ''} {word}{shape}")
    vals = tuple(int(a) for a in parts)
    if any(v > MAX_ORDER for v in vals):
        raise _bad_model(text, f"orders above {MAX_ORDER} are not supported")
    return vals


def parse_model(text) -> ModelSpec:
    """Parse a model string into a :class:`ModelSpec`; raise :class:`InputError` if malformed."""
    if text is None or (isinstance(text, str) and not text.strip()):
        return ModelSpec(mean="const", variance="garch", p=1, q=1)
    if not isinstance(text, str):
        raise InputError(f"model must be text such as GARCH(1,1), got {describe_value(text)}")
    raw = text
    s = re.sub(r"\s+", "", text).upper()
    if s.count("(") != s.count(")"):
        raise _bad_model(raw, "its parentheses do not match")
    token = _TOKEN
    parts = []
    pos = 0
    while pos < len(s):
        m = token.match(s, pos)
        if not m or m.end() == pos:
            raise _bad_model(raw, f'unexpected "{excerpt(s[pos:])}"')
        parts.append((m.group(1), m.group(2)))
        pos = m.end()
        if pos < len(s):
            if s[pos] != "-":
                raise _bad_model(raw, f'expected "-" between mean and variance parts, found "{excerpt(s[pos:])}"')
            pos += 1
            if pos == len(s):
                raise _bad_model(raw, "it ends with a dash")
    in_mean = False
    if len(parts) > 1 and parts[-1][0] == IN_MEAN_WORD:
        if parts[-1][1] is not None:
            raise _bad_model(raw, f"{IN_MEAN_WORD} (in-mean) takes no order")
        in_mean = True
        parts.pop()
    if any(word == IN_MEAN_WORD for word, _ in parts):
        raise _bad_model(raw, f'"-{IN_MEAN_WORD}" (in-mean) goes last, after the variance part')
    if len(parts) > 2:
        raise _bad_model(raw, "it has more than a mean part and a variance part")

    mean_part = variance_part = None
    if len(parts) == 2:
        mean_part, variance_part = parts
        if mean_part[0] not in _MEAN_WORDS:
            raise _bad_model(raw, f'"{excerpt(mean_part[0])}" is not a mean (use ZERO, CONST, AR(p), MA(q) or ARMA(p,q))')
        if variance_part[0] not in WORDS:
            raise _bad_model(raw, f'"{excerpt(variance_part[0])}" is not a variance model (use {_variance_list()})')
    else:
        word = parts[0][0]
        if word in _MEAN_WORDS:
            mean_part = parts[0]
        elif word in WORDS:
            variance_part = parts[0]
        else:
            raise _bad_model(raw, f'"{excerpt(word)}" is not a model name')

    mean, ar, ma = "const", 0, 0
    if mean_part is not None:
        word, args = mean_part
        if word in ("ZERO", "CONST"):
            if args is not None:
                raise _bad_model(raw, f"{word} takes no order")
            mean = word.lower()
        elif word == "AR":
            (ar,) = _orders(raw, "AR", args, 1, (1,))
        elif word == "MA":
            (ma,) = _orders(raw, "MA", args, 1, (1,))
        else:
            ar, ma = _orders(raw, "ARMA", args, 2, (1, 1))
        if word in ("AR", "MA", "ARMA"):
            mean = "arma" if ar + ma > 0 else "const"

    variance, p, q = "constant", 0, 0
    if variance_part is not None:
        word, args = variance_part
        cls = WORDS[word]
        try:
            orders = cls.read_orders(word, args)  # a family with orders of its own form
        except ValueError as exc:
            raise _bad_model(raw, str(exc)) from None
        if orders is None and cls.n_orders == 0:
            if args is not None:
                raise _bad_model(raw, f"{word} takes no order")
            orders = tuple(cls.default_orders)
        elif orders is None:
            orders = _orders(raw, word, args, cls.n_orders, tuple(cls.default_orders))
        try:
            variance, p, q = cls.resolve(word, orders)
        except ValueError as exc:
            raise _bad_model(raw, str(exc)) from None
    spec = ModelSpec(mean=mean, ar=ar, ma=ma, variance=variance, p=p, q=q, in_mean=in_mean)
    if in_mean and not spec.family.varies:
        raise _bad_model(raw, f"-{IN_MEAN_WORD} (the in-mean term lambda_m * sigma) needs a variance part: with a "
                              "constant variance it cannot be told apart from mu")
    return spec


# ----------------------------------------------------------------------------------------
# parameter names
# the mean's stems (x: mean regressor, lambda_m: in-mean), the families', the variance
# regressors' (v) and the distributions'; longer stems first so that lambda_m is not read as lambda
_STEMS = ("mu", "phi", "theta", "x", "lambda_m") + tuple(dict.fromkeys(st for cls in FAMILIES.values() for st in cls.stems)) + ("v", "nu", "lambda")
_NAME_RE = re.compile(r"^(" + "|".join(sorted(_STEMS, key=len, reverse=True)) + r")(?:\[(\d+)\]|(\d+))?$")
_INDEXED = {"phi", "theta", "x", "v"} | {st for cls in FAMILIES.values() for st in cls.indexed}


def normalise_param_name(name) -> str | None:
    """Canonical parameter name, or None if ``name`` is not a parameter name.

    Case-insensitive; ``alpha0`` means ``omega``, ``alpha1`` and ``alpha`` mean ``alpha[1]``.
    """
    if not isinstance(name, str):
        return None
    s = re.sub(r"\s+", "", name).lower()
    if s in ("alpha0", "alpha[0]"):
        return "omega"
    m = _NAME_RE.match(s)
    if not m:
        return None
    base, i1, i2 = m.group(1), m.group(2), m.group(3)
    idx = i1 or i2
    if base in _INDEXED:
        idx = int(idx) if idx else 1
        if idx < 1:
            return None
        return f"{base}[{idx}]"
    if idx:
        return None
    return base


# ----------------------------------------------------------------------------------------
# options
_CHOICES = {
    "presample": ("mean", "drop"),
    "se": ("robust", "hessian", "opg"),
    "target": ("yes", "no"),
    "missing": ("error", "skip"),
}
_DEFAULTS = {"presample": "mean", "se": "robust", "target": "no", "missing": "error"}
_YES = {"yes": "yes", "true": "yes", "1": "yes", "on": "yes", "no": "no", "false": "no", "0": "no", "off": "no"}
_INT_KEYS = {"periods": (1, 100000), "seed": (0, 2**31 - 1), "paths": (1000, 1_000_000)}
#: how the returns are defined (no default: unknown unless said); read by the risk figures only
RETURN_DEFINITIONS = ("log100", "log", "simple100", "simple")
#: our own rule: returns said to be fractions (returns=log or simple, 0.01 = 1 %) whose standard
#: deviation is above this (100 % a period) are taken to be in the wrong units
FRACTION_SD_LIMIT = 1.0


def check_return_units(r, returns) -> None:
    """Refuse ``returns=log`` or ``returns=simple`` (fractions, 0.01 = 1 %) for returns ``r``
    whose sample standard deviation is above :data:`FRACTION_SD_LIMIT`, 100 % a period: such data
    are almost surely percentages, and the loss as a percentage of value would be meaningless."""
    if returns not in ("log", "simple"):
        return
    x = [float(v) for v in r]
    x = [v for v in x if math.isfinite(v)]
    if len(x) < 2:
        return
    mean = math.fsum(x) / len(x)
    sd = math.sqrt(math.fsum((v - mean) ** 2 for v in x) / (len(x) - 1))
    if sd > FRACTION_SD_LIMIT:
        raise InputError(
            f"options: returns={returns} means fractions (0.01 = 1 %), but these returns have standard deviation "
            f"{sd:.3g} ({100 * sd:.3g} % a period); for percent returns use returns={returns}100 (Volcast's own rule: "
            f"fraction units are refused above a standard deviation of {FRACTION_SD_LIMIT:g}, 100 % a period)")


@dataclass(frozen=True)
class Options:
    presample: str = "mean"
    se: str = "robust"
    target: bool = False
    missing: str = "error"
    periods: int | None = None
    seed: int | None = None
    paths: int | None = None
    fixed: tuple = field(default_factory=tuple)  # ((name, value), ...) in the order given
    returns: str | None = None  # one of RETURN_DEFINITIONS, or None when not said
    xvar: tuple = ()  # columns of the regressors range that enter the variance (1-based, ascending)

    @property
    def fixed_dict(self) -> dict:
        return dict(self.fixed)

    @property
    def canonical(self) -> str:
        parts = [f"presample={self.presample}", f"se={self.se}"]
        if self.target:
            parts.append("target=yes")
        if self.missing != "error":
            parts.append(f"missing={self.missing}")
        for key in ("periods", "seed", "paths"):
            val = getattr(self, key)
            if val is not None:
                parts.append(f"{key}={val}")
        if self.returns is not None:
            parts.append(f"returns={self.returns}")
        if self.xvar:
            parts.append("xvar=" + ",".join(map(str, self.xvar)))
        for name, value in self.fixed:
            parts.append(f"{name}={_fmt_number(value)}")
        return "; ".join(parts)

    @property
    def estimation_key(self) -> tuple:
        """What changes the estimate (periods, missing, seed and returns do not)."""
        return (self.presample, self.se, self.target, tuple(sorted(self.fixed))) + ((("xvar",) + self.xvar,) if self.xvar else ())


def _fmt_number(x: float) -> str:
    if float(x).is_integer() and abs(x) < 1e15:
        return str(int(x))
    return repr(float(x))


def _typed_value(value: str) -> str:
    """An options value as typed, with its meaning where Python would read it as a number that is
    not finite (nan, inf): "nan (not a number)", "-inf (minus infinity)"."""
    shown = excerpt(value)
    try:
        x = float(value)
    except ValueError:
        return shown
    return shown if math.isfinite(x) else f"{shown} ({number_words(x)})"


def _columns(value: str, shown_value: str) -> tuple:
    """The column numbers of ``xvar=2,3`` (ascending, each once)."""
    cols = []
    for piece in re.split(r"[,\s]+", value.strip()):
        if not re.fullmatch(r"\d+", piece) or not 1 <= int(piece) <= MAX_REGRESSORS:
            raise InputError(f"options: xvar must list regressor column numbers from 1 to {MAX_REGRESSORS} separated by "
                             f"commas, e.g. xvar=2,3; got {shown_value}")
        if int(piece) in cols:
            raise InputError(f"options: xvar names column {int(piece)} twice")
        cols.append(int(piece))
    return tuple(sorted(cols))


def parse_options(text) -> Options:
    """Parse an options string; raise :class:`InputError` naming the bad key or value."""
    if text is None:
        return Options()
    if not isinstance(text, str):
        raise InputError(f"options must be text such as \"se=hessian; nu=8\", got {describe_value(text)}")
    values = dict(_DEFAULTS)
    ints: dict = {}
    fixed: dict = {}
    seen: set = set()
    for chunk in text.split(";"):
        chunk = chunk.strip()
        if not chunk:
            continue
        if "=" not in chunk:
            raise InputError(f'options: "{excerpt(chunk)}" is not key=value; write for example se=hessian')
        key, _, value = chunk.partition("=")
        key = re.sub(r"\s+", "", key).lower()
        value = value.strip()
        shown_key, shown_value = excerpt(key), _typed_value(value)
        low = value.lower()
        if not value:
            raise InputError(f'options: {shown_key}= has no value')
        if key in seen:
            raise InputError(f"options: {shown_key} is given twice; keep one value")
        seen.add(key)
        if key in _CHOICES:
            if key == "target":
                low = _YES.get(low, low)
            if low not in _CHOICES[key]:
                raise InputError(f'options: {key}={shown_value} is not allowed; use {" or ".join(key + "=" + c for c in _CHOICES[key])}')
            values[key] = low
        elif key == "returns":
            if low not in RETURN_DEFINITIONS:
                raise InputError(f'options: returns={shown_value} is not allowed; use {" or ".join("returns=" + c for c in RETURN_DEFINITIONS)}')
            values[key] = low
        elif key == "xvar":
            values[key] = _columns(value, shown_value)
        elif key in _INT_KEYS:
            lo, hi = _INT_KEYS[key]
            try:
                num = float(value)
            except ValueError:
                num = math.nan
            if not (math.isfinite(num) and num.is_integer() and lo <= num <= hi):
                raise InputError(f"options: {key} must be a whole number from {lo} to {hi}, got {shown_value}")
            ints[key] = int(num)
        else:
            name = normalise_param_name(key)
            if name is None:
                raise InputError(
                    f'options: unknown key "{shown_key}"; use presample, se, target, periods, missing, seed, paths, '
                    f"returns or a parameter name such as nu=8 (or xvar= for variance regressors)"
                )
            try:
                num = float(value)
            except ValueError:
                raise InputError(f"options: {shown_key} must be a number to hold the parameter fixed, got {shown_value}") from None
            if not math.isfinite(num):
                raise InputError(f"options: {shown_key} must be a finite number, got {shown_value}")
            if name in fixed:
                raise InputError(f"options: {name} is given twice; keep one value")
            fixed[name] = num
    return Options(
        presample=values["presample"],
        se=values["se"],
        target=values["target"] == "yes",
        missing=values["missing"],
        periods=ints.get("periods"),
        seed=ints.get("seed"),
        paths=ints.get("paths"),
        fixed=tuple(fixed.items()),
        returns=values.get("returns"),
        xvar=values.get("xvar", ()),
    )
