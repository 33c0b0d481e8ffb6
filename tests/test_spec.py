"""Tests of model strings, options strings and parameter names (``xlfuncs.core.spec``).

The contract is DESIGN.md ("Model strings", "Fit table", "Options string").  Nothing here is
checked against an outside number; the notation (GARCH(p,q) with p ARCH terms and q GARCH
terms, GJR's one asymmetry term per ARCH lag) is the literature's own, as DESIGN.md fixes it.
"""

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from xlfuncs.core.errors import InputError
from xlfuncs.core.spec import (
    MAX_ORDER,
    ModelSpec,
    Options,
    normalise_param_name,
    parse_model,
    parse_options,
)

# ---------------------------------------------------------------------------------------------
# model strings: canonical forms

CANONICAL = [
    # (typed, canonical)
    ("GARCH(1,1)", "GARCH(1,1)"),
    ("garch(1,1)", "GARCH(1,1)"),
    ("  Garch ( 1 , 1 ) ", "GARCH(1,1)"),
    ("GARCH", "GARCH(1,1)"),
    ("ARCH", "ARCH(1)"),
    ("arch(3)", "ARCH(3)"),
    ("GJR-GARCH", "GJR-GARCH(1,1)"),
    ("gjr-garch(2,1)", "GJR-GARCH(2,1)"),
    ("GJRGARCH(1,1)", "GJR-GARCH(1,1)"),
    ("GJR", "GJR-GARCH(1,1)"),
    ("EGARCH", "EGARCH(1,1)"),
    ("e garch(1, 2)", "EGARCH(1,2)"),
    ("IGARCH", "IGARCH(1,1)"),
    # the constant mean is the default and is not written
    ("CONST", "CONST"),
    ("const-arch(1)", "ARCH(1)"),
    ("CONST-EGARCH(1,1)", "EGARCH(1,1)"),
    ("CONST-GJR-GARCH(1,1)", "GJR-GARCH(1,1)"),
    # a zero mean is written
    ("ZERO", "ZERO"),
    ("zero-arch", "ZERO-ARCH(1)"),
    ("ZERO-EGARCH(1,1)", "ZERO-EGARCH(1,1)"),
    ("Zero-GJR-GARCH(1,1)", "ZERO-GJR-GARCH(1,1)"),
    # AR/MA/ARMA means
    ("AR(1)", "AR(1)"),
    ("ar(2)-garch(1,1)", "AR(2)-GARCH(1,1)"),
    ("AR(1)-GARCH", "AR(1)-GARCH(1,1)"),
    ("AR(1) - GJR-GARCH(1,1)", "AR(1)-GJR-GARCH(1,1)"),
    ("MA(1)-ARCH(2)", "MA(1)-ARCH(2)"),
    ("ARMA(1,1)-GARCH(2,1)", "ARMA(1,1)-GARCH(2,1)"),
    ("ARMA(2,0)", "AR(2)"),
    ("ARMA(0,2)", "MA(2)"),
    # AR(0) is the constant mean
    ("AR(0)", "CONST"),
    ("MA(0)", "CONST"),
    ("ARMA(0,0)", "CONST"),
    ("AR(0)-GARCH(1,1)", "GARCH(1,1)"),
    # a GARCH with no GARCH term is an ARCH
    ("GARCH(1,0)", "ARCH(1)"),
    ("GARCH(3,0)", "ARCH(3)"),
    ("AR(1)-GARCH(2,0)", "AR(1)-ARCH(2)"),
    (f"ARCH({MAX_ORDER})", f"ARCH({MAX_ORDER})"),
]


@pytest.mark.parametrize("typed, canonical", CANONICAL)
def test_canonical_form(typed, canonical):
    assert parse_model(typed).canonical == canonical


@pytest.mark.parametrize("typed, canonical", CANONICAL)
def test_canonical_form_is_a_fixed_point(typed, canonical):
    spec = parse_model(typed)
    again = parse_model(spec.canonical)
    assert again == spec
    assert again.canonical == canonical


@pytest.mark.parametrize("blank", [None, "", "   "])
def test_blank_model_means_garch11(blank):
    # the worksheet's and the command line's default model
    assert parse_model(blank).canonical == "GARCH(1,1)"


def test_garch_orders_are_arch_then_garch():
    # DESIGN.md: GARCH(p,q) has p ARCH terms (alpha) and q GARCH terms (beta)
    spec = parse_model("GARCH(2,1)")
    assert (spec.variance, spec.p, spec.q) == ("garch", 2, 1)


def test_mean_only_string_is_constant_variance():
    for text in ("AR(1)", "CONST", "ZERO", "ARMA(1,1)"):
        assert parse_model(text).variance == "constant"


# ---------------------------------------------------------------------------------------------
# a bare mean word directly before GARCH (once mis-read as one word "ZERO-GARCH")

@pytest.mark.parametrize(
    "typed, canonical",
    [
        ("ZERO-GARCH(1,1)", "ZERO-GARCH(1,1)"),
        ("CONST-GARCH(1,1)", "GARCH(1,1)"),
        ("zero-garch", "ZERO-GARCH(1,1)"),
    ],
)
def test_bare_mean_word_before_garch(typed, canonical):
    assert parse_model(typed).canonical == canonical


# ---------------------------------------------------------------------------------------------
# parameter names

PARAM_NAMES = [
    ("CONST", ("mu", "omega")),
    ("ZERO", ("omega",)),
    ("AR(1)", ("mu", "phi[1]", "omega")),
    ("MA(2)", ("mu", "theta[1]", "theta[2]", "omega")),
    ("ARMA(1,1)", ("mu", "phi[1]", "theta[1]", "omega")),
    ("ARCH(1)", ("mu", "omega", "alpha[1]")),
    ("ZERO-ARCH(2)", ("omega", "alpha[1]", "alpha[2]")),
    ("GARCH(1,1)", ("mu", "omega", "alpha[1]", "beta[1]")),
    ("GARCH(2,1)", ("mu", "omega", "alpha[1]", "alpha[2]", "beta[1]")),
    ("GARCH(1,3)", ("mu", "omega", "alpha[1]", "beta[1]", "beta[2]", "beta[3]")),
    ("AR(1)-GJR-GARCH(1,1)", ("mu", "phi[1]", "omega", "alpha[1]", "gamma[1]", "beta[1]")),
    ("GJR-GARCH(2,1)", ("mu", "omega", "alpha[1]", "alpha[2]", "gamma[1]", "gamma[2]", "beta[1]")),
    ("ZERO-EGARCH(1,1)", ("omega", "alpha[1]", "gamma[1]", "beta[1]")),
    ("IGARCH(1,1)", ("mu", "omega", "alpha[1]", "beta[1]")),
    ("ARMA(1,1)-GARCH(2,1)", ("mu", "phi[1]", "theta[1]", "omega", "alpha[1]", "alpha[2]", "beta[1]")),
]


@pytest.mark.parametrize("model, names", PARAM_NAMES)
def test_param_names(model, names):
    assert parse_model(model).param_names == names


@pytest.mark.parametrize("p", [1, 2, 3])
@pytest.mark.parametrize("q", [1, 2, 4])
@pytest.mark.parametrize("family", ["GARCH", "GJR-GARCH", "EGARCH", "IGARCH"])
def test_orders_give_p_alphas_and_q_betas(family, p, q):
    names = parse_model(f"{family}({p},{q})").param_names
    assert [n for n in names if n.startswith("alpha")] == [f"alpha[{i}]" for i in range(1, p + 1)]
    assert [n for n in names if n.startswith("beta")] == [f"beta[{j}]" for j in range(1, q + 1)]
    gammas = [n for n in names if n.startswith("gamma")]
    if family in ("GJR-GARCH", "EGARCH"):
        assert gammas == [f"gamma[{i}]" for i in range(1, p + 1)]  # one per ARCH lag
    else:
        assert gammas == []


# ---------------------------------------------------------------------------------------------
# malformed model strings

BAD_MODELS = [
    # (text, a fragment the message must contain)
    ("FOO", r'"FOO" is not a model name'),
    ("GARCH(1,1,1)", r"GARCH takes 2 whole-number orders"),
    ("GARCH(1)", r"GARCH takes 2 whole-number orders"),
    ("GARCH()", r"GARCH takes 2 whole-number orders"),
    ("GARCH(1.5,1)", r"whole-number"),
    ("GARCH(-1,1)", r"whole-number"),
    ("ARCH(1,1)", r"ARCH takes 1 whole-number order"),
    ("AR(1,1)-GARCH(1,1)", r"AR takes 1 whole-number order"),
    ("ARMA(1)-GARCH(1,1)", r"ARMA takes 2 whole-number orders"),
    ("ARCH(0)", r"at least one lag"),
    ("GARCH(0,1)", r"at least one ARCH term"),
    ("IGARCH(0,1)", r"at least one ARCH term"),
    (f"ARCH({MAX_ORDER + 1})", rf"orders above {MAX_ORDER}"),
    (f"AR({MAX_ORDER + 1})", rf"orders above {MAX_ORDER}"),
    ("AR(1)-", r"ends with a dash"),
    ("-GARCH(1,1)", r"unexpected"),
    ("GARCH(1,1", r'parentheses do not match'),
    ("GARCH[1,1]", r'expected "-"'),
    ("ARCH(1)GARCH(1,1)", r'expected "-"'),
    ("AR(1)-GARCH(1,1)-ARCH(1)", r"more than a mean part and a variance part"),
    ("GARCH(1,1)-ARCH(1)", r'"GARCH" is not a mean'),
    ("AR(1)-MA(1)", r'"MA" is not a variance model'),
    ("ZERO(1)", r"ZERO takes no order"),
    ("CONST()", r"CONST takes no order"),
    ("GARCH%", r"unexpected|expected"),
]


@pytest.mark.parametrize("text, fragment", BAD_MODELS)
def test_malformed_model_raises_input_error(text, fragment):
    with pytest.raises(InputError, match=fragment) as info:
        parse_model(text)
    msg = str(info.value)
    # the message quotes what was typed and shows how to write a model
    assert f'"{text}"' in msg
    assert "e.g. GARCH(1,1)" in msg


@pytest.mark.parametrize("value", [3, 1.5, True, ["GARCH(1,1)"]])
def test_non_text_model_raises(value):
    with pytest.raises(InputError, match=r"model must be text"):
        parse_model(value)


def test_input_error_is_a_value_error():
    # existing handlers that catch ValueError still work (STYLE.md)
    with pytest.raises(ValueError):
        parse_model("FOO")


# ---------------------------------------------------------------------------------------------
# a property: any well-formed string, however cased and spaced, parses to its canonical form

_orders = st.integers(min_value=1, max_value=4)


@st.composite
def model_strings(draw):
    mean = draw(st.sampled_from(["", "ZERO", "CONST", "AR", "MA", "ARMA"]))
    ar = ma = 0
    if mean == "AR":
        ar = draw(_orders)
        mean_text = f"AR({ar})"
    elif mean == "MA":
        ma = draw(_orders)
        mean_text = f"MA({ma})"
    elif mean == "ARMA":
        ar, ma = draw(_orders), draw(_orders)
        mean_text = f"ARMA({ar},{ma})"
    else:
        mean_text = mean
    var = draw(st.sampled_from(["", "ARCH", "GARCH", "GJR-GARCH", "EGARCH", "IGARCH"]))
    p = draw(_orders)
    q = draw(_orders)
    if var == "ARCH":
        var_text = f"ARCH({p})"
    elif var:
        var_text = f"{var}({p},{q})"
    else:
        var_text = ""
    if not mean_text and not var_text:
        mean_text = "CONST"
    text = "-".join(t for t in (mean_text, var_text) if t)
    # random case and random spaces
    cased = "".join(c.lower() if draw(st.booleans()) else c for c in text)
    spaced = "".join(c + (" " if draw(st.integers(0, 4)) == 0 else "") for c in cased)
    return spaced, text, (mean_text, var, ar, ma, p, q)


@settings(max_examples=150, deadline=None)
@given(model_strings())
def test_property_model_strings(case):
    typed, text, (mean_text, var, ar, ma, p, q) = case
    spec = parse_model(typed)
    assert spec == parse_model(text)
    assert parse_model(spec.canonical) == spec
    names = spec.param_names
    assert ("mu" in names) == (mean_text != "ZERO")
    assert sum(n.startswith("phi[") for n in names) == ar
    assert sum(n.startswith("theta[") for n in names) == ma
    assert names.count("omega") == 1
    if var:
        assert sum(n.startswith("alpha[") for n in names) == p
        assert sum(n.startswith("beta[") for n in names) == (0 if var == "ARCH" else q)
    else:
        assert not any(n.startswith(("alpha", "beta", "gamma")) for n in names)


# ---------------------------------------------------------------------------------------------
# parameter names typed by people

NAMES = [
    ("mu", "mu"),
    ("MU", "mu"),
    ("omega", "omega"),
    ("Omega", "omega"),
    ("alpha0", "omega"),
    ("ALPHA0", "omega"),
    ("alpha[0]", "omega"),
    ("alpha1", "alpha[1]"),
    ("Alpha1", "alpha[1]"),
    ("alpha[1]", "alpha[1]"),
    ("alpha", "alpha[1]"),
    ("alpha2", "alpha[2]"),
    ("ALPHA[2]", "alpha[2]"),
    (" alpha 2 ", "alpha[2]"),
    ("beta", "beta[1]"),
    ("beta1", "beta[1]"),
    ("Beta[3]", "beta[3]"),
    ("gamma", "gamma[1]"),
    ("gamma[2]", "gamma[2]"),
    ("phi1", "phi[1]"),
    ("PHI[2]", "phi[2]"),
    ("theta[1]", "theta[1]"),
    ("nu", "nu"),
    ("NU", "nu"),
    ("lambda", "lambda"),
    ("Lambda", "lambda"),
]


@pytest.mark.parametrize("typed, canonical", NAMES)
def test_normalise_param_name(typed, canonical):
    assert normalise_param_name(typed) == canonical


@pytest.mark.parametrize(
    "typed",
    ["sigma", "", "parameter", "loglik", "model", "beta0", "beta[0]", "phi0", "nu1", "mu[1]",
     "omega1", "lambda2", "alpha[x]", "alpha[-1]", "alpha[1", None, 3, 1.0, True],
)
def test_normalise_param_name_rejects(typed):
    assert normalise_param_name(typed) is None


# ---------------------------------------------------------------------------------------------
# options strings

def test_option_defaults():
    o = parse_options(None)
    assert o == Options()
    assert (o.presample, o.se, o.target, o.missing) == ("mean", "robust", False, "error")
    assert (o.periods, o.seed, o.paths, o.fixed) == (None, None, None, ())
    assert o.canonical == "presample=mean; se=robust"


@pytest.mark.parametrize("blank", ["", "   ", ";", " ; ; "])
def test_blank_options_are_the_defaults(blank):
    assert parse_options(blank) == Options()


OPTIONS = [
    # (typed, canonical)
    ("se=hessian; nu=8", "presample=mean; se=hessian; nu=8"),
    ("presample=drop", "presample=drop; se=robust"),
    ("presample=mean", "presample=mean; se=robust"),
    ("se=robust", "presample=mean; se=robust"),
    ("se=opg", "presample=mean; se=opg"),
    ("SE = HESSIAN", "presample=mean; se=hessian"),
    ("Presample=Drop;SE=OPG", "presample=drop; se=opg"),
    ("target=yes", "presample=mean; se=robust; target=yes"),
    ("target=TRUE", "presample=mean; se=robust; target=yes"),
    ("target=1", "presample=mean; se=robust; target=yes"),
    ("target=no", "presample=mean; se=robust"),
    ("missing=skip", "presample=mean; se=robust; missing=skip"),
    ("missing=error", "presample=mean; se=robust"),
    ("periods=12", "presample=mean; se=robust; periods=12"),
    ("periods=252.0", "presample=mean; se=robust; periods=252"),
    ("seed=0", "presample=mean; se=robust; seed=0"),
    ("paths=1000", "presample=mean; se=robust; paths=1000"),
    ("mu=0", "presample=mean; se=robust; mu=0"),
    ("nu=8.5", "presample=mean; se=robust; nu=8.5"),
    # canonical order: presample, se, target, missing, periods, seed, paths, then fixed as given
    ("nu=8; periods=12; missing=skip; target=yes; se=opg; presample=drop",
     "presample=drop; se=opg; target=yes; missing=skip; periods=12; nu=8"),
    ("beta=0.8; mu=0", "presample=mean; se=robust; beta[1]=0.8; mu=0"),
]


@pytest.mark.parametrize("typed, canonical", OPTIONS)
def test_options_canonical(typed, canonical):
    o = parse_options(typed)
    assert o.canonical == canonical
    assert parse_options(o.canonical) == o  # the canonical string reads back to the same options


def test_option_fields():
    o = parse_options("presample=drop; se=opg; target=yes; missing=skip; periods=52; seed=7; paths=5000")
    assert (o.presample, o.se, o.target, o.missing) == ("drop", "opg", True, "skip")
    assert (o.periods, o.seed, o.paths) == (52, 7, 5000)


@pytest.mark.parametrize(
    "typed, fixed",
    [
        ("nu=8", {"nu": 8.0}),
        ("mu=0", {"mu": 0.0}),
        ("alpha0=0.1", {"omega": 0.1}),
        ("ALPHA0=0.1", {"omega": 0.1}),
        ("alpha1=0.2", {"alpha[1]": 0.2}),
        ("Alpha1=0.2", {"alpha[1]": 0.2}),
        ("alpha[2]=0.05", {"alpha[2]": 0.05}),
        ("OMEGA=0.01; Beta=0.9", {"omega": 0.01, "beta[1]": 0.9}),
        ("lambda=-0.2; nu=6", {"lambda": -0.2, "nu": 6.0}),
        ("phi1=0.1", {"phi[1]": 0.1}),
        ("gamma = 0.05", {"gamma[1]": 0.05}),
    ],
)
def test_fixed_parameters(typed, fixed):
    o = parse_options(typed)
    assert o.fixed_dict == fixed


def test_estimation_key_ignores_what_does_not_change_the_estimate():
    base = parse_options("se=hessian; nu=8")
    for extra in ("periods=12", "missing=skip", "seed=3"):
        assert parse_options(f"se=hessian; nu=8; {extra}").estimation_key == base.estimation_key
    for other in ("se=opg; nu=8", "se=hessian; nu=9", "se=hessian", "se=hessian; nu=8; presample=drop",
                  "se=hessian; nu=8; target=yes"):
        assert parse_options(other).estimation_key != base.estimation_key


def test_estimation_key_ignores_order_of_fixed_parameters():
    assert parse_options("mu=0; nu=8").estimation_key == parse_options("nu=8; mu=0").estimation_key


BAD_OPTIONS = [
    ("presample=foo", r"presample=foo is not allowed; use presample=mean or presample=drop"),
    ("se=white", r"se=white is not allowed; use se=robust or se=hessian or se=opg"),
    ("target=maybe", r"target=maybe is not allowed"),
    ("missing=maybe", r"missing=maybe is not allowed; use missing=error or missing=skip"),
    ("periods=0", r"periods must be a whole number from 1 to"),
    ("periods=1.5", r"periods must be a whole number"),
    ("periods=abc", r"periods must be a whole number.*got abc"),
    ("periods=inf", r"periods must be a whole number"),
    ("seed=-1", r"seed must be a whole number from 0"),
    ("paths=999", r"paths must be a whole number from 1000"),
    ("nu", r'"nu" is not key=value'),
    ("se hessian", r'"se hessian" is not key=value'),
    ("nu=", r"nu= has no value"),
    ("se=", r"se= has no value"),
    ("nu=abc", r"nu must be a number to hold the parameter fixed, got abc"),
    ("nu=inf", r"nu must be a finite number"),
    ("mu=nan", r"mu must be a finite number"),
    ("foo=1", r'unknown key "foo"'),
    ("sigma=1", r'unknown key "sigma"'),
    ("beta0=0.5", r'unknown key "beta0"'),
    ("=3", r'unknown key ""'),
]


@pytest.mark.parametrize("typed, fragment", BAD_OPTIONS)
def test_bad_options_raise_input_error(typed, fragment):
    with pytest.raises(InputError, match=fragment) as info:
        parse_options(typed)
    assert str(info.value).startswith("options")


def test_bad_option_in_a_longer_string_is_named():
    with pytest.raises(InputError, match=r"se=sandwich"):
        parse_options("presample=drop; se=sandwich; nu=8")


@pytest.mark.parametrize("value, fragment", [(3, r"got the number 3"), (2.5, r"got the number 2.5"),
                                             (True, r"got the logical value TRUE"), (["se=opg"], r"got a list")])
def test_non_text_options_raise(value, fragment):
    with pytest.raises(InputError, match=r'options must be text such as "se=hessian; nu=8", ' + fragment):
        parse_options(value)


# a property: the canonical string of any options reads back to the same options
_param = st.sampled_from(["mu", "omega", "alpha[1]", "alpha[2]", "beta[1]", "gamma[1]", "nu", "lambda", "phi[1]"])


@settings(max_examples=100, deadline=None)
@given(
    presample=st.sampled_from(["mean", "drop"]),
    se=st.sampled_from(["robust", "hessian", "opg"]),
    target=st.booleans(),
    missing=st.sampled_from(["error", "skip"]),
    periods=st.none() | st.integers(1, 100000),
    seed=st.none() | st.integers(0, 2**31 - 1),
    fixed=st.dictionaries(_param, st.floats(-1e6, 1e6, allow_nan=False) | st.integers(-100, 100), max_size=4),
)
def test_property_options_round_trip(presample, se, target, missing, periods, seed, fixed):
    parts = [f"presample={presample}", f"se={se}", f"target={'yes' if target else 'no'}", f"missing={missing}"]
    if periods is not None:
        parts.append(f"periods={periods}")
    if seed is not None:
        parts.append(f"seed={seed}")
    parts += [f"{k}={v!r}" for k, v in fixed.items()]
    o = parse_options(";".join(parts))
    assert (o.presample, o.se, o.target, o.missing, o.periods, o.seed) == (presample, se, target, missing, periods, seed)
    assert o.fixed_dict == {k: float(v) for k, v in fixed.items()}
    assert parse_options(o.canonical) == o


def test_model_spec_default_is_constant_mean_constant_variance():
    assert ModelSpec().canonical == "CONST"
    assert ModelSpec().param_names == ("mu", "omega")
    assert ModelSpec(mean="zero").canonical == "ZERO"
