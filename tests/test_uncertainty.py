"""Parameter uncertainty: declared spreads, seeded draws, probability layers, paired change (issue 11).

Sources beside each check. The climate values are synthetic (tests/test_model.py's grid).
"""

from __future__ import annotations

import dask
import numpy as np
import pytest

from suitability import indicators, model
from suitability.physiology import PARAMETER_SETS, resolve_params
from suitability.physiology.params import register_parameter_set
from suitability.physiology.uncertainty import (
    PARAMETER_UNCERTAINTY,
    Spread,
    draw_parameters,
    register_uncertainty,
    spreads_of,
    unit_sample,
    varied_parameters,
)
from suitability.variables import OUTPUT_LAYERS

from test_model import synthetic_climate


@pytest.fixture(autouse=True)
def _registries_restored():
    """Sets and spreads registered by a test are removed after it: other tests (e.g. the starter template's
    list of every set) see only the package's own."""
    sets = {pathway: dict(named) for pathway, named in PARAMETER_SETS.items()}
    spreads = dict(PARAMETER_UNCERTAINTY)
    yield
    for pathway, named in sets.items():
        PARAMETER_SETS[pathway].clear()
        PARAMETER_SETS[pathway].update(named)
    PARAMETER_UNCERTAINTY.clear()
    PARAMETER_UNCERTAINTY.update(spreads)

TEMPERATURES = [4.0, 12.0, 18.0, 24.0, 32.0]
UNCERTAINTY = {"draws": 12, "seed": 7}


# --- the declarations and the draws ------------------------------------------------------------------------


def test_every_parameter_set_declares_spreads_that_hold_its_own_value():
    for pathway, sets in PARAMETER_SETS.items():
        for name in sets:
            spreads = PARAMETER_UNCERTAINTY[name]
            assert spreads, name
            resolved = resolve_params(pathway, name)
            for spread in spreads:
                centre = 1.0 if spread.relative else resolved[spread.key]
                assert spread.low <= centre <= spread.high, (name, spread.key)
                assert spread.source.strip(), (name, spread.key)


def test_the_default_pair_varies_the_parameters_the_issue_names():
    keys = {(row["pathway"], row["key"]) for row in varied_parameters()}
    # Issue 11: C4 quantum yield, capacities, Jmax/Vcmax, g1, temperature-response terms.
    assert {("C4", "alpha"), ("C3", "vcmax25"), ("C4", "vmax25"), ("C3", "jmax_ratio_factor"), ("C3", "g1"), ("C4", "g1"),
            ("C4", "low_temperature_c"), ("C4", "q10")} <= keys


def test_declared_ranges_match_their_sources():
    grass = {s.key: s for s in PARAMETER_UNCERTAINTY["c3_temperate_grass"]}
    # Kattge et al. (2009) Table 3, C3 herbaceous Vcmax25 78.2 +- 31.1 (from memory), declared as mean +- 2 sd.
    assert (grass["vcmax25"].low, grass["vcmax25"].high) == pytest.approx((78.2 - 62.2, 78.2 + 62.2))
    alpha = {s.key: s for s in PARAMETER_UNCERTAINTY["c4_tropical_grass"]}["alpha"]
    # Collatz et al. (1992) fitted 0.04; Ehleringer & Pearcy (1983) NADP-ME grasses 0.065.
    assert (alpha.low, alpha.high) == (0.04, 0.065)


def test_latin_hypercube_puts_one_draw_in_each_stratum_of_every_parameter():
    # McKay, Beckman & Conover (1979): n draws, each of the n equal strata of every dimension sampled once.
    sample = unit_sample(20, 5, seed=3)
    for column in sample.T:
        assert sorted(np.floor(column * 20).astype(int)) == list(range(20))


def test_draws_are_seeded_and_a_truncated_normal_keeps_its_declared_range():
    first = draw_parameters(None, None, 16, seed=5)
    assert first == draw_parameters(None, None, 16, seed=5)
    assert first != draw_parameters(None, None, 16, seed=6)
    vcmax = np.array([c3["vcmax25"] for c3, _ in first])
    spread = spreads_of("C3")[0]
    assert spread.key == "vcmax25" and ((vcmax >= spread.low) & (vcmax <= spread.high)).all()
    # Derived here: the median of a normal truncated symmetrically about its mean is the mean.
    assert float(spread.quantile(0.5)) == pytest.approx(78.2)


def test_jmax_varies_as_a_factor_on_the_jmax_derived_from_the_drawn_vcmax_and_still_follows_tg():
    from suitability.physiology.params import jmax25_is_derived, resolve_params

    factors = []
    for c3, _ in draw_parameters(None, None, 10, seed=2):
        resolved = resolve_params("C3", c3)
        # Kattge & Knorr (2007): Jmax25 = (2.59 - 0.035 Tg) Vcmax25, Tg 25 °C -> 1.715; the declared +-20 %.
        ratio = resolved["jmax25"] / resolved["vcmax25"]
        assert 0.8 * 1.715 - 1e-9 <= ratio <= 1.2 * 1.715 + 1e-9
        # A drawn Jmax stays "derived", so under acclimation it follows each cell's growth temperature.
        assert jmax25_is_derived(resolved)
        factors.append(c3["jmax_ratio_factor"])
    assert min(factors) < 0.9 and max(factors) > 1.1  # Latin hypercube: 10 strata over 0.8..1.2


def test_an_overridden_parameter_is_held_and_the_others_keep_their_draws():
    held = draw_parameters(None, {"alpha": 0.05}, 8, seed=4)
    free = draw_parameters(None, None, 8, seed=4)
    for (c3_held, c4_held), (c3_free, c4_free) in zip(held, free):
        assert c4_held["alpha"] == 0.05
        assert c3_held == c3_free
        assert {k: v for k, v in c4_held.items() if k != "alpha"} == {k: v for k, v in c4_free.items() if k != "alpha"}


def test_a_set_without_declared_spreads_is_refused_by_name():
    register_parameter_set("C4", "test_unc_undeclared", dict(PARAMETER_SETS["C4"]["c4_tropical_grass"]))
    with pytest.raises(ValueError, match="test_unc_undeclared.*declares no uncertainty"):
        draw_parameters(None, "test_unc_undeclared", 4, seed=0)


# --- indicators ---------------------------------------------------------------------------------------------


def test_confidence_class_thresholds():
    # indicators.LIKELY_SHARE / ROBUST_SHARE after the IPCC calibrated language (Mastrandrea et al. 2010,
    # from memory): likely >= 66 %, very likely >= 90 %.
    p_c3 = np.array([0.95, 0.7, 0.3, 0.0, 0.0, np.nan])
    p_c4 = np.array([0.0, 0.1, 0.5, 0.7, 0.9, 0.5])
    assert indicators.confidence_class(p_c3, p_c4).tolist() == [1, 2, 3, 4, 5, 255]
    assert set(OUTPUT_LAYERS["confidence_class"].legend) == {1, 2, 3, 4, 5}


def test_paired_indicators_on_hand_made_draws():
    # Derived here from the definitions: shares over 4 paired draws.
    base = np.array([[-0.2], [0.0], [0.1], [0.3]])
    scen = np.array([[-0.1], [0.0], [-0.1], [0.4]])
    assert indicators.towards_c4_probability(base, scen).tolist() == [0.5]  # draws 1 and 4 rise
    assert indicators.class_change_probability(base, scen, 0.05).tolist() == [0.25]  # draw 3: C4 -> C3
    assert indicators.favoured_probability(scen, 0.05, "C4").tolist() == [0.25]
    assert indicators.favoured_probability(scen, 0.05, "C3").tolist() == [0.5]


# --- the model ---------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def result():
    return model.evaluate(synthetic_climate(TEMPERATURES), {"co2_ppm": 420}, uncertainty=UNCERTAINTY)


def test_probabilities_lie_in_0_1_and_the_quantiles_are_ordered(result):
    for name in ("c4_advantage_probability", "c3_advantage_probability"):
        values = result[name].values
        assert ((values >= 0) & (values <= 1)).all(), name
    assert (result["c4_advantage_probability"] + result["c3_advantage_probability"] <= 1 + 1e-6).all()
    p05, p50, p95 = (result[f"advantage_p{q}"].values for q in ("05", "50", "95"))
    assert (p05 <= p50).all() and (p50 <= p95).all()
    # Ehleringer et al. (1997): C4 favoured in warm climates, C3 in cool ones; so along the gradient the
    # probability of C4 advantage rises from the coolest to the warmest column.
    p = result["c4_advantage_probability"].values[0]
    assert p[0] < p[-1]


def test_results_are_bitwise_equal_across_chunk_sizes_and_schedulers(result):
    layers = model.UNCERTAINTY_LAYERS[:6]
    for chunks, scheduler in ((True, "threads"), (True, "synchronous")):
        chunked = model.evaluate(synthetic_climate(TEMPERATURES, chunks=chunks), {"co2_ppm": 420},
                                 uncertainty=UNCERTAINTY)
        with dask.config.set(scheduler=scheduler):
            computed = chunked.compute()
        for name in layers:
            np.testing.assert_array_equal(computed[name].values, result[name].values, err_msg=name)


def test_shifting_a_parameter_that_favours_c4_never_lowers_the_probability():
    # Collatz et al. (1992) eq. 2: the C4 light-limited rate is alpha x absorbed PAR, so a larger quantum
    # yield raises C4 assimilation in every draw; FvCB (Farquhar et al. 1980): a lower C3 Vcmax lowers C3's.
    # A parameter set in the config is held in every draw while the others keep their draws.
    climate = synthetic_climate(TEMPERATURES)
    probabilities = []
    for c3, c4 in (({"vcmax25": 90.0}, {"alpha": 0.045}), ({"vcmax25": 90.0}, {"alpha": 0.055}),
                   ({"vcmax25": 50.0}, {"alpha": 0.055})):
        physiology = {"c3": {"overrides": c3}, "c4": {"overrides": c4}}
        out = model.evaluate(climate, {"co2_ppm": 420}, physiology=physiology, uncertainty=UNCERTAINTY)
        probabilities.append(out["c4_advantage_probability"].values)
    assert (probabilities[1] >= probabilities[0]).all() and (probabilities[2] >= probabilities[1]).all()
    assert (probabilities[2] > probabilities[0]).any()


def _zero_spread_set(pathway: str, base: str) -> str:
    name = f"test_unc_zero_{base}"
    if name not in PARAMETER_SETS[pathway]:
        register_parameter_set(pathway, name, dict(PARAMETER_SETS[pathway][base]))
        resolved = resolve_params(pathway, name)
        register_uncertainty(name, [Spread(s.key, 1.0 if s.relative else resolved[s.key],
                                           1.0 if s.relative else resolved[s.key], s.shape, "zero spread, test",
                                           relative=s.relative) for s in PARAMETER_UNCERTAINTY[base]])
    return name


def test_with_zero_spread_every_draw_is_the_deterministic_run():
    # Derived here: when every spread has zero width, each draw is the set itself, so each quantile equals
    # the deterministic advantage and the probabilities are 0 or 1 as the deterministic class says.
    physiology = {"c3": {"parameter_set": _zero_spread_set("C3", "c3_temperate_grass")},
                  "c4": {"parameter_set": _zero_spread_set("C4", "c4_tropical_grass")}}
    out = model.evaluate(synthetic_climate(TEMPERATURES), {"co2_ppm": 420}, physiology=physiology,
                         uncertainty=UNCERTAINTY)
    advantage = out["pathway_advantage"].values
    for q in ("05", "50", "95"):
        np.testing.assert_array_equal(out[f"advantage_p{q}"].values, advantage)
    np.testing.assert_array_equal(out["c4_advantage_probability"].values, (out["pathway_class"].values == 3) * 1.0)
    np.testing.assert_array_equal(out["c3_advantage_probability"].values, (out["pathway_class"].values == 1) * 1.0)


def test_paired_change_identity_and_the_direction_of_a_co2_rise():
    climate = synthetic_climate(TEMPERATURES)
    same = model.evaluate(climate, {"co2_ppm": 420}, uncertainty=UNCERTAINTY, baseline={"co2_ppm": 420})
    # Derived here: the same climate and the same draw give the same advantage, so nothing moves.
    assert (same["towards_c4_probability"].values == 0).all()
    assert (same["class_change_probability"].values == 0).all()
    richer = model.evaluate(climate, {"co2_ppm": 700}, uncertainty=UNCERTAINTY, baseline={"co2_ppm": 420})
    # Ehleringer et al. (1997) Oecologia 112:285: rising CO2 favours C3 (its photorespiration falls), so
    # in no draw does 700 ppm move a cell towards C4.
    assert (richer["towards_c4_probability"].values == 0).all()
    assert (richer["class_change_probability"].values > 0).any()


def test_uncertainty_layers_only_with_draws():
    plain = model.evaluate(synthetic_climate([20.0]), {"co2_ppm": 420})
    assert not set(model.UNCERTAINTY_LAYERS) & set(plain.data_vars)


# --- config, check, run, manifest ---------------------------------------------------------------------------


def _uncertain_demo(folder, **uncertainty):
    import yaml

    from conftest import write_demo_config

    path = write_demo_config(folder, brief=None, uncertainty={"draws": 4, "seed": 11, **uncertainty})
    config = yaml.safe_load(path.read_text())
    config["scenarios"] = config["scenarios"][:2]  # the baseline and a CO2-only scenario
    config["region"]["grid"]["bounds"] = [300000, 7300000, 360000, 7340000]  # a corner: 60 x 40 cells
    path.write_text(yaml.safe_dump(config, sort_keys=False))
    return path


def test_the_config_refuses_too_few_draws_and_unknown_keys(tmp_path):
    from suitability.config import load_config
    from suitability.errors import ConfigError

    with pytest.raises(ConfigError, match="draws"):
        load_config(_uncertain_demo(tmp_path, draws=1))
    with pytest.raises(ConfigError, match="samples"):
        load_config(_uncertain_demo(tmp_path, samples=3))


def test_check_lists_the_draws_and_the_run_writes_and_records_them(tmp_path):
    import json

    import rasterio
    from typer.testing import CliRunner

    import suitability
    from suitability.cli import app

    config = _uncertain_demo(tmp_path)
    shown = " ".join(CliRunner().invoke(app, ["check", str(config)], env={"COLUMNS": "200"}).output.split())
    assert "Parameter uncertainty: 4 draws, seed 11, latin_hypercube" in shown
    # The demo's c4_tropical_grass set: from the Collatz et al. (1992) fitted 0.04 up to the NADP-ME grass
    # yield 0.065 of Ehleringer & Pearcy (1983) (suitability/physiology/uncertainty.py, _C4_ALPHA).
    assert "C4 alpha: uniform 0.04..0.065" in shown
    result = suitability.run(config)
    baseline, scenario = result.layers["baseline"], result.layers["co2_only"]
    assert set(model.UNCERTAINTY_LAYERS) - set(model.PAIRED_LAYERS) <= set(baseline)
    assert not set(model.PAIRED_LAYERS) & set(baseline)  # nothing to pair the baseline with
    assert set(model.UNCERTAINTY_LAYERS) <= set(scenario)
    with rasterio.open(scenario["c4_advantage_probability"]) as src:
        values = src.read(1, masked=True)
        assert 0 <= values.min() and values.max() <= 1
    with rasterio.open(baseline["confidence_class"]) as src:
        assert set(np.unique(src.read(1))) <= {1, 2, 3, 4, 5, 255}
        assert src.colormap(1)[5][:3] == (230, 159, 0)  # C4 robust: the C4 class colour
    manifest = json.loads(result.manifest_path.read_text())
    assert manifest["uncertainty"]["draws"] == 4 and manifest["uncertainty"]["seed"] == 11
    assert {row["key"] for row in manifest["uncertainty"]["parameters"]} >= {"alpha", "vcmax25", "g1"}


def test_draws_and_ensemble_members_are_orthogonal(tmp_path):
    # Derived here: every member gets the same draws, so the ensemble's share of (member, draw) pairs
    # favouring C4 is the mean of the members' shares, each member run alone as a scenario.
    import rasterio
    import yaml

    import suitability
    from test_ensembles import MEMBERS, _single, config, write_inputs

    write_inputs(tmp_path)
    singles = [_single(m, [2051, 2060], 560) for m in MEMBERS]
    path = config(tmp_path, singles)
    cfg = yaml.safe_load(path.read_text())
    cfg["uncertainty"] = {"draws": 3, "seed": 2}
    cfg["scenarios"] = [s for s in cfg["scenarios"] if s["name"] != "mid"]
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    layers = suitability.run(path).layers

    def read(scenario, name):
        with rasterio.open(layers[scenario][name]) as src:
            return src.read(1)

    for name in ("c4_advantage_probability", "towards_c4_probability", "class_change_probability"):
        pooled = np.mean([read(f"late_{m}", name) for m in MEMBERS], axis=0)
        np.testing.assert_allclose(read("late", name), pooled, atol=1e-6, err_msg=name)
    assert set(np.unique(read("late", "confidence_class"))) <= {1, 2, 3, 4, 5, 255}


def test_member_outputs_with_draws_write_each_members_draw_layers_and_keep_the_ensemble_layers(tmp_path):
    # Derived here: writing the members' layers (output.member_outputs) must not change the ensemble's layers
    # in any pixel, and each member's draw layers must be those of the member run alone. (An earlier version
    # re-read the ensemble's layers from the members' files and stopped with KeyError
    # 'c4_advantage_probability': only the members' seasonal layers were written.)
    import rasterio
    import yaml

    import suitability
    from test_ensembles import MEMBERS, _single, config, write_inputs

    write_inputs(tmp_path)
    path = config(tmp_path, [_single(m, [2031, 2040], 480) for m in MEMBERS])
    cfg = yaml.safe_load(path.read_text())
    cfg["uncertainty"] = {"draws": 3, "seed": 4}
    cfg["scenarios"] = [s for s in cfg["scenarios"] if s["name"] != "late"]  # the member-dimension file: not needed
    layers = {}
    for member_outputs in (False, True):
        cfg["output"].update(member_outputs=member_outputs, folder=f"out_{member_outputs}")
        path.write_text(yaml.safe_dump(cfg, sort_keys=False))
        layers[member_outputs] = suitability.run(path).layers

    def read(path):
        with rasterio.open(path) as src:
            return src.read(1)

    assert set(layers[True]["mid"]) > set(layers[False]["mid"])  # plus members/<member>/<layer>
    for name, written in layers[False]["mid"].items():
        if str(written).endswith(".tif"):
            np.testing.assert_array_equal(read(layers[True]["mid"][name]), read(written), err_msg=name)
    for member in MEMBERS:
        for name in ("c4_advantage_probability", "advantage_p50", "towards_c4_probability", "confidence_class"):
            np.testing.assert_array_equal(read(layers[True]["mid"][f"members/{member}/{name}"]),
                                          read(layers[True][f"mid_{member}"][name]), err_msg=f"{member} {name}")


def test_sensitivity_lists_each_varied_parameter_with_both_ends(tmp_path):
    from typer.testing import CliRunner

    from suitability.cli import app
    from suitability.config import load_config
    from suitability.sensitivity import one_at_a_time

    config = _uncertain_demo(tmp_path)
    table = one_at_a_time(load_config(config))
    varied = {f"{r['pathway']} {r['key']}" for r in varied_parameters("c3_temperate_grass", "c4_tropical_grass")}
    assert set(table["parameter"]) == varied | {"central"}
    shares = table[["C3 favoured %", "contested %", "C4 favoured %"]].sum(axis=1)
    np.testing.assert_allclose(shares, 100.0, rtol=1e-9)
    c4 = table.set_index(["parameter", "end"])["C4 favoured %"]
    # Collatz et al. (1992) eq. 2: a larger C4 quantum yield raises C4 assimilation; FvCB (Farquhar et al.
    # 1980): a larger C3 Vcmax raises C3 assimilation. So the C4 share moves with alpha and against Vcmax.
    assert c4[("C4 alpha", "high")] >= c4[("C4 alpha", "low")]
    assert c4[("C3 vcmax25", "high")] <= c4[("C3 vcmax25", "low")]
    swings = table.dropna(subset=["C4 share swing %"])["C4 share swing %"].abs().tolist()
    assert swings == sorted(swings, reverse=True)  # largest swing first
    shown = CliRunner().invoke(app, ["sensitivity", str(config), "--out", str(tmp_path / "sens")])
    assert shown.exit_code == 0, shown.output
    assert (tmp_path / "sens" / "sensitivity.png").stat().st_size > 0
    assert "largest swing first" in shown.output and "not yield forecasts" in shown.output


def test_sobol_draws_come_in_powers_of_two_and_the_seed_is_part_of_the_scenario_hash(tmp_path):
    from suitability.config import load_config
    from suitability.errors import ConfigError
    from suitability.provenance import input_checksums
    from suitability.resume import scenario_hash

    # Sobol (1967), from memory: the sequence's balance holds for 2^k points (scipy.stats.qmc warns otherwise).
    with pytest.raises(ConfigError, match="power of 2"):
        load_config(_uncertain_demo(tmp_path, method="sobol", draws=12))
    assert len(draw_parameters(None, None, 8, seed=1, method="sobol")) == 8
    # resume.py: outputs depend on the draws, so a new seed must recompute them (derived here).
    hashes = []
    for seed in (1, 2):
        cfg = load_config(_uncertain_demo(tmp_path, seed=seed))
        hashes.append(scenario_hash(cfg, cfg.baseline_scenario, ["pathway_class"], input_checksums(cfg)))
    assert hashes[0] != hashes[1]


def test_parameters_shows_a_sets_published_spread():
    from typer.testing import CliRunner

    from suitability.cli import app

    shown = " ".join(CliRunner().invoke(app, ["parameters", "c4_tropical_grass"], env={"COLUMNS": "200"}).output.split())
    # The declared range of alpha: Collatz et al. (1992) fit to Ehleringer & Pearcy (1983) NADP-ME.
    assert "C4 alpha: uniform 0.04..0.065" in shown and "Ehleringer & Pearcy (1983)" in shown


def test_the_numpy_engine_gives_the_same_draws():
    # model.py: both engines run the same equations (kernel tested against the numpy physiology within 1e-4
    # relative, tests/test_kernel.py); so the draws' advantage agrees to that order.
    climate = synthetic_climate([10.0, 26.0])
    compiled = model.evaluate(climate, {"co2_ppm": 560}, uncertainty={"draws": 3, "seed": 1}, baseline={"co2_ppm": 420})
    numpy_ = model.evaluate(climate, {"co2_ppm": 560}, uncertainty={"draws": 3, "seed": 1}, baseline={"co2_ppm": 420},
                            engine="numpy")
    for name in ("advantage_p05", "advantage_p50", "advantage_p95"):
        np.testing.assert_allclose(numpy_[name].values, compiled[name].values, atol=1e-4, err_msg=name)


@pytest.mark.slow
def test_draws_are_bitwise_equal_with_worker_processes():
    # dask's process scheduler pickles the settings (with the draws) to other processes: same bits.
    chunked = model.evaluate(synthetic_climate(TEMPERATURES, chunks=True), {"co2_ppm": 420}, uncertainty=UNCERTAINTY)
    reference = model.evaluate(synthetic_climate(TEMPERATURES), {"co2_ppm": 420}, uncertainty=UNCERTAINTY)
    with dask.config.set(scheduler="processes", num_workers=2):
        computed = chunked.compute()
    for name in model.UNCERTAINTY_LAYERS[:6]:
        np.testing.assert_array_equal(computed[name].values, reference[name].values, err_msg=name)


# --------------------------------------------------------------------------- overrides beyond the declared spreads


def test_overrides_outside_the_declared_spread_are_found():
    # c3_temperate_grass declares Vcmax25 78.2 +- 2 x 31.1 (Kattge et al. 2009, Table 3, C3 herbaceous):
    # 16.0..140.4. c4_tropical_grass declares alpha 0.04 (Collatz et al. 1992) .. 0.065 (Ehleringer &
    # Pearcy 1983).
    from suitability.physiology.uncertainty import overrides_outside_spreads

    outside = overrides_outside_spreads("C3", {"parameter_set": "c3_temperate_grass", "vcmax25": 150.0, "g1": 5.0})
    assert [(spread.key, spread.low, spread.high, value) for spread, value in outside] == [
        ("vcmax25", pytest.approx(16.0), pytest.approx(140.4), 150.0)]
    assert overrides_outside_spreads("C3", {"parameter_set": "c3_temperate_grass", "vcmax25": 140.0}) == ()
    assert [s.key for s, _ in overrides_outside_spreads("C4", {"alpha": 0.03})] == ["alpha"]  # default C4 set
    assert overrides_outside_spreads("C4", {"alpha": 0.05}) == ()
    assert overrides_outside_spreads("C3", "c3_temperate_grass") == ()  # no overrides
    # A key without a declared spread has nothing to be compared with.
    assert "rd25" not in {s.key for s in PARAMETER_UNCERTAINTY["c3_temperate_grass"]}
    assert overrides_outside_spreads("C3", {"parameter_set": "c3_temperate_grass", "rd25": 50.0}) == ()


def test_an_override_beyond_its_spread_is_said_where_assumptions_are(demo_config):
    # check, run output, manifest and briefs all show run_assumptions (tests/test_first_hour.py).
    import yaml

    from suitability.assumptions import run_assumptions
    from suitability.config import load_config

    path = demo_config()
    config = yaml.safe_load(path.read_text())
    assert not any("overrides" in note for note in run_assumptions(load_config(path)))
    config["physiology"]["c4"]["overrides"] = {"alpha": 0.03, "q10": 2.0}
    path.write_text(yaml.safe_dump(config))
    notes = [note for note in run_assumptions(load_config(path)) if "overrides" in note]
    assert len(notes) == 1  # q10 2.0 lies inside its 1.8..2.2
    assert notes[0].startswith("physiology.c4.overrides.alpha = 0.03 lies outside the range 0.04..0.065 declared "
                               "for the parameter set 'c4_tropical_grass' (")
