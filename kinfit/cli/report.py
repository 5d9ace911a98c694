"""kinfit report: write the reproducible fit report."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from kinfit.errors import StudyError
from kinfit.fitting.results import FitResult
from kinfit.report.build import build_report
from kinfit.report.render import FIGURE_DIR
from kinfit.study.freshness import changed_inputs
from kinfit.study.load import load_study

__all__ = ["add_arguments", "run"]


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Arguments of ``kinfit report STUDY [--fit DIR] --out DIR``."""
    parser.add_argument("study", type=Path, help="the study file (TOML) the fit was made from")
    parser.add_argument("--fit", type=Path, default=None, metavar="DIR",
                        help="folder with results.json from 'kinfit fit' (default: --out)")
    parser.add_argument("--out", type=Path, default=Path("reports"), metavar="DIR",
                        help="output folder of the report (default: reports)")
    parser.add_argument("--allow-changed-data", action="store_true",
                        help="write the report even though the study's files changed since "
                             "the fit (the report then says so)")


def run(args: argparse.Namespace) -> int:
    """Run ``kinfit report`` from parsed arguments; returns the exit code (0 when the report
    was written; errors of input raise StudyError, which the command line maps to exit 2)."""

    fit_dir = args.fit if args.fit is not None else args.out
    _refuse_changed_data(args.study, fit_dir, allow=args.allow_changed_data)
    result = build_report(args.study, fit_dir, args.out, argv=sys.argv)
    print(f"wrote {result.html}, {result.markdown}, {len(result.figures)} figure files in "
          f"{result.out_dir / FIGURE_DIR}, {len(result.tables)} CSV tables, {result.latex.name}")
    for note in result.notes:
        print(f"kinfit: note: {note}", file=sys.stderr)
    if not result.report.status_ok:
        print("kinfit: the report documents a fit that did not converge", file=sys.stderr)
    return 0


def _refuse_changed_data(study_path: Path, fit_dir: Path, *, allow: bool) -> None:
    """Bad input (exit 2): a report would show results of other data than the study names."""

    changed = changed_inputs(load_study(study_path), FitResult.load(fit_dir).manifest)
    if changed and not allow:
        raise StudyError(f"{', '.join(changed)} changed since the fit in {fit_dir}, so the "
                         "report would show results of other data; refit with 'kinfit fit "
                         f"{study_path} --out {fit_dir}', or pass --allow-changed-data")
