"""The quick form of the validation (validation/): every band and its source is declared before running;
the model must lie inside each band, except the documented disagreements, which must still disagree (so
the report stays true; if one starts to agree, move it out of KNOWN_DISAGREEMENTS and say so).

Sources and bands: validation/comparisons.py (BANDS, each naming its papers and how far each number
was checked)."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:  # validation/ is a folder of the repository, not of the installed package
    sys.path.insert(0, str(REPO))

from validation.comparisons import BANDS, KNOWN_DISAGREEMENTS, run_all  # noqa: E402
from validation.run import report  # noqa: E402


@pytest.fixture(scope="module")
def outcomes():
    # The report's own settings (64 draws, 1 °C gradient steps): a few seconds once the kernel is compiled,
    # and the grassland rank correlation (0.81 at 64 draws) is too close to its band for 16 draws (0.70).
    return run_all(64, quick=False)


def test_every_band_names_its_source_and_how_far_it_was_checked():
    for band in BANDS.values():
        assert band.sources and band.low < band.high, band.key
        assert all("[P" in source or "[M" in source for source in band.sources), band.key
    assert set(KNOWN_DISAGREEMENTS) <= set(BANDS)


def test_the_quick_validation_bands(outcomes):
    found, _ = outcomes
    assert {o.band.key for o in found} == set(BANDS)
    for outcome in found:
        if outcome.band.key in KNOWN_DISAGREEMENTS:
            assert not outcome.passed, f"{outcome.band.key} now agrees ({outcome.value:.3g}): update the report"
        else:
            assert outcome.passed, f"{outcome.band.key}: {outcome.value:.3g} outside {outcome.band.text()}"


def test_the_report_states_the_bands_before_the_results(outcomes):
    found, figures = outcomes
    text = report(found, figures, 16, 1.0, quick=True)
    assert text.index("declared before running") < text.index("## Results")
    assert all(png.startswith(b"\x89PNG") for png in figures.values())
    assert "not yield forecasts" in text
