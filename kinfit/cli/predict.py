"""kinfit predict: profiles or rates at new conditions, with bands."""

from __future__ import annotations

import argparse
import sys
from dataclasses import replace
from pathlib import Path

from kinfit.analysis.predict import ExtrapolationRefused, predict_conditions
from kinfit.core.files import (
    prepare_out_dir,
    recorded_command,
)
from kinfit.errors import StudyError
from kinfit.fitting.results import FitResult
from kinfit.study.conditions import (
    Condition,
    conditions_from_argument,
    parse_times,
)
from kinfit.study.load import load_study

__all__ = ["add_arguments", "run"]


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``kinfit predict STUDY --fit DIR --at CONDITIONS``."""
    parser.add_argument("study", type=Path, help="the fitted study file (TOML)")
    parser.add_argument("--fit", type=Path, required=True,
                        help="folder with results.json of 'kinfit fit' (and posterior_draws.csv "
                             "of 'kinfit sample', used for the bands when present)")
    parser.add_argument("--at", action="append", required=True, metavar="CONDITIONS",
                        help="a CSV table of conditions (runs-table columns with units) or "
                             "inline conditions such as \"dp=500 um, N=800 rpm, T=70 degC\" "
                             "(keys T, N, dp, w, C0 or the full factor names; several "
                             "separated by ';'; unspecified factors take the campaign value "
                             "nearest the median); may be repeated")
    parser.add_argument("--times", default=None,
                        help="sampling times of the profiles, e.g. \"0, 10, 30, 60 min\" "
                             "(default: 21 points up to the campaign's longest run)")
    parser.add_argument("--draws", type=int, default=400,
                        help="parameter draws for the bands (default 400)")
    parser.add_argument("--seed", type=int, default=None, help="seed of the draws")
    parser.add_argument("--extrapolate", action="store_true",
                        help="predict even outside the campaign's ranges or where a film "
                             "coefficient fitted only to film-limited data would be carried "
                             "elsewhere; every output is then marked as extrapolated")
    parser.add_argument("--out", type=Path, default=None,
                        help="output folder (default: FIT/predict)")


def run(args: argparse.Namespace) -> int:
    """Run ``kinfit predict``; returns the exit code (1 when the extrapolation is refused)."""

    study = load_study(args.study)
    fit = FitResult.load(args.fit)
    conditions: list[Condition] = []
    for text in args.at:
        conditions += conditions_from_argument(text, study, first_index=len(conditions) + 1)
    times = parse_times(args.times) if args.times else None
    out = Path(args.out) if args.out is not None else Path(args.fit) / "predict"
    if out.resolve() == Path(args.fit).resolve():
        raise StudyError(f"--out {out} is the fit folder, whose predictions.csv belongs to the "
                         "fit; choose another folder")
    try:
        pred = predict_conditions(study, fit, conditions, fit_dir=args.fit, times=times,
                                  n_draws=args.draws, seed=args.seed,
                                  extrapolate=args.extrapolate)
    except ExtrapolationRefused as exc:
        for reason in exc.reasons:
            print(f"kinfit: refused: {reason}", file=sys.stderr)
        print("kinfit: pass --extrapolate to predict anyway; every output is then marked as "
              "extrapolated", file=sys.stderr)
        return 1
    pred = replace(pred, manifest={**pred.manifest, "command": recorded_command(sys.argv)})
    prepare_out_dir(out)
    pred.save(out)
    print(pred.report())
    print(f"\nwrote {out / 'predictions.csv'} and {out / 'predictions.json'}")
    return 0
