"""The extension registries: output layers (suitability.variables) and input readers (suitability.inputs),
and the one atomic-write helper every writer uses.

A new output layer or input format is one registry entry plus its tests; these tests check that the
entries are complete and that everything reads them (the model's layers, the change layers, the readers).
"""

from __future__ import annotations

import numpy as np
import pytest
import rioxarray  # noqa: F401 - registers the .rio accessor
import xarray as xr

from suitability import indicators
from suitability.atomic import atomic_write
from suitability.caution import CAUTION
from suitability.config import LayerSpec
from suitability.errors import InputDataError, OutputError
from suitability.inputs import READERS, Reader, layer_files, open_layer, reader_for
from suitability.inputs.native import Native
from suitability.model import MONTHLY_LAYERS, SEASONAL_LAYERS
from suitability.variables import (
    CHANGE,
    CLASS_NODATA,
    DATACUBE,
    DERIVED,
    ENSEMBLE,
    OUTPUT_LAYERS,
    OUTPUT_VARIABLES,
    SEASONAL,
    UNCERTAINTY,
    layer_names,
)

# --- output layers -----------------------------------------------------------------------------------------


def test_every_output_layer_has_a_known_kind_and_a_valid_range():
    for name, layer in OUTPUT_LAYERS.items():
        assert layer.kind in (SEASONAL, CHANGE, DATACUBE, ENSEMBLE, DERIVED, UNCERTAINTY), name
        low, high = layer.valid_range
        assert low < high, name


def test_the_model_returns_the_registered_seasonal_and_monthly_layers_in_registry_order():
    assert SEASONAL_LAYERS == layer_names(SEASONAL)
    assert MONTHLY_LAYERS == layer_names(DATACUBE)
    # what output.layers may ask for: every GeoTIFF layer, none of the datacube's
    assert list(OUTPUT_VARIABLES) == list(layer_names(SEASONAL, CHANGE, ENSEMBLE, UNCERTAINTY))


def test_ensemble_and_uncertainty_layers_name_an_indicator():
    for name in layer_names(ENSEMBLE, UNCERTAINTY):
        assert callable(getattr(indicators, OUTPUT_LAYERS[name].indicator)), name


def test_change_layers_name_an_indicator_and_a_seasonal_layer_to_compare():
    for name in layer_names(CHANGE):
        layer = OUTPUT_LAYERS[name]
        assert callable(getattr(indicators, layer.indicator)), name
        compared = OUTPUT_LAYERS[layer.compares]
        assert compared.kind == SEASONAL and compared.required, name  # written for the baseline whatever is asked
        assert compared.categorical == layer.categorical, name


def test_change_indicators_give_the_documented_codes():
    # Derived here from the registry's long names: class_transition = baseline * 10 + scenario, 255 nodata;
    # advantage_change = scenario - baseline.
    base = np.array([1, 3, 2, CLASS_NODATA], np.uint8)
    scen = np.array([3, 1, 2, 1], np.uint8)
    transition = getattr(indicators, OUTPUT_LAYERS["class_transition"].indicator)(base, scen)
    assert transition.tolist() == [13, 31, 22, CLASS_NODATA]
    assert set(transition[:3].tolist()) <= set(OUTPUT_LAYERS["class_transition"].legend)
    change = getattr(indicators, OUTPUT_LAYERS["advantage_change"].indicator)(np.array([0.2]), np.array([-0.1]))
    assert change == pytest.approx([-0.3])


def test_categorical_layers_have_a_colour_for_every_code_and_a_transparent_nodata():
    categorical = [name for name, layer in OUTPUT_LAYERS.items() if layer.categorical]
    assert set(categorical) == {"pathway_class", "class_transition", "change_agreement", "confidence_class"}
    for name in categorical:
        layer = OUTPUT_LAYERS[name]
        assert set(layer.colours) == set(layer.legend) | {CLASS_NODATA}, name
        assert layer.colours[CLASS_NODATA][3] == 0, name
        assert layer.resampling == "mode", name  # overviews of class codes must not average them


# --- input readers -----------------------------------------------------------------------------------------


def test_each_path_goes_to_the_reader_that_recognises_it(tmp_path):
    store = tmp_path / "tmax.zarr"
    (store / "tmax").mkdir(parents=True)
    (store / ".zgroup").write_text("{}")
    (store / "tmax" / "0.0.0").write_bytes(b"x")
    assert reader_for(tmp_path / "t.nc").name == "netcdf"
    assert reader_for(store).name == "zarr"
    assert reader_for(tmp_path / "t.tif").name == "geotiff"  # the last entry takes every other path
    assert list(READERS)[-1] == "geotiff"
    assert layer_files(LayerSpec(path=store)) == sorted([store / ".zgroup", store / "tmax" / "0.0.0"])


def test_a_reader_refuses_the_option_of_another_format(tmp_path):
    path = tmp_path / "tmin.tif"
    path.write_bytes(b"")
    with pytest.raises(InputDataError, match="applies to NetCDF/Zarr"):
        open_layer("tmin", LayerSpec(path=path, variable="tasmin", units="K"))


def test_a_format_is_added_by_one_registry_entry(tmp_path, monkeypatch):
    # A toy format: a file ending in .toy holds a 2 x 3 elevation grid in km (values made up here).
    def read_toy(name, path, *, band, variable, nodata, monthly, chunk):
        values = np.array([[0.1, 0.2, 0.3], [1.0, 1.5, 2.0]], np.float32)
        data = xr.DataArray(values, dims=("y", "x"), coords={"y": [-20.5, -21.5], "x": [55.5, 56.5, 57.5]})
        return Native(data.rio.write_crs("EPSG:4326"), "toy", "km")

    toy = Reader("toy", lambda path: path.suffix == ".toy", read_toy)
    monkeypatch.setattr("suitability.inputs.readers.READERS", {"toy": toy, **READERS})
    path = tmp_path / "dem.toy"
    path.write_bytes(b"")
    layer = open_layer("elevation", LayerSpec(path=path), chunk=8)
    # 1 km = 1000 m (SI definition); the file's units attribute is used when the config gives none
    np.testing.assert_allclose(layer.values, [[100.0, 200.0, 300.0], [1000.0, 1500.0, 2000.0]], rtol=1e-6)
    assert layer.attrs["units"] == "m" and layer.attrs["declared_units"] == "km"


# --- the one atomic writer, the one caution -------------------------------------------------------------------


def test_a_failed_write_leaves_the_old_file_and_no_temporary(tmp_path):
    target = tmp_path / "table.csv"
    target.write_text("old\n")

    def half_then_fail(temporary):
        temporary.write_text("new, but cut off")
        raise OSError("simulated failure half-way")

    with pytest.raises(OutputError, match="table.csv: cannot write the table: simulated failure"):
        atomic_write(target, half_then_fail, what="the table")
    assert target.read_text() == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["table.csv"]
    atomic_write(target, lambda temporary: temporary.write_text("new\n"))
    assert target.read_text() == "new\n" and sorted(p.name for p in tmp_path.iterdir()) == ["table.csv"]


def test_the_caution_is_one_text_shared_by_the_run_result_and_the_briefs():
    from suitability.pipeline import RunResult
    from suitability.reports.brief import BriefContext

    assert RunResult.__dataclass_fields__["caution"].default is CAUTION
    assert BriefContext.__dataclass_fields__["caution"].default is CAUTION
    # README / rules: results are potential estimates, not yield forecasts; defer to local advice
    for phrase in ("not yield forecasts", "local agronomic advice", "field trials", "local regulations"):
        assert phrase in CAUTION
