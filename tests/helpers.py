"""Small helpers the test files share."""

import math


def lre(value, ref):
    """Log relative error: the number of correct significant digits (McCullough 1998)."""
    if value == ref:
        return math.inf
    return -math.log10(abs(value - ref) / abs(ref))


def column(x):
    """A column range of cells, as a worksheet function receives it."""
    return [[float(v)] for v in x]


def family_models(orders=(2, 1), constant=True):
    """One model string per registered variance family: the family at ``orders`` (the first one
    for a one-order family), or its bare word where it takes no orders or not those (EWMA,
    CGARCH(1,1) only, FIGARCH's (1,d,1)); ``CONST`` for the constant variance if ``constant``."""
    from xlfuncs.core import parse_model
    from xlfuncs.core.errors import InputError
    from xlfuncs.core.families import FAMILIES

    out = []
    for cls in FAMILIES.values():
        if not cls.words:
            if constant:
                out.append("CONST")
            continue
        word = cls.words[0]
        model = word
        if cls.n_orders:
            model = f"{word}({orders[0]})" if cls.n_orders == 1 else f"{word}({orders[0]},{orders[1]})"
            try:
                parse_model(model)
            except InputError:
                model = word
        out.append(model)
    return out


def egarch11_product_forecast(params, eta, e_last, s2_last, kappa, horizon):
    """E_T sigma2_{T+h}, h = 1..horizon, of an EGARCH(1,1) with normal (``eta`` empty) or GED
    (``eta = {"nu": ...}``) shocks: sigma2_{T+1}^(beta^(h-1)) exp(omega sum_{i<h-1} beta^i)
    prod_{i=1}^{h-1} E exp(beta^(i-1) (alpha (|z| - E|z|) + gamma z)) (Nelson 1991), each factor
    by SciPy's quad over the scipy.stats density.  ``e_last``, ``s2_last``: the last residual and
    variance in the sample; ``kappa``: E|z| of the shocks."""
    from scipy import integrate, special, stats

    om, a, g, b = params["omega"], params["alpha[1]"], params["gamma[1]"], params["beta[1]"]
    if not eta:
        logpdf = stats.norm.logpdf
    else:
        nu = eta["nu"]
        scale = math.sqrt(special.gamma(1 / nu) / special.gamma(3 / nu))

        def logpdf(x):
            return stats.gennorm.logpdf(x, nu, scale=scale)

    def mgf(u, c):
        def f(z):
            return math.exp(u * abs(z) + c * z + logpdf(z))
        return (integrate.quad(f, -math.inf, 0, epsabs=0, epsrel=2e-14, limit=500)[0]
                + integrate.quad(f, 0, math.inf, epsabs=0, epsrel=2e-14, limit=500)[0])

    z = e_last / math.sqrt(s2_last)
    lv1 = om + a * (abs(z) - kappa) + g * z + b * math.log(s2_last)
    out, logprod = [], 0.0
    for h in range(1, horizon + 1):
        out.append(math.exp(b ** (h - 1) * lv1 + om * sum(b ** i for i in range(h - 1)) + logprod))
        c = b ** (h - 1)
        logprod += math.log(mgf(c * a, c * g)) - c * a * kappa
    return out
