"""Fixed parameter values (the options' ``name=value``) that leave no admissible model are refused
before estimating, in a spreadsheet user's words; valid ones estimate as before.

References: the GARCH(p,q) variance is positive with omega > 0 and non-negative ARCH/GARCH weights,
and covariance-stationary when the weights sum below 1 (Bollerslev 1986, J. Econometrics 31,
sections 2-3); an ARMA part is stationary (invertible) when the roots of its AR (MA) lag polynomial
lie outside the unit circle (Box & Jenkins, Time Series Analysis, ch. 3; for one lag |phi| < 1).
The exact wording of the messages is the project's own (common practice for spreadsheet messages).
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from xlfuncs import VOLFIT
from xlfuncs.cli import main
from xlfuncs.core.distributions import get_distribution
from xlfuncs.core.errors import InputError
from xlfuncs.core.estimate import fit
from xlfuncs.core.simulate import simulate
from xlfuncs.core.spec import parse_model


def _returns(n=400, seed=11):
    x = simulate(parse_model("GARCH(1,1)"), get_distribution("normal"), np.array([0.0, 0.1, 0.1, 0.8]), n, 1,
                 rng=np.random.default_rng(seed))[:, 0]
    return [float(v) for v in x]


R = _returns()
CELLS = [[v] for v in R]


def _error_cell(out):
    """The one ERROR cell a worksheet function answers with."""
    assert isinstance(out, list) and len(out) == 1 and len(out[0]) == 1, out
    text = str(out[0][0])
    assert text.startswith("ERROR:"), text
    return text


# --- negative weights (Bollerslev 1986: alpha_i, beta_j >= 0) -------------------------------------
@pytest.mark.parametrize("model,opt,name", [("GARCH(1,1)", "alpha[1]=-0.1", "alpha[1]"),
                                            ("GARCH(1,1)", "beta[1]=-0.2", "beta[1]"),
                                            ("GJR-GARCH(1,1)", "alpha[1]=-0.1", "alpha[1]"),
                                            ("ARCH(2)", "alpha[2]=-0.3", "alpha[2]")])
def test_a_negative_weight_is_refused_by_name(model, opt, name):
    with pytest.raises(InputError, match=re.escape(f"{name} must be 0 or more")):
        fit(R, model, "normal", opt)
    assert "must be 0 or more" in _error_cell(VOLFIT(CELLS, model, "normal", opt))


# --- fixed weights already at or above the stationarity bound (Bollerslev 1986: sum < 1) ----------
@pytest.mark.parametrize("model,dist,opt,total", [("GARCH(1,1)", "normal", "alpha[1]=1.5", "1.5"),
                                                  ("GARCH(1,1)", "t", "alpha[1]=1", "1"),
                                                  ("GARCH(1,1)", "normal", "beta[1]=1.2", "1.2"),
                                                  ("GARCH(1,1)", "normal", "alpha[1]=0.5; beta[1]=0.6", "1.1"),
                                                  ("GJR-GARCH(1,1)", "normal", "beta[1]=1.05", "1.05"),
                                                  ("ARCH(2)", "normal", "alpha[1]=0.7; alpha[2]=0.4", "1.1")])
def test_fixed_weights_summing_to_one_or_more_are_refused(model, dist, opt, total):
    with pytest.raises(InputError) as e:
        fit(R, model, dist, opt)
    msg = str(e.value)
    assert "sum" in msg and total in msg and "stationar" in msg, msg
    assert "of an IGARCH model sum to 1" not in msg and "implied by the others" not in msg, msg
    cell = _error_cell(VOLFIT(CELLS, model, dist, opt))
    assert "sum" in cell and "implied by the others" not in cell


def test_the_sum_check_is_for_stationary_families_only():
    # GARCH refuses alpha 0.6 + beta 0.5; IGARCH is integrated by design and a fixed alpha is fine
    with pytest.raises(InputError, match="sum") as e:
        fit(R, "GARCH(1,1)", "normal", "alpha[1]=0.6; beta[1]=0.5")
    assert "implied by the others" not in str(e.value)
    f = fit(R, "IGARCH(1,1)", "normal", "alpha[1]=0.3")
    d = f.param_dict
    assert d["alpha[1]"] == 0.3 and abs(d["alpha[1]"] + d["beta[1]"] - 1.0) < 1e-12


# --- AR part non-stationary / MA part non-invertible by fixed coefficients (Box & Jenkins) ---------
@pytest.mark.parametrize("dist", ["normal", "t"])
@pytest.mark.parametrize("phi", [1.0, 1.2, 1.5, -1.5])
def test_a_fixed_ar_coefficient_of_one_or_more_in_size_is_refused(dist, phi):
    opt = f"phi[1]={phi}"
    with pytest.raises(InputError, match=r"phi\[1\]") as e:
        fit(R, "AR(1)-GARCH(1,1)", dist, opt)
    assert "stationary" in str(e.value)
    assert "phi[1]" in _error_cell(VOLFIT(CELLS, "AR(1)-GARCH(1,1)", dist, opt))


@pytest.mark.parametrize("model,opt,word", [
    # 1 - 0.5 L - 0.6 L^2 has a root at L = 0.88, inside the unit circle (coefficients sum above 1)
    ("AR(2)-GARCH(1,1)", "phi[1]=0.5; phi[2]=0.6", "stationary"),
    ("MA(1)-GARCH(1,1)", "theta[1]=1.2", "invertible"),
    ("MA(1)-GARCH(1,1)", "theta[1]=-1", "invertible"),
    # 1 + 0.3 L + 1.1 L^2: roots of modulus 1/sqrt(1.1) < 1
    ("MA(2)-GARCH(1,1)", "theta[1]=0.3; theta[2]=1.1", "invertible"),
])
def test_fixed_arma_coefficients_are_checked_by_the_roots(model, opt, word):
    with pytest.raises(InputError, match=word):
        fit(R, model, "normal", opt)


def test_the_command_line_refuses_an_explosive_fixed_value_with_exit_2(tmp_path, capsys):
    p = tmp_path / "r.csv"
    p.write_text("return\n" + "\n".join(f"{v!r}" for v in R) + "\n")
    assert main(["fit", str(p), "--model", "GARCH(1,1)", "--options", "alpha[1]=1.5"]) == 2
    err = capsys.readouterr().err
    assert "sum" in err and "1.5" in err


# --- never 'converged' from the untouched starting values -------------------------------------------
def test_a_fit_that_converges_moved_from_its_start():
    # a fixed AR coefficient that is valid but whose partner's least-squares start is not
    # stationary: the fit must still estimate (or say it did not), never report the start
    import csv
    from pathlib import Path
    demo = Path(__file__).resolve().parents[1] / "demo_data" / "demo_returns.csv"
    with open(demo, newline="") as fh:
        d = [float(row["return"]) for row in csv.DictReader(fh)]
    # on the demo returns least squares gives phi[2] = 0.14: beside phi[1] = 0.9 not stationary
    f = fit(d, "AR(2)-GARCH(1,1)", "normal", "phi[1]=0.9")
    assert f.converged and "after 0 iterations" not in f.message and not f.message.startswith("converged: 0 ")
    d = f.param_dict
    assert abs(d["phi[1]"] + d["phi[2]"]) < 1 + 1e-9  # admissible


# --- valid fixed values estimate as before (internal-consistency check) ------------------------------
@pytest.mark.parametrize("model,dist,name", [("GARCH(1,1)", "normal", "alpha[1]"),
                                             ("AR(1)-GARCH(1,1)", "normal", "phi[1]"),
                                             ("GARCH(1,1)", "t", "nu")])
def test_fixing_a_parameter_at_its_estimate_leaves_the_others(model, dist, name):
    # internal consistency: at the free maximum the score of the other parameters vanishes, so
    # holding one parameter at its estimate leaves the others where they were
    free = fit(R, model, dist)
    held = fit(R, model, dist, f"{name}={free.param_dict[name]!r}")
    assert held.converged
    for n in free.names:
        assert abs(held.param_dict[n] - free.param_dict[n]) < 1e-6, n
    assert abs(held.loglik - free.loglik) < 1e-8


@pytest.mark.parametrize("model,fixed", [("GARCH(1,1)", "beta[1]=0.95"), ("GJR-GARCH(1,1)", "beta[1]=0.97")])
def test_a_high_fixed_weight_is_estimated_around(model, fixed):
    """A valid fixed weight near 1 (beta[1]=0.95): every usual start added an alpha of 0.05 to 0.3
    and so lay outside the stationary region, and the fit found 'no admissible estimate'.  The free
    weights now shrink until the start is inside; the fit converges, its persistence is below 1
    (Bollerslev 1986), and no nearby point scores higher (a local maximum: internal consistency)."""
    from xlfuncs.core.likelihood import Likelihood

    r = np.asarray(_returns(600, seed=5))
    res = fit(r, model, "normal", fixed)
    assert res.converged and res.persistence < 1.0
    lik = Likelihood(r, res.spec, res.dist, "mean", None)
    theta = np.asarray(res.params, dtype=float)
    best = lik.loglik(theta)
    assert abs(best - res.loglik) < 1e-9 * abs(best)
    free = [i for i, n in enumerate(res.names) if n not in ("beta[1]",)]
    for i in free:
        for step in (-1e-3, 1e-3):
            t = theta.copy()
            t[i] += step * max(1.0, abs(t[i]))
            assert lik.loglik(t) <= best + 1e-9, (res.names[i], step)
