"""Command line: parses arguments, calls the public API, renders results, maps errors to exit codes.

Exit codes: 0 success, 1 unexpected internal error, 2 config error, 3 input-data error, 4 output error,
130 interrupted (Ctrl-C, SIGINT), 143 terminated (SIGTERM). SIGTERM is handled like Ctrl-C: the run
stops, removes its temporary files and releases the output folder; finished scenarios stay (and can be
kept with ``run --resume``). Warnings of the tool are shown as one line each, "warning: ...".

Help is plain text (click's layout), so flags show as flags (``--force``) and help reads the same in a
terminal, a pipe or a log. Tables are drawn only on a terminal wide enough for them; otherwise the same
facts are printed as lines that are never wrapped word by word. The caution is printed with results
(maps, briefs, curves, a usable check), never before a refusal.
"""

from __future__ import annotations

import contextlib
import functools
import signal
import sys
import threading
import warnings
from pathlib import Path
from typing import List, Optional

import typer
from rich.console import Console
from rich.markup import escape
from rich.panel import Panel
from rich.table import Table

from .caution import CAUTION
from .errors import SuitabilityError

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    rich_markup_mode=None,
    help="Map where C4 plants out-assimilate C3 plants, today and under climate scenarios.",
)

#: Below this many columns (or off a terminal) tables are printed as plain lines.
TABLE_MIN_WIDTH = 120


class _LazyConsole:
    """A rich Console made on first use, so the terminal width is read when a command runs."""

    def __init__(self, stderr: bool):
        self._stderr = stderr

    def print(self, *args, **kwargs):
        Console(stderr=self._stderr).print(*args, **kwargs)

    def wide_terminal(self) -> bool:
        """True on a terminal at least :data:`TABLE_MIN_WIDTH` columns wide (tables fit there)."""
        probe = Console(stderr=self._stderr)
        return probe.is_terminal and probe.width >= TABLE_MIN_WIDTH

    def line(self, text: str, **kwargs) -> None:
        """One line of rich markup that is never wrapped (a pipe or log gets it whole)."""
        Console(stderr=self._stderr).print(text, soft_wrap=True, highlight=False, **kwargs)


console = _LazyConsole(stderr=False)
errors = _LazyConsole(stderr=True)



def _quiet_library_noise() -> None:
    # Harmless notices from the raster stack that a GIS user cannot act on; our own warnings still show.
    warnings.filterwarnings("ignore", category=PendingDeprecationWarning)
    warnings.filterwarnings("ignore", category=DeprecationWarning)
    warnings.filterwarnings("ignore", message="Dataset has no geotransform")


class Terminated(KeyboardInterrupt):
    """SIGTERM arrived; raised in the main thread so that cleanup runs as for Ctrl-C."""


def _raise_terminated(signum, frame):
    raise Terminated()


@contextlib.contextmanager
def _sigterm_as_interrupt():
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.signal(signal.SIGTERM, _raise_terminated)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def _show_warning(message, category, filename, lineno, file=None, line=None):
    errors.print(f"[yellow]warning:[/] {escape(str(message))}", highlight=False, soft_wrap=True)


@contextlib.contextmanager
def _warnings_as_lines(debug: bool):
    with warnings.catch_warnings():
        if not debug:
            warnings.simplefilter("default", UserWarning)
            _quiet_library_noise()  # after: the filters added last are matched first
            warnings.showwarning = _show_warning
        yield


def _handle_errors(command):
    @functools.wraps(command)
    def wrapper(*args, debug: bool = False, **kwargs):
        try:
            with _warnings_as_lines(debug), _sigterm_as_interrupt():
                return command(*args, **kwargs)
        except SuitabilityError as error:
            if debug:
                raise
            errors.print(f"[bold red]error:[/] {escape(str(error))}", highlight=False, soft_wrap=True)
            raise typer.Exit(error.exit_code)
        except KeyboardInterrupt as interrupt:
            how = "terminated (SIGTERM)" if isinstance(interrupt, Terminated) else "interrupted"
            errors.print(f"[bold red]{how}[/]: no finished-looking partial outputs were left behind; "
                         "scenarios already finished are kept (run again with --resume to keep them).")
            raise typer.Exit(143 if isinstance(interrupt, Terminated) else 130)
        except Exception as error:  # noqa: BLE001 - the last line of defence for a GIS user
            if debug:
                raise
            errors.print(f"[bold red]internal error:[/] {type(error).__name__}: {escape(str(error))}", highlight=False)
            errors.print("Run again with --debug for the traceback, and report it.")
            raise typer.Exit(1)

    return wrapper


#: Help of the options that the config also has; the starter template and the README say the same
#: (tests/test_first_hour.py compares them).
CONFIG_OPTIONS = {
    "scheduler": ("compute.scheduler", "threads | processes | local-cluster | tcp://host:port | tls://host:port"),
    "workers": ("compute.workers", "number of threads (threads) or worker processes (processes, local-cluster)"),
    "memory_limit": ("compute.memory_limit", "memory limit per worker process, e.g. 2GiB, 500MB or auto"),
    "overwrite": ("output.overwrite", "replace existing outputs"),
}
OPTION_HELP = {name: f"{text if name == 'scheduler' else text[0].upper() + text[1:]}; overrides the config's {key}."
               for name, (key, text) in CONFIG_OPTIONS.items()}

DebugOption = typer.Option(False, "--debug", help="Show the full traceback on errors.")


def _show_version(value: bool) -> None:
    if value:
        from ._version import __version__

        console.line(f"suitability {__version__}")
        raise typer.Exit(0)


@app.callback()
def _main(
    version: bool = typer.Option(False, "--version", is_eager=True, callback=_show_version,
                                 help="Show the version and exit."),
):
    """Map where C4 plants out-assimilate C3 plants, today and under climate scenarios.

    Start with `suitability init`, edit the file it writes, then `suitability check` and `suitability run`.
    """


@app.command(short_help="Compute every scenario of a config: maps, tables, manifest, briefs.")
def run(
    config: Path = typer.Argument(..., help="YAML config file."),
    overwrite: Optional[bool] = typer.Option(None, "--overwrite/--no-overwrite", help=OPTION_HELP["overwrite"]),
    resume: bool = typer.Option(
        False, "--resume",
        help="Keep scenarios whose outputs match the manifest (same config and input files); recompute the rest.",
    ),
    scheduler: Optional[str] = typer.Option(None, help=OPTION_HELP["scheduler"]),
    workers: Optional[int] = typer.Option(None, help=OPTION_HELP["workers"]),
    memory_limit: Optional[str] = typer.Option(None, help=OPTION_HELP["memory_limit"]),
    progress: bool = typer.Option(True, "--progress/--no-progress", help="Show progress bars."),
    debug: bool = DebugOption,
):
    """Compute every scenario of CONFIG and write the maps, tables, manifest (and briefs)."""
    _run(config, overwrite, resume, scheduler, workers, memory_limit, progress, debug=debug)


@_handle_errors
def _run(config, overwrite, resume, scheduler, workers, memory_limit, progress):
    from . import pipeline

    result = pipeline.run(
        config, overwrite=overwrite, resume=resume, scheduler=scheduler, workers=workers, memory_limit=memory_limit,
        progress=progress,
    )
    if result.resumed:
        console.line(f"Kept from the earlier run (outputs up to date): {', '.join(result.resumed)}")
    table = Table(title="Share of mapped cells by favoured pathway (%)")
    table.add_column("scenario", no_wrap=True)
    for heading in ("C3 favoured", "contested", "C4 favoured", "no growing season", "mapped cells"):
        table.add_column(heading, justify="right")
    for row in result.summary.to_dict(orient="records"):
        table.add_row(
            escape(row["scenario"]), *(f"{100 * row[f'share_{key}']:.1f}" for key in ("c3", "contested", "c4", "noseason")),
            str(row["valid_cells"]),
        )
    console.print(table)
    _print_assumptions(result.assumptions, "This run assumed (also in the manifest):")
    if result.manifest.get("region_note"):  # invented_note(), recorded by the run as briefs and GeoTIFFs carry it
        console.line(escape(result.manifest["region_note"]))
    console.line(f"Outputs: {escape(str(result.output_folder))}")
    console.line(f"Manifest: {escape(str(result.manifest_path))}")
    if result.briefs:
        console.line("Briefs and district tables:")
        for line in _brief_lines(result.briefs):
            console.line(f"  {line}")
    console.line(f"Run time: {result.manifest['timings']['total_s']:.1f} s")
    _print_caution()


@app.command(short_help="Validate a config and open every input, without computing.")
def check(config: Path = typer.Argument(..., help="YAML config file."), debug: bool = DebugOption):
    """Validate CONFIG and open every input (exists, CRS, units, overlap, nodata) without computing."""
    _check(config, debug=debug)


@_handle_errors
def _check(config):
    from .assumptions import run_assumptions
    from .config import load_config
    from .errors import InputDataError
    from .inputs import inspect_inputs

    cfg = load_config(config)
    _print_grid(cfg)
    reports = inspect_inputs(cfg)
    with_scenarios = any(report.scenario for report in reports)
    problems = sum(len(report.problems) for report in reports)
    if console.wide_terminal():
        _check_table(config, reports, with_scenarios)
    else:
        _check_lines(config, reports)
    console.line(f"{len(cfg.scenarios)} scenarios: {escape(', '.join(s.name for s in cfg.scenarios))}")
    _print_assumptions(run_assumptions(cfg), "The run will assume:")
    _print_uncertainty(cfg)
    if problems:
        raise InputDataError(f"{problems} problem(s) found in the inputs of {config}; see the notes above")
    console.line("[green]Config and inputs look usable.[/]")
    _print_caution()


def _print_uncertainty(cfg) -> None:
    """The parameter draws a run makes (config ``uncertainty``): count, seed, method, and each spread."""
    if cfg.uncertainty is None:
        return
    from .provenance import uncertainty_record
    from .physiology.uncertainty import spread_text

    record = uncertainty_record(cfg)
    varied = sum(row["varied"] for row in record["parameters"])
    console.line(f"Parameter uncertainty: {record['draws']} draws, seed {record['seed']}, {record['method']} "
                 f"over {varied} parameters (also in the manifest):")
    for row in record["parameters"]:
        console.line(f"  - {escape(spread_text(row))}")


def _check_table(config, reports, with_scenarios: bool) -> None:
    table = Table(title=f"Inputs of {escape(str(config))}")
    columns = (["layer"] + (["scenario"] if with_scenarios else [])
               + ["file", "CRS", "units", "time", "overlap %", "nodata %", "notes"])
    for column in columns:
        table.add_column(column, overflow="fold", ratio=4 if column == "notes" else None,
                         no_wrap=column in ("overlap %", "nodata %"))
    for report in reports:
        notes = [f"[red]{escape(p)}[/]" for p in report.problems] + [f"[yellow]{escape(w)}[/]" for w in report.warnings]
        cells = [escape(str(report.layer))] + ([escape(report.scenario or "-")] if with_scenarios else [])
        cells += [escape(Path(str(report.path)).name), escape(_crs_text(report)), escape(_units_text(report)),
                  escape(report.time or "-"), _percent(report.overlap_share), _percent(report.nodata_share),
                  "; ".join(notes) or "[green]ok[/]"]
        table.add_row(*cells)
    console.print(table)


def _check_lines(config, reports) -> None:
    """The check report as lines: one heading line per layer, then its facts and each note on a line."""
    console.line(f"Inputs of {escape(str(config))}:")
    for report in reports:
        where = f" (scenario {escape(report.scenario)})" if report.scenario else ""
        console.line(f"- {escape(str(report.layer))}{where}: {escape(Path(str(report.path)).name)}")
        console.line(f"    CRS {escape(_crs_text(report))}; units {escape(_units_text(report))}; "
                     f"overlap {_percent(report.overlap_share)} %; nodata {_percent(report.nodata_share)} %")
        if report.time:
            console.line(f"    time: {escape(report.time)}")
        for problem in report.problems:
            console.line(f"    [red]problem:[/] {escape(problem)}")
        for warning in report.warnings:
            console.line(f"    [yellow]note:[/] {escape(warning)}")
        if not report.problems and not report.warnings:
            console.line("    [green]ok[/]")


def _print_grid(cfg) -> None:
    """The region's grid: CRS, cell size, shape, and bounds in its CRS and in the CRS the extent was given
    in (or lon/lat). A grid that cannot be built is reported by the input check, not here."""
    from pyproj import CRS, Transformer

    from .errors import SuitabilityError
    from .grid import TargetGrid

    try:
        grid = TargetGrid.from_region(cfg.region, cfg.config_dir)
    except (SuitabilityError, ValueError):
        return
    crs = grid.crs
    units = "degrees" if crs.is_geographic else (crs.axis_info[0].unit_name if crs.axis_info else "CRS units")
    res_x, res_y = grid.resolution
    console.line(f"Grid of {escape(cfg.region.name)}: {escape(_crs_name(crs))}, cells {res_x:g} x {res_y:g} {escape(units)}, "
                 f"{grid.height} rows x {grid.width} columns ({grid.height * grid.width:,} cells)")
    console.line(f"  bounds in {escape(_crs_short(crs))}: {_bounds_text(grid.bounds, geographic=crs.is_geographic)}")
    others = []
    given_in = getattr(getattr(cfg.region, "grid", None), "bounds_crs", None)
    if given_in:
        others.append(CRS.from_user_input(given_in))
    lonlat = CRS.from_epsg(4326)
    if not any(o == lonlat for o in others):
        others.append(lonlat)
    for other in others:
        if other == crs:
            continue
        bounds = Transformer.from_crs(crs, other, always_xy=True).transform_bounds(*grid.bounds, densify_pts=21)
        console.line(f"  bounds in {escape(_crs_short(other))}: {_bounds_text(bounds, geographic=other.is_geographic)}")


def _bounds_text(bounds, geographic: bool = False) -> str:
    fmt = "{:.4f}" if geographic else "{:.10g}"
    return "[" + ", ".join(fmt.format(b) for b in bounds) + "] (xmin, ymin, xmax, ymax)"


def _crs_short(crs) -> str:
    epsg = crs.to_epsg()
    return f"EPSG:{epsg}" if epsg else crs.name


def _crs_name(crs) -> str:
    epsg = crs.to_epsg()
    return f"EPSG:{epsg} ({crs.name})" if epsg else crs.name


def _print_assumptions(notes, heading: str) -> None:
    if not notes:
        return
    console.line(heading)
    for note in notes:
        console.line(f"  - {escape(note)}")


@app.command(short_help="District statistics and HTML/PDF briefs of a finished run.")
def brief(
    config: Path = typer.Argument(..., help="YAML config file of a finished run."),
    scenario: Optional[List[str]] = typer.Option(
        None, "--scenario", help="Brief only this scenario (compared with the baseline); repeat for several. Default: all."),
    overwrite: bool = typer.Option(False, "--overwrite", help="Replace briefs and district tables that exist."),
    progress: bool = typer.Option(True, "--progress/--no-progress", help="Show a progress bar."),
    debug: bool = DebugOption,
):
    """Write the district statistics and HTML/PDF briefs from the outputs of a finished run."""
    _brief(config, scenario, overwrite, progress, debug=debug)


@_handle_errors
def _brief(config, scenario, overwrite, progress):
    from . import pipeline
    from .config import load_config

    cfg = load_config(config)
    paths = pipeline.briefs_of_finished_run(cfg, scenarios=scenario or None, overwrite=overwrite, progress=progress)
    for line in _brief_lines(paths):
        console.line(line)
    _print_caution()


def _brief_lines(paths) -> list[str]:
    """The briefs and tables one per line; the figures (PNG and SVG of each) as one line with their folder."""
    figures = [path for name, path in paths.items() if str(name).startswith("figures/")]
    lines = [escape(str(path)) for name, path in paths.items() if not str(name).startswith("figures/")]
    if figures:
        lines.append(f"{len(figures)} figure files (PNG and SVG) in {escape(str(figures[0].parent))}")
    return lines


@app.command(short_help="Leaf C3/C4 assimilation versus temperature; leaf quantum-yield crossovers.")
def curves(
    co2: List[float] = typer.Option([280.0, 420.0, 700.0], "--co2", help="CO2 in ppm; repeat for several."),
    absorbed_par: float = typer.Option(1500.0, help="Absorbed PAR of the leaf [µmol m-2 s-1]."),
    out: Path = typer.Option(Path("curves"), help="Output folder for the CSV and PNG."),
    config: Optional[Path] = typer.Option(
        None, "--config", help="Take both parameter sets (with overrides), the baseline's O2 and the region's "
        "median elevation from this run config."),
    o2: Optional[float] = typer.Option(None, "--o2", help="O2 in percent (default 20.95, or the config's)."),
    elevation: Optional[float] = typer.Option(
        None, "--elevation", help="Elevation in m for the air pressure (default sea level, or the config's)."),
    debug: bool = DebugOption,
):
    """Leaf net assimilation of C3 and C4 versus leaf temperature, and the leaf quantum-yield crossover
    (not the canopy crossover of the maps)."""
    _curves(co2, absorbed_par, out, config, o2, elevation, debug=debug)


@_handle_errors
def _curves(co2, absorbed_par, out, config, o2, elevation):
    from .curves import settings_from_config, write_curves
    from .errors import ConfigError

    settings = {"o2_percent": 20.95, "elevation_m": None}
    source = "no elevation given"
    if config is not None:
        from .config import load_config

        settings = settings_from_config(load_config(config))
        source = settings.pop("elevation_source")
    if o2 is not None:
        if not 0 < o2 <= 100:
            raise ConfigError(f"--o2 {o2:g}: expected a percentage above 0 and at most 100")
        settings["o2_percent"] = o2
    if elevation is not None:
        settings["elevation_m"] = elevation
        source = "--elevation"
    try:
        paths = write_curves(co2, out, absorbed_par=absorbed_par, **settings)
    except ValueError as exc:
        raise ConfigError(str(exc)) from None
    sets = [_set_name(settings.get(key), pathway) for key, pathway in (("c3_params", "C3"), ("c4_params", "C4"))]
    where = ("standard sea-level pressure 101.325 kPa" if settings["elevation_m"] is None
             else f"elevation {settings['elevation_m']:.0f} m")
    console.line(f"C3 set {escape(sets[0])}, C4 set {escape(sets[1])}, O2 {settings['o2_percent']:g} %, "
                 f"{where} ({escape(source)})")
    for path in paths.values():
        console.line(f"Wrote {escape(str(path))}")
    _print_caution()


def _set_name(params, pathway: str) -> str:
    from .physiology.params import DEFAULT_SETS

    name = (params or {}).get("parameter_set") or DEFAULT_SETS[pathway]
    changed = sorted(k for k in (params or {}) if k != "parameter_set")
    return name + (f" (changed: {', '.join(changed)})" if changed else "")


@app.command(short_help="List the leaf parameter sets (plant types), or show one in full.")
def parameters(
    name: Optional[str] = typer.Argument(None, help="A parameter set to show in full; without it, list them all."),
    debug: bool = DebugOption,
):
    """List the leaf parameter sets (plant types), or show one with every value, unit and source."""
    _parameters(name, debug=debug)


@_handle_errors
def _parameters(name):
    from .errors import ConfigError
    from .parameter_info import describe_set, format_value, parameter_sets

    if name is None:
        console.line("Parameter sets (physiology.c3.parameter_set / physiology.c4.parameter_set):")
        for row in parameter_sets():
            default = ", the default" if row["default"] else ""
            console.line(f"- {row['pathway']} {escape(row['name'])} (model {escape(row['model'])}{default})")
            console.line(f"    source: {escape(row['source'])}")
        console.line("Show one in full: suitability parameters NAME")
        return
    try:
        pathway, rows = describe_set(name)
    except ValueError as exc:
        raise ConfigError(str(exc)) from None
    source = next(r.value for r in rows if r.key == "source")
    console.line(f"{pathway} parameter set {escape(name)}")
    console.line(f"source: {escape(source)}")
    for row in rows:
        if row.key == "source":
            continue
        unit = f" {row.unit}" if row.unit and row.unit != "-" else ""
        note = f"  ({escape(row.note)})" if row.note else ""
        console.line(f"  {row.key} = {escape(format_value(row.value))}{escape(unit)}: {escape(row.meaning)}{note}")
    from .physiology.uncertainty import PARAMETER_UNCERTAINTY, spread_text, varied_parameters

    if name in PARAMETER_UNCERTAINTY:
        console.line("Published spread of its influential parameters (what the config's 'uncertainty' draws over):")
        pair = {"c3_params": name} if pathway == "C3" else {"c4_params": name}
        for row in (r for r in varied_parameters(**pair) if r["pathway"] == pathway):
            console.line(f"  - {escape(spread_text(row))}")
    console.line("Change single values under physiology.c3.overrides or physiology.c4.overrides in the config; "
                 "`suitability curves --config CONFIG` shows their effect.")


@app.command(short_help="Which parameters move the C3/C4 boundary most (one at a time over published ranges).")
def sensitivity(
    config: Path = typer.Argument(..., help="YAML config file."),
    scenario: Optional[str] = typer.Option(None, "--scenario", help="Scenario to run (default: the baseline)."),
    out: Optional[Path] = typer.Option(None, "--out", help="Folder for the CSV and PNG (default: <output.folder>/sensitivity)."),
    debug: bool = DebugOption,
):
    """Set each parameter with a published range to its low and high end, one at a time, and show how the
    shares of C3-favoured, contested and C4-favoured cells of the region move."""
    _sensitivity(config, scenario, out, debug=debug)


@_handle_errors
def _sensitivity(config, scenario, out):
    from .config import load_config
    from .errors import ConfigError
    from .sensitivity import one_at_a_time, write_sensitivity

    cfg = load_config(config)
    if scenario is not None and scenario not in [s.name for s in cfg.scenarios]:
        raise ConfigError(f"--scenario {scenario!r}: no such scenario; scenarios: {', '.join(s.name for s in cfg.scenarios)}")
    try:
        table = one_at_a_time(cfg, scenario)
    except ValueError as exc:
        raise ConfigError(f"{config}: {exc}") from None
    name = scenario or cfg.baseline
    folder = out if out is not None else Path(cfg.output.folder) / "sensitivity"
    paths = write_sensitivity(table, folder, f"{cfg.region.name}, scenario {name}: one parameter at a time")
    central = table[table["end"] == "central"].iloc[0]
    console.line(f"Central run ({escape(name)}): C3 favoured {central['C3 favoured %']:.1f} %, contested "
                 f"{central['contested %']:.1f} %, C4 favoured {central['C4 favoured %']:.1f} % of "
                 f"{int(central['mapped cells'])} cells")
    console.line("C4-favoured share at the low / high end of each range, largest swing first:")
    for parameter in dict.fromkeys(table["parameter"]):
        if parameter == "central":
            continue
        rows = table[table["parameter"] == parameter].set_index("end")
        console.line(f"  {escape(parameter)}: {rows.loc['low', 'value']:.4g} -> {rows.loc['low', 'C4 favoured %']:.1f} %, "
                     f"{rows.loc['high', 'value']:.4g} -> {rows.loc['high', 'C4 favoured %']:.1f} % "
                     f"(swing {rows.loc['high', 'C4 share swing %']:+.1f} points)")
    for path in paths.values():
        console.line(f"Wrote {escape(str(path))}")
    _print_caution()


@app.command(short_help="Write a commented starter config to edit.")
def init(
    path: Path = typer.Argument(Path("suitability.yaml"), help="Where to write the starter config."),
    force: bool = typer.Option(False, "--force", help="Replace an existing file (a flag: give it without a value)."),
    debug: bool = DebugOption,
):
    """Write a commented starter config to edit."""
    _init(path, force, debug=debug)


@_handle_errors
def _init(path, force):
    from importlib import resources

    from .errors import OutputError

    if path.exists() and not force:
        raise OutputError(f"{path} exists; use --force to replace it")
    from .atomic import write_text_atomic

    text = resources.files("suitability").joinpath("templates/starter.yaml").read_text(encoding="utf-8")
    write_text_atomic(path, text, what="the starter config")  # never follows a link planted at ``path``
    console.line(f"Wrote {escape(str(path))}. Replace every EDIT-ME value, then run: suitability check {escape(str(path))}")


def _print_caution() -> None:
    """The caution, with results: a panel on a terminal, one plain line in a pipe or log."""
    if Console().is_terminal:
        console.print(Panel(CAUTION, title="caution", border_style="yellow"))
    else:
        console.line(f"[yellow]Caution:[/] {escape(CAUTION)}")


def _crs_text(report) -> str:
    return str(report.crs) if report.crs else "none found"


def _percent(share) -> str:
    return "-" if share is None else f"{100 * share:.1f}"


def _units_text(report) -> str:
    declared = getattr(report, "declared_units", None)
    canonical = getattr(report, "canonical_units", None)
    return f"{declared} -> {canonical}" if declared and canonical and declared != canonical else str(canonical or declared)


def main() -> None:  # pragma: no cover - console entry point
    app()


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
