"""Published uncertainty of the parameter sets, and seeded draws over it (pure data and pure functions).

:data:`PARAMETER_UNCERTAINTY` is the one registry: parameter-set name -> the :class:`Spread` of each of its
influential parameters, with its source. Tags as in :mod:`.params`: [P] published value (checked),
[M] recalled from memory (published, not verified here), [CP] common practice with no single source.

A :class:`Spread` is a range ``[low, high]`` and how draws fall in it:

- ``"uniform"``: evenly between low and high;
- ``"normal"``: a normal distribution with mean (low + high)/2 and standard deviation (high − low)/4,
  truncated at low and high (i.e. a published mean ± sd is declared as mean ± 2 sd);
- ``relative=True``: low and high are factors on the set's resolved value (for a value the set derives;
  the C3 Jmax is varied instead through ``jmax_ratio_factor``, a factor on the derived Jmax25/Vcmax25, so
  that a drawn Jmax still follows each cell's growth temperature).

:func:`draw_parameters` turns a pair of parameter mappings (what :func:`.params.resolve_params` takes) into
``draws`` pairs of parameter mappings: a Latin hypercube (McKay, Beckman & Conover 1979; scipy.stats.qmc)
of one dimension per declared spread of both sets, seeded, mapped through each spread's quantile function.
The draws depend only on the sets, the overrides and the seed, never on the data, so every block of cells
and every scenario gets the same draws (paired draws). A parameter the user overrides is held at the
override (a value you set is taken as known) but keeps its dimension of the hypercube, so the other
parameters' draws do not change with it.

Decisions:
- C3 temperature-response terms (the Kattge & Knorr 2007 peaked responses and their acclimation) are
  constants of the model, not keys of the sets, so they are not varied; the C4 sets' temperature terms
  (Q10, chilling and high-temperature limits) are.
- The spread of a capacity is the spread among species of a plant type (Kattge et al. 2009), not the
  standard error of its mean: the maps are for "a C3 grass", not for one species.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from .params import PARAMETER_SETS, normalise_pathway, resolve_params

SHAPES = ("uniform", "normal")
#: Sampling designs of :func:`unit_sample`.
METHODS = ("latin_hypercube", "sobol")


@dataclass(frozen=True)
class Spread:
    """The published uncertainty of one parameter of a set.

    key: the parameter's key in the set. low, high: the range (values, or factors when ``relative``).
    shape: "uniform" or "normal" (see the module docstring). source: where the range comes from, tagged.
    """

    key: str
    low: float
    high: float
    shape: str
    source: str
    relative: bool = False

    def __post_init__(self):
        if self.shape not in SHAPES:
            raise ValueError(f"spread of {self.key!r}: shape {self.shape!r}; valid: {', '.join(SHAPES)}")
        if not (math.isfinite(self.low) and math.isfinite(self.high) and self.low <= self.high):
            raise ValueError(f"spread of {self.key!r}: expected finite low <= high, got {self.low}, {self.high}")
        if not self.source.strip():
            raise ValueError(f"spread of {self.key!r} must name its source")

    def quantile(self, u: np.ndarray) -> np.ndarray:
        """Values (or factors) at probabilities ``u`` in [0, 1] (the inverse cumulative distribution)."""
        u = np.asarray(u, np.float64)
        if self.high == self.low:
            return np.full(u.shape, self.low)
        if self.shape == "uniform":
            return self.low + u * (self.high - self.low)
        from scipy.stats import truncnorm

        mean, sd = 0.5 * (self.low + self.high), 0.25 * (self.high - self.low)
        return truncnorm.ppf(u, -2.0, 2.0, loc=mean, scale=sd)


_KATTGE_2009 = "Kattge et al. (2009) Global Change Biol 15:976, Table 3"
_LIN_2015 = "Lin et al. (2015) Nature Clim Change 5:459"
_THETA = ("curvature of the electron-transport light response, 0.7 default (von Caemmerer 2000); measured "
          "leaves 0.7-0.9 (Ogren & Evans 1993) [M], widened down to 0.6 [CP]")
_JMAX_RATIO = ("Jmax25/Vcmax25 of single species scatters about +-20 % around the Kattge & Knorr (2007) "
               "regression [M]")
_C3_VCMAX_NOTE = "mean +- sd among species, declared as mean +- 2 sd [M, not verified]"
_C4_ALPHA = ("from the Collatz et al. (1992) fit, 0.04 per absorbed photon [P], up to the NADP-ME grass yield "
             "0.065 of Ehleringer & Pearcy (1983) Plant Physiol 73:555 [P]")
_C4_SUBTYPE_ALPHA = ("C4 grass quantum yields by subtype, Ehleringer & Pearcy (1983) Plant Physiol 73:555: "
                     "NAD-ME 0.060, NADP-ME 0.065 [P], widened to 0.052-0.069 for species scatter [M]")
_C4_CHILL = ("half-inhibition temperature of the C4 enzymes: chilling limits of C4 grasses 10-16 degC "
             "(Long 1983 Plant Cell Environ 6:345; Sage & Kubien 2007 Plant Cell Environ 30:1086) [M]")
_C4_CAPACITY = "+-25 % around the published leaf [CP: no grass-specific spread verified]"


def _c3(vcmax_mean: float, vcmax_sd: float, vcmax_source: str, g1: float, g1_range: tuple, *,
        with_jmax: bool = True) -> tuple[Spread, ...]:
    spreads = [Spread("vcmax25", vcmax_mean - 2 * vcmax_sd, vcmax_mean + 2 * vcmax_sd, "normal", vcmax_source)]
    if with_jmax:
        spreads.append(Spread("jmax_ratio_factor", 0.8, 1.2, "uniform", _JMAX_RATIO))
    spreads += [
        Spread("g1", *g1_range, "uniform", f"{_LIN_2015}: {g1:g} kPa^0.5; range of the type's estimates [M]"),
        Spread("theta", 0.6, 0.9, "uniform", _THETA),
    ]
    return tuple(spreads)


def _collatz_c4(alpha_range: tuple, alpha_source: str) -> tuple[Spread, ...]:
    return (
        Spread("alpha", *alpha_range, "uniform", alpha_source),
        Spread("vmax25", 29.25, 48.75, "uniform", f"Vmax25 39 of Collatz et al. (1992) {_C4_CAPACITY}"),
        Spread("k25", 0.525, 0.875, "uniform", f"k25 0.7 of Collatz et al. (1992) {_C4_CAPACITY}"),
        Spread("g1", 1.0, 2.3, "uniform", f"{_LIN_2015}: 1.62 kPa^0.5 for C4 grasses; range of the estimates [M]"),
        Spread("q10", 1.8, 2.2, "uniform", "Q10 2.0 of Collatz et al. (1992) +- 0.2 [CP]"),
        Spread("low_temperature_c", 10.0, 16.0, "uniform", _C4_CHILL),
        Spread("high_temperature_c", 33.0, 39.0, "uniform", "36 degC of Collatz et al. (1992) +- 3 degC [CP]"),
    )


def _vc2000_c4(g1: float) -> tuple[Spread, ...]:
    return (
        Spread("vcmax25", 45.0, 75.0, "uniform", f"Vcmax25 60 of von Caemmerer (2000) Table 4.1 {_C4_CAPACITY}"),
        Spread("vpmax25", 90.0, 150.0, "uniform", f"Vpmax25 120 of von Caemmerer (2000) Table 4.1 {_C4_CAPACITY}"),
        Spread("jmax25", 300.0, 500.0, "uniform", f"Jmax25 400 of von Caemmerer (2000) Table 4.1 {_C4_CAPACITY}"),
        Spread("g1", round(g1 * 0.65, 2), round(g1 * 1.4, 2), "uniform",
               f"{_LIN_2015}: {g1:g} kPa^0.5; range of the estimates [M]"),
        Spread("theta", 0.6, 0.9, "uniform", _THETA),
        Spread("chilling_temperature_c", 10.0, 16.0, "uniform", _C4_CHILL),
    )


#: The registry: parameter-set name -> the spreads of its influential parameters.
PARAMETER_UNCERTAINTY: dict[str, tuple[Spread, ...]] = {
    "c3_temperate_grass": _c3(78.2, 31.1, f"{_KATTGE_2009}, C3 herbaceous 78.2 +- 31.1 umol m-2 s-1: {_C3_VCMAX_NOTE}",
                              5.25, (4.0, 6.5)),
    "c3_cereal": _c3(100.7, 36.6, f"{_KATTGE_2009}, C3 crops 100.7 +- 36.6 umol m-2 s-1: {_C3_VCMAX_NOTE}",
                     5.79, (4.5, 7.1)),
    "bernacchi2001": _c3(80.0, 31.1, f"80 [CP] with the C3-herbaceous sd of {_KATTGE_2009} (31.1): {_C3_VCMAX_NOTE}",
                         5.25, (4.0, 6.5)),
    "collatz1991": _c3(80.0, 31.1, f"80 [CP] with the C3-herbaceous sd of {_KATTGE_2009} (31.1): {_C3_VCMAX_NOTE}",
                       5.25, (4.0, 6.5), with_jmax=False),
    "c4_tropical_grass": _collatz_c4((0.04, 0.065), _C4_ALPHA),
    "collatz1992": _collatz_c4((0.052, 0.069), _C4_SUBTYPE_ALPHA),
    "c4_cereal": _vc2000_c4(1.79),
    "vc2000": _vc2000_c4(1.62),
}


def register_uncertainty(set_name: str, spreads) -> None:
    """Declare the spreads of a parameter set (a set added with ``register_parameter_set``); once per name.

    Each spread's key must be a numeric key of the set, and the set's own value must lie in the range
    (factor 1 for a relative spread).
    """
    if set_name in PARAMETER_UNCERTAINTY:
        raise ValueError(f"the uncertainty of parameter set {set_name!r} is declared already")
    spreads = tuple(spreads)
    _check_spreads(set_name, spreads)
    PARAMETER_UNCERTAINTY[set_name] = spreads


def _set_pathway(set_name: str) -> str:
    for pathway, sets in PARAMETER_SETS.items():
        if set_name in sets:
            return pathway
    raise ValueError(f"unknown parameter set {set_name!r}")


def _check_spreads(set_name: str, spreads) -> None:
    pathway = _set_pathway(set_name)
    resolved = resolve_params(pathway, set_name)
    keys = [s.key for s in spreads]
    if len(set(keys)) != len(keys):
        raise ValueError(f"parameter set {set_name!r}: each parameter's spread once, got {keys}")
    for spread in spreads:
        value = resolved.get(spread.key)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ValueError(f"parameter set {set_name!r}: {spread.key!r} is not a numeric parameter of the set")
        centre = 1.0 if spread.relative else value
        if not spread.low <= centre <= spread.high:
            raise ValueError(f"parameter set {set_name!r}: the set's {spread.key} = {centre:g} lies outside its "
                             f"declared range {spread.low:g}..{spread.high:g}")


def _base(pathway: str, params: Any) -> tuple[str, dict]:
    """(set name, overrides) of what ``resolve_params`` takes."""
    name = resolve_params(pathway, params)["parameter_set"]
    if params is None or isinstance(params, str):
        return name, {}
    return name, {k: v for k, v in dict(params).items() if k != "parameter_set"}


def spreads_of(pathway: str, params: Any = None) -> tuple[Spread, ...]:
    """The declared spreads of the set ``params`` names (ValueError naming the set if none is declared)."""
    pathway = normalise_pathway(pathway)
    name, _ = _base(pathway, params)
    if name not in PARAMETER_UNCERTAINTY:
        raise ValueError(f"{pathway} parameter set {name!r} declares no uncertainty; declare one with "
                         "suitability.physiology.uncertainty.register_uncertainty, or run without 'uncertainty'")
    return PARAMETER_UNCERTAINTY[name]


def unit_sample(draws: int, dimensions: int, seed: int, method: str = "latin_hypercube") -> np.ndarray:
    """(draws, dimensions) points in [0, 1): a seeded Latin hypercube (each point at a random place within
    its stratum, scipy's default) or a scrambled Sobol sequence (scipy.stats.qmc)."""
    from scipy.stats import qmc

    if draws < 1:
        raise ValueError(f"draws: expected at least 1, got {draws}")
    if dimensions == 0:
        return np.zeros((draws, 0))
    rng = np.random.default_rng(seed)
    if method == "latin_hypercube":
        engine = qmc.LatinHypercube(d=dimensions, rng=rng)
    elif method == "sobol":
        engine = qmc.Sobol(d=dimensions, scramble=True, rng=rng)
    else:
        raise ValueError(f"method {method!r}; valid: {', '.join(METHODS)}")
    return engine.random(draws)


def draw_parameters(c3_params: Any, c4_params: Any, draws: int, seed: int,
                    method: str = "latin_hypercube") -> list[tuple[dict, dict]]:
    """``draws`` pairs (C3 parameters, C4 parameters), each a mapping ``resolve_params`` takes.

    c3_params, c4_params: None, a set name or a mapping with ``parameter_set`` and overrides. Deterministic
    for a seed; see the module docstring for the design and for overridden parameters.
    """
    bases = {p: _base(p, params) for p, params in (("C3", c3_params), ("C4", c4_params))}
    dims = [(p, spread) for p in ("C3", "C4") for spread in spreads_of(p, bases[p][0])]
    sample = unit_sample(draws, len(dims), seed, method)
    values = [spread.quantile(sample[:, j]) for j, (_, spread) in enumerate(dims)]
    out = []
    for i in range(draws):
        pair = {}
        for pathway in ("C3", "C4"):
            name, overrides = bases[pathway]
            mine = [(j, spread) for j, (p, spread) in enumerate(dims) if p == pathway and spread.key not in overrides]
            params = {"parameter_set": name, **overrides,
                      **{spread.key: float(values[j][i]) for j, spread in mine if not spread.relative}}
            relative = [(j, spread) for j, spread in mine if spread.relative]
            if relative:  # factors on the value derived from this draw's other values (e.g. Jmax from Vcmax)
                resolved = resolve_params(pathway, params)
                params.update({spread.key: float(values[j][i]) * resolved[spread.key] for j, spread in relative})
            pair[pathway] = params
        out.append((pair["C3"], pair["C4"]))
    return out


def varied_parameters(c3_params: Any = None, c4_params: Any = None) -> list[dict[str, Any]]:
    """One record per declared spread of both sets: pathway, set, key, range, shape, source and whether
    it varies (False: held at the user's override). For ``check`` and the manifest."""
    rows = []
    for pathway, params in (("C3", c3_params), ("C4", c4_params)):
        name, overrides = _base(pathway, params)
        for spread in spreads_of(pathway, name):
            rows.append({"pathway": pathway, "parameter_set": name, "key": spread.key, "low": spread.low,
                         "high": spread.high, "shape": spread.shape, "relative": spread.relative,
                         "source": spread.source, "varied": spread.key not in overrides})
    return rows


def spread_text(row: Mapping[str, Any]) -> str:
    """One line for a record of :func:`varied_parameters`."""
    what = f"x {row['low']:g}..{row['high']:g} of the set's value" if row["relative"] else f"{row['low']:g}..{row['high']:g}"
    held = "" if row["varied"] else " (held: overridden in the config)"
    return f"{row['pathway']} {row['key']}: {row['shape']} {what}{held}; {row['source']}"


def overrides_outside_spreads(pathway: str, params: Any) -> tuple[tuple[Spread, float], ...]:
    """(spread, value) of every override in ``params`` that lies outside its key's declared spread in the
    set ``params`` names: the value itself, or for a relative spread its factor on the set's own value.
    Empty for a set without declared spreads and for keys without one (nothing to compare with)."""
    pathway = normalise_pathway(pathway)
    name, overrides = _base(pathway, params)
    if not overrides or name not in PARAMETER_UNCERTAINTY:
        return ()
    own = resolve_params(pathway, name)
    outside = []
    for spread in PARAMETER_UNCERTAINTY[name]:
        if spread.key not in overrides:
            continue
        value = float(overrides[spread.key])
        compared = value / own[spread.key] if spread.relative and own[spread.key] else value
        if not spread.low <= compared <= spread.high:
            outside.append((spread, value))
    return tuple(outside)


def outside_spread_text(pathway: str, set_name: str, spread: Spread, value: float) -> str:
    """One sentence for an entry of :func:`overrides_outside_spreads`, naming the config key."""
    what = (f"x {spread.low:g}..{spread.high:g} of the set's value" if spread.relative
            else f"{spread.low:g}..{spread.high:g}")
    return (f"physiology.{pathway.lower()}.overrides.{spread.key} = {value:g} lies outside the range {what} "
            f"declared for the parameter set {set_name!r} ({spread.source}); the maps rest on a value beyond it")


for _name, _spreads in PARAMETER_UNCERTAINTY.items():  # every declaration fits its set (checked at import)
    _check_spreads(_name, _spreads)

__all__ = ["Spread", "PARAMETER_UNCERTAINTY", "register_uncertainty", "spreads_of", "unit_sample",
           "draw_parameters", "varied_parameters", "spread_text", "overrides_outside_spreads", "outside_spread_text",
           "METHODS", "SHAPES"]
