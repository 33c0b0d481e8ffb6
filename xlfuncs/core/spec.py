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

``GARCH(p,q)`` has p ARCH terms (alpha) and q GARCH terms (beta).  The options string is
``key=value`` pairs separated by ``;``:

>>> parse_options("se=hessian; nu=8").canonical
'presample=mean; se=hessian; nu=8'
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

from .errors import InputError, excerpt
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
    "RETURN_DEFINITIONS",
]

MEAN_KINDS = ("zero", "const", "arma")
VARIANCE_KINDS = tuple(FAMILIES)
MAX_ORDER = 12  # highest lag order accepted in any part of a model string

_MEAN_WORDS = ("ZERO", "CONST", "AR", "MA", "ARMA")
# words with a dash inside (GJR-GARCH) first, longest first, so that the dash is not read as a separator
_DASHED = sorted((w for w in WORDS if "-" in w), key=len, reverse=True)
_TOKEN = re.compile("(" + "".join(re.escape(w) + "|" for w in _DASHED) + r"[A-Z]+)(?:\(([^()]*)\))?")


def _variance_list() -> str:
    words = [cls.words[0] for cls in FAMILIES.values() if cls.words]
    return ", ".join(words[:-1]) + " or " + words[-1] if len(words) > 1 else "".join(words)


_EXAMPLES = "e.g. GARCH(1,1), AR(1)-GJR-GARCH(1,1), ZERO-EGARCH(1,1) or CONST"


@dataclass(frozen=True)
class ModelSpec:
    """A parsed model: mean kind and orders, variance kind and orders.

    ``p`` counts ARCH terms (alpha, and gamma for GJR/EGARCH); ``q`` counts GARCH terms (beta).
    """

    mean: str = "const"  # 'zero', 'const' or 'arma'
    ar: int = 0
    ma: int = 0
    variance: str = "constant"  # one of VARIANCE_KINDS
    p: int = 0
    q: int = 0

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
        mean, var = self.mean_canonical, self.variance_canonical
        if not var:
            return mean
        if mean == "CONST":
            return var
        return f"{mean}-{var}"

    def __str__(self) -> str:  # pragma: no cover - convenience
        return self.canonical

    # ----- parameters --------------------------------------------------------------------
    @property
    def has_mu(self) -> bool:
        return self.mean != "zero"

    @property
    def mean_names(self) -> tuple:
        names = ["mu"] if self.has_mu else []
        names += [f"phi[{i}]" for i in range(1, self.ar + 1)]
        names += [f"theta[{j}]" for j in range(1, self.ma + 1)]
        return tuple(names)

    @property
    def variance_names(self) -> tuple:
        return self.family.param_names

    @property
    def param_names(self) -> tuple:
        """Mean then variance parameter names (distribution shape parameters come after)."""
        return self.mean_names + self.variance_names

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
        raise InputError(f"model must be text such as GARCH(1,1), got {excerpt(repr(text))}")
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
    return ModelSpec(mean=mean, ar=ar, ma=ma, variance=variance, p=p, q=q)


# ----------------------------------------------------------------------------------------
# parameter names
_STEMS = ("mu", "phi", "theta") + tuple(dict.fromkeys(st for cls in FAMILIES.values() for st in cls.stems)) + ("nu", "lambda")
_NAME_RE = re.compile(r"^(" + "|".join(_STEMS) + r")(?:\[(\d+)\]|(\d+))?$")
_INDEXED = {"phi", "theta"} | {st for cls in FAMILIES.values() for st in cls.indexed}


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
        for name, value in self.fixed:
            parts.append(f"{name}={_fmt_number(value)}")
        return "; ".join(parts)

    @property
    def estimation_key(self) -> tuple:
        """What changes the estimate (periods, missing, seed and returns do not)."""
        return (self.presample, self.se, self.target, tuple(sorted(self.fixed)))


def _fmt_number(x: float) -> str:
    if float(x).is_integer() and abs(x) < 1e15:
        return str(int(x))
    return repr(float(x))


def parse_options(text) -> Options:
    """Parse an options string; raise :class:`InputError` naming the bad key or value."""
    if text is None:
        return Options()
    if not isinstance(text, str):
        if isinstance(text, (int, float)) and not isinstance(text, bool):
            raise InputError(f"options must be text such as \"se=hessian; nu=8\", got the number {text}")
        raise InputError(f"options must be text such as \"se=hessian; nu=8\", got {excerpt(repr(text))}")
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
        shown_key, shown_value = excerpt(key), excerpt(value)
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
                    f"returns or a parameter name such as nu=8"
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
    )
