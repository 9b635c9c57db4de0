"""Run the validation and write validation/results/: report.md and PNG figures (``make validate``).

    python -m validation.run [--quick] [--draws N] [--out FOLDER]

The bands and sources are written to the report (and printed) before any comparison runs. A few minutes
on 2 cores, most of it the first compilation of the model kernel.
"""

from __future__ import annotations

import argparse
import platform
import sys
import time
from pathlib import Path

from suitability._version import __version__
from suitability.atomic import atomic_write, write_text_atomic
from suitability.caution import CAUTION

from .comparisons import BANDS, GLOBAL_SHARE_NOTE, KNOWN_DISAGREEMENTS, run_all

RESULTS = Path(__file__).resolve().parent / "results"


def bands_section() -> list[str]:
    lines = ["## Pass bands and sources (declared before running)", ""]
    for band in BANDS.values():
        lines.append(f"- **{band.title}** ({band.key}): {band.text()}. Band: {band.width}.")
        for source in band.sources:
            lines.append(f"  - {source}")
    return lines


def _table(header, rows) -> list[str]:
    lines = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    lines += ["| " + " | ".join(str(c) for c in row) + " |" for row in rows]
    return lines


def report(outcomes, figures: dict[str, bytes], draws: int, seconds: float, quick: bool) -> str:
    agree = [o for o in outcomes if o.passed]
    lines = [
        "# Validation of suitability against published observations",
        "",
        f"suitability {__version__}, Python {platform.python_version()}; {draws} parameter draws per uncertainty "
        f"layer; {'quick form' if quick else 'full form'}; {seconds:.0f} s. Written by `make validate` "
        "(validation/run.py); the climates are synthetic, built from the rules in validation/comparisons.py.",
        "",
        f"*{CAUTION}*",
        "",
        f"**Summary: the model lies inside {len(agree)} of {len(outcomes)} bands.**",
        "",
        "| comparison | band | model | agrees |",
        "|---|---|---|---|",
    ]
    for o in outcomes:
        lines.append(f"| {o.band.title} | {o.band.low:g} to {o.band.high:g} {o.band.unit} | {o.value:.3g} | "
                     f"{'yes' if o.passed else 'no'} |")
    lines += [""] + bands_section() + ["", "## Results", ""]
    for o in outcomes:
        lines += [f"### {o.band.title}: {'agrees' if o.passed else 'disagrees'}", "",
                  f"{o.band.text()}; the model gives **{o.value:.3g}** {o.band.unit}.", ""]
        if o.note:
            lines += [o.note, ""]
        if not o.passed and o.band.key in KNOWN_DISAGREEMENTS:
            lines += [f"Why: {KNOWN_DISAGREEMENTS[o.band.key]}", ""]
        if o.rows:
            lines += _table(o.header, o.rows) + [""]
    lines += ["## Global C4 share of GPP (optional comparison)", "", GLOBAL_SHARE_NOTE, "",
              "## Figures", ""]
    lines += [f"![{name}]({name})" for name in figures]
    agree = [o.band.title for o in outcomes if o.passed]
    disagree = [o.band.title for o in outcomes if not o.passed]
    lines += ["", "## What this says", "",
              "Where the model agrees (" + str(len(agree)) + " of " + str(len(outcomes)) + "): " + "; ".join(agree)
              + ". Where it disagrees: " + ("; ".join(disagree) or "nowhere") + "; the reason is given under each "
              "result. The model maps a physiological advantage over the months of the growing season, not the "
              "abundance of grasses shaped by competition, cool-season growth and land use; the parameter draws "
              "span the measured leaf crossover (see its note): these maps need their probability layers.", ""]
    return "\n".join(lines)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="coarser gradient and 16 draws (as in make test)")
    parser.add_argument("--draws", type=int, default=None, help="parameter draws (default 64, quick 16)")
    parser.add_argument("--out", type=Path, default=RESULTS, help="output folder (default validation/results)")
    args = parser.parse_args(argv)
    draws = args.draws or (16 if args.quick else 64)
    print("\n".join(bands_section()), flush=True)
    started = time.perf_counter()
    outcomes, figures = run_all(draws, quick=args.quick)
    seconds = time.perf_counter() - started
    args.out.mkdir(parents=True, exist_ok=True)
    for name, png in figures.items():
        atomic_write(args.out / name, lambda path, png=png: path.write_bytes(png), what="a validation figure")
    write_text_atomic(args.out / "report.md", report(outcomes, figures, draws, seconds, args.quick),
                      what="the validation report")
    for o in outcomes:
        print(f"{'agrees   ' if o.passed else 'DISAGREES'} {o.band.key}: {o.value:.3g} (band {o.band.low:g}..{o.band.high:g})")
    print(f"Wrote {args.out / 'report.md'} in {seconds:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
