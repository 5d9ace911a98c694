"""kinfit diagnose: which runs measure true kinetics."""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

from kinfit.analysis.diagnosis.diagnosis import DRAWS_FILE, diagnose, read_draws
from kinfit.analysis.diagnosis.per_run import N_DRAWS
from kinfit.analysis.transport_limits import SPEED_RANGE
from kinfit.core.files import prepare_out_dir
from kinfit.core.units import parse_quantity
from kinfit.errors import StudyError
from kinfit.fitting.results import FitResult
from kinfit.physics.criteria import Thresholds
from kinfit.study.load import load_study

__all__ = ["add_arguments", "run"]


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``kinfit diagnose STUDY [--fit DIR] [--out DIR] ...``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser; the positional ``study`` and every option are added to it.
    """
    parser.add_argument("study", type=Path, help="the study file (TOML)")
    parser.add_argument("--fit", type=Path, default=None, metavar="DIR",
                        help="use the fit saved in DIR/results.json (default: fit first)")
    parser.add_argument("--draws", type=Path, default=None, metavar="CSV",
                        help="posterior draws, one column per varying parameter: adds "
                             "intervals and regime probabilities (default: DIR/"
                             f"{DRAWS_FILE} of --fit when present)")
    parser.add_argument("--out", type=Path, default=Path("reports"),
                        help="output folder for diagnosis.json (default: reports)")
    parser.add_argument("--alpha", type=float, default=0.05,
                        help="significance level of the model-free tests (default 0.05)")
    parser.add_argument("--carberry", type=float, default=0.05, metavar="LIMIT",
                        help="Carberry limit times |n| (default 0.05: Ca < 0.05/|n|)")
    parser.add_argument("--weisz-prater", type=float, default=None, metavar="LIMIT",
                        help="Weisz-Prater limit with R = dp/2 for every shape (default: the "
                             "value at which the first-order eta of the geometry is 0.95, "
                             "0.767 for a sphere)")
    parser.add_argument("--mears", type=float, default=0.15, metavar="LIMIT",
                        help="Mears limit for a sphere, R = dp/2 (default 0.15; other shapes "
                             "scale by (R/L)/3 for the same rate error)")
    parser.add_argument("--min-effectiveness", type=float, default=0.95, metavar="ETA",
                        help="smallest effectiveness factor counted as kinetic (default 0.95)")
    parser.add_argument("--max-speed", default="3000 rpm", metavar="SPEED",
                        help="highest stirrer speed considered for next runs (default "
                             "'3000 rpm')")
    parser.add_argument("--n-draws", type=int, default=N_DRAWS, metavar="N",
                        help=f"posterior draws evaluated (default {N_DRAWS})")
    parser.add_argument("--seed", type=int, default=0, help="seed of the draw subsample")


def _positive(name: str, value: float) -> float:
    if not (np.isfinite(value) and value > 0):
        raise StudyError(f"--{name} must be a number > 0, got {value}")
    return float(value)


def run(args: argparse.Namespace) -> int:
    """Run ``kinfit diagnose``: print the report and write diagnosis.json.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed by a parser set up with :func:`add_diagnose_arguments`.

    Returns
    -------
    int
        0 done; 1 the fit did not converge (the diagnosis is written all the same).

    Raises
    ------
    StudyError
        Bad input (the command line maps it to exit code 2).
    """
    import sys


    study = load_study(args.study)
    thresholds = Thresholds(
        carberry=_positive("carberry", args.carberry),
        weisz_prater_radius=(None if args.weisz_prater is None
                             else _positive("weisz-prater", args.weisz_prater)),
        mears=_positive("mears", args.mears),
        effectiveness=_positive("min-effectiveness", args.min_effectiveness),
    )
    if thresholds.effectiveness > 1:
        raise StudyError(f"--min-effectiveness must be in (0, 1], got {args.min_effectiveness}")
    top = parse_quantity(args.max_speed, "speed", where="--max-speed")
    if not top > SPEED_RANGE[0]:
        raise StudyError(f"--max-speed must exceed {SPEED_RANGE[0] * 60:g} rpm, got "
                         f"'{args.max_speed}'")
    fit_result = FitResult.load(args.fit) if args.fit is not None else None
    posterior = read_draws(args.draws) if args.draws is not None else None
    out = prepare_out_dir(args.out)
    diag = diagnose(study, fit_result, posterior=posterior, posterior_dir=args.fit,
                    thresholds=thresholds,
                    alpha=args.alpha, n_draws=args.n_draws, seed=args.seed,
                    speed_range=(SPEED_RANGE[0], top))
    path = diag.save(out)
    print(diag.report())
    print(f"\nwrote {path}")
    if not diag.model.get("converged", True):
        print("kinfit: the fit did not converge; the model-based part is at its last iterate",
              file=sys.stderr)
        return 1
    return 0
