"""Briefs: files, self-contained HTML, numbers in the words, rendering in headless Chromium, the PDF.

The rasters and districts are SYNTHETIC, made up for these tests in an invented region; the district
names (Orvanne, Telmira, Quessel, Far Reach) describe no real place. Sources are named beside each check.
"""

from __future__ import annotations

import re
import shutil
import subprocess
from datetime import date
from html.parser import HTMLParser
from pathlib import Path

import geopandas as gpd
import numpy as np
import pypdf
import pytest
from PIL import Image
from rasterio.transform import from_origin
from shapely.geometry import box

from suitability.errors import ConfigError
from suitability.reports.brief import (
    BriefContext,
    ScenarioInfo,
    brief_context_from_config,
    build_brief,
    hectares_text,
    percent_text,
    summary_sentences,
    warm_season_mean,
)
from suitability.reports.zones import zonal_statistics
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


def _classes(c4_from: int, contested_from: int) -> np.ndarray:
    """C3 left of ``contested_from``, contested up to ``c4_from``, C4 from column ``c4_from`` on."""
    columns = np.broadcast_to(np.arange(40), (30, 40))
    return np.where(columns >= c4_from, CLASS_C4, np.where(columns >= contested_from, CLASS_CONTESTED, CLASS_C3)
                    ).astype("uint8")


def _linear_crossover(co2, o2_percent):
    return 12 + 0.025 * np.asarray(co2, dtype=float)


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    root = tmp_path_factory.mktemp("run")
    columns = np.broadcast_to(np.arange(40), (30, 40))
    base_classes, warm_classes = _classes(24, 22), _classes(16, 14)
    base_adv = -0.4 + 0.02 * columns
    base = write_scenario_folder(root / "present", CRS, TRANSFORM, base_classes, base_adv)
    warm = write_scenario_folder(root / "hotter", CRS, TRANSFORM, warm_classes, base_adv + 0.16,
                                 baseline_classes=base_classes, baseline_advantage=base_adv)
    zones = root / "districts.gpkg"
    gpd.GeoDataFrame({"name": list(DISTRICTS)}, geometry=list(DISTRICTS.values()), crs=CRS).to_file(zones)
    context = BriefContext(
        region=REGION, generated=date(2031, 5, 4), tool_version="9.9.9",
        scenarios=(ScenarioInfo("present", 420, base, "present CO2 and climate", is_baseline=True),
                   ScenarioInfo("hotter", 650, warm, "650 ppm and 2.5 \u00b0C warmer", temperature_offset_c=2.5)),
        baseline="present", c3_parameter_set="set_a", c4_parameter_set="set_b", zones_path=zones,
        name_field="name", warm_season_temperature_c=24.2, contested_margin=0.05, per_district=True,
        crossover_function=_linear_crossover,
        notes=("All data in this brief are synthetic, made up for a test.",),
    )
    paths = build_brief(context, root / "out")
    table = zonal_statistics(zones, "name", {"present": base, "hotter": warm}, "present")
    return {"root": root, "context": context, "paths": paths, "table": table}


def test_files_are_named_by_region_and_scenario(run):
    names = set(run["paths"])
    expected = {"vellmark_uplands_hotter.html", "vellmark_uplands_hotter.pdf",
                "vellmark_uplands_districts.csv", "vellmark_uplands_districts.gpkg"}
    expected |= {f"vellmark_uplands_{d.lower().replace(' ', '_')}.{ext}" for d in DISTRICTS for ext in ("html", "pdf")}
    assert names == expected  # DESIGN.md: brief/<region>_<scenario>.html and .pdf (+ per district)
    for name, path in run["paths"].items():
        assert path.parent == run["root"] / "out" / "brief" and path.name == name and path.stat().st_size > 0
    assert not [p for p in (run["root"] / "out" / "brief").iterdir() if p.name.startswith(".")]  # no temporaries


class _Resources(HTMLParser):
    def __init__(self):
        super().__init__()
        self.sources: list[str] = []
        self.stylesheets: list[str] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag in ("img", "script", "iframe") and "src" in attrs:
            self.sources.append(attrs["src"])
        if tag == "link":
            self.stylesheets.append(attrs.get("href", ""))

    def handle_data(self, data):
        self.text.append(data)


def test_html_is_self_contained(run):
    parser = _Resources()
    parser.feed(run["paths"]["vellmark_uplands_hotter.html"].read_text(encoding="utf-8"))
    assert len(parser.sources) == 5  # two class maps, one change map, the share chart, the crossover chart
    assert all(src.startswith("data:image/png;base64,") for src in parser.sources)
    assert parser.stylesheets == []


def test_table_numbers_match_hand_derivation(run):
    # Hand derivation from the synthetic layout (whole cells of 100 ha):
    # Orvanne covers columns 10-29: baseline C4 from column 24 -> 6 of 20 columns = 30 %;
    # scenario C4 from column 16 -> 14 of 20 = 70 %; C3 -> C4 on columns 16-21 x 10 rows = 6000 ha.
    table = run["table"].set_index(["district", "scenario"])
    assert table.loc[("Orvanne", "present"), "share_c4"] == pytest.approx(0.30, rel=1e-9)
    assert table.loc[("Orvanne", "hotter"), "share_c4"] == pytest.approx(0.70, rel=1e-9)
    assert table.loc[("Orvanne", "hotter"), "c3_to_c4_ha"] == pytest.approx(6000, rel=1e-9)
    # Telmira, columns 0-19: 0 % C4 today, 4 of 20 columns (16-19) = 20 % in the scenario.
    assert table.loc[("Telmira", "hotter"), "share_c4"] == pytest.approx(0.20, rel=1e-9)


def test_summary_sentences_match_the_table(run):
    table = run["table"]
    sentences = summary_sentences(table, "present", "hotter")
    # Hand derivation (see above): Orvanne 30 % -> 70 %; Telmira 0 % -> 20 %; Quessel (columns 20-39):
    # 16 of 20 columns C4 today (80 %), all 20 in the scenario (100 %).
    assert "Under hotter, the share of Orvanne where C4 crops have the advantage rises from 30 % to 70 %." in sentences
    assert "Under hotter, the share of Telmira where C4 crops have the advantage rises from 0 % to 20 %." in sentences
    assert "Under hotter, the share of Quessel where C4 crops have the advantage rises from 80 % to 100 %." in sentences
    assert any(s.startswith("There are no results for Far Reach (no overlap") for s in sentences)
    # Every percentage pair in a sentence is the table's share, rounded (consistency with the table).
    rows = table.set_index(["district", "scenario"])
    for sentence in sentences:
        match = re.match(r"Under hotter, the share of (.+) where C4 crops have the advantage \w+ from (\d+) % to (\d+) %", sentence)
        if match:
            district, before, after = match.group(1), int(match.group(2)), int(match.group(3))
            assert before == round(100 * rows.loc[(district, "present"), "share_c4"])
            assert after == round(100 * rows.loc[(district, "hotter"), "share_c4"])
    total = rows.xs("hotter", level="scenario")["c3_to_c4_ha"].sum()
    assert f"Across these districts, {hectares_text(total)} change from a C3 advantage to a C4 advantage" in sentences[-1]
    # Hand: C3 today left of column 22, C4 in the scenario from column 16. Orvanne columns 16-21 x 10 rows
    # = 6000 ha; Telmira columns 16-19 x 10 rows = 4000 ha; Quessel columns 20-21 x 20 rows = 4000 ha.
    assert total == pytest.approx(14_000, rel=1e-9)


def test_sentences_say_stays_and_falls():
    import pandas as pd

    table = pd.DataFrame([
        {"district": "Orvanne", "scenario": "a", "share_c4": 0.404, "valid_share": 1.0, "flag": "", "c3_to_c4_ha": 0.0, "c4_to_c3_ha": 0.0},
        {"district": "Orvanne", "scenario": "b", "share_c4": 0.396, "valid_share": 1.0, "flag": "", "c3_to_c4_ha": 0.0, "c4_to_c3_ha": 120.4},
        {"district": "Telmira", "scenario": "a", "share_c4": 0.5, "valid_share": 1.0, "flag": "", "c3_to_c4_ha": 0.0, "c4_to_c3_ha": 0.0},
        {"district": "Telmira", "scenario": "b", "share_c4": 0.25, "valid_share": 1.0, "flag": "", "c3_to_c4_ha": 0.0, "c4_to_c3_ha": 1250.0},
    ])
    sentences = summary_sentences(table, "a", "b")
    # Hand: 40.4 % and 39.6 % both round to 40 %; 50 % -> 25 % falls; 120.4 + 1250 = 1,370 ha.
    assert sentences[0] == "Under b, the share of Orvanne where C4 crops have the advantage stays at 40 %."
    assert sentences[1] == "Under b, the share of Telmira where C4 crops have the advantage falls from 50 % to 25 %."
    assert sentences[2].endswith("0 ha change from a C3 advantage to a C4 advantage and 1,370 ha change from C4 to C3.")
    assert summary_sentences(table, "a", "a", ["Telmira"]) == [
        "Today, C4 crops have the advantage on 50 % of Telmira's mapped land."]


def test_number_words():
    # Hand derivation of the rounding rules.
    assert percent_text(0.184) == "18 %" and percent_text(0.004) == "less than 1 %" and percent_text(0.0) == "0 %"
    assert percent_text(0.004, short=True) == "<1 %" and percent_text(float("nan")) == "no data"
    assert hectares_text(12345.6) == "12,346 ha"
    # warm season: mean of the three warmest months (common practice, no source); hand: (26 + 27 + 25) / 3
    assert warm_season_mean([18, 19, 21, 23, 25, 26, 27, 24, 22, 20, 19, 18]) == pytest.approx(26.0)


def test_bad_context_is_a_config_error(run):
    context = run["context"]
    with pytest.raises(ConfigError, match="baseline 'past' is not among the scenarios present, hotter"):
        BriefContext(**{**context.__dict__, "baseline": "past"})
    with pytest.raises(ConfigError, match="unique"):
        BriefContext(**{**context.__dict__, "scenarios": context.scenarios + context.scenarios[:1]})


def _page_texts(path: Path) -> list[str]:
    return [page.extract_text() for page in pypdf.PdfReader(path).pages]


@pytest.mark.slow  # reads the rendered PDFs
def test_pdf_pages_and_text(run):
    pages = _page_texts(run["paths"]["vellmark_uplands_hotter.pdf"])
    # The template's five sections each start a page: overview, maps, districts, why, assumptions/act.
    assert len(pages) == 5
    assert REGION in pages[0] and "hotter" in pages[0] and "not yield forecasts" in pages[0]
    assert "2031-05-04" in pages[0] and "9.9.9" in pages[0]
    assert "All data in this brief are synthetic" in " ".join(pages[0].split())
    assert pages[1].startswith("Maps")
    assert all(name in pages[2] for name in DISTRICTS)
    assert "Farquhar et al." in pages[3] and "FAO-56" in pages[3]
    flat = " ".join(" ".join(pages).split())
    for phrase in CAUTION_PHRASES:
        assert phrase in flat
    for reference in ("Planta 149", "Plant, Cell & Environment 24", "Australian Journal of Plant Physiology 19",
                      "CSIRO Publishing", "Global Change Biology 17", "Oecologia 114", "Irrigation and Drainage Paper 56"):
        assert reference in flat
    assert "650 ppm" in pages[4] and "+2.5" in pages[4] and "set_a" in pages[4] and "set_b" in pages[4]
    for page in pages:
        assert "page" in page and "not yield forecasts" in page  # the footer on every page


@pytest.mark.slow  # reads the rendered PDFs
def test_per_district_brief_covers_every_scenario(run):
    text = " ".join(" ".join(_page_texts(run["paths"]["vellmark_uplands_orvanne.pdf"])).split())
    assert "Today, C4 crops have the advantage on 30 % of Orvanne's mapped land." in text
    assert "Under hotter, the share of Orvanne where C4 crops have the advantage rises from 30 % to 70 %." in text
    assert "In Orvanne, 6,000 ha change from a C3 advantage to a C4 advantage" in text
    far = " ".join(run["paths"]["vellmark_uplands_far_reach.html"].read_text(encoding="utf-8").split())
    assert "There are no results for Far Reach (no overlap with the output grid)" in far


CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync"]


@pytest.mark.slow  # headless Chromium
@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed (apt-get install chromium)")
def test_html_renders_in_headless_chromium(run, tmp_path):
    html = run["paths"]["vellmark_uplands_hotter.html"]
    url = html.resolve().as_uri()
    screenshot = tmp_path / "brief.png"
    common = [CHROMIUM, *CHROMIUM_FLAGS, f"--user-data-dir={tmp_path / 'profile'}"]
    subprocess.run([*common, f"--screenshot={screenshot}", "--window-size=1200,2000", url],
                   check=True, capture_output=True, timeout=180)
    pixels = np.asarray(Image.open(screenshot).convert("L"), dtype=float)
    assert pixels.shape == (2000, 1200)
    assert pixels.std() > 20  # not blank: text, maps and the caution box make a varied page
    dom = subprocess.run([*common, "--dump-dom", url], check=True, capture_output=True, timeout=180, text=True).stdout
    text = " ".join(re.sub(r"<[^>]+>", " ", dom).split())
    assert REGION in text
    for name in DISTRICTS:
        assert name in text
    for phrase in CAUTION_PHRASES:
        assert phrase in text
    shutil.copy(screenshot, run["root"] / "chromium_screenshot.png")  # kept for a look by eye


def test_context_from_a_run_config(tmp_path):
    from suitability.config import RunConfig

    (tmp_path / "t.tif").write_bytes(b"")
    zones = tmp_path / "districts.gpkg"
    gpd.GeoDataFrame({"district": ["Orvanne"]}, geometry=[box(0, 0, 1, 1)], crs=CRS).to_file(zones)
    cfg = RunConfig.model_validate({
        "region": {"name": REGION, "grid": {"crs": CRS, "resolution": 1000, "bounds": [0, 0, 10000, 10000]}},
        "climate": {"tmin": {"path": str(tmp_path / "t.tif"), "units": "degC"},
                    "tmax": {"path": str(tmp_path / "t.tif"), "units": "degC"},
                    "shortwave": {"path": str(tmp_path / "t.tif"), "units": "MJ m-2 d-1"},
                    "water_availability": {"path": str(tmp_path / "t.tif"), "units": "1"}},
        "physiology": {"c3": {"parameter_set": "bernacchi2001", "overrides": {}}},
        "scenarios": [{"name": "now", "co2_ppm": 420}, {"name": "later", "co2_ppm": 560, "temperature_offset_c": 2}],
        "brief": {"zones": str(zones), "name_field": "district"},
    })
    context = brief_context_from_config(cfg, {"now": tmp_path / "now", "later": tmp_path / "later"},
                                        tool_version="1.2.3", warm_season_temperature_c=22.0)
    assert context.region == REGION and context.baseline == "now"  # no baseline key: the first scenario
    assert [s.name for s in context.compared] == ["later"]
    assert context.scenario("later").temperature_offset_c == 2 and context.scenario("now").is_baseline
    assert context.c3_parameter_set == "bernacchi2001" and context.zones_path == zones
