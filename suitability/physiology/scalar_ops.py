"""The elementwise operations the physiology equations call, compiled for one float at a time.

The same names and meanings as :mod:`.array_ops`, as numba functions inlined into the compiled engine
(:mod:`suitability.kernel`). Where an equation runs inside the kernel's vectorised loops (light,
temperature course), a call to the C maths library would stop LLVM from vectorising the loop, so
``one_minus_exp_neg``, ``sin`` and ``cos`` are polynomials here, accurate to a few 1e-16 (derived here;
tests/physiology/test_elementwise.py checks them against numpy). ``exp``, ``log``, ``tan`` and ``arccos``
are the library functions: they are only used outside those loops (per cell, day or temperature table).

NaN propagates as in numpy: ``maximum``/``minimum`` return NaN when either argument is NaN, and no
fast-math flag that assumes finite values is used anywhere.
"""

from __future__ import annotations

import math

import numba
import numpy as np

_JIT = dict(inline="always", nogil=True, error_model="numpy", fastmath={"contract"}, _nrt=False)
_INV_FACTORIAL = tuple(1.0 / math.factorial(k) for k in range(23))
#: Below −80 an exponential is below 2e-35, nothing next to the 1 it is subtracted from.
_EXP_FLOOR = -80.0

pi = math.pi
inf = math.inf
nan = math.nan


@numba.njit(**_JIT)
def exp(x):
    return math.exp(x)


@numba.njit(**_JIT)
def log(x):
    return math.log(x)


@numba.njit(**_JIT)
def sqrt(x):
    return math.sqrt(x)


@numba.njit(**_JIT)
def tan(x):
    return math.tan(x)


@numba.njit(**_JIT)
def arccos(x):
    return math.acos(x)


@numba.njit(**_JIT)
def deg2rad(degrees):
    return degrees * (math.pi / 180.0)


@numba.njit(**_JIT)
def maximum(a, b):
    return a if (a >= b or a != a) else b


@numba.njit(**_JIT)
def minimum(a, b):
    return a if (a <= b or a != a) else b


@numba.njit(**_JIT)
def where(condition, if_true, if_false):
    return if_true if condition else if_false


@numba.njit(**_JIT)
def where_valid(valid, value, fill=math.nan):
    return value if valid else fill


@numba.njit(**_JIT)
def in_range(value, low, high):
    return value >= low and value <= high


@numba.njit(**_JIT)
def reciprocals(x, y, z):
    # One division for three reciprocals: r = 1/(xyz), then 1/x = r·yz and so on (a few ulp; the
    # divider, not the multipliers, limits the kernel's vectorised loops).
    yz = y * z
    r = 1.0 / (x * yz)
    return r * yz, r * (x * z), r * (x * y)


@numba.njit(**_JIT)
def weak_scalar(value):
    return value


@numba.njit(**_JIT)
def _expm1_nonpositive(x):
    """exp(x) − 1 for −80 <= x <= 0 (x below −80 is taken as −80), relative error a few 1e-16.

    z = x / 2¹², expm1(z) by its Taylor series to z⁷ (truncation < 1e-18 relative for |z| < 0.02), then
    twelve doublings expm1(2z) = expm1(z) (expm1(z) + 2), which keep the relative error of small results.
    """
    z = (_EXP_FLOOR if x < _EXP_FLOOR else x) * (1.0 / 4096.0)
    f = _INV_FACTORIAL
    m = z * (1.0 + z * (f[2] + z * (f[3] + z * (f[4] + z * (f[5] + z * (f[6] + z * f[7]))))))
    # Written out: a loop here would be an inner loop and stop LLVM vectorising the caller's loop.
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    return m


@numba.njit(**_JIT)
def one_minus_exp_neg(x):
    """1 − exp(−x) for x >= 0 (Beer's-law absorption); NaN stays NaN."""
    return -_expm1_nonpositive(-x)


@numba.njit(**_JIT)
def _sincos_reduced(angle):
    """(sin, cos) of an angle in [−π, π]: Taylor series of the half angle h (|h| <= π/2) to h¹⁹ and
    h²⁰ (next terms < 3e-16), then sin = 2 sin h cos h, cos = (cos h − sin h)(cos h + sin h)."""
    h = 0.5 * angle
    q = h * h
    f = _INV_FACTORIAL
    s = h * (1.0 - q * (f[3] - q * (f[5] - q * (f[7] - q * (f[9] - q * (f[11] - q * (f[13] - q * (f[15] - q * (
        f[17] - q * f[19])))))))))
    c = 1.0 - q * (f[2] - q * (f[4] - q * (f[6] - q * (f[8] - q * (f[10] - q * (f[12] - q * (f[14] - q * (
        f[16] - q * (f[18] - q * f[20])))))))))
    return 2.0 * s * c, (c - s) * (c + s)


@numba.njit(**_JIT)
def _reduce_angle(angle):
    # angle − 2π k into [−π, π]; exact enough for the few turns the equations use (|angle| < 100).
    turns = np.floor(angle * (0.5 / math.pi) + 0.5)
    return angle - (2.0 * math.pi) * turns


@numba.njit(**_JIT)
def sin(angle):
    return _sincos_reduced(_reduce_angle(angle))[0]


@numba.njit(**_JIT)
def cos(angle):
    return _sincos_reduced(_reduce_angle(angle))[1]
