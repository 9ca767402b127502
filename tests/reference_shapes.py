"""Independent closed forms of the ramp shapes, shared by the shape, sampling and compile tests.

Written out from their definitions, not from seqgen: linear s; exponential (1 - e^{-r s}) / (1 - e^{-r})
with r = T / tau; smooth (1 - cos pi s) / 2; minimum jerk 10 s^3 - 15 s^4 + 6 s^5 (the minimum-jerk profile,
J. Neurosci. 5, 1688 (1985); the same polynomial in the frictionless trap ramp of Phys. Rev. Lett. 104, 063002
(2010)); a table through scipy's PCHIP (SIAM J. Numer. Anal. 17, 238 (1980); scipy's slope rule, SIAM J. Sci.
Stat. Comput. 5, 300 (1984)).
"""

import numpy as np
from scipy.interpolate import PchipInterpolator


def table_interpolator(table):
    return PchipInterpolator(*zip(*table))


def fraction(shape, s, r=None, table=None):
    """f(s) of a shape on progress s in [0, 1]."""
    if shape == "linear":
        return s
    if shape == "exponential":
        return (1 - np.exp(-r * s)) / (1 - np.exp(-r))
    if shape == "smooth":
        return (1 - np.cos(np.pi * s)) / 2
    if shape == "minimum_jerk":
        return 10 * s ** 3 - 15 * s ** 4 + 6 * s ** 5
    if shape == "table":
        return table_interpolator(table)(s)
    raise AssertionError(shape)


def second_derivative(shape, s, r=None, table=None):
    """d^2 f / ds^2, differentiated by hand (table: PCHIP's own derivative)."""
    if shape == "linear":
        return 0 * s
    if shape == "exponential":
        return -r * r * np.exp(-r * s) / (1 - np.exp(-r))
    if shape == "smooth":
        return np.pi ** 2 / 2 * np.cos(np.pi * s)
    if shape == "minimum_jerk":
        return 60 * s - 180 * s ** 2 + 120 * s ** 3
    if shape == "table":
        return table_interpolator(table).derivative(2)(s)
    raise AssertionError(shape)
