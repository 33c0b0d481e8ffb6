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
