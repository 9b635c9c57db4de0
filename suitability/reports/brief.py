"""Regional briefs: self-contained HTML and PDF pages, in plain words, built from the district table.

Briefs written to ``<folder>/brief/`` (file stems from :func:`brief_stems`):

- one per non-baseline scenario, comparing it with the baseline (``<region>_<scenario>``); with only a
  baseline, one brief of it;
- when scenarios exist, a brief of today's conditions (``<region>_today``);
- with two or more scenarios, a comparison of all of them side by side (``<region>_comparison``);
- optionally one per district covering every scenario (``<region>_<district>``), its maps zoomed to it.

Beside them: the district table (``<region>_districts.csv`` with a data dictionary
``<region>_districts.columns.csv``, and ``.gpkg``), and every figure as PNG and SVG in ``figures/``.

File names come from names (:func:`file_stems`): lower-case ASCII letters, digits and ``_`` only, at most
:data:`MAX_STEM` characters (a longer name is cut and ends in a short hash of the whole name), unique
ignoring case; two names that would give one file name get ``_2``, ``_3``, ... and a warning says so.

Every number in the text comes from the district table of :func:`suitability.reports.zones.zonal_statistics`
or from sums of it (:mod:`suitability.reports.summary`); the crossover chart reads the run's
``crossover_temperature`` layer per district, against each district's own warm months. The HTML embeds its
figures as base64 data URIs and its CSS inline; the PDF is WeasyPrint's rendering of the same HTML.
"""

from __future__ import annotations

import base64
import functools
import hashlib
import math
import os
import re
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path

import pandas as pd
from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape

from suitability import outputs
from suitability.atomic import atomic_write, write_text_atomic
from suitability.caution import CAUTION, invented_note
from suitability.errors import ConfigError, OutputError
from suitability.indicators import warm_season_mean  # noqa: F401 - re-exported: the brief's warm-season rule
from suitability.reports import figures
from suitability.reports.workers import TEMPLATES, Workers, write_pdf, write_setup
from suitability.reports.summary import (
    CLASS_WORDS,
    flag_sentences,
    headline,
    hectares_text,
    largest_changes,
    percent_text,
    region_table,
    scenario_words,
    transition_matrix,
)
from suitability.reports.zones import (
    COLUMNS,
    district_distribution,
    read_zones,
    warmest_months,
    write_table_csv,
    write_table_geopackage,
    zonal_statistics,
)
from suitability.runtime import progress as show_progress


#: References a brief may cite, by a key word found in the sources of the parameter sets used; the
#: brief lists only those its run used (plus the ones every run uses, :data:`ALWAYS_CITED`).
REFERENCES = {
    "Farquhar": "Farquhar, G.D., von Caemmerer, S. & Berry, J.A. (1980) A biochemical model of photosynthetic CO2 "
                "assimilation in leaves of C3 species. Planta 149, 78-90.",
    "Bernacchi": "Bernacchi, C.J., Singsaas, E.L., Pimentel, C., Portis, A.R. & Long, S.P. (2001) Improved "
                 "temperature response functions for models of Rubisco-limited photosynthesis. Plant, Cell & "
                 "Environment 24, 253-259.",
    "Kattge": "Kattge, J. & Knorr, W. (2007) Temperature acclimation in a biochemical model of photosynthesis: a "
              "reanalysis of data from 36 species. Plant, Cell & Environment 30, 1176-1190.",
    "Collatz, Ribas": "Collatz, G.J., Ribas-Carbo, M. & Berry, J.A. (1992) Coupled photosynthesis-stomatal "
                      "conductance model for leaves of C4 plants. Australian Journal of Plant Physiology 19, 519-538.",
    "Collatz et al. (1992)": "Collatz, G.J., Ribas-Carbo, M. & Berry, J.A. (1992) Coupled photosynthesis-stomatal "
                             "conductance model for leaves of C4 plants. Australian Journal of Plant Physiology 19, "
                             "519-538.",
    "Collatz et al. (1991)": "Collatz, G.J., Ball, J.T., Grivet, C. & Berry, J.A. (1991) Physiological and "
                             "environmental regulation of stomatal conductance, photosynthesis and transpiration. "
                             "Agricultural and Forest Meteorology 54, 107-136.",
    "Caemmerer (2000)": "von Caemmerer, S. (2000) Biochemical Models of Leaf Photosynthesis. CSIRO Publishing, "
                        "Collingwood.",
    "Massad": "Massad, R.S., Tuzet, A. & Bethenod, O. (2007) The effect of temperature on C4-type leaf "
              "photosynthesis parameters. Plant, Cell & Environment 30, 1191-1204.",
    "Medlyn": "Medlyn, B.E., Duursma, R.A., Eamus, D. et al. (2011) Reconciling the optimal and empirical approaches "
              "to modelling stomatal conductance. Global Change Biology 17, 2134-2144.",
    "Lin et al.": "Lin, Y.-S., Medlyn, B.E., Duursma, R.A. et al. (2015) Optimal stomatal behaviour around the world. "
                  "Nature Climate Change 5, 459-464.",
}
ALWAYS_CITED = (
    "de Pury, D.G.G. & Farquhar, G.D. (1997) Simple scaling of photosynthesis from leaves to canopies "
    "without the errors of big-leaf models. Plant, Cell & Environment 20, 537-557.",
    "Allen, R.G., Pereira, L.S., Raes, D. & Smith, M. (1998) Crop evapotranspiration: guidelines for "
    "computing crop water requirements. FAO Irrigation and Drainage Paper 56, FAO, Rome.",
)
#: The leaf models in words, by their registered name (physiology/models.py).
MODEL_WORDS = {
    "fvcb": "the C3 leaf model of Farquhar, von Caemmerer & Berry (1980)",
    "collatz1992": "the C4 leaf model of Collatz, Ribas-Carbo & Berry (1992)",
    "vc2000": "the C4 leaf model of von Caemmerer (2000)",
}


@dataclass(frozen=True)
class ScenarioInfo:
    """One scenario as the brief describes it.

    name: scenario name (also its output folder's name). co2_ppm: CO2 [ppm]. output_folder: the folder
    with its rasters. description: one line in plain words. temperature_offset_c: warming added to the
    baseline climate [deg C]. o2_percent: O2 [%]. is_baseline: True for the baseline scenario.
    own_temperature: the scenario brings temperature layers of its own (its warm months are then not
    the baseline's plus the offset, and the crossover chart leaves its temperature out).
    members: names of its climate-model members (an ensemble), empty for one climate.
    """

    name: str
    co2_ppm: float
    output_folder: Path
    description: str = ""
    temperature_offset_c: float = 0.0
    o2_percent: float = 20.95
    is_baseline: bool = False
    own_temperature: bool = False
    members: tuple[str, ...] = ()


@dataclass(frozen=True)
class BriefContext:
    """Everything a brief says that is not in the rasters.

    region: region name. generated: date of the brief. tool_version: suitability's version.
    scenarios: every scenario, baseline included. baseline: the baseline's name.
    c3_parameter_set, c4_parameter_set: the plant types used, in words (with changed values, if any).
    zones_path, name_field: the district polygons and their name field.
    warm_season_temperature_c: the region's warm-season mean air temperature today [deg C] (NaN: unknown).
    contested_margin: |advantage| below this is "no clear advantage" [-].
    per_district: also write one brief per district. district_svg: save the district briefs' figures as
    SVG besides PNG (the region briefs' figures always are). caution: the caution text every brief carries.
    notes: extra lines shown under the caution (e.g. that a demo's region is invented).
    district_climate: mean monthly air temperature of each district today (index district, columns
        months 1..12) [deg C], from the baseline climate; None leaves the crossover chart out.
    models: sentences naming the leaf models used. climate_data: sentences naming the climate files,
        periods and members. assumptions: the defaults the run relied on, in words. references: the
        references the run's models and parameters use (None: every one the brief knows).
    """

    region: str
    generated: date
    tool_version: str
    scenarios: tuple[ScenarioInfo, ...]
    baseline: str
    c3_parameter_set: str
    c4_parameter_set: str
    zones_path: Path
    name_field: str
    warm_season_temperature_c: float = math.nan
    contested_margin: float = 0.05
    per_district: bool = False
    district_svg: bool = False
    caution: str = CAUTION
    notes: tuple[str, ...] = ()
    district_climate: pd.DataFrame | None = field(default=None, compare=False)
    models: tuple[str, ...] = ()
    climate_data: tuple[str, ...] = ()
    assumptions: tuple[str, ...] = ()
    references: tuple[str, ...] | None = None

    def __post_init__(self):
        names = [s.name for s in self.scenarios]
        if not names:
            raise ConfigError("brief: expected at least one scenario")
        if len(set(names)) != len(names):
            raise ConfigError(f"brief: scenario names must be unique, got {names}")
        if self.baseline not in names:
            raise ConfigError(f"brief: baseline {self.baseline!r} is not among the scenarios {', '.join(names)}")

    def scenario(self, name: str) -> ScenarioInfo:
        return next(s for s in self.scenarios if s.name == name)

    @property
    def compared(self) -> list[ScenarioInfo]:
        """The scenarios that get a brief of their own: every non-baseline one, else the baseline."""
        others = [s for s in self.scenarios if s.name != self.baseline]
        return others or [self.scenario(self.baseline)]

    @property
    def others(self) -> list[ScenarioInfo]:
        return [s for s in self.scenarios if s.name != self.baseline]


# --- files -----------------------------------------------------------------------------------------------

#: Longest file-name stem made from names (well below the 255 bytes of common file systems, leaving room
#: for a suffix, the region part and a collision number).
MAX_STEM = 60


def slug(text: str, limit: int = MAX_STEM) -> str:
    """A file-name-safe form of ``text``: lower case, runs of other characters replaced by '_', at most
    ``limit`` characters (a longer one is cut and ends with 8 hex digits of the SHA-1 of ``text``)."""
    cleaned = re.sub(r"[^0-9a-zA-Z]+", "_", text.strip().lower()).strip("_") or "region"
    if len(cleaned) > limit:
        digest = hashlib.sha1(text.encode("utf-8")).hexdigest()[:8]
        cleaned = f"{cleaned[:limit - 9].rstrip('_')}_{digest}"
    return cleaned


def file_stems(named: Sequence[tuple[str, str]], warn: bool = True) -> list[str]:
    """Unique file stems for ``(stem, what)`` pairs, in order: a stem already taken (ignoring case) gets
    ``_2``, ``_3``, ... and one warning lists every renamed file (``what`` names its source)."""
    taken: set[str] = set()
    stems, renamed = [], []
    for stem, what in named:
        chosen, n = stem, 1
        while chosen.lower() in taken:
            n += 1
            chosen = f"{stem}_{n}"
        taken.add(chosen.lower())
        stems.append(chosen)
        if chosen != stem:
            renamed.append(f"{what} -> {chosen}")
    if renamed and warn:
        warnings.warn("names that would give the same brief file name were numbered: " + "; ".join(renamed),
                      stacklevel=3)
    return stems


@dataclass(frozen=True)
class BriefPage:
    """One brief to write: its file stem, kind ("scenario", "today", "comparison", "district") and subject."""

    stem: str
    kind: str
    scenario: str | None = None
    district: str | None = None


def brief_pages(region: str, scenarios: Sequence[str], baseline: str, districts: Sequence[str] = (),
                warn: bool = True) -> list[BriefPage]:
    """The briefs of a run, in order, with unique file stems (see the module docstring)."""
    region = slug(region, 40)
    others = [s for s in scenarios if s != baseline]
    planned: list[tuple[str, str, BriefPage]] = []
    for name in others or [baseline]:
        planned.append((f"{region}_{slug(name)}", f"scenario {name!r}", BriefPage("", "scenario", scenario=name)))
    if others:
        planned.append((f"{region}_today", "the brief of today", BriefPage("", "today", scenario=baseline)))
    if len(others) >= 2:
        planned.append((f"{region}_comparison", "the comparison brief", BriefPage("", "comparison")))
    for district in districts:
        planned.append((f"{region}_{slug(str(district))}", f"district {district!r}",
                        BriefPage("", "district", district=str(district))))
    stems = file_stems([(stem, what) for stem, what, _ in planned], warn=warn)
    return [BriefPage(stem, page.kind, page.scenario, page.district) for stem, (_, _, page) in zip(stems, planned)]


def expected_files(region: str, scenarios: Sequence[str], baseline: str, districts: Sequence[str] = ()) -> list[str]:
    """Names of the files a brief run writes in ``brief/`` (figures/ aside)."""
    region_stem = slug(region, 40)
    names = [f"{region_stem}_districts.csv", f"{region_stem}_districts.columns.csv", f"{region_stem}_districts.gpkg"]
    for page in brief_pages(region, scenarios, baseline, districts, warn=False):
        names += [f"{page.stem}.html", f"{page.stem}.pdf"]
    return names


def _data_uri(png: bytes) -> str:
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


@functools.cache
def _environment() -> Environment:
    """The briefs' template environment, made once per process (compiling the template took 0.08 s a page)."""
    environment = Environment(
        loader=FileSystemLoader(TEMPLATES),
        autoescape=select_autoescape(["html", "j2"]),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    environment.filters["ha"] = hectares_text
    environment.filters["pct"] = lambda v: percent_text(v, short=True)
    return environment


# --- figures ---------------------------------------------------------------------------------------------

#: Maps printed two to a page: the size they are drawn at is the size on paper.
HALF_PAGE_MAP_IN = (7.0, 4.35)


class _Figures:
    """Figures drawn once and shared by all briefs: each saved as PNG in ``figures/`` (and as SVG, but a
    district brief's only with ``district_svg``) and embedded in the HTML as a PNG data URI."""

    def __init__(self, context: BriefContext, table: pd.DataFrame, zones, folder: Path, region_stem: str):
        self._context, self._table, self._zones = context, table, zones
        self._folder, self._region = folder, region_stem
        self._cache: dict[tuple, str] = {}
        self._crossover: dict[str, pd.DataFrame] = {}
        self._months_of: dict[str, list[int]] | None = None
        self.written: dict[str, Path] = {}
        self.png_paths: dict[tuple, Path] = {}
        self.numbers = {d: i + 1 for i, d in enumerate(dict.fromkeys(table["district"]))}
        self.labels_left_out: set[str] = set()
        self._frames = figures.MapFrames()  # each map is saved as soon as drawn, as MapFrames requires

    def _get(self, key: tuple, name: str, draw: Callable[[], object], district: str | None) -> str:
        if key not in self._cache:
            figure = draw()
            self.labels_left_out |= {d for d, ok in getattr(figure, "labels_drawn", {}).items() if not ok}
            self._folder.mkdir(exist_ok=True)
            stem = slug(f"{self._region}_{name}", 100)
            png = figures.figure_bytes(figure, "png", dpi=150)
            saved = [("png", png)]
            # A district's SVG figures were a sixth of its brief's time and half the figures' bytes at 100 districts.
            if district is None or self._context.district_svg:
                saved.append(("svg", figures.figure_bytes(figure, "svg")))
            for fmt, data in saved:
                path = atomic_write(self._folder / f"{stem}.{fmt}", lambda p, d=data: p.write_bytes(d),
                                    what="the figure")
                self.written[f"figures/{path.name}"] = path
                if fmt == "png":
                    self.png_paths[key] = path
            self._cache[key] = _data_uri(png)
        return self._cache[key]

    def drawn_since(self, written_before: int) -> dict:
        """The figures drawn after the first ``written_before`` files, as :meth:`adopt` takes them."""
        written = dict(list(self.written.items())[written_before:])
        return {"figures": [[list(key), str(path)] for key, path in self.png_paths.items()
                            if f"figures/{path.name}" in written],
                "written": {name: str(path) for name, path in written.items()},
                "left_out": sorted(self.labels_left_out)}

    def adopt(self, drawn: dict) -> None:
        """Figures another process drew (:meth:`drawn_since`), as if drawn here: embedded from their PNG files."""
        for key, png in drawn["figures"]:
            self._cache[tuple(key)] = _data_uri(Path(png).read_bytes())
            self.png_paths[tuple(key)] = Path(png)
        self.written.update({name: Path(path) for name, path in drawn["written"].items()})
        self.labels_left_out |= set(drawn["left_out"])

    def class_map(self, scenario: ScenarioInfo, district: str | None = None) -> str:
        title = f"{_title_words(scenario, self._context)}: where each kind of crop has the advantage"
        return self._map("class", figures.class_map_figure, "pathway_class.tif", title, scenario, district)

    def change_map(self, scenario: ScenarioInfo, district: str | None = None) -> str:
        title = f"Change of the advantage: {_title_words(scenario, self._context)} against today"
        return self._map("change", figures.change_map_figure, "advantage_change.tif", title, scenario, district)

    def _map(self, kind, draw, layer_file, title, scenario: ScenarioInfo, district: str | None) -> str:
        """A map of one of the scenario's layers (zoomed to ``district`` if given), drawn once per brief run."""
        return self._get((kind, scenario.name, district), f"{district or ''}_{scenario.name}_{kind}_map",
                         lambda: draw(Path(scenario.output_folder) / layer_file, self._zones, title=title,
                                      highlight=district, numbers=self.numbers, zoom=district is not None,
                                      size_in=HALF_PAGE_MAP_IN, frames=self._frames), district)

    def crossover_points(self, scenarios: Sequence[ScenarioInfo]) -> pd.DataFrame | None:
        """Per district and scenario: warm-month temperature and the crossover quantiles of its cells."""
        climate = self._context.district_climate
        if climate is None:
            return None
        frames = []
        for scenario in scenarios:
            path = Path(scenario.output_folder) / "crossover_temperature.tif"
            if not path.exists():
                return None
            if scenario.name not in self._crossover:
                if self._months_of is None:  # once: it took 0.08 s, and every page asks
                    self._months_of = {d: warmest_months(climate.loc[d]) for d in climate.index
                                       if climate.loc[d].notna().any()}
                months_of = self._months_of
                quantiles = district_distribution(self._context.zones_path, self._context.name_field, path, months_of)
                warm = pd.Series({d: float(climate.loc[d, months].mean()) for d, months in months_of.items()})
                frame = quantiles.assign(
                    warm_c=warm.reindex(quantiles.index) + scenario.temperature_offset_c,
                    scenario=_title_words(scenario, self._context),
                )
                if scenario.own_temperature:
                    frame["warm_c"] = math.nan
                self._crossover[scenario.name] = frame.rename_axis("district").reset_index()
            frames.append(self._crossover[scenario.name])
        return pd.concat(frames, ignore_index=True)

    def crossover(self, scenarios: Sequence[ScenarioInfo], district: str | None = None) -> str | None:
        points = self.crossover_points(scenarios)
        if points is None or points[["q50", "warm_c"]].dropna().empty:
            return None
        names = "_".join(s.name for s in scenarios)
        return self._get(("crossover", names, district), f"{district or ''}_{names}_crossover",
                         lambda: figures.district_crossover_figure(points, highlight=district), district)


def _title_words(scenario: ScenarioInfo, context: BriefContext) -> str:
    if scenario.name == context.baseline:
        return "Today"
    return scenario_words(scenario, context.scenario(context.baseline))


#: Most districts a "largest changes" table lists in each direction.
TOP_DISTRICTS = 10
#: Most districts that get a brief of their own (``brief.per_district``); checked before computing.
MAX_DISTRICT_BRIEFS = 200
#: Kept for the callers of the former district-capped briefs: every brief now covers every district.
MAX_BRIEF_DISTRICTS = None


def largest_districts(table: pd.DataFrame, count: int) -> list[str]:
    """The ``count`` districts of ``table`` with the largest area, in the table's order."""
    areas = table.drop_duplicates("district").set_index("district")["district_area_ha"]
    kept = set(areas.sort_values(ascending=False, kind="stable").index[:count])
    return [d for d in dict.fromkeys(table["district"]) if d in kept]


# --- the pieces of a page ----------------------------------------------------------------------------------

def _moves(table: pd.DataFrame, baseline: str, scenario: str, numbers: Mapping[str, int]) -> dict[str, list[dict]]:
    out = {}
    base = table[table["scenario"] == baseline].set_index("district")
    for direction in ("c4", "c3"):
        rows = largest_changes(table, scenario, direction, TOP_DISTRICTS)
        out[direction] = [{
            "number": numbers[r["district"]], "district": r["district"],
            "moving": hectares_text(r[f"towards_{direction}_ha"]),
            "share": percent_text(r["moving_share"], short=True),
            "c4_before": percent_text(base.loc[r["district"], "share_c4"], short=True),
            "c4_after": percent_text(r["share_c4"], short=True),
            "flag": r["flag"],
        } for _, r in rows.iterrows()]
    return out


def _matrix(row: pd.Series) -> dict:
    """The transition matrix as the template prints it: areas and shares of the area, with totals."""
    matrix = transition_matrix(row)
    total = float(row["district_area_ha"])
    cells = [[{"ha": hectares_text(v), "share": percent_text(v / total if total > 0 else math.nan, short=True),
               "kind": _move_kind(b, a)} for a, v in zip(matrix.columns, values)]
             for b, values in zip(matrix.index, matrix.to_numpy())]
    return {"labels": list(matrix.columns), "cells": cells,
            "row_totals": [hectares_text(v) for v in matrix.sum(axis=1)],
            "column_totals": [hectares_text(v) for v in matrix.sum(axis=0)],
            "total": hectares_text(float(matrix.to_numpy().sum())), "district_area": hectares_text(total)}


_ORDER = {CLASS_WORDS["c3"]: 0, CLASS_WORDS["contested"]: 1, CLASS_WORDS["c4"]: 2}


def _move_kind(before: str, after: str) -> str:
    if before in _ORDER and after in _ORDER:
        return "to-c4" if _ORDER[after] > _ORDER[before] else ("to-c3" if _ORDER[after] < _ORDER[before] else "kept")
    return "other"


def _district_rows(table: pd.DataFrame, scenarios: Sequence[ScenarioInfo], baseline: str,
                   numbers: Mapping[str, int], districts: Sequence[str] | None = None) -> list[dict]:
    """The appendix table: one row per district, the baseline's and each scenario's shares side by side."""
    by = {s.name: table[table["scenario"] == s.name].set_index("district") for s in scenarios}
    base = table[table["scenario"] == baseline].set_index("district")
    rows = []
    for district in districts if districts is not None else list(dict.fromkeys(table["district"])):
        b = base.loc[district]
        rows.append({
            "number": numbers[district], "district": district, "area": hectares_text(b["district_area_ha"]),
            "results": percent_text(b["valid_share"], short=True),
            "today": {k: percent_text(b[f"share_{k}"], short=True) for k in ("c3", "contested", "c4", "noseason")},
            "scenarios": [{
                "c3": percent_text(by[s.name].loc[district, "share_c3"], short=True),
                "c4": percent_text(by[s.name].loc[district, "share_c4"], short=True),
                "to_c4": hectares_text(by[s.name].loc[district, "towards_c4_ha"]),
                "to_c3": hectares_text(by[s.name].loc[district, "towards_c3_ha"]),
            } for s in scenarios if s.name != baseline],
            "flag": b["flag"],
        })
    return rows


def _side_by_side(region: pd.DataFrame, context: BriefContext) -> list[dict]:
    rows = []
    for s in context.scenarios:
        r = region.loc[s.name]
        rows.append({
            "words": _title_words(s, context), "co2": f"{s.co2_ppm:g} ppm",
            "warming": f"{s.temperature_offset_c:+.1f} \u00b0C" if not s.own_temperature else "own climate",
            **{k: percent_text(r[f"share_{k}"], short=True) for k in ("c3", "contested", "c4", "noseason")},
            "to_c4": "\u2013" if s.name == context.baseline else hectares_text(r["towards_c4_ha"]),
            "to_c3": "\u2013" if s.name == context.baseline else hectares_text(r["towards_c3_ha"]),
        })
    return rows


def _today_extremes(table: pd.DataFrame, baseline: str, numbers, column: str) -> list[dict]:
    rows = table[(table["scenario"] == baseline) & (table[column] > 0)]
    rows = rows.sort_values([column, "district_area_ha"], ascending=False, kind="stable").head(TOP_DISTRICTS)
    return [{"number": numbers[r["district"]], "district": r["district"], "share": percent_text(r[column], short=True),
             "area": hectares_text(r["district_area_ha"]), "flag": r["flag"]} for _, r in rows.iterrows()]


def _scenario_table(context: BriefContext) -> list[dict]:
    return [{"words": _title_words(s, context), "name": s.name, "is_baseline": s.name == context.baseline,
             "co2": f"{s.co2_ppm:g} ppm", "o2": f"{s.o2_percent:.2f} %",
             "warming": "own climate layers" if s.own_temperature else f"{s.temperature_offset_c:+.1f} \u00b0C",
             "members": len(s.members)} for s in context.scenarios]


def render_html(context: BriefContext, table: pd.DataFrame, page: BriefPage, drawn: _Figures) -> str:
    """The HTML of one brief (see :class:`BriefPage` for the kinds)."""
    baseline = context.scenario(context.baseline)
    numbers = drawn.numbers
    n_districts = len(numbers)
    district = page.district
    if district is not None:
        region = region_table(table, [district])
        subject = district
        shown = list(context.scenarios)
    else:
        region = region_table(table)
        subject = f"the {n_districts} districts of {context.region}" if n_districts > 1 else context.region
        if page.kind == "scenario" and page.scenario != baseline.name:
            shown = [baseline, context.scenario(page.scenario)]
        elif page.kind == "comparison":
            shown = list(context.scenarios)
        else:
            shown = [baseline]
    others = [s for s in shown if s.name != baseline.name]
    sentences = headline(region, shown, baseline, subject)
    flags = flag_sentences(table if district is None else table[table["district"] == district], baseline.name)
    maps = [{"title": _title_words(s, context), "image": drawn.class_map(s, district)} for s in shown]
    change_maps = [{"title": _title_words(s, context), "image": drawn.change_map(s, district)} for s in others]
    crossover = drawn.crossover(shown, district)
    chosen = [district] if district is not None else None
    template = _environment().get_template("brief.html.j2")
    kind_title = {"scenario": "what changes" if others else "today", "today": "today",
                  "comparison": "all scenarios side by side", "district": "district brief"}[page.kind]
    return template.render(
        css=(TEMPLATES / "brief.css").read_text(encoding="utf-8"),
        context=context,
        kind=page.kind,
        title=f"{context.region}: C3 and C4 crops" + (f" \u2013 {district}" if district else f" \u2013 {kind_title}"),
        subject=subject,
        district=district,
        baseline=baseline,
        baseline_words=_title_words(baseline, context),
        shown=shown,
        others=others,
        other_words={s.name: _title_words(s, context) for s in others},
        sentences=[s.text for s in sentences],
        flags=[s.text for s in flags],
        moves={s.name: _moves(table, baseline.name, s.name, numbers) for s in others} if district is None else {},
        # the comparison shows the scenarios side by side; each scenario's own brief has its full matrix
        matrices=[{"words": _title_words(s, context), "matrix": _matrix(region.loc[s.name])} for s in others
                  if page.kind != "comparison"],
        side_by_side=_side_by_side(region, context) if page.kind in ("comparison", "district") else [],
        most_c4=_today_extremes(table, baseline.name, numbers, "share_c4") if page.kind == "today" else [],
        most_c3=_today_extremes(table, baseline.name, numbers, "share_c3") if page.kind == "today" else [],
        maps=maps,
        change_maps=change_maps,
        crossover_chart=crossover,
        rows=_district_rows(table, shown, baseline.name, numbers, chosen),
        n_districts=n_districts,
        numbered=n_districts > figures.MAX_NAME_LABELS,
        labels_left_out=len(drawn.labels_left_out),
        scenario_table=_scenario_table(context),
        references=context.references if context.references is not None else
        tuple(dict.fromkeys(REFERENCES.values())) + ALWAYS_CITED,
        generated=context.generated.isoformat(),
    )


# --- the whole brief ---------------------------------------------------------------------------------------

def write_data_dictionary(path: Path) -> Path:
    """``<table>.columns.csv`` beside the district table: every column with its meaning and units."""
    return outputs.write_data_dictionary(COLUMNS, path)


def build_brief(context: BriefContext, folder: str | os.PathLike, *, table: pd.DataFrame | None = None,
                progress: bool = False, workers: int | None = None) -> dict[str, Path]:
    """Write the briefs, their district table and figures and return {file name: path}.

    context: what the brief says besides the rasters. folder: the run's output folder; files go to
    ``<folder>/brief/``. table: a precomputed :func:`zonal_statistics` table (computed here if None).
    progress: show a progress bar on stderr, one step for the district table and one per brief.
    workers: processes drawing the district briefs' figures and rendering the PDFs while this one writes
    the pages in order (None: one per core, see :func:`suitability.reports.workers.default_workers`; 0:
    everything here).
    """
    out = Path(folder) / "brief"
    if out.is_symlink():
        raise OutputError(f"{out}: is a symbolic link; the tool does not write through links inside the output "
                          "folder. Remove it and run again")
    created = not out.exists()
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"{out}: cannot create the brief folder ({exc})") from exc
    try:
        return _build_brief(context, out, table, progress, workers)
    except BaseException:
        if created:  # a refused brief leaves no empty brief/ folder behind
            try:
                out.rmdir()
            except OSError:
                pass
        raise


def rounded_table(table: pd.DataFrame) -> pd.DataFrame:
    """The district table as written: areas to 0.01 ha, shares (fractions 0-1) and means to 4 decimals."""
    out = table.copy()
    for column in out.columns:
        if column.endswith("_ha"):
            out[column] = out[column].round(2)
        elif out[column].dtype.kind == "f":
            out[column] = out[column].round(4)
    return out


def _build_brief(context: BriefContext, out: Path, table: pd.DataFrame | None, progress: bool,
                 workers: int | None) -> dict[str, Path]:
    scenario_folders = {s.name: Path(s.output_folder) for s in context.scenarios}
    zones = read_zones(context.zones_path, context.name_field)
    region = slug(context.region, 40)
    districts = list(zones["district"]) if context.per_district else []
    pages = brief_pages(context.region, [s.name for s in context.scenarios], context.baseline, districts)
    written: dict[str, Path] = {}
    with show_progress(f"briefs ({len(pages)} pages, HTML and PDF)", progress, steps=len(pages) + 1) as bar:
        if table is None:
            table = zonal_statistics(context.zones_path, context.name_field, scenario_folders, context.baseline)
        for path in (
            write_table_csv(rounded_table(table), out / f"{region}_districts.csv"),
            write_data_dictionary(out / f"{region}_districts.columns.csv"),
            write_table_geopackage(rounded_table(table), context.zones_path, context.name_field,
                                   out / f"{region}_districts.gpkg", scenarios=list(scenario_folders)),
        ):
            written[path.name] = path
        if bar is not None:
            bar.advance()
        drawn = _Figures(context, table, zones, out / "figures", region)
        with Workers(workers if len(pages) > 1 else 0) as pool:
            for page in _write_pages(context, table, zones, pages, drawn, pool, out, region):
                written[f"{page.stem}.html"] = out / f"{page.stem}.html"
                written[f"{page.stem}.pdf"] = out / f"{page.stem}.pdf"
                if bar is not None:
                    bar.advance()
    written.update(drawn.written)
    return written


def _write_pages(context, table, zones, pages, drawn: _Figures, pool: Workers, out: Path, region: str):
    """Write each page's HTML here, in order, and its PDF (yields each page once handed over).

    With workers, the district pages' figures are drawn by them ahead of their turn (see
    :mod:`suitability.reports.workers`) and the PDFs are rendered by them."""
    district_pages = [i for i, page in enumerate(pages) if page.kind == "district"] if pool.active else []
    drawn_elsewhere: dict[int, dict] = {}
    submitted = 0
    setup = None
    if district_pages:
        drawn.crossover_points(context.scenarios)  # read once here, handed to the workers with the rest
        setup = write_setup(out / f".{region}_workers.pickle", context=context, table=table, zones=zones,
                            folder=drawn._folder, region=region, crossover=drawn._crossover, pages=pages)
        pool.broadcast(["setup", str(setup)])

    def hand_out(upto: int) -> None:
        nonlocal submitted
        while submitted < len(district_pages) and (submitted <= upto or pool.has_room()):
            index = district_pages[submitted]
            pool.submit(["figures", str(index)], lambda reply, i=index: drawn_elsewhere.__setitem__(i, reply))
            submitted += 1

    try:
        hand_out(-1)
        for index, page in enumerate(pages):
            if index in district_pages:
                hand_out(district_pages.index(index))
                pool.wait_until(lambda: index in drawn_elsewhere)
                drawn.adopt(drawn_elsewhere.pop(index))
            html = render_html(context, table, page, drawn)
            html_path = write_text_atomic(out / f"{page.stem}.html", html, what="the brief")
            if pool.active:
                pool.submit(["pdf", str(html_path), str(out / f"{page.stem}.pdf")])
                hand_out(-1)
            else:
                write_pdf(html, out / f"{page.stem}.pdf")
            yield page
    finally:
        if setup is not None:
            setup.unlink(missing_ok=True)


def draw_page_figures(index: int, *, context, table, zones, folder, region, crossover, pages) -> dict:
    """A worker's ``figures`` job: draw the figures of page ``index`` (written to ``folder``) and say
    which they are, for :meth:`_Figures.adopt` in the main process."""
    drawn = _Figures(context, table, zones, folder, region)
    drawn._crossover.update(crossover)
    render_html(context, table, pages[index], drawn)
    return drawn.drawn_since(0)


# --- from a run config -------------------------------------------------------------------------------------

def plant_type_words(pathway: str, name: str | None, overrides: Mapping | None = None) -> str:
    """A parameter set in words: a plant-type set by what it is ("C4 tropical grass"), another by its
    source; changed values listed."""
    from suitability.physiology.params import DEFAULT_SETS, PARAMETER_SETS

    name = name or DEFAULT_SETS[pathway]
    values = PARAMETER_SETS[pathway].get(name, {})
    if re.fullmatch(r"c[34]_[a-z_]+", name):
        words = f"{name[:2].upper()} {name[3:].replace('_', ' ')}"
    else:
        words = f"{pathway} plant after {values.get('source', name).split(';')[0]}"
    if overrides:
        words += " (changed: " + ", ".join(f"{k} = {v}" for k, v in sorted(overrides.items())) + ")"
    return words


def model_sentences(cfg) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """Sentences naming the leaf model of each pathway that the run used, and the references they cite."""
    from suitability.physiology.params import DEFAULT_SETS, PARAMETER_SETS

    sentences, sources = [], []
    for pathway, chosen in (("C3", cfg.physiology.c3), ("C4", cfg.physiology.c4)):
        name = chosen.parameter_set or DEFAULT_SETS[pathway]
        values = {**PARAMETER_SETS[pathway].get(name, {}), **(chosen.overrides or {})}
        model = MODEL_WORDS.get(values.get("model", ""), f"the {pathway} leaf model {values.get('model', '')!r}")
        plant = plant_type_words(pathway, chosen.parameter_set, chosen.overrides)
        sentences.append(f"{pathway} crops: {model}, with the values of a {plant} ({values.get('source', name)}).")
        sources.append(values.get("source", ""))
        sources.append(model)
    text = " ".join(sources)
    cited = tuple(dict.fromkeys(reference for key, reference in REFERENCES.items() if key in text))
    return tuple(sentences), cited + ALWAYS_CITED


def climate_sentences(cfg, time_info: Mapping | None = None) -> tuple[str, ...]:
    """The climate data in words: each file and the layers read from it, the period and the members."""
    by_file: dict[str, list[str]] = {}
    for name, spec in cfg.climate.items():
        by_file.setdefault(Path(str(spec.path)).name, []).append(name)
    lines = []
    for file, layers in by_file.items():
        periods = {str((time_info or {}).get(layer, {}).get("method", "")) for layer in layers} - {""}
        when = f" ({'; '.join(sorted(periods))})" if periods else ""
        lines.append(f"Today's climate: {', '.join(layers)} from {file}{when}.")
    for scenario in cfg.scenarios:
        if scenario.climate:
            files = sorted({Path(str(spec.path)).name for spec in scenario.climate.values()})
            members = f", {len(scenario.members)} climate models: {', '.join(scenario.members)}" if scenario.members else ""
            lines.append(f"Scenario \u201c{scenario.description or scenario.name}\u201d: "
                         f"{', '.join(scenario.climate)} from {', '.join(files)}{members}.")
    return tuple(lines)


def brief_context_from_config(cfg, scenario_folders: Mapping[str, Path], *, warm_season_temperature_c: float = math.nan,
                              caution: str = CAUTION, tool_version: str = "",
                              generated: date | None = None, district_climate: pd.DataFrame | None = None,
                              time_info: Mapping | None = None, members: Mapping[str, Sequence[str]] | None = None,
                              assumptions: Sequence[str] = ()) -> BriefContext:
    """The BriefContext of a run config (``suitability.config.RunConfig``) whose outputs are written.

    warm_season_temperature_c: the region's warm-season mean air temperature today [deg C].
    district_climate: the districts' mean monthly temperature today (see :class:`BriefContext`).
    time_info: layer -> the record of its time axis (period, years), as the manifest keeps it.
    members: scenario -> its climate-model members. assumptions: the run's assumptions in words.
    """
    if cfg.brief is None:
        raise ConfigError("the config has no 'brief' section (zones, name_field)")
    baseline = cfg.baseline
    temperature_layers = {"tmin", "tmax", "tmean"}
    scenarios = tuple(
        ScenarioInfo(
            name=s.name, co2_ppm=s.co2_ppm, output_folder=Path(scenario_folders[s.name]),
            description=s.description, temperature_offset_c=s.temperature_offset_c, o2_percent=s.o2_percent,
            is_baseline=s.name == baseline, own_temperature=bool(temperature_layers & set(s.climate or {})),
            members=tuple((members or {}).get(s.name) or s.members or ()),
        )
        for s in cfg.scenarios
    )
    models, references = model_sentences(cfg)
    notes = (invented_note(cfg.region.name),) if getattr(cfg.region, "invented", False) else ()
    return BriefContext(
        region=cfg.region.name,
        generated=generated or date.today(),
        tool_version=tool_version,
        scenarios=scenarios,
        baseline=baseline,
        c3_parameter_set=plant_type_words("C3", cfg.physiology.c3.parameter_set, cfg.physiology.c3.overrides),
        c4_parameter_set=plant_type_words("C4", cfg.physiology.c4.parameter_set, cfg.physiology.c4.overrides),
        zones_path=Path(cfg.brief.zones),
        name_field=cfg.brief.name_field,
        warm_season_temperature_c=warm_season_temperature_c,
        contested_margin=cfg.classes.contested_margin,
        per_district=cfg.brief.per_district,
        district_svg=cfg.brief.district_svg,
        caution=caution,
        notes=notes,
        district_climate=district_climate,
        models=models,
        climate_data=climate_sentences(cfg, time_info),
        assumptions=tuple(assumptions),
        references=references,
    )
