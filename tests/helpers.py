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
