"""Command line: parses arguments, calls the public API, renders results, maps errors to exit codes.

Exit codes: 0 success, 1 unexpected internal error, 2 config error, 3 input-data error, 4 output error,
130 interrupted (Ctrl-C, SIGINT), 143 terminated (SIGTERM). SIGTERM is handled like Ctrl-C: the run
stops, removes its temporary files and releases the output folder; finished scenarios stay (and can be
kept with ``run --resume``). Warnings of the tool are shown as one line each, "warning: ...".
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
    help="Map where C4 plants out-assimilate C3 plants, today and under climate scenarios.",
)


class _LazyConsole:
    """A rich Console made on first use, so the terminal width is read when a command runs."""

    def __init__(self, stderr: bool):
        self._stderr = stderr

    def print(self, *args, **kwargs):
        Console(stderr=self._stderr).print(*args, **kwargs)


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


DebugOption = typer.Option(False, "--debug", help="Show the full traceback on errors.")


@app.command()
def run(
    config: Path = typer.Argument(..., help="YAML config file."),
    overwrite: Optional[bool] = typer.Option(None, "--overwrite/--no-overwrite", help="Replace existing outputs."),
    resume: bool = typer.Option(
        False, "--resume",
        help="Keep scenarios whose outputs match the manifest (same config and input files); recompute the rest.",
    ),
    scheduler: Optional[str] = typer.Option(None, help="threads | processes | local-cluster | tcp://host:port"),
    workers: Optional[int] = typer.Option(None, help="Threads or worker processes."),
    memory_limit: Optional[str] = typer.Option(None, help="Memory limit per worker, e.g. 2GiB."),
    progress: bool = typer.Option(True, "--progress/--no-progress", help="Show progress bars."),
    debug: bool = DebugOption,
):
    """Compute every scenario of CONFIG and write the maps, tables, manifest (and briefs)."""
    _run(config, overwrite, resume, scheduler, workers, memory_limit, progress, debug=debug)


@_handle_errors
def _run(config, overwrite, resume, scheduler, workers, memory_limit, progress):
    from . import pipeline

    _print_caution()
    result = pipeline.run(
        config, overwrite=overwrite, resume=resume, scheduler=scheduler, workers=workers, memory_limit=memory_limit,
        progress=progress,
    )
    if result.resumed:
        console.print(f"Kept from the earlier run (outputs up to date): {', '.join(result.resumed)}")
    table = Table(title="Share of mapped cells by favoured pathway (%)")
    table.add_column("scenario", no_wrap=True)
    for heading in ("C3 favoured", "contested", "C4 favoured", "mapped cells"):
        table.add_column(heading, justify="right")
    for row in result.summary.to_dict(orient="records"):
        table.add_row(
            row["scenario"], f"{row['C3 favoured %']:.1f}", f"{row['contested %']:.1f}",
            f"{row['C4 favoured %']:.1f}", str(row["valid_cells"]),
        )
    console.print(table)
    console.print(f"Outputs: {result.output_folder}")
    console.print(f"Manifest: {result.manifest_path}")
    if result.briefs:
        console.print("Briefs and district tables:")
        for path in result.briefs.values():
            console.print(f"  {path}", soft_wrap=True)
    console.print(f"Run time: {result.manifest['timings']['total_s']:.1f} s")


@app.command()
def check(config: Path = typer.Argument(..., help="YAML config file."), debug: bool = DebugOption):
    """Validate CONFIG and open every input (exists, CRS, units, overlap, nodata) without computing."""
    _check(config, debug=debug)


@_handle_errors
def _check(config):
    from .config import load_config
    from .errors import InputDataError
    from .inputs import inspect_inputs

    cfg = load_config(config)
    reports = inspect_inputs(cfg)
    table = Table(title=f"Inputs of {config}")
    with_scenarios = any(report.scenario for report in reports)
    columns = ["layer"] + (["scenario"] if with_scenarios else []) + ["file", "CRS", "units", "overlap %", "nodata %", "notes"]
    for column in columns:
        table.add_column(column, overflow="fold")
    problems = 0
    for report in reports:
        issues = list(report.problems)
        problems += len(issues)
        notes = [f"[red]{escape(p)}[/]" for p in issues] + [f"[yellow]{escape(w)}[/]" for w in report.warnings]
        cells = [str(report.layer)] + ([report.scenario or "-"] if with_scenarios else [])
        cells += [escape(Path(str(report.path)).name), str(report.crs), escape(_units_text(report)),
                  _percent(report.overlap_share), _percent(report.nodata_share), "; ".join(notes) or "[green]ok[/]"]
        table.add_row(*cells)
    console.print(table)
    console.print(f"{len(cfg.scenarios)} scenarios: {', '.join(s.name for s in cfg.scenarios)}")
    if problems:
        raise InputDataError(f"{problems} problem(s) found in the inputs of {config}; see the table above")
    console.print("[green]Config and inputs look usable.[/]")
    _print_caution()


@app.command()
def brief(config: Path = typer.Argument(..., help="YAML config file of a finished run."), debug: bool = DebugOption):
    """Write the district statistics and HTML/PDF briefs from the outputs of a finished run."""
    _brief(config, debug=debug)


@_handle_errors
def _brief(config):
    from . import pipeline
    from .config import load_config

    cfg = load_config(config)
    paths = pipeline.briefs_of_finished_run(cfg)
    _print_caution()
    for name, path in paths.items():
        console.print(f"{name}: {path}")


@app.command()
def curves(
    co2: List[float] = typer.Option([280.0, 420.0, 700.0], "--co2", help="CO2 in ppm; repeat for several."),
    absorbed_par: float = typer.Option(1500.0, help="Absorbed PAR of the leaf [µmol m-2 s-1]."),
    out: Path = typer.Option(Path("curves"), help="Output folder for the CSV and PNG."),
    debug: bool = DebugOption,
):
    """Leaf net assimilation of C3 and C4 versus leaf temperature, and the crossover temperature."""
    _curves(co2, absorbed_par, out, debug=debug)


@_handle_errors
def _curves(co2, absorbed_par, out):
    from .curves import write_curves

    _print_caution()
    paths = write_curves(co2, out, absorbed_par=absorbed_par)
    for path in paths.values():
        console.print(f"Wrote {path}")


@app.command()
def init(
    path: Path = typer.Argument(Path("suitability.yaml"), help="Where to write the starter config."),
    force: bool = typer.Option(False, "--force", help="Replace an existing file."),
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
    console.print(f"Wrote {path}. Edit the paths and units, then run: suitability check {path}")


def _print_caution() -> None:
    console.print(Panel(CAUTION, title="caution", border_style="yellow"))


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
