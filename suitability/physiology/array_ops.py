"""The elementwise operations the physiology equations call, for arrays.

Every equation of :mod:`suitability.physiology` does its arithmetic through a module-level name ``ops``.
Imported normally, ``ops`` is this module: numpy ufuncs and a selection that keeps the kind of its inputs,
so an equation works unchanged on Python scalars, numpy arrays, xarray DataArrays and dask arrays (dask
stays lazy). The compiled engine runs the same equations with ``ops`` bound to
:mod:`.scalar_ops` instead (see :mod:`.elementwise`). Both modules offer the same names with the same
meaning; tests/physiology/test_elementwise.py holds them together.
"""

from __future__ import annotations

import numpy as np

pi = np.pi
inf = np.inf
nan = np.nan

exp = np.exp
log = np.log
sqrt = np.sqrt
sin = np.sin
cos = np.cos
tan = np.tan
arccos = np.arccos
maximum = np.maximum
minimum = np.minimum


def deg2rad(degrees):
    """Degrees to radians."""
    return np.deg2rad(degrees)


def one_minus_exp_neg(x):
    """1 − exp(−x), accurate for small x (no cancellation)."""
    return -np.expm1(-x)


def reciprocals(x, y, z):
    """(1/x, 1/y, 1/z). For positive finite arguments whose product is a normal number (the compiled
    form shares one division among the three, :mod:`.scalar_ops`); equations pass guarded denominators."""
    return 1.0 / x, 1.0 / y, 1.0 / z


def is_xarray(value) -> bool:
    # Checked by module name so that numpy-only callers never pay for importing xarray.
    return type(value).__module__.split(".")[0] == "xarray"


def where(condition, if_true, if_false):
    """Elementwise ``condition ? if_true : if_false`` that keeps the kind of its inputs.

    ``xarray.where`` when any argument is an xarray object (dask-backed ones stay lazy), ``numpy.where``
    otherwise (which dispatches to ``dask.array.where`` for bare dask arrays). A 0-d result is a numpy
    scalar of the inputs' dtype, or a Python scalar when every input was a Python scalar: Python scalars
    stay "weak" (NEP 50) and do not upcast the float32 arrays they later meet.
    """
    if is_xarray(condition) or is_xarray(if_true) or is_xarray(if_false):
        import xarray as xr

        return xr.where(condition, if_true, if_false, keep_attrs=True)
    result = np.where(condition, if_true, if_false)
    if isinstance(result, np.ndarray) and result.ndim == 0:
        numpy_input = any(isinstance(v, (np.generic, np.ndarray)) for v in (condition, if_true, if_false))
        return result[()] if numpy_input else result.item()
    return result


def where_valid(valid, value, fill=np.nan):
    """``value`` where ``valid`` is true, else ``fill`` (NaN by default)."""
    return where(valid, value, fill)


def in_range(value, low, high):
    """True where ``low <= value <= high`` (false for NaN)."""
    return (value >= low) & (value <= high)


def weak_scalar(value):
    """A numpy scalar or 0-d array as a Python float, which does not upcast float32 arrays (NEP 50)."""
    if isinstance(value, (np.generic, np.ndarray)) and np.ndim(value) == 0:
        return float(value)
    return value
