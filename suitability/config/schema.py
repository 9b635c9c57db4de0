"""The config schema: a tree of pydantic v2 models, one per YAML section.

Every model has ``extra="forbid"``, so a misspelt key is an error (with the closest valid key suggested),
never silently ignored. A validated :class:`RunConfig` is final: every later step reads its values as they
are, without checking them again (:func:`suitability.config.validate_section` checks a single section given
in Python, e.g. a compute section passed to :func:`suitability.runtime.compute_context`, with the same models).

Paths: a relative path is resolved against the folder of the config file (``RunConfig.config_dir``) at
load time, so every path in a validated config is absolute; ``~`` is expanded. A climate path may hold a
``{month}`` placeholder in Python format syntax (``{month}`` or ``{month:02d}``), one file per month
(expanded by :func:`suitability.inputs.month_path`). Other braces in a path are kept literally.

``configs/demo.yaml`` and ``suitability/templates/starter.yaml`` show every section; the starter template
documents each key with its default and unit.
"""

from __future__ import annotations

import difflib
import hashlib
import json
import os
import re
from pathlib import Path
from typing import Annotated, Any, Literal, Union
from urllib.parse import urlsplit

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Field,
    PrivateAttr,
    RootModel,
    ValidationInfo,
    field_validator,
    model_validator,
)
from pydantic_core import PydanticCustomError

from ..variables import INPUT_VARIABLES, OUTPUT_VARIABLES

# ----------------------------------------------------------------------------------------------- paths

#: The ``{month}`` / ``{month:<format>}`` placeholder of a climate path (one file per month).
MONTH_FIELD = re.compile(r"\{month(?::(?P<spec>[^{}]*))?\}")
#: The ``{member}`` placeholder of a scenario's climate path (one file per ensemble member).
MEMBER_FIELD = "{member}"
_SCENARIO_NAME = re.compile(r"^[A-Za-z0-9_-]+$")
# A practical limit, common practice, no source: 2e9 cells is a 1 km grid of the whole land surface twice
# over, or a 30 m grid of a 1300 x 1300 km country; each float32 layer is then 8 GB uncompressed. More is
# almost surely a units slip, such as a resolution in degrees over bounds in metres (0.01 over 200 km
# gives 4e14 cells), and would only start allocating.
MAX_GRID_CELLS = 2_000_000_000


def _resolve_path(value: Path, info: ValidationInfo) -> Path:
    """Absolute path: ``~`` expanded, relative paths taken from the config file's folder."""
    base = Path((info.context or {}).get("config_dir") or Path.cwd())
    path = Path(value).expanduser()
    return Path(os.path.normpath(path if path.is_absolute() else base.absolute() / path))


ConfigPath = Annotated[Path, AfterValidator(_resolve_path)]
_Finite = Annotated[float, Field(allow_inf_nan=False)]
_Positive = Annotated[float, Field(gt=0, allow_inf_nan=False)]


def _check_period(value: Any) -> Any:
    """``[first_year, last_year]`` (inclusive, both whole years 1..9999, first <= last)."""
    if value is None:
        return None
    if isinstance(value, int) and not isinstance(value, bool):
        value = [value, value]
    if (not isinstance(value, (list, tuple)) or len(value) != 2
            or not all(isinstance(v, int) and not isinstance(v, bool) for v in value)):
        raise ValueError(f"expected [first_year, last_year] as two whole years, e.g. [2041, 2070], got {value!r}")
    first, last = value
    if not (1 <= first <= last <= 9999):
        raise ValueError(f"expected 1 <= first_year <= last_year <= 9999, got {list(value)}")
    return (first, last)




def member_names_from_files(paths: list[Path]) -> list[str]:
    """Member names for a list of member files: the part of the file names that differs (``tas_cnrm.nc``,
    ``tas_ipsl.nc`` -> ``cnrm``, ``ipsl``), else the parent folders' names (``cnrm/tas.nc``), else
    ``member1``, ``member2``, ... Only letters, digits, '_' and '-' are kept (names become folder names)."""
    stems = [Path(p).name.split(".")[0] for p in paths]
    # the common prefix and suffix, cut back to a separator so that tas_mpi / tas_miroc give mpi / miroc
    prefix = re.sub(r"[^_.-]*$", "", os.path.commonprefix(stems))
    rest = [s[len(prefix):] for s in stems]
    suffix = re.sub(r"^[^_.-]*", "", os.path.commonprefix([r[::-1] for r in rest])[::-1])
    for candidates in ([r[:len(r) - len(suffix)] for r in rest], [Path(p).parent.name for p in paths]):
        cleaned = [re.sub(r"[^A-Za-z0-9_-]", "", c).strip("_-") for c in candidates]
        if all(cleaned) and len(set(cleaned)) == len(cleaned):
            return cleaned
    return [f"member{i}" for i in range(1, len(paths) + 1)]


def is_month_pattern(path: str | Path) -> bool:
    """True if ``path`` holds a ``{month}`` or ``{month:<format>}`` placeholder."""
    return MONTH_FIELD.search(str(path)) is not None


# ----------------------------------------------------------------------------------------------- models


class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", validate_default=True)


class GridConfig(_Section):
    """An explicit target grid: CRS, cell size, and the extent as ``bounds`` or from a ``zones`` file.

    ``bounds`` are in ``crs`` unless ``bounds_crs`` names the CRS they are given in (e.g. lon/lat corners
    with ``bounds_crs: EPSG:4326``; they are then transformed, following the edges, to ``crs``). Instead of
    bounds, ``zones`` takes the extent of a district file (any CRS) widened by ``margin`` [units of ``crs``].
    Either way the extent is snapped outward to whole cells by :mod:`suitability.grid`.
    """

    crs: str
    resolution: tuple[_Positive, _Positive]
    bounds: tuple[_Finite, _Finite, _Finite, _Finite] | None = None
    bounds_crs: str | None = None
    zones: ConfigPath | None = None
    margin: Annotated[float, Field(ge=0, allow_inf_nan=False)] = 0.0

    @field_validator("crs", "bounds_crs")
    @classmethod
    def _crs_known_to_proj(cls, value: str | None) -> str | None:
        if value is not None:
            parse_crs(value)
        return value

    @field_validator("resolution", mode="before")
    @classmethod
    def _one_or_two_numbers(cls, value: Any) -> Any:
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            if not value > 0:
                raise ValueError(f"expected a cell size greater than 0 in the units of the CRS, got {value!r}")
            return (value, value)
        if isinstance(value, (list, tuple)) and len(value) == 2:
            return tuple(value)
        raise ValueError(f"expected one positive number or [x, y] in the units of the CRS, got {value!r}")

    @field_validator("bounds", mode="before")
    @classmethod
    def _four_numbers(cls, value: Any) -> Any:
        if value is None:
            return None
        if not isinstance(value, (list, tuple)) or len(value) != 4:
            raise ValueError(f"expected 4 numbers [xmin, ymin, xmax, ymax] in the units of the CRS, got {value!r}")
        return tuple(value)

    @model_validator(mode="after")
    def _bounds_make_a_grid(self) -> "GridConfig":
        if (self.bounds is None) == (self.zones is None):
            raise ValueError("give exactly one of 'bounds' ([xmin, ymin, xmax, ymax]) or 'zones' (a district file "
                             "whose extent, plus 'margin', is the grid's)")
        if self.zones is not None:
            if self.bounds_crs is not None:
                raise ValueError("'bounds_crs' goes with 'bounds'; a 'zones' file carries its own CRS")
            return self
        if self.margin:
            raise ValueError("'margin' goes with 'zones'; widen 'bounds' themselves instead")
        xmin, ymin, xmax, ymax = self.bounds
        if not (xmin < xmax and ymin < ymax):
            raise ValueError(f"bounds must be [xmin, ymin, xmax, ymax] with xmin < xmax and ymin < ymax, got {list(self.bounds)}")
        given_in = parse_crs(self.bounds_crs or self.crs)
        if given_in.is_geographic and not (-360 <= xmin and xmax <= 360 and -90 <= ymin and ymax <= 90):
            raise ValueError(f"bounds {list(self.bounds)} are outside longitude/latitude limits of the geographic CRS "
                             f"{self.bounds_crs or self.crs}")
        xmin, ymin, xmax, ymax = self.target_bounds()
        width, height = (xmax - xmin) / self.resolution[0], (ymax - ymin) / self.resolution[1]
        cells = width * height
        if cells > MAX_GRID_CELLS:
            raise ValueError(
                f"resolution {list(self.resolution)} over bounds {list(self.bounds)} gives {width:.0f} x {height:.0f} = "
                f"{cells:.3g} cells, {cells * 4 / 2**30:.3g} GiB per float32 layer; at most {MAX_GRID_CELLS:.0e} "
                "cells: expected the resolution in the units of the CRS (metres for a projected CRS, degrees for "
                "a geographic one), or split the region"
            )
        return self

    def target_bounds(self) -> tuple[float, float, float, float]:
        """``bounds`` in ``crs`` (transformed from ``bounds_crs`` along densified edges), not yet snapped.
        Only for a grid given by bounds (a ``zones`` extent is read by :mod:`suitability.grid`)."""
        if self.bounds is None:
            raise ValueError("this grid takes its extent from its zones file")
        if self.bounds_crs is None:
            return tuple(float(b) for b in self.bounds)
        from pyproj import Transformer

        source, target = parse_crs(self.bounds_crs), parse_crs(self.crs)
        if source == target:
            return tuple(float(b) for b in self.bounds)
        transformer = Transformer.from_crs(source, target, always_xy=True)
        try:
            bounds = transformer.transform_bounds(*self.bounds, densify_pts=21)
        except Exception as exc:  # pyproj raises ProjError for points that cannot be transformed
            raise ValueError(f"bounds {list(self.bounds)} in {self.bounds_crs} cannot be transformed to {self.crs} ({exc})") from None
        if not all(map(_isfinite, bounds)):
            raise ValueError(f"bounds {list(self.bounds)} in {self.bounds_crs} fall outside the area of use of {self.crs}")
        return tuple(float(b) for b in bounds)

    @property
    def pyproj_crs(self):
        return parse_crs(self.crs)


class RegionConfig(_Section):
    """Where to compute: an explicit ``grid`` or the grid of an existing raster (``like``), optional mask."""

    name: Annotated[str, Field(min_length=1)]
    grid: GridConfig | None = None
    like: ConfigPath | None = None
    mask: ConfigPath | None = None
    #: The region is made up (the demo, tests): briefs and GeoTIFF tags say so.
    invented: bool = False

    @model_validator(mode="after")
    def _grid_or_like(self) -> "RegionConfig":
        if (self.grid is None) == (self.like is None):
            raise ValueError("give exactly one of 'grid' (crs, resolution, bounds) or 'like' (a raster whose grid is copied)")
        return self


class LayerSpec(_Section):
    """One climate input layer: where it is and how to read it.

    ``path`` is one path; in a scenario's own climate it may also be a list of files, one per ensemble
    member (:meth:`ScenarioConfig.member_climate`). ``height_m``: for ``wind_speed``, the height above
    ground the wind is given at [m]; it is brought to 2 m by FAO-56 eq. 47.
    """

    path: ConfigPath | Annotated[list[ConfigPath], Field(min_length=2)]
    variable: Annotated[str, Field(min_length=1)] | None = None
    units: Annotated[str, Field(min_length=1)] | None = None
    resampling: str | None = None
    nodata: float | None = None
    band: Annotated[int, Field(ge=1)] | None = None
    period: tuple[int, int] | None = None
    height_m: Annotated[float, Field(gt=0, le=100)] | None = None

    _period_years = field_validator("period", mode="before")(classmethod(lambda cls, v: _check_period(v)))

    @field_validator("resampling")
    @classmethod
    def _known_resampling(cls, value: str | None) -> str | None:
        if value is None:
            return None
        from rasterio.enums import Resampling

        names = [r.name for r in Resampling]
        if value.lower() not in names:
            raise ValueError(f"unknown resampling {value!r}; expected one of {', '.join(names)}{_did_you_mean(value, names)}")
        return value.lower()

    @field_validator("path")
    @classmethod
    def _month_format_valid(cls, value: Path | list[Path]) -> Path | list[Path]:
        for match in (m for path in (value if isinstance(value, list) else [value]) for m in MONTH_FIELD.finditer(str(path))):
            try:
                format(12, match.group("spec") or "")
            except ValueError as exc:
                raise ValueError(f"{match.group(0)} is not a valid month placeholder ({exc}); use {{month}} or {{month:02d}}") from exc
        return value

    @property
    def is_month_pattern(self) -> bool:
        return any(is_month_pattern(path) for path in self.paths)

    @property
    def paths(self) -> list[Path]:
        """The path as a list (one element unless the layer lists a file per ensemble member)."""
        return list(self.path) if isinstance(self.path, list) else [self.path]


class ClimateLayers(RootModel[dict[str, LayerSpec]]):
    """Layer name -> LayerSpec. Names are the input layers of :data:`suitability.variables.INPUT_VARIABLES`."""

    @model_validator(mode="before")
    @classmethod
    def _known_layer_names(cls, data: Any) -> Any:
        if isinstance(data, dict):
            for key in data:
                if key not in INPUT_VARIABLES:
                    raise PydanticCustomError(
                        "unknown_key",
                        "unknown layer '{key}'{hint}; valid layers: {valid}",
                        {"key": key, "hint": _did_you_mean(str(key), INPUT_VARIABLES), "valid": ", ".join(INPUT_VARIABLES)},
                    )
        return data

    @model_validator(mode="after")
    def _patterns_only_for_monthly(self) -> "ClimateLayers":
        for name, spec in self.root.items():
            if spec.is_month_pattern and not INPUT_VARIABLES[name].monthly:
                raise _located((name, "path"), f"a {{month}} pattern path is only for monthly layers; {name!r} is static")
            if spec.height_m is not None and name != "wind_speed":
                raise _located((name, "height_m"), f"height_m is for the wind_speed layer only, not {name!r}")
        return self

    def items(self):
        return self.root.items()

    def keys(self):
        return self.root.keys()

    def values(self):
        return self.root.values()

    def __getitem__(self, name: str) -> LayerSpec:
        return self.root[name]

    def __contains__(self, name: object) -> bool:
        return name in self.root

    def __iter__(self):  # type: ignore[override]  # iterate like the mapping it stands for
        return iter(self.root)

    def __len__(self) -> int:
        return len(self.root)

    def get(self, name: str, default: Any = None) -> Any:
        return self.root.get(name, default)


# Layers that cannot be given together; and the quantity each layer stands for, so that a scenario may
# replace a baseline layer with its alternative (water_stress for water_availability, par for shortwave).
_EXCLUSIVE = (("water_availability", "water_stress"), ("shortwave", "par"), ("vpd", "humidity"),
              ("precipitation", "water_availability"), ("precipitation", "water_stress"))
_CANONICAL = {"water_stress": "water_availability", "par": "radiation", "shortwave": "radiation",
              "precipitation": "water_availability", "pet": "water_availability",
              "soil_water_capacity": "water_availability"}


class ClimateConfig(ClimateLayers):
    """The run's baseline climate: must give temperature, radiation and water."""

    @model_validator(mode="after")
    def _complete(self) -> "ClimateConfig":
        names = set(self.root)
        for name, spec in self.root.items():
            if isinstance(spec.path, list):
                raise _located((name, "path"), "a list of files is for the ensemble members of a scenario's own "
                               "climate (scenarios[].climate); the baseline climate takes one path per layer")
        problems = []
        if not ({"tmin", "tmax"} <= names or "tmean" in names):
            problems.append("temperature: give tmin and tmax, or tmean")
        for a, b in (("tmin", "tmax"), ("tmax", "tmin")):
            if a in names and b not in names:
                problems.append(f"{a} is given without {b}")
        if not names & {"shortwave", "par"}:
            problems.append("radiation: give shortwave or par")
        if not names & {"water_availability", "water_stress", "precipitation"}:
            problems.append("water: give water_availability or water_stress, or precipitation (with optional pet)")
        for name in ("pet", "soil_water_capacity", "wind_speed"):
            if name in names and "precipitation" not in names:
                problems.append(f"{name} is given without precipitation (it serves the soil-water balance of rainfall)")
        for a, b in _EXCLUSIVE:
            if a in names and b in names:
                problems.append(f"give {a} or {b}, not both")
        if problems:
            raise ValueError("; ".join(problems))
        return self


class SeasonConfig(_Section):
    """Which months count: a fixed list, or per cell the months warm enough to grow in.

    Default (neither ``months`` nor a threshold given): the growing season of each cell, the months with
    a mean temperature of at least 5 °C (the threshold of the thermal growing season, as in the ETCCDI
    growing-season-length index; from memory) and a mean daily minimum of at least 0 °C (no frost on
    most nights; common practice, no source). Cells with no such month are "no growing season".
    """

    months: list[Annotated[int, Field(ge=1, le=12)]] | None = None
    min_mean_temperature_c: Annotated[float, Field(ge=-60, le=60)] | None = None
    min_mean_tmin_c: Annotated[float, Field(ge=-60, le=60)] | None = None

    @model_validator(mode="after")
    def _one_rule(self) -> "SeasonConfig":
        thresholds = self.min_mean_temperature_c is not None or self.min_mean_tmin_c is not None
        if self.months is not None and thresholds:
            raise ValueError("give either 'months' or the temperature thresholds, not both")
        if self.months is None and not thresholds:
            self.min_mean_temperature_c = GROWING_SEASON_MIN_MEAN_TEMPERATURE_C
            self.min_mean_tmin_c = GROWING_SEASON_MIN_MEAN_TMIN_C
        if self.months is not None:
            if not self.months:
                raise ValueError("months: expected at least one month (1..12)")
            repeated = sorted({m for m in self.months if self.months.count(m) > 1})
            if repeated:
                raise ValueError(f"months: each month once; repeated: {repeated}")
            self.months = sorted(self.months)
        return self


#: The default growing season (SeasonConfig): monthly mean temperature >= 5 °C and mean Tmin >= 0 °C.
GROWING_SEASON_MIN_MEAN_TEMPERATURE_C = 5.0
GROWING_SEASON_MIN_MEAN_TMIN_C = 0.0


class PathwayConfig(_Section):
    """A published parameter set by name and single-parameter overrides (keys as in the set)."""

    parameter_set: Annotated[str, Field(min_length=1)] | None = None
    overrides: dict[str, Any] = Field(default_factory=dict)

    def as_params(self) -> dict[str, Any]:
        """What :func:`suitability.physiology.resolve_params` takes."""
        params = dict(self.overrides)
        if self.parameter_set is not None:
            params["parameter_set"] = self.parameter_set
        return params


class PhysiologyConfig(_Section):
    """Leaf model parameters per pathway and canopy defaults."""

    c3: PathwayConfig = Field(default_factory=dict)
    c4: PathwayConfig = Field(default_factory=dict)
    lai: Annotated[float, Field(gt=0, le=15)] = 3.0
    diurnal_range_c: Annotated[float, Field(gt=0, le=40)] = 10.0
    #: The soil's daily water supply at field capacity, Emax [mm d-1] (suitability.physiology.water;
    #: 5 mm d-1 after Sitch et al. 2003).
    max_water_supply_mm: Annotated[float, Field(gt=0, le=50)] = 5.0
    soil_water_capacity_mm: Annotated[float, Field(gt=0, le=2000)] = 150.0
    soil_water_retention: Literal["exponential", "linear"] = "exponential"
    #: Growth temperature of the C3 acclimation (Kattge & Knorr 2007): "month_mean", each cell's mean air
    #: temperature of the month; "parameter_set", the C3 set's own growth_temperature_c everywhere.
    growth_temperature: Literal["month_mean", "parameter_set"] = "month_mean"
    #: Solve the canopy crossover (crossover_temperature and the datacube's monthly_crossover_temperature;
    #: about five model evaluations per cell and month solved); false leaves those layers NaN.
    crossover_temperature: bool = True

    @field_validator("c3", "c4")
    @classmethod
    def _parameters_known(cls, value: PathwayConfig, info: ValidationInfo) -> PathwayConfig:
        # Imported here: physiology is independent of the config, and importing it at module level
        # would make `import suitability.config` pull in the whole science stack.
        from ..physiology import resolve_params

        try:
            resolve_params(info.field_name.upper(), value.as_params())
        except (ValueError, KeyError, TypeError) as exc:
            raise ValueError(str(exc).strip("'\"")) from exc
        return value


#: Longest scenario name: it names a folder, GeoTIFF tags and brief files (common practice, no source).
MAX_SCENARIO_NAME = 64

#: Accepted range of each numeric scenario setting: (low, high, unit, why). Values outside give outputs
#: with no physical meaning (e.g. CO2 of 1e9 ppm), so they are refused with the key and the range.
SCENARIO_RANGES = {
    # Lower end below the glacial minimum of about 180 ppm (from memory: ice cores); upper end the practical
    # range of the leaf models, whose CO2 responses are measured to about 2000 umol mol-1 (common practice).
    "co2_ppm": (100.0, 2000.0, "ppm", "from below glacial levels to the upper end of the leaf models' measured range"),
    # Low-O2 leaf experiments use about 1-2 %; ambient is 20.95 % (common practice, no source).
    "o2_percent": (1.0, 40.0, "%", "from low-O2 experiments to twice ambient"),
    # Regional warming of the most extreme long-range projections stays within about 15 degC (from memory).
    "temperature_offset_c": (-15.0, 15.0, "degC", "a uniform change of air temperature"),
    # A factor on radiation beyond +-50 % leaves the range of surface shortwave (common practice, no source).
    "shortwave_factor": (0.5, 1.5, "", "a factor on shortwave radiation"),
    # 0 is total drought; availability is capped at 1 after the factor (suitability.scenarios).
    "water_availability_factor": (0.0, 2.0, "", "a factor on water availability, capped at 1 after it"),
}


class ScenarioConfig(_Section):
    """One scenario: CO2, O2, uniform warming, radiation and water factors, optional own climate layers."""

    name: str
    description: str = ""
    co2_ppm: _Finite
    o2_percent: _Finite = 20.95
    temperature_offset_c: _Finite = 0.0
    shortwave_factor: _Finite = 1.0
    water_availability_factor: _Finite = 1.0
    climate: ClimateLayers | None = None
    period: tuple[int, int] | None = None
    members: list[str] | None = None

    _period_years = field_validator("period", mode="before")(classmethod(lambda cls, v: _check_period(v)))

    @field_validator("members")
    @classmethod
    def _member_names(cls, value: list[str] | None) -> list[str] | None:
        if value is None:
            return None
        if len(value) < 2:
            raise ValueError(f"an ensemble needs at least 2 members, got {value!r}")
        for name in value:
            if not _SCENARIO_NAME.match(str(name)):
                raise ValueError(f"member name {name!r} is used in file and folder names: use only letters, digits, '_' and '-'")
        if len(set(value)) != len(value):
            raise ValueError(f"each member once, got {value}")
        return value

    @model_validator(mode="after")
    def _member_patterns(self) -> "ScenarioConfig":
        specs = dict(self.climate.items()) if self.climate else {}
        patterned = [name for name, spec in specs.items() if MEMBER_FIELD in str(spec.path)]
        listed = {name: spec.paths for name, spec in specs.items() if isinstance(spec.path, list)}
        if patterned and listed:
            raise _located(("climate", next(iter(listed)), "path"),
                           f"give the members one way: a list of files here, or a {MEMBER_FIELD} pattern "
                           f"(as layer {patterned[0]!r} does), not both")
        if listed:
            counts = {name: len(paths) for name, paths in listed.items()}
            if len(set(counts.values())) > 1:
                raise _located(("climate", next(iter(listed)), "path"),
                               "every layer listing member files needs one file per member; counts: "
                               + ", ".join(f"{name} {count}" for name, count in counts.items()))
            count = next(iter(counts.values()))
            if self.members is None:
                self.members = member_names_from_files(next(iter(listed.values())))
            elif len(self.members) != count:
                raise _located(("members",), f"{len(self.members)} member names for {count} files per layer; "
                               "expected one name per file, in the same order")
            return self
        if patterned and not self.members:
            raise _located(("climate", patterned[0], "path"),
                           f"holds {MEMBER_FIELD} but the scenario lists no members (members: [name, ...])")
        if self.members and not self.climate:
            raise ValueError("members: an ensemble needs climate layers of its own (with a {member} pattern path, "
                             "a list of files per layer or a member dimension)")
        return self

    def member_climate(self, member: str) -> dict[str, LayerSpec]:
        """The scenario's own layers as read for one ensemble member: a ``{member}`` pattern filled in, the
        member's file of a list of files; a layer with one plain path is returned as it is (a file with a
        member dimension, from which the reader takes the member's slice)."""
        specs = {}
        index = self.members.index(member) if self.members and member in self.members else None
        for name, spec in (self.climate.items() if self.climate else ()):
            if isinstance(spec.path, list):
                if index is None:
                    raise KeyError(f"no member {member!r} in scenario {self.name!r}")
                specs[name] = spec.model_copy(update={"path": spec.path[index]})
            elif MEMBER_FIELD in str(spec.path):
                specs[name] = spec.model_copy(update={"path": Path(str(spec.path).replace(MEMBER_FIELD, member))})
            else:
                specs[name] = spec
        return specs

    @field_validator("name")
    @classmethod
    def _safe_folder_name(cls, value: str) -> str:
        if not _SCENARIO_NAME.match(value):
            raise ValueError(
                f"scenario name {value!r} is used as an output folder name: use only letters, digits, '_' and '-'"
            )
        if len(value) > MAX_SCENARIO_NAME:
            raise ValueError(f"scenario name {value[:20]!r}... is {len(value)} characters long; it names folders and "
                             f"files, so at most {MAX_SCENARIO_NAME} characters")
        return value

    @field_validator(*SCENARIO_RANGES)
    @classmethod
    def _within_range(cls, value: float, info: ValidationInfo) -> float:
        low, high, unit, why = SCENARIO_RANGES[info.field_name]
        if not low <= value <= high:
            raise ValueError(f"expected {low:g} to {high:g}{' ' + unit if unit else ''} ({why}), got {value:g}")
        return value


class ClassesConfig(_Section):
    contested_margin: Annotated[float, Field(ge=0, le=1)] = 0.05


class CogConfig(_Section):
    compression: Literal["deflate", "zstd"] = "deflate"
    level: Annotated[int, Field(ge=1, le=22)] = 6
    overviews: bool = True

    @model_validator(mode="after")
    def _level_fits_codec(self) -> "CogConfig":
        top = {"deflate": 9, "zstd": 22}[self.compression]
        if self.level > top:
            raise ValueError(f"level: {self.compression} levels are 1..{top}, got {self.level}")
        return self


class OutputConfig(_Section):
    folder: ConfigPath = Path("out")
    layers: Union[Literal["all"], list[str]] = "all"
    cog: CogConfig = Field(default_factory=dict)
    datacube: bool = False
    overwrite: bool = False
    member_outputs: bool = False

    @field_validator("layers", mode="before")
    @classmethod
    def _known_layers(cls, value: Any) -> Any:
        if value == "all":
            return value
        if isinstance(value, str):
            value = [value]
        if not isinstance(value, list) or not value or not all(isinstance(v, str) for v in value):
            raise ValueError(f"expected 'all' or a list of layer names ({', '.join(OUTPUT_VARIABLES)}), got {value!r}")
        for name in value:
            if name not in OUTPUT_VARIABLES:
                raise ValueError(f"unknown output layer {name!r}{_did_you_mean(name, OUTPUT_VARIABLES)}; valid: {', '.join(OUTPUT_VARIABLES)}")
        if len(set(value)) != len(value):
            raise ValueError(f"each layer once, got {value}")
        return value

    def layer_names(self) -> list[str]:
        """The requested layer names, with 'all' expanded."""
        return list(OUTPUT_VARIABLES) if self.layers == "all" else list(self.layers)


LOCAL_SCHEDULERS = ("threads", "processes", "local-cluster")
#: Values of ``compute.engine``: the compiled (numba) kernel or the numpy physiology (see suitability.model).
ENGINES = ("compiled", "numpy")


class ComputeConfig(_Section):
    chunk_size: Annotated[int, Field(gt=0)] = 512
    scheduler: str = "threads"
    workers: Annotated[int, Field(ge=1)] | None = None
    threads_per_worker: Annotated[int, Field(ge=1)] | None = None
    memory_limit: str | None = None
    engine: Literal[ENGINES] = "compiled"
    #: Most model runs (a scenario is one, an ensemble one per member) computed in one dask pass: the runs
    #: of a pass share the reading and resampling of the climate; an interrupted pass is redone whole by
    #: --resume (1: one scenario per pass, every finished scenario kept).
    runs_per_pass: Annotated[int, Field(ge=1)] = 8

    @field_validator("chunk_size")
    @classmethod
    def _whole_tiles(cls, value: int) -> int:
        if value % 512:
            raise ValueError(f"expected a multiple of 512 (the output tile size), got {value}")
        return value

    @field_validator("scheduler")
    @classmethod
    def _known_scheduler(cls, value: str) -> str:
        if value in LOCAL_SCHEDULERS:
            return value
        if "://" in value:
            parts = urlsplit(value)
            try:
                port = parts.port
            except ValueError:
                port = None
            if parts.scheme in ("tcp", "tls") and parts.hostname and port:
                return value
            raise ValueError(f"scheduler address {value!r}: expected tcp://host:port or tls://host:port")
        raise ValueError(f"expected one of {', '.join(LOCAL_SCHEDULERS)} or a scheduler address tcp://host:port{_did_you_mean(value, LOCAL_SCHEDULERS)}")

    @field_validator("memory_limit")
    @classmethod
    def _byte_size(cls, value: str | None) -> str | None:
        if value is None or value == "auto":
            return value
        from dask.utils import parse_bytes

        try:
            if parse_bytes(value) <= 0:
                raise ValueError
        except ValueError:
            raise ValueError(f"expected a memory size such as '2GiB' or '500MB' (or 'auto'), got {value!r}") from None
        return value


#: Most draws of ``uncertainty.draws``: each draw is one more model evaluation per scenario (common practice,
#: no source: 1000 draws give a probability to about +-0.03 at 95 %).
MAX_DRAWS = 1000


class UncertaintyConfig(_Section):
    """Parameter uncertainty: ``draws`` parameter sets drawn over the published spreads of both sets
    (:mod:`suitability.physiology.uncertainty`), seeded, giving per-cell probabilities of C4 advantage."""

    draws: Annotated[int, Field(ge=2, le=MAX_DRAWS)]
    seed: Annotated[int, Field(ge=0)] = 0
    method: Literal["latin_hypercube", "sobol"] = "latin_hypercube"

    @model_validator(mode="after")
    def _sobol_in_powers_of_two(self) -> "UncertaintyConfig":
        # A Sobol sequence keeps its balance properties only for 2^k points (Sobol 1967, from memory;
        # scipy.stats.qmc.Sobol warns otherwise).
        if self.method == "sobol" and self.draws & (self.draws - 1):
            raise ValueError(f"method sobol: draws must be a power of 2 (e.g. 64 or 128), got {self.draws}")
        return self


class BriefConfig(_Section):
    zones: ConfigPath
    name_field: Annotated[str, Field(min_length=1)]
    per_district: bool = False
    #: Also save the district briefs' figures as SVG (the region briefs' figures always are; PNG always).
    district_svg: bool = False


class RunConfig(_Section):
    """A whole validated run config. ``config_dir`` is the folder of the YAML file (cwd if built in Python)."""

    region: RegionConfig
    climate: ClimateConfig
    season: SeasonConfig = Field(default_factory=dict)
    physiology: PhysiologyConfig = Field(default_factory=dict)
    scenarios: Annotated[list[ScenarioConfig], Field(min_length=1)]
    baseline: str | None = None
    classes: ClassesConfig = Field(default_factory=dict)
    output: OutputConfig = Field(default_factory=dict)
    compute: ComputeConfig = Field(default_factory=dict)
    brief: BriefConfig | None = None
    uncertainty: UncertaintyConfig | None = None

    _config_dir: Path = PrivateAttr(default_factory=Path.cwd)
    _source_path: Path | None = PrivateAttr(default=None)

    @field_validator("scenarios")
    @classmethod
    def _scenarios_fit(cls, scenarios: list[ScenarioConfig], info: ValidationInfo) -> list[ScenarioConfig]:
        seen: dict[str, str] = {}
        for i, scenario in enumerate(scenarios):
            # Scenario names become folders; on case-insensitive file systems these would be one folder.
            key = scenario.name.lower()
            if key in seen:
                raise _located((i, "name"), f"scenario names must be unique (ignoring case): {seen[key]!r} is given twice"
                               + ("" if seen[key] == scenario.name else f" (as {scenario.name!r})"))
            seen[key] = scenario.name
        climate = info.data.get("climate")
        if climate is None:  # the climate section itself is invalid; reported there
            return scenarios
        base = {_CANONICAL.get(n, n) for n in climate.keys()}
        for i, scenario in enumerate(scenarios):
            for layer in (scenario.climate.keys() if scenario.climate else ()):
                if _CANONICAL.get(layer, layer) not in base:
                    raise _located(
                        (i, "climate", layer),
                        f"replaces nothing: the baseline climate has {', '.join(climate.keys())} "
                        "(a scenario's climate may only replace baseline layers)",
                    )
        return scenarios

    @field_validator("baseline")
    @classmethod
    def _baseline_is_a_scenario(cls, baseline: str | None, info: ValidationInfo) -> str | None:
        scenarios = info.data.get("scenarios")
        if not scenarios:
            return baseline
        names = [s.name for s in scenarios]
        if baseline is None:
            return names[0]
        if baseline not in names:
            raise ValueError(f"{baseline!r} is not a scenario name{_did_you_mean(baseline, names)}; scenarios: {', '.join(names)}")
        return baseline

    @model_validator(mode="after")
    def _periods_to_layers(self) -> "RunConfig":
        """A scenario's ``period`` becomes the period of each of its own layers that gives none; the
        baseline scenario's also of each ``climate`` layer that gives none (a layer's own period wins)."""
        for scenario in self.scenarios:
            if scenario.period is None:
                continue
            specs = list(scenario.climate.values()) if scenario.climate else []
            if scenario.name == self.baseline:
                specs += list(self.climate.values())
            for spec in specs:
                if spec.period is None:
                    spec.period = scenario.period
        return self

    @model_validator(mode="after")
    def _uncertainty_declared(self) -> "RunConfig":
        """With ``uncertainty``, both parameter sets must declare their spreads; the baseline (which every
        scenario's draws are paired with) must be a single climate."""
        if self.uncertainty is None:
            return self
        from ..physiology.uncertainty import spreads_of

        for key in ("c3", "c4"):
            try:
                spreads_of(key.upper(), getattr(self.physiology, key).as_params())
            except ValueError as exc:
                raise _located(("uncertainty",), str(exc)) from None
        if self.baseline_scenario.members:
            raise _located(("uncertainty",), f"the baseline scenario {self.baseline!r} is an ensemble; paired parameter "
                           "draws need a single baseline climate (run the ensemble as a non-baseline scenario)")
        return self

    @model_validator(mode="after")
    def _remember_where(self, info: ValidationInfo) -> "RunConfig":
        context = info.context or {}
        self._config_dir = Path(context.get("config_dir") or Path.cwd()).absolute()
        self._source_path = Path(context["source_path"]).absolute() if context.get("source_path") else None
        return self

    @property
    def config_dir(self) -> Path:
        return self._config_dir

    @property
    def source_path(self) -> Path | None:
        """The YAML file this config came from (None if built in Python)."""
        return self._source_path

    @property
    def baseline_scenario(self) -> ScenarioConfig:
        """The baseline scenario. ``baseline`` was resolved at validation (the first scenario if not given)."""
        return self.scenario(self.baseline)

    def scenarios_baseline_first(self) -> list[ScenarioConfig]:
        """The scenarios in config order with the baseline moved first (change layers need it written)."""
        return sorted(self.scenarios, key=lambda s: s.name != self.baseline)

    def scenario(self, name: str) -> ScenarioConfig:
        for scenario in self.scenarios:
            if scenario.name == name:
                return scenario
        raise KeyError(f"no scenario {name!r}; scenarios: {', '.join(s.name for s in self.scenarios)}")

    def config_hash(self) -> str:
        """sha256 (hex) of the canonical JSON of the validated config: sorted keys, absolute paths, defaults filled."""
        canonical = json.dumps(self.model_dump(mode="json"), sort_keys=True, separators=(",", ":"), ensure_ascii=False)
        return hashlib.sha256(canonical.encode("utf-8")).hexdigest()



# ----------------------------------------------------------------------------------------------- helpers


def parse_crs(value: Any):
    """pyproj CRS from an EPSG code, WKT or PROJ string; a CRSError becomes ValueError for pydantic."""
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    try:
        return CRS.from_user_input(value)
    except CRSError as exc:
        raise ValueError(f"unknown CRS {value!r}: expected an EPSG code such as 'EPSG:32740' or a WKT string ({exc})") from None


def _isfinite(value: float) -> bool:
    import math

    return math.isfinite(value)


def _located(at: tuple, message: str) -> PydanticCustomError:
    """An error reported at a key below the validated field (``at`` is appended to its location)."""
    return PydanticCustomError("located", "{message}", {"message": message, "at": at})


def _did_you_mean(value: str, valid) -> str:
    close = difflib.get_close_matches(str(value), [str(v) for v in valid], n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


__all__ = [
    "RunConfig", "RegionConfig", "GridConfig", "LayerSpec", "ClimateLayers", "ClimateConfig", "SeasonConfig",
    "PathwayConfig", "PhysiologyConfig", "ScenarioConfig", "ClassesConfig", "CogConfig", "OutputConfig",
    "ComputeConfig", "BriefConfig", "UncertaintyConfig", "parse_crs", "is_month_pattern", "member_names_from_files", "MONTH_FIELD", "MEMBER_FIELD", "ENGINES",
    "LOCAL_SCHEDULERS",
]
