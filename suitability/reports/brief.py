"""Regional briefs: self-contained HTML and PDF pages, in plain words, built from the district table.

One brief per non-baseline scenario, each comparing that scenario with the baseline
(``<folder>/brief/<region>_<scenario>.html`` and ``.pdf``); with only a baseline, one brief for it.
Optionally one brief per district covering every scenario (``<region>_<district>.html`` / ``.pdf``;
a district whose name gives a scenario's file name is numbered instead). Beside them the district table is written as ``<region>_districts.csv`` and ``.gpkg``.

File names come from names (:func:`file_stems`): lower-case ASCII letters, digits and ``_`` only, at most
:data:`MAX_STEM` characters (a longer name is cut and ends in a short hash of the whole name), unique
ignoring case; two names that would give one file name get ``_2``, ``_3``, ... and a warning says so.

Every number in the text comes from the table of :func:`suitability.reports.zones.zonal_statistics`.
The HTML embeds its figures as base64 data URIs and its CSS inline; the PDF is WeasyPrint's rendering
of the same HTML.
"""

from __future__ import annotations

import base64
import dataclasses
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

from suitability.atomic import atomic_write, write_text_atomic
from suitability.caution import CAUTION
from suitability.errors import ConfigError, OutputError
from suitability.indicators import warm_season_mean  # noqa: F401 - re-exported: the brief's warm-season rule
from suitability.reports import figures
from suitability.reports.zones import read_zones, write_table_csv, write_table_geopackage, zonal_statistics

TEMPLATES = Path(__file__).with_name("templates")


#: The references the method section cites, in the order they appear.
REFERENCES = (
    "Farquhar, G.D., von Caemmerer, S. & Berry, J.A. (1980) A biochemical model of photosynthetic CO2 "
    "assimilation in leaves of C3 species. Planta 149, 78-90.",
    "Bernacchi, C.J., Singsaas, E.L., Pimentel, C., Portis, A.R. & Long, S.P. (2001) Improved temperature "
    "response functions for models of Rubisco-limited photosynthesis. Plant, Cell & Environment 24, 253-259.",
    "Collatz, G.J., Ribas-Carbo, M. & Berry, J.A. (1992) Coupled photosynthesis-stomatal conductance model "
    "for leaves of C4 plants. Australian Journal of Plant Physiology 19, 519-538.",
    "von Caemmerer, S. (2000) Biochemical Models of Leaf Photosynthesis. CSIRO Publishing, Collingwood.",
    "Medlyn, B.E., Duursma, R.A., Eamus, D. et al. (2011) Reconciling the optimal and empirical approaches "
    "to modelling stomatal conductance. Global Change Biology 17, 2134-2144.",
    "de Pury, D.G.G. & Farquhar, G.D. (1997) Simple scaling of photosynthesis from leaves to canopies "
    "without the errors of big-leaf models. Plant, Cell & Environment 20, 537-557.",
    "Collatz, G.J., Berry, J.A. & Clark, J.S. (1998) Effects of climate and atmospheric CO2 partial pressure "
    "on the global distribution of C4 grasses: present, past, and future. Oecologia 114, 441-454.",
    "Allen, R.G., Pereira, L.S., Raes, D. & Smith, M. (1998) Crop evapotranspiration: guidelines for "
    "computing crop water requirements. FAO Irrigation and Drainage Paper 56, FAO, Rome.",
)


@dataclass(frozen=True)
class ScenarioInfo:
    """One scenario as the brief describes it.

    name: scenario name (also its output folder's name). co2_ppm: CO2 [ppm]. output_folder: the folder
    with its rasters. description: one line in plain words. temperature_offset_c: warming added to the
    baseline climate [deg C]. o2_percent: O2 [%]. is_baseline: True for the baseline scenario.
    """

    name: str
    co2_ppm: float
    output_folder: Path
    description: str = ""
    temperature_offset_c: float = 0.0
    o2_percent: float = 20.95
    is_baseline: bool = False


@dataclass(frozen=True)
class BriefContext:
    """Everything a brief says that is not in the rasters.

    region: region name. generated: date of the brief. tool_version: suitability's version.
    scenarios: every scenario, baseline included. baseline: the baseline's name.
    c3_parameter_set, c4_parameter_set: names of the parameter sets used (with overrides, if any).
    zones_path, name_field: the district polygons and their name field.
    warm_season_temperature_c: the region's warm-season mean air temperature today [deg C].
    contested_margin: |advantage| below this is "no clear advantage" [-].
    per_district: also write one brief per district. caution: the caution text every brief carries.
    notes: extra lines shown under the caution (e.g. that a demo's data are synthetic).
    crossover_function: crossover temperature [deg C] as a function of CO2 [ppm] (keyword o2_percent);
        None uses :func:`suitability.physiology.quantum_yield_crossover`.
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
    warm_season_temperature_c: float
    contested_margin: float
    per_district: bool = False
    caution: str = CAUTION
    notes: tuple[str, ...] = ()
    crossover_function: Callable | None = field(default=None, compare=False)

    def __post_init__(self):
        names = [s.name for s in self.scenarios]
        if not names:
            raise ConfigError("brief: expected at least one scenario")
        if len(set(names)) != len(names):
            raise ConfigError(f"brief: scenario names must be unique, got {names}")
        if self.baseline not in names:
            raise ConfigError(f"brief: baseline {self.baseline!r} is not among the scenarios {', '.join(names)}")
        if not math.isfinite(self.warm_season_temperature_c):
            raise ConfigError(f"brief: warm-season temperature must be a number, got {self.warm_season_temperature_c}")

    def scenario(self, name: str) -> ScenarioInfo:
        return next(s for s in self.scenarios if s.name == name)

    @property
    def compared(self) -> list[ScenarioInfo]:
        """The scenarios that get a brief of their own: every non-baseline one, else the baseline."""
        others = [s for s in self.scenarios if s.name != self.baseline]
        return others or [self.scenario(self.baseline)]


# --- words from numbers ----------------------------------------------------------------------------------

def percent_text(share: float, *, short: bool = False) -> str:
    """A share [0-1] as whole percent, e.g. 0.184 -> '18 %'; tiny non-zero shares as 'less than 1 %'
    (``short``: '<1 %'); NaN as 'no data' ('\u2013')."""
    if not math.isfinite(share):
        return "\u2013" if short else "no data"
    if 0 < share < 0.005:
        return "<1 %" if short else "less than 1 %"
    return f"{round(100 * share):d} %"


def hectares_text(hectares: float) -> str:
    """Hectares rounded to whole numbers with thousands separators, e.g. 12345.6 -> '12,346 ha'."""
    return f"{hectares:,.0f} ha"


def _district_rows(table: pd.DataFrame, scenario: str) -> pd.DataFrame:
    return table[table["scenario"] == scenario].set_index("district")


def summary_sentences(table: pd.DataFrame, baseline: str, scenario: str,
                      districts: Sequence[str] | None = None) -> list[str]:
    """Plain sentences comparing ``scenario`` with ``baseline`` for each district, from the table's numbers.

    For the baseline itself, sentences describe today. Districts without data get a sentence saying why.
    """
    base = _district_rows(table, baseline)
    other = _district_rows(table, scenario)
    chosen = list(districts) if districts is not None else list(base.index)
    sentences = []
    for district in chosen:
        b, s = base.loc[district], other.loc[district]
        if not (b["valid_share"] > 0 and s["valid_share"] > 0):
            reason = s["flag"] or b["flag"] or "no valid data"
            sentences.append(f"There are no results for {district} ({reason}).")
            continue
        before, after = percent_text(b["share_c4"]), percent_text(s["share_c4"])
        if scenario == baseline:
            sentences.append(f"Today, C4 crops have the advantage on {before} of {district}'s mapped land.")
        elif before == after:
            sentences.append(
                f"Under {scenario}, the share of {district} where C4 crops have the advantage stays at {before}."
            )
        else:
            verb = "rises" if s["share_c4"] > b["share_c4"] else "falls"
            sentences.append(
                f"Under {scenario}, the share of {district} where C4 crops have the advantage {verb} "
                f"from {before} to {after}."
            )
    if scenario != baseline:
        rows = other.loc[chosen]
        gained, lost = rows["c3_to_c4_ha"].sum(), rows["c4_to_c3_ha"].sum()
        where = f"In {chosen[0]}" if len(chosen) == 1 else "Across these districts"
        sentences.append(
            f"{where}, {hectares_text(gained)} change from a C3 advantage to a C4 advantage and "
            f"{hectares_text(lost)} change from C4 to C3."
        )
    return sentences


def _number(value: float, digits: int = 2) -> str:
    return "\u2013" if not math.isfinite(value) else f"{value:.{digits}f}"


def table_rows(table: pd.DataFrame, scenarios: Sequence[str], baseline: str,
               districts: Sequence[str] | None = None) -> list[dict]:
    """The district table as the brief prints it: one dict of display strings per district and scenario
    (change columns are a dash for the baseline, which is not compared with itself)."""
    rows = []
    chosen = districts if districts is not None else list(dict.fromkeys(table["district"]))
    for district in chosen:
        for scenario in scenarios:
            r = table[(table["district"] == district) & (table["scenario"] == scenario)].iloc[0]
            rows.append({
                "district": district,
                "scenario": scenario,
                "area": hectares_text(r["district_area_ha"]),
                "mapped": percent_text(r["valid_share"], short=True),
                "c3": percent_text(r["share_c3"], short=True),
                "contested": percent_text(r["share_contested"], short=True),
                "c4": percent_text(r["share_c4"], short=True),
                "advantage": _number(r["advantage_mean"]),
                "months": _number(r["c4_favoured_months_mean"], 1),
                "to_c4": "\u2013" if scenario == baseline else hectares_text(r["c3_to_c4_ha"]),
                "to_c3": "\u2013" if scenario == baseline else hectares_text(r["c4_to_c3_ha"]),
                "flag": r["flag"],
            })
    return rows


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


def file_stems(named: Sequence[tuple[str, str]]) -> list[str]:
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
    if renamed:
        warnings.warn("names that would give the same brief file name were numbered: " + "; ".join(renamed),
                      stacklevel=3)
    return stems


def _data_uri(png: bytes) -> str:
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def _environment() -> Environment:
    return Environment(
        loader=FileSystemLoader(TEMPLATES),
        autoescape=select_autoescape(["html", "j2"]),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )


def _write_pdf(html: str, target: Path) -> Path:
    import weasyprint  # imported late: it is slow to import and only the PDF needs it

    return atomic_write(target, lambda path: weasyprint.HTML(string=html, base_url=str(TEMPLATES)).write_pdf(path),
                        what="the brief")


class _Figures:
    """Figures drawn once and shared by all briefs (as data URIs)."""

    def __init__(self, context: BriefContext, table: pd.DataFrame, zones):
        self._context, self._table, self._zones = context, table, zones
        self._cache: dict[tuple, str] = {}

    def _get(self, key: tuple, draw: Callable[[], bytes]) -> str:
        if key not in self._cache:
            self._cache[key] = _data_uri(draw())
        return self._cache[key]

    def class_map(self, scenario: ScenarioInfo, district: str | None = None) -> str:
        title = f"{scenario.name}: where each kind of crop has the advantage"
        return self._get(("class", scenario.name, district), lambda: figures.class_map_png(
            Path(scenario.output_folder) / "pathway_class.tif", self._zones, title=title, highlight=district))

    def change_map(self, scenario: ScenarioInfo, district: str | None = None) -> str:
        title = f"Change: {scenario.name} against {self._context.baseline}"
        return self._get(("change", scenario.name, district), lambda: figures.change_map_png(
            Path(scenario.output_folder) / "advantage_change.tif", self._zones, title=title, highlight=district))

    def shares(self, scenarios: Sequence[str], districts: Sequence[str] | None = None) -> str:
        table = self._table if districts is None else self._table[self._table["district"].isin(districts)]
        return self._get(("shares", tuple(scenarios), tuple(districts or ())),
                         lambda: figures.class_share_png(table, scenarios))

    def crossover(self) -> str:
        context = self._context
        o2 = context.scenario(context.baseline).o2_percent
        return self._get(("crossover",), lambda: figures.crossover_png(
            context.warm_season_temperature_c, context.scenarios, o2_percent=o2,
            crossover=context.crossover_function))


#: Most districts a region brief lists (table, sentences, chart): the largest by area. More would make
#: pages nobody reads and PDFs that take long to lay out; the district table holds all of them.
MAX_BRIEF_DISTRICTS = 100
#: Most districts that get a brief of their own (``brief.per_district``); checked before computing.
MAX_DISTRICT_BRIEFS = 200


def largest_districts(table: pd.DataFrame, count: int) -> list[str]:
    """The ``count`` districts of ``table`` with the largest area, in the table's order."""
    areas = table.drop_duplicates("district").set_index("district")["district_area_ha"]
    kept = set(areas.sort_values(ascending=False, kind="stable").index[:count])
    return [d for d in dict.fromkeys(table["district"]) if d in kept]


def render_html(context: BriefContext, table: pd.DataFrame, scenario: ScenarioInfo,
                drawn: _Figures, district: str | None = None) -> str:
    """The HTML of one brief: ``scenario`` against the baseline, or (``district``) one district, all scenarios."""
    baseline = context.scenario(context.baseline)
    districts = [district] if district is not None else None
    if district is None and table["district"].nunique() > MAX_BRIEF_DISTRICTS:
        districts = largest_districts(table, MAX_BRIEF_DISTRICTS)
        note = (f"This brief shows the {len(districts)} largest of {table['district'].nunique()} districts; "
                "every district is in the district table (CSV and GeoPackage) beside it.")
        context = dataclasses.replace(context, notes=(*context.notes, note))
    if district is None:
        shown = [baseline] if scenario.is_baseline or scenario.name == baseline.name else [baseline, scenario]
        summaries = [(scenario.name, summary_sentences(table, baseline.name, scenario.name, districts))]
    else:
        shown = list(context.scenarios)
        summaries = [(s.name, summary_sentences(table, baseline.name, s.name, districts)) for s in shown]
    maps = [{"title": s.name, "image": drawn.class_map(s, district)} for s in shown]
    change_maps = [{"title": s.name, "image": drawn.change_map(s, district)} for s in shown if s.name != baseline.name]
    names = [s.name for s in shown]
    flagged = table[(table["flag"] != "") & table["scenario"].isin(names)]
    if districts is not None:
        flagged = flagged[flagged["district"].isin(districts)]
    all_districts = list(dict.fromkeys(table["district"]))
    return _environment().get_template("brief.html.j2").render(
        css=(TEMPLATES / "brief.css").read_text(encoding="utf-8"),
        context=context,
        title=f"{context.region}: C3 and C4 crops" + (f" \u2013 {district}" if district else ""),
        subject=district or context.region,
        district=district,
        scenario=scenario,
        baseline=baseline,
        shown=shown,
        summaries=summaries,
        maps=maps,
        change_maps=change_maps,
        shares_chart=drawn.shares(names, districts),
        crossover_chart=drawn.crossover(),
        rows=table_rows(table, names, baseline.name, districts),
        districts=districts or all_districts,
        flags=sorted(set(zip(flagged["district"], flagged["flag"]))),
        references=REFERENCES,
        generated=context.generated.isoformat(),
    )


def build_brief(context: BriefContext, folder: str | os.PathLike, *, table: pd.DataFrame | None = None) -> dict[str, Path]:
    """Write the briefs, their district table and return {file name: path}.

    context: what the brief says besides the rasters. folder: the run's output folder; files go to
    ``<folder>/brief/``. table: a precomputed :func:`zonal_statistics` table (computed here if None).
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
        return _build_brief(context, out, table)
    except BaseException:
        if created:  # a refused brief leaves no empty brief/ folder behind
            try:
                out.rmdir()
            except OSError:
                pass
        raise


def _build_brief(context: BriefContext, out: Path, table: pd.DataFrame | None) -> dict[str, Path]:
    scenario_folders = {s.name: Path(s.output_folder) for s in context.scenarios}
    if table is None:
        table = zonal_statistics(context.zones_path, context.name_field, scenario_folders, context.baseline)
    zones = read_zones(context.zones_path, context.name_field)
    region = slug(context.region, 40)
    written: dict[str, Path] = {}
    for path in (
        write_table_csv(table, out / f"{region}_districts.csv"),
        write_table_geopackage(table, context.zones_path, context.name_field, out / f"{region}_districts.gpkg",
                               scenarios=list(scenario_folders)),
    ):
        written[path.name] = path
    drawn = _Figures(context, table, zones)
    named = [(f"{region}_{slug(s.name)}", f"scenario {s.name!r}") for s in context.compared]
    districts = list(zones["district"]) if context.per_district else []
    named += [(f"{region}_{slug(str(d))}", f"district {d!r}") for d in districts]
    stems = file_stems(named)
    pages: list[tuple[str, Callable[[], str]]] = []
    for stem, scenario in zip(stems, context.compared):
        pages.append((stem, functools.partial(render_html, context, table, scenario, drawn)))
    for stem, district in zip(stems[len(context.compared):], districts):
        pages.append((stem, functools.partial(render_html, context, table, context.scenario(context.baseline), drawn,
                                              district=district)))
    for stem, render in pages:
        html = render()
        html_path = write_text_atomic(out / f"{stem}.html", html, what="the brief")
        pdf_path = _write_pdf(html, out / f"{stem}.pdf")
        written[html_path.name] = html_path
        written[pdf_path.name] = pdf_path
    return written


# --- from a run config -------------------------------------------------------------------------------------

def _parameter_set_text(pathway_config) -> str:
    name = pathway_config.parameter_set or "default"
    if pathway_config.overrides:
        changes = ", ".join(f"{k} = {v}" for k, v in sorted(pathway_config.overrides.items()))
        return f"{name} (changed: {changes})"
    return name


def brief_context_from_config(cfg, scenario_folders: Mapping[str, Path], *, warm_season_temperature_c: float,
                              caution: str = CAUTION, tool_version: str = "",
                              generated: date | None = None) -> BriefContext:
    """The BriefContext of a run config (``suitability.config.RunConfig``) whose outputs are written.

    warm_season_temperature_c: the region's warm-season mean air temperature today [deg C], as the
    pipeline computed it from the baseline climate (:func:`suitability.indicators.warm_season_mean`).
    """
    if cfg.brief is None:
        raise ConfigError("the config has no 'brief' section (zones, name_field)")
    baseline = cfg.baseline
    scenarios = tuple(
        ScenarioInfo(
            name=s.name, co2_ppm=s.co2_ppm, output_folder=Path(scenario_folders[s.name]),
            description=s.description, temperature_offset_c=s.temperature_offset_c, o2_percent=s.o2_percent,
            is_baseline=s.name == baseline,
        )
        for s in cfg.scenarios
    )
    return BriefContext(
        region=cfg.region.name,
        generated=generated or date.today(),
        tool_version=tool_version,
        scenarios=scenarios,
        baseline=baseline,
        c3_parameter_set=_parameter_set_text(cfg.physiology.c3),
        c4_parameter_set=_parameter_set_text(cfg.physiology.c4),
        zones_path=Path(cfg.brief.zones),
        name_field=cfg.brief.name_field,
        warm_season_temperature_c=warm_season_temperature_c,
        contested_margin=cfg.classes.contested_margin,
        per_district=cfg.brief.per_district,
        caution=caution,
    )
