"""One definition, two engines: the compiled operations and equations against numpy and the array forms.

References: numpy's libm-backed functions serve as the independent reference for the polynomial
operations of ``scalar_ops``; the array form of each equation (the same source) for its compiled form.
"""

from __future__ import annotations

import inspect

import numpy as np
import pytest

from suitability.physiology import (
    array_ops,
    atmosphere,
    c3,
    c4,
    canopy,
    elementwise,
    light,
    rubisco,
    scalar_ops,
    stomata,
)

MODULES = (atmosphere, c3, c4, canopy, light, rubisco, stomata)


def test_scalar_ops_offers_every_array_op():
    # Project contract (array_ops docstring): both namespaces have the same names.
    public = {name for name in vars(array_ops) if not name.startswith("_") and name not in {"annotations", "np"}}
    public -= {"is_xarray"}  # array-only helper, not called by equations
    missing = sorted(name for name in public if not hasattr(scalar_ops, name))
    assert not missing


def test_polynomial_exp_sin_cos_match_numpy():
    # numpy's libm functions as the independent reference (module docstring of scalar_ops: a few 1e-16).
    x = np.concatenate([np.linspace(0.0, 80.0, 20001), [1e-12, 1e-300, 0.0]])
    got = np.array([scalar_ops.one_minus_exp_neg(v) for v in x])
    np.testing.assert_allclose(got, -np.expm1(-x), rtol=2e-14, atol=0.0)
    assert np.isnan(scalar_ops.one_minus_exp_neg(np.nan))
    angles = np.linspace(-20.0, 20.0, 40001)
    np.testing.assert_allclose([scalar_ops.sin(a) for a in angles], np.sin(angles), rtol=0, atol=4e-15)
    np.testing.assert_allclose([scalar_ops.cos(a) for a in angles], np.cos(angles), rtol=0, atol=4e-15)


def test_maximum_minimum_propagate_nan_like_numpy():
    # numpy semantics (np.maximum / np.minimum propagate NaN from either argument).
    for a, b in ((1.0, np.nan), (np.nan, 1.0), (np.nan, np.nan), (2.0, 1.0), (1.0, 2.0)):
        for name in ("maximum", "minimum"):
            expected = getattr(np, name)(a, b)
            got = getattr(scalar_ops, name)(a, b)
            assert (np.isnan(expected) and np.isnan(got)) or got == expected


def _equations():
    for module in MODULES:
        for name, value in vars(module).items():
            if elementwise.is_equation(value) and value.__module__ == module.__name__:
                yield f"{module.__name__.rsplit('.', 1)[1]}.{name}", value


def test_equations_do_their_arithmetic_through_ops_only():
    # Project rule (elementwise docstring): an equation never calls numpy directly, or the compiled form
    # would differ from the array form.
    offenders = [name for name, function in _equations() if "np" in function.__code__.co_names]
    assert not offenders
    assert len(list(_equations())) >= 30


# Leaf-model rates (arguments "terms", "constants") are compared through the kernel in tests/test_kernel.py.
SCALAR_EQUATIONS = [(n, f) for n, f in _equations() if "terms" not in inspect.signature(f).parameters]


@pytest.mark.parametrize("name, function", SCALAR_EQUATIONS, ids=[n for n, _ in SCALAR_EQUATIONS])
def test_each_equation_compiles_to_the_numbers_of_its_array_form(name, function):
    # Derived here: the compiled and the array form are the same source; on scalar arguments (the
    # parameter's default where it has one, else a value valid for every equation) they agree to 1e-12.
    signature = inspect.signature(function)
    args = []
    for parameter in signature.parameters.values():
        if parameter.default is not inspect.Parameter.empty:
            args.append(parameter.default)
        elif parameter.name == "constants":  # stomata.stomatal_constants of a Medlyn set with stress on Vcmax
            args.append((5.25, 0.7, 0.0, 1.0))
        else:
            args.append(0.37 if "fraction" in parameter.name or "clearness" in parameter.name else 12.5)
    expected = function(*args)
    got = elementwise.compiled(function)(*args)
    np.testing.assert_allclose(np.asarray(got, float), np.asarray(expected, float), rtol=1e-12, atol=1e-300)
