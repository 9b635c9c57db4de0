"""The assumptions a run makes where the config leaves something out, or sets a parameter beyond the
range its set declares, stated in words.

``suitability check`` lists them, ``suitability run`` prints them and the manifest records them
(``manifest["assumptions"]``), so that a default the tool filled in is never silent. Each entry names the
config key that would change it. This module only reads a validated config; it computes nothing.
"""

from __future__ import annotations

from typing import Any

from .physiology.atmosphere import SEA_LEVEL_PRESSURE_KPA  # FAO-56 eq. 7 at z = 0, the pressure without elevation


def run_assumptions(cfg: Any) -> list[str]:
    """Sentences naming every default the run of ``cfg`` (a validated RunConfig) relies on.

    Covered: the daily range assumed around ``tmean``, sea-level air pressure without ``elevation``, VPD
    from Tmin as dew point without ``vpd``/``humidity``, the uniform LAI without a ``lai`` layer, and
    the default parameter set of a pathway whose ``parameter_set`` is not given; and every override
    outside the spread its set declares (:func:`override_assumptions`).
    """
    return layer_assumptions(
        set(cfg.climate.keys()),
        diurnal_range_c=cfg.physiology.diurnal_range_c,
        lai=cfg.physiology.lai,
        c3_set=cfg.physiology.c3.parameter_set,
        c4_set=cfg.physiology.c4.parameter_set,
    ) + override_assumptions(cfg.physiology.c3.as_params(), cfg.physiology.c4.as_params())


def override_assumptions(c3_params, c4_params) -> list[str]:
    """One sentence per physiology override that lies outside the range its parameter set declares for it
    (:data:`suitability.physiology.uncertainty.PARAMETER_UNCERTAINTY`): a value the user sets is used as
    given, but never silently beyond the published (or tagged) spread of that plant type."""
    from .physiology.params import resolve_params
    from .physiology.uncertainty import outside_spread_text, overrides_outside_spreads

    notes = []
    for pathway, params in (("C3", c3_params), ("C4", c4_params)):
        set_name = resolve_params(pathway, params)["parameter_set"]
        notes += [outside_spread_text(pathway, set_name, spread, value)
                  for spread, value in overrides_outside_spreads(pathway, params)]
    return notes


def layer_assumptions(names: set[str], *, diurnal_range_c: float = 10.0, lai: float = 3.0,
                      c3_set: str | None = None, c4_set: str | None = None, key_prefix: str = "physiology.") -> list[str]:
    """The assumptions for a climate holding the layers ``names`` (config layer names or dataset variables)."""
    from .physiology.params import DEFAULT_SETS

    notes = []
    if "tmean" in names and not {"tmin", "tmax"} <= names:
        notes.append(f"daily temperature range: only tmean is given, so tmin and tmax are tmean -/+ "
                     f"{diurnal_range_c / 2:g} °C (a daily range of {diurnal_range_c:g} °C; common practice, no source; "
                     f"set {key_prefix}diurnal_range_c)")
    if "elevation" not in names:
        notes.append(f"air pressure: no elevation layer, so every cell is at sea level ({SEA_LEVEL_PRESSURE_KPA} kPa); "
                     "give an elevation layer for highlands")
    if not names & {"vpd", "humidity"}:
        notes.append("vapour pressure deficit: no vpd or humidity layer, so the dew point is taken as Tmin "
                     "(Allen et al. 1998, FAO-56); this overstates humidity in arid regions")
    if "lai" not in names:
        notes.append(f"leaf area index: no lai layer, so LAI is {lai:g} m2 m-2 in every cell (set {key_prefix}lai)")
    for pathway, chosen in (("C3", c3_set), ("C4", c4_set)):
        if chosen is None:
            notes.append(f"{pathway} parameters: no parameter_set given, so the default set "
                         f"{DEFAULT_SETS[pathway]!r} is used (see `suitability parameters {DEFAULT_SETS[pathway]}`)")
    return notes


__all__ = ["run_assumptions", "layer_assumptions", "override_assumptions", "SEA_LEVEL_PRESSURE_KPA"]
