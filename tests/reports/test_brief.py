"""Briefs: files, self-contained HTML, numbers in the words, transition accounting, the PDF, per-district maps.

The rasters and districts are SYNTHETIC, made up for these tests in an invented region; the district
names (Orvanne, Telmira, Quessel, Far Reach) describe no real place. Sources are named beside each check;
most expectations are hand derivations from the synthetic layout.
"""

from __future__ import annotations

import dataclasses
import math
import re
from datetime import date
from html.parser import HTMLParser
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pypdf
import pytest
from rasterio.transform import from_origin
from shapely.geometry import box

from suitability.errors import ConfigError
from suitability.reports.brief import BriefContext, ScenarioInfo, brief_context_from_config, build_brief, brief_pages
from suitability.reports.summary import (
    hectares_text,
    headline,
    largest_changes,
    percent_text,
    region_table,
    transition_matrix,
)
from suitability.reports.zones import (
    TRANSITION_COLUMNS,
    district_monthly_means,
    output_grid,
    transition_column,
    zonal_statistics,
)
from suitability.variables import CLASS_C3, CLASS_C4, CLASS_CONTESTED

from . import write_scenario_folder

REGION = "Vellmark Uplands"
CRS = "EPSG:32740"
# 40 x 30 cells of 1 km; top-left corner (300000, 7400000).
TRANSFORM = from_origin(300000, 7400000, 1000, 1000)
DISTRICTS = {
    "Orvanne": box(310000, 7390000, 330000, 7400000),    # columns 10-29, rows 0-9
    "Telmira": box(300000, 7380000, 320000, 7390000),    # columns 0-19, rows 10-19
    "Quessel": box(320000, 7370000, 340000, 7390000),    # columns 20-39, rows 10-29
    "Far Reach": box(100000, 7000000, 110000, 7010000),  # off the grid
}
CAUTION_PHRASES = ("not yield forecasts", "local agronomic advice", "field trials", "local regulations",
                   "soils, irrigation, pests", "markets and farmer knowledge")
SCENARIO_ID = "hotter_650"  # an identifier that must never reach the text of a brief
WORDS = "650 ppm and 2.5 \u00b0C warmer"


def _classes(c4_from: int, contested_from: int) -> np.ndarray:
    """C3 left of ``contested_from``, contested up to ``c4_from``, C4 from column ``c4_from`` on."""
    columns = np.broadcast_to(np.arange(40), (30, 40))
    return np.where(columns >= c4_from, CLASS_C4, np.where(columns >= contested_from, CLASS_CONTESTED, CLASS_C3)
                    ).astype("uint8")


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    root = tmp_path_factory.mktemp("run")
    columns = np.broadcast_to(np.arange(40), (30, 40))
    base_classes, warm_classes = _classes(24, 22), _classes(16, 14)
    base_adv = -0.4 + 0.02 * columns
    base = write_scenario_folder(root / "present", CRS, TRANSFORM, base_classes, base_adv)
    warm = write_scenario_folder(root / SCENARIO_ID, CRS, TRANSFORM, warm_classes, base_adv + 0.16,
                                 baseline_classes=base_classes, baseline_advantage=base_adv)
    zones = root / "districts.gpkg"
    gpd.GeoDataFrame({"name": list(DISTRICTS)}, geometry=list(DISTRICTS.values()), crs=CRS).to_file(zones)
    # Monthly temperature rising west to east (synthetic): 18 + 0.2 * column degC in the warmest month.
    months = np.arange(1, 13)[:, None, None]
    monthly = 12 + 0.2 * columns[None] + 6 * np.cos(2 * np.pi * (months - 1) / 12)
    climate = district_monthly_means(zones, "name", output_grid(base / "pathway_class.tif"), monthly)
    context = BriefContext(
        region=REGION, generated=date(2031, 5, 4), tool_version="9.9.9",
        scenarios=(ScenarioInfo("present", 420, base, "present CO2 and climate", is_baseline=True),
                   ScenarioInfo(SCENARIO_ID, 650, warm, WORDS, temperature_offset_c=2.5)),
        baseline="present", c3_parameter_set="C3 temperate grass", c4_parameter_set="C4 tropical grass",
        zones_path=zones, name_field="name", contested_margin=0.05, per_district=True, district_svg=True,
        notes=("All data in this brief are synthetic, made up for a test.",), district_climate=climate,
        models=("C3 crops: the C3 leaf model of Farquhar, von Caemmerer & Berry (1980).",),
        references=("Farquhar, G.D., von Caemmerer, S. & Berry, J.A. (1980) Planta 149, 78-90.",),
        assumptions=("air pressure: no elevation layer, so every cell is at sea level",),
        climate_data=("Today's climate: tmin, tmax from temperature.nc (monthly series, 1991-2020).",),
    )
    paths = build_brief(context, root / "out")
    table = zonal_statistics(zones, "name", {"present": base, SCENARIO_ID: warm}, "present")
    return {"root": root, "context": context, "paths": paths, "table": table, "climate": climate}


def test_files_are_named_by_region_and_scenario(run):
    names = {name for name in run["paths"] if not name.startswith("figures/")}
    expected = {f"vellmark_uplands_{SCENARIO_ID}.html", f"vellmark_uplands_{SCENARIO_ID}.pdf",
                "vellmark_uplands_today.html", "vellmark_uplands_today.pdf",
                "vellmark_uplands_districts.csv", "vellmark_uplands_districts.columns.csv",
                "vellmark_uplands_districts.gpkg"}
    expected |= {f"vellmark_uplands_{d.lower().replace(' ', '_')}.{ext}" for d in DISTRICTS for ext in ("html", "pdf")}
    assert names == expected  # DESIGN.md: brief/<region>_<scenario>.html and .pdf (+ today, per district)
    figures = {name for name in run["paths"] if name.startswith("figures/")}
    stems = {name.rsplit(".", 1)[0] for name in figures}
    assert stems and all(f"{stem}.png" in figures and f"{stem}.svg" in figures for stem in stems)  # PNG and SVG
    for name, path in run["paths"].items():
        assert path.stat().st_size > 0
    assert not [p for p in (run["root"] / "out" / "brief").iterdir() if p.name.startswith(".")]  # no temporaries


def test_a_scenario_named_today_does_not_overwrite_the_today_brief():
    with pytest.warns(UserWarning, match="numbered"):
        pages = brief_pages("R", ["now", "today"], "now")
    assert [p.stem for p in pages] == ["r_today", "r_today_2"]
    assert [p.kind for p in pages] == ["scenario", "today"]


class _Resources(HTMLParser):
    def __init__(self):
        super().__init__()
        self.sources: list[str] = []
        self.stylesheets: list[str] = []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag in ("img", "script", "iframe") and "src" in attrs:
            self.sources.append(attrs["src"])
        if tag == "link":
            self.stylesheets.append(attrs.get("href", ""))


def test_html_is_self_contained(run):
    parser = _Resources()
    parser.feed(run["paths"][f"vellmark_uplands_{SCENARIO_ID}.html"].read_text(encoding="utf-8"))
    assert len(parser.sources) == 4  # two class maps, one change map, the crossover chart
    assert all(src.startswith("data:image/png;base64,") for src in parser.sources)
    assert parser.stylesheets == []


def test_table_numbers_match_hand_derivation(run):
    # Hand derivation from the synthetic layout (whole cells of 100 ha):
    # Orvanne covers columns 10-29: baseline C4 from column 24 -> 6 of 20 columns = 30 %;
    # scenario C4 from column 16 -> 14 of 20 = 70 %; C3 -> C4 on columns 16-21 x 10 rows = 6000 ha.
    table = run["table"].set_index(["district", "scenario"])
    assert table.loc[("Orvanne", "present"), "share_c4"] == pytest.approx(0.30, rel=1e-9)
    assert table.loc[("Orvanne", SCENARIO_ID), "share_c4"] == pytest.approx(0.70, rel=1e-9)
    assert table.loc[("Orvanne", SCENARIO_ID), "c3_to_c4_ha"] == pytest.approx(6000, rel=1e-9)
    assert table.loc[("Telmira", SCENARIO_ID), "share_c4"] == pytest.approx(0.20, rel=1e-9)


def test_towards_c4_counts_every_move_through_contested(run):
    # Orvanne, 10 rows of 100 ha cells. Baseline: C3 columns 10-21, contested 22-23, C4 24-29. Scenario: C3
    # 10-13, contested 14-15, C4 16-29. Hand: C3->C3 4 columns, C3->contested 2, C3->C4 6, contested->C4 2,
    # C4->C4 6; towards C4 = (2 + 6 + 2) x 1000 ha = 10,000 ha (the former count saw only C3->C4, 6000 ha).
    row = run["table"].set_index(["district", "scenario"]).loc[("Orvanne", SCENARIO_ID)]
    assert row[transition_column("c3", "c3")] == pytest.approx(4000)
    assert row[transition_column("c3", "contested")] == pytest.approx(2000)
    assert row[transition_column("contested", "c4")] == pytest.approx(2000)
    assert row[transition_column("c4", "c4")] == pytest.approx(6000)
    assert row["towards_c4_ha"] == pytest.approx(10_000)
    assert row["towards_c3_ha"] == 0.0


def test_transition_matrix_sums_to_the_district_area(run):
    table = run["table"]
    # Every district and scenario: the 25 cells sum to the district's area (Far Reach, off the grid: all of
    # it in "no results"); the area is measured from the polygon, the cells from the grid's coverage.
    sums = table[list(TRANSITION_COLUMNS)].sum(axis=1)
    np.testing.assert_allclose(sums, table["district_area_ha"], rtol=1e-9)
    far = table[(table["district"] == "Far Reach") & (table["scenario"] == SCENARIO_ID)].iloc[0]
    assert far[transition_column("nodata", "nodata")] == pytest.approx(10_000)  # hand: 10 km x 10 km
    region = region_table(table)
    matrix = transition_matrix(region.loc[SCENARIO_ID])
    assert matrix.to_numpy().sum() == pytest.approx(region.loc[SCENARIO_ID, "district_area_ha"], rel=1e-12)


_NUMBER = re.compile(r"(?:less than |more than )?[\d,]+(?:\.\d+)? (?:ha|%)")


def test_every_number_in_the_headline_is_the_tables(run):
    table, context = run["table"], run["context"]
    region = region_table(table)
    # Independently of region_table: sums of the district table by hand (pandas), shares from the sums.
    rows = table[table["scenario"] == SCENARIO_ID]
    base = table[table["scenario"] == "present"]
    results = base[["area_c3_ha", "area_contested_ha", "area_c4_ha", "area_noseason_ha"]].to_numpy().sum()
    expected = {
        percent_text(base["area_c4_ha"].sum() / results), percent_text(base["area_c3_ha"].sum() / results),
        hectares_text(results), percent_text(results / base["district_area_ha"].sum()),
        hectares_text(rows["towards_c4_ha"].sum()), hectares_text(rows["towards_c3_ha"].sum()),
        percent_text(rows["towards_c4_ha"].sum() / rows["district_area_ha"].sum()),
        percent_text(rows["towards_c3_ha"].sum() / rows["district_area_ha"].sum()),
        percent_text(rows["area_c4_ha"].sum() / rows[["area_c3_ha", "area_contested_ha", "area_c4_ha",
                                                      "area_noseason_ha"]].to_numpy().sum()),
    }
    sentences = headline(region, context.scenarios, context.scenario("present"), "the districts")
    found = {m for s in sentences for m in _NUMBER.findall(s.text)}
    assert found and found <= expected, found - expected
    # Hand: Orvanne 10,000 ha, Telmira columns 0-19 (C3 0-13 -> contested 14-15 -> C4 16-19; today C3
    # up to 21): 6 columns x 10 rows = 6000 ha; Quessel columns 20-39, 20 rows: 20-21 C3 -> C4 and 22-23
    # contested -> C4: 4 columns x 20 rows = 8000 ha; total 24,000 ha.
    assert rows["towards_c4_ha"].sum() == pytest.approx(24_000)
    assert any("24,000 ha" in s.text and "towards C4" in s.text for s in sentences)


def test_the_issue_example_a_fall_through_contested_is_counted():
    # A district 80 % C4 today and 44 % C4 later, the rest moving to "contested" (issue 14): no C4 -> C3
    # move, yet 36 % of it moves towards C3. Synthetic table, 100 ha district.
    row = {"district": "Orvanne", "district_area_ha": 100.0, "valid_share": 1.0, "flag": "", "members": math.nan}
    base = dict(row, scenario="a", area_c3_ha=20.0, area_contested_ha=0.0, area_c4_ha=80.0, area_noseason_ha=0.0,
                towards_c4_ha=0.0, towards_c3_ha=0.0)
    later = dict(row, scenario="b", area_c3_ha=20.0, area_contested_ha=36.0, area_c4_ha=44.0, area_noseason_ha=0.0,
                 towards_c4_ha=0.0, towards_c3_ha=36.0)
    for name in TRANSITION_COLUMNS:
        base[name] = later[name] = 0.0
    base[transition_column("c3", "c3")], base[transition_column("c4", "c4")] = 20.0, 80.0
    later[transition_column("c3", "c3")], later[transition_column("c4", "c4")] = 20.0, 44.0
    later[transition_column("c4", "contested")] = 36.0
    table = pd.DataFrame([base, later])
    region = region_table(table)
    sentences = [s.text for s in headline(region, [_info("a", True), _info("b")], _info("a", True), "Orvanne")]
    assert "36 ha (36 % of the area) move towards C4 crops" not in " ".join(sentences)
    assert any("0 ha (0 % of the area) move towards C4 crops and 36 ha (36 %) towards C3 crops" in s for s in sentences)
    assert any("C4 crops then have the advantage on 44 %" in s for s in sentences)
    assert list(largest_changes(table, "b", "c3")["district"]) == ["Orvanne"]


def _info(name, baseline=False, **kw):
    return ScenarioInfo(name, 420.0, Path("."), description=f"scenario {name} in words", is_baseline=baseline, **kw)


def test_number_words():
    # Hand derivation of the rounding rules.
    assert percent_text(0.184) == "18 %" and percent_text(0.004) == "less than 1 %" and percent_text(0.0) == "0 %"
    assert percent_text(0.996) == "more than 99 %" and percent_text(1.0) == "100 %"
    assert percent_text(0.004, short=True) == "<1 %" and percent_text(float("nan")) == "no data"
    assert hectares_text(12345.6) == "12,346 ha"


def test_bad_context_is_a_config_error(run):
    context = run["context"]
    with pytest.raises(ConfigError, match=f"baseline 'past' is not among the scenarios present, {SCENARIO_ID}"):
        BriefContext(**{**context.__dict__, "baseline": "past"})
    with pytest.raises(ConfigError, match="unique"):
        BriefContext(**{**context.__dict__, "scenarios": context.scenarios + context.scenarios[:1]})


def _page_texts(path: Path) -> list[str]:
    return [page.extract_text() for page in pypdf.PdfReader(path).pages]


@pytest.mark.slow  # reads the rendered PDFs
def test_pdf_text_names_things_in_words(run):
    pages = _page_texts(run["paths"][f"vellmark_uplands_{SCENARIO_ID}.pdf"])
    flat = " ".join(" ".join(pages).split())
    assert REGION in pages[0] and "not yield forecasts" in pages[0]
    assert "2031-05-04" in pages[0] and "9.9.9" in pages[0]
    assert "All data in this brief are synthetic" in " ".join(pages[0].split())
    assert WORDS in flat and SCENARIO_ID not in flat  # scenario descriptions, never identifiers
    assert "Farquhar, von Caemmerer & Berry (1980)" in flat  # the model used, from the context
    assert "Planta 149" in flat and "Oecologia" not in flat and "CSIRO" not in flat  # only the references given
    assert "temperature.nc (monthly series, 1991-2020)" in flat  # the climate data
    assert "every cell is at sea level" in flat  # the assumptions
    for phrase in CAUTION_PHRASES:
        assert phrase in flat
    for page in pages:
        assert "page" in page and "not yield forecasts" in page  # the footer on every page


@pytest.mark.slow  # reads the rendered PDFs
def test_per_district_brief_covers_every_scenario_and_zooms(run):
    text = " ".join(" ".join(_page_texts(run["paths"]["vellmark_uplands_orvanne.pdf"])).split())
    # Hand: Orvanne today 30 % C4 and 60 % C3 (columns 10-21 of 10-29), later 70 % C4; 10,000 ha of 20,000
    # towards C4 (50 %).
    assert "C4 crops have the advantage on 30 % of the land with results in Orvanne and C3 crops on 60 %" in text
    assert "10,000 ha (50 % of the area) move towards C4 crops" in text
    assert "C4 crops then have the advantage on 70 %" in text
    far = " ".join(run["paths"]["vellmark_uplands_far_reach.html"].read_text(encoding="utf-8").split())
    assert "There are no results for Far Reach." in far
    zoomed = [name for name in run["paths"] if name.startswith("figures/vellmark_uplands_orvanne_") and name.endswith(".svg")]
    assert zoomed
    svg = run["paths"][zoomed[0]].read_text(encoding="utf-8")
    assert 'id="locator"' in svg and 'id="north_arrow"' in svg and 'id="scale_bar"' in svg


def test_district_figures_are_saved_as_svg_only_when_asked(run, tmp_path):
    # Project decision (issue 15): by default a district brief's figures are saved as PNG only; the region
    # briefs' figures as PNG and SVG. The PNG files are the same either way (the fixture asked for SVG).
    paths = build_brief(dataclasses.replace(run["context"], district_svg=False), tmp_path / "out", workers=0)
    district_stems = {f"figures/vellmark_uplands_{d.lower().replace(' ', '_')}_" for d in DISTRICTS}
    figures = [name for name in paths if name.startswith("figures/")]
    of_districts = [name for name in figures if name.startswith(tuple(district_stems))]
    of_region = [name for name in figures if name not in of_districts]
    assert of_districts and all(name.endswith(".png") for name in of_districts)
    assert {n.rsplit(".", 1)[0] for n in of_region if n.endswith(".svg")} == {n.rsplit(".", 1)[0] for n in of_region}
    assert not list((tmp_path / "out" / "brief" / "figures").glob("vellmark_uplands_orvanne_*.svg"))
    for name in of_districts + of_region:
        if name.endswith(".png"):
            assert paths[name].read_bytes() == run["paths"][name].read_bytes(), name
    assert set(figures) < set(run["paths"])  # with district_svg the district SVG files come on top


def test_context_from_a_run_config(tmp_path):
    from suitability.config import RunConfig

    (tmp_path / "t.tif").write_bytes(b"")
    zones = tmp_path / "districts.gpkg"
    gpd.GeoDataFrame({"district": ["Orvanne"]}, geometry=[box(0, 0, 1, 1)], crs=CRS).to_file(zones)
    cfg = RunConfig.model_validate({
        "region": {"name": REGION, "invented": True,
                   "grid": {"crs": CRS, "resolution": 1000, "bounds": [0, 0, 10000, 10000]}},
        "climate": {"tmin": {"path": str(tmp_path / "t.tif"), "units": "degC"},
                    "tmax": {"path": str(tmp_path / "t.tif"), "units": "degC"},
                    "shortwave": {"path": str(tmp_path / "t.tif"), "units": "MJ m-2 d-1"},
                    "water_availability": {"path": str(tmp_path / "t.tif"), "units": "1"}},
        "physiology": {"c3": {"parameter_set": "c3_temperate_grass", "overrides": {}},
                       "c4": {"parameter_set": "c4_tropical_grass"}},
        "scenarios": [{"name": "now", "co2_ppm": 420}, {"name": "later", "co2_ppm": 560, "temperature_offset_c": 2}],
        "brief": {"zones": str(zones), "name_field": "district"},
    })
    context = brief_context_from_config(cfg, {"now": tmp_path / "now", "later": tmp_path / "later"},
                                        tool_version="1.2.3", time_info={"tmin": {"method": "12-month climatology as given"}})
    assert context.region == REGION and context.baseline == "now"  # no baseline key: the first scenario
    assert [s.name for s in context.compared] == ["later"]
    assert context.scenario("later").temperature_offset_c == 2 and context.scenario("now").is_baseline
    assert context.c3_parameter_set == "C3 temperate grass" and context.c4_parameter_set == "C4 tropical grass"
    # The model actually used, only that one: c4_tropical_grass runs the Collatz et al. (1992) model.
    assert any("Collatz, Ribas-Carbo & Berry (1992)" in s for s in context.models)
    assert not any("von Caemmerer (2000)" in s for s in context.models)
    assert not any("CSIRO" in r for r in context.references)
    assert any(r.startswith("Collatz, G.J., Ribas-Carbo") for r in context.references)
    assert any("Invented region" in note for note in context.notes)
    assert context.climate_data[0] == "Today's climate: tmin, tmax, shortwave, water_availability from t.tif (12-month climatology as given)."
    assert context.per_district is False and context.district_svg is False  # the defaults of the brief section
    with_svg = cfg.model_copy(update={"brief": cfg.brief.model_copy(update={"per_district": True, "district_svg": True})})
    assert brief_context_from_config(with_svg, {"now": tmp_path / "now", "later": tmp_path / "later"}).district_svg


def test_the_district_table_is_rounded_and_has_a_data_dictionary(run):
    table = pd.read_csv(run["paths"]["vellmark_uplands_districts.csv"])
    dictionary = pd.read_csv(run["paths"]["vellmark_uplands_districts.columns.csv"], keep_default_na=False)
    assert list(dictionary["column"]) == list(table.columns)  # every column explained, in order
    units = dict(zip(dictionary["column"], dictionary["units"]))
    assert units["district_area_ha"] == "ha" and units["share_c4"] == "0-1" and units["flag"] == ""
    assert units["c3_assimilation_mean"] == "g C m-2"
    # Rounding (common practice, no source): hectares to 0.01, fractions and means to 4 decimals.
    for column in table.columns:
        values = table[column].dropna()
        if column.endswith("_ha") and len(values):
            assert ((values * 100 - (values * 100).round()).abs() < 1e-6).all(), column
        elif column.startswith("share_") and len(values):
            assert ((values * 1e4 - (values * 1e4).round()).abs() < 1e-6).all(), column


def test_pages_are_the_same_whoever_draws_them(run, tmp_path):
    # The reference is the brief written in this process alone (workers=0); with worker processes drawing
    # the district figures and rendering the PDFs, every HTML page (figures embedded, the count of map
    # labels left out included), every figure and every PDF's text must be the same.
    serial = build_brief(run["context"], tmp_path / "serial", workers=0)
    parallel = build_brief(run["context"], tmp_path / "parallel", workers=2)
    assert list(serial) == list(parallel)
    # the scenario's brief, today's, and one per district (per_district), which the workers draw
    assert len([name for name in serial if name.endswith(".html")]) == 2 + len(DISTRICTS)
    for name, path in serial.items():
        other = parallel[name]
        if name.endswith(".pdf"):
            assert [p.extract_text() for p in pypdf.PdfReader(path).pages] == \
                   [p.extract_text() for p in pypdf.PdfReader(other).pages], name
        elif name.endswith((".html", ".png", ".csv")):
            assert path.read_bytes() == other.read_bytes(), name
