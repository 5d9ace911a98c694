"""kinfit report: write the reproducible fit report."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from kinfit.report.build import build_report
from kinfit.report.render import FIGURE_DIR

__all__ = ["add_arguments", "run"]


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Arguments of ``kinfit report STUDY [--fit DIR] --out DIR``."""
    parser.add_argument("study", type=Path, help="the study file (TOML) the fit was made from")
    parser.add_argument("--fit", type=Path, default=None, metavar="DIR",
                        help="folder with results.json from 'kinfit fit' (default: --out)")
    parser.add_argument("--out", type=Path, default=Path("reports"), metavar="DIR",
                        help="output folder of the report (default: reports)")


def run(args: argparse.Namespace) -> int:
    """Run ``kinfit report`` from parsed arguments; returns the exit code (0 when the report
    was written; errors of input raise StudyError, which the command line maps to exit 2)."""

    fit_dir = args.fit if args.fit is not None else args.out
    result = build_report(args.study, fit_dir, args.out, argv=sys.argv)
    print(f"wrote {result.html}, {result.markdown}, {len(result.figures)} figure files in "
          f"{result.out_dir / FIGURE_DIR}, {len(result.tables)} CSV tables, {result.latex.name}")
    for note in result.notes:
        print(f"kinfit: note: {note}", file=sys.stderr)
    if not result.report.status_ok:
        print("kinfit: the report documents a fit that did not converge", file=sys.stderr)
    return 0
