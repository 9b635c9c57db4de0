"""The leaf-model registry: what every part of the package needs to know about a leaf model.

A leaf model is split where the compiled engine needs the split:

- ``temperature_terms(temperature_c, params)``: the terms that depend on leaf temperature only
  (capacities, kinetic constants), an array function. The numpy engine calls it directly; the compiled
  engine tabulates it on a fine temperature grid (:mod:`suitability.kernel.tables`) and interpolates.
- ``constants(params)``: the numbers of the resolved parameter mapping the rates need, a tuple of floats.
- ``rates(terms, constants, absorbed_par, co2_pa, o2_pa, capacity_scale)``: an *equation*
  (:mod:`.elementwise`) giving :class:`LeafRates`; it runs on arrays and, compiled, inside the kernel.
- ``acclimated_terms(terms, constants, growth_temperature_c)`` (optional): an *equation* completing the
  temperature terms for the growth temperature Tg [°C] of the cell and month (acclimation, e.g. Kattge &
  Knorr 2007 in :mod:`.c3`); both engines call it between ``temperature_terms`` and ``rates``. Tg is
  constant over a day, the leaf temperature is not: so the tables stay one-dimensional (leaf temperature)
  and a model keeps the Tg-dependent arithmetic here. ``None``: the terms are used as they are
  (:func:`unchanged_terms`).
- ``quantum_yield(temperature_c, co2_pa, o2_pa, params)``: the light-limited quantum yield used by the
  leaf quantum-yield crossover (:mod:`.crossover`), mol CO2 (mol absorbed photons)-1.

Adding a model is one :func:`register_leaf_model` call next to its equations, a parameter set that
names it (:mod:`.params`), and its tests (DEVELOPERS.md, "Adding a leaf model").
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, NamedTuple

from .elementwise import equation, is_equation

#: Most temperature terms or constants a model may have (the compiled engine's fixed tuple width).
MAX_TERMS = 12


class LeafRates(NamedTuple):
    """Leaf CO2 exchange of one leaf model [µmol m-2 s-1], its limitation code, bundle-sheath CO2 [Pa]
    (NaN where the model has none) and leakiness [-] (NaN where the model has none)."""

    net: Any
    gross: Any
    photorespiration: Any
    limitation: Any
    bundle_sheath_co2_pa: Any
    leakiness: Any


@equation
def unchanged_terms(terms, constants, growth_temperature_c):
    """The temperature terms as they are: the ``acclimated_terms`` of a model without acclimation."""
    return terms


@dataclass(frozen=True, eq=False)
class LeafModel:
    """One entry of :data:`LEAF_MODELS` (module docstring)."""

    name: str
    pathway: str
    temperature_terms: Callable[[Any, Any], tuple]
    constants: Callable[[Any], tuple]
    rates: Callable[..., LeafRates]
    quantum_yield: Callable[..., Any]
    limitation_codes: dict
    compiled: bool = True
    acclimated_terms: Callable[..., tuple] | None = None

    @property
    def acclimate(self) -> Callable[..., tuple]:
        """``acclimated_terms``, or :func:`unchanged_terms` for a model without acclimation."""
        return self.acclimated_terms or unchanged_terms


LEAF_MODELS: dict[str, LeafModel] = {}


def register_leaf_model(model: LeafModel) -> LeafModel:
    """Add ``model`` to :data:`LEAF_MODELS` (a name may be registered once). A parameter set selects it
    with ``"model": name`` (:func:`suitability.physiology.params.register_parameter_set`)."""
    if model.pathway not in ("C3", "C4"):
        raise ValueError(f"leaf model {model.name!r}: pathway must be 'C3' or 'C4', got {model.pathway!r}")
    if model.name in LEAF_MODELS and LEAF_MODELS[model.name] != model:
        raise ValueError(f"leaf model {model.name!r} is already registered")
    if model.compiled and not is_equation(model.rates):
        raise ValueError(f"leaf model {model.name!r}: rates must be an @equation to run in the compiled engine")
    if model.compiled and not is_equation(model.acclimate):
        raise ValueError(f"leaf model {model.name!r}: acclimated_terms must be an @equation to run in the compiled "
                         "engine")
    LEAF_MODELS[model.name] = model
    return model


def leaf_model(name: str, pathway: str | None = None) -> LeafModel:
    """The registered model ``name``; ValueError listing the valid ones (of ``pathway`` if given)."""
    from . import c3, c4  # noqa: F401  (the built-in models register themselves on import)

    model = LEAF_MODELS.get(name)
    if model is None or (pathway is not None and model.pathway != pathway):
        valid = sorted(n for n, m in LEAF_MODELS.items() if pathway is None or m.pathway == pathway)
        where = f"{pathway} " if pathway else ""
        raise ValueError(f"unknown {where}leaf model {name!r}; valid: {', '.join(valid)}")
    return model
