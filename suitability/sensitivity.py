"""One-at-a-time sensitivity: which parameter moves the region's C3/C4 boundary most.

Each declared spread of both parameter sets (:mod:`suitability.physiology.uncertainty`) is set in turn to the
low and the high end of its published range, the others kept at the set's values, and the model runs on the
config's region for one scenario. The table gives, per parameter and end, the value used and the shares of
the mapped cells (C3 favoured, contested, C4 favoured; cells with a growing season) and the region's mean
advantage index; the swing is the difference of the C4-favoured share between the two ends. This is the
elementary one-at-a-time design (e.g. Saltelli et al. 2008, Global Sensitivity Analysis, ch. 1); it shows
first-order effects only, not interactions, which the ``uncertainty`` draws include.

Order of work as in :mod:`suitability.pipeline`: config -> inputs -> scenario -> model -> class shares ->
table and figure; nothing is re-derived from written files.
"""

from __future__ import annotations

from pathlib import Path
import numpy as np
import pandas as pd

from .config import RunConfig
from .physiology import resolve_params
from .physiology.uncertainty import varied_parameters
from .variables import CLASS_C3, CLASS_C4, CLASS_CONTESTED

#: The caution, short, on the figure (the CLI prints it in full).
CAUTION_SHORT = "Potential, model-based estimates, not yield forecasts; defer to local agronomic advice and field trials."
SENSITIVITY_CSV = "sensitivity.csv"
SENSITIVITY_PNG = "sensitivity.png"
_SHARES = {"C3 favoured %": CLASS_C3, "contested %": CLASS_CONTESTED, "C4 favoured %": CLASS_C4}


def class_shares(classes: np.ndarray, advantage: np.ndarray) -> dict[str, float]:
    """Shares [%] of the mapped cells (C3 favoured, contested, C4 favoured) and their mean advantage."""
    mapped = np.isin(classes, list(_SHARES.values()))
    count = int(mapped.sum())
    shares = {label: 100.0 * float((classes == code).sum()) / count if count else float("nan")
              for label, code in _SHARES.items()}
    shares["mean advantage"] = float(np.nanmean(np.where(mapped, advantage, np.nan))) if count else float("nan")
    shares["mapped cells"] = count
    return shares


def one_at_a_time(cfg: RunConfig, scenario: str | None = None) -> pd.DataFrame:
    """The one-at-a-time table for ``scenario`` (default the baseline) of a validated config.

    Rows: "central" (the sets as configured), then per varied parameter its "low" and "high" ends, with
    pathway, key, value, the source of the range, the class shares, the mean advantage and (on the "high"
    row) the swing of the C4-favoured share, sorted by the size of the swing. Parameters overridden in the
    config are held and not listed.
    """
    import dask

    from .grid import TargetGrid
    from .inputs import load_climate
    from .model import evaluate
    from .pipeline import _model_inputs

    chosen = cfg.scenario(scenario or cfg.baseline)
    grid = TargetGrid.from_region(cfg.region, cfg.config_dir)
    today = load_climate(cfg.climate, grid, cfg.config_dir, cfg.compute.chunk_size)
    climate = _model_inputs(cfg, grid, today)
    own = load_climate(chosen.climate, grid, cfg.config_dir, cfg.compute.chunk_size) if chosen.climate else None
    base = {"c3": cfg.physiology.c3.as_params(), "c4": cfg.physiology.c4.as_params()}

    def shares_with(c3: dict, c4: dict) -> dict[str, float]:
        physiology = cfg.physiology.model_copy(update={
            "crossover_temperature": False,  # only the classes and the advantage are read
            "c3": cfg.physiology.c3.model_copy(update={"overrides": {k: v for k, v in c3.items() if k != "parameter_set"}}),
            "c4": cfg.physiology.c4.model_copy(update={"overrides": {k: v for k, v in c4.items() if k != "parameter_set"}}),
        })
        result = evaluate(climate, chosen, physiology=physiology, season=cfg.season, classes=cfg.classes,
                          scenario_layers=own, engine=cfg.compute.engine)
        classes, advantage = dask.compute(result["pathway_class"].data, result["pathway_advantage"].data)
        return class_shares(np.asarray(classes), np.asarray(advantage))

    rows = [{"parameter": "central", "pathway": "", "end": "central", "value": float("nan"), "source": "",
             **shares_with(base["c3"], base["c4"])}]
    for spread in (row for row in varied_parameters(base["c3"], base["c4"]) if row["varied"]):
        pathway = spread["pathway"]
        key = pathway.lower()
        ends = []
        for end in ("low", "high"):
            value = spread[end]
            if spread["relative"]:
                value *= resolve_params(pathway, base[key])[spread["key"]]
            changed = {**base, key: {**base[key], spread["key"]: float(value)}}
            ends.append({"parameter": f"{pathway} {spread['key']}", "pathway": pathway, "end": end, "value": value,
                         "source": spread["source"], **shares_with(changed["c3"], changed["c4"])})
        swing = ends[1]["C4 favoured %"] - ends[0]["C4 favoured %"]
        ends[0]["C4 share swing %"], ends[1]["C4 share swing %"] = float("nan"), swing
        rows.extend(ends)
    table = pd.DataFrame(rows)
    order = table.groupby("parameter")["C4 share swing %"].max().abs().fillna(np.inf).sort_values(ascending=False)
    table["_order"] = table["parameter"].map({name: i for i, name in enumerate(order.index)})
    return table.sort_values(["_order", "end"], kind="stable").drop(columns="_order").reset_index(drop=True)


def sensitivity_figure(table: pd.DataFrame, title: str) -> bytes:
    """PNG bytes: per parameter, the C4-favoured share at the low and the high end of its range, around
    the central run (a bar chart of our own design)."""
    import io

    from matplotlib.figure import Figure

    central = float(table.loc[table["end"] == "central", "C4 favoured %"].iloc[0])
    params = [p for p in dict.fromkeys(table["parameter"]) if p != "central"]
    figure = Figure(figsize=(7.5, 0.45 * len(params) + 1.6), dpi=120)
    axes = figure.add_subplot()
    for i, name in enumerate(reversed(params)):
        rows = table[table["parameter"] == name].set_index("end")
        # neutral greys: the class colours would read as "C3"/"C4" rather than as the ends of a range
        for end, colour in (("low", "#A8A8A8"), ("high", "#4A4A4A")):
            value = float(rows.loc[end, "C4 favoured %"])
            axes.barh(i, value - central, left=central, height=0.6, color=colour, alpha=0.9,
                      label=f"{end} end of the range" if i == 0 else None)
    axes.axvline(central, color="#222222", linewidth=1)
    axes.set_yticks(range(len(params)), list(reversed(params)))
    axes.set_xlabel("share of mapped cells where C4 is favoured [%]")
    axes.set_title(title, fontsize=10)
    axes.legend(loc="lower right", fontsize=8, frameon=False)
    figure.text(0.01, 0.005, CAUTION_SHORT, fontsize=6.5, color="#555555")
    figure.tight_layout(rect=(0, 0.03, 1, 1))
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png")
    return buffer.getvalue()


def write_sensitivity(table: pd.DataFrame, folder: Path, title: str) -> dict[str, Path]:
    """Write the table (CSV) and the figure (PNG) into ``folder`` atomically; returns their paths."""
    from .atomic import atomic_write
    from .outputs import write_csv

    folder.mkdir(parents=True, exist_ok=True)
    png = sensitivity_figure(table, title)
    return {"table": write_csv(table, folder / SENSITIVITY_CSV),
            "figure": atomic_write(folder / SENSITIVITY_PNG, lambda path: path.write_bytes(png), what="the figure")}


__all__ = ["one_at_a_time", "class_shares", "sensitivity_figure", "write_sensitivity", "SENSITIVITY_CSV",
           "SENSITIVITY_PNG"]
