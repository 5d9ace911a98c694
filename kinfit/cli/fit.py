"""kinfit fit: fit all runs jointly."""

from __future__ import annotations

import argparse
import sys

from kinfit.cli.common import (
    EXIT_FAILED,
    EXIT_INTERRUPTED,
    add_common,
    adequacy_exit,
    print_adequacy,
)
from kinfit.cli.options import add_parallel_arguments, executor_from_args
from kinfit.core.files import prepare_out_dir
from kinfit.fitting.fit import FitOptions, fit
from kinfit.study.load import load_study

__all__ = ["add_arguments", "run"]


def _fit_options(args: argparse.Namespace):

    return FitOptions(multistart=args.multistart, seed=args.seed, profile=not args.no_profile,
                      bootstrap=args.bootstrap,
                      bootstrap_kind="group" if args.bootstrap_runs else "residual",
                      progress=not args.quiet, max_nfev=args.max_nfev)


def run(args: argparse.Namespace) -> int:
    from dataclasses import replace


    study = load_study(args.study)
    out = prepare_out_dir(args.out)
    with executor_from_args(args) as executor:
        result = fit(study, replace(_fit_options(args), executor=executor),
                     candidates=args.compare, argv=sys.argv)
    result.save(out)
    print(result.report())
    print_adequacy(result.fit.get("adequacy"))
    print(f"\nwrote {out / 'results.json'} and {out / 'predictions.csv'}")
    boot = result.extras.get("bootstrap") or {}
    if boot.get("interrupted"):
        print(f"kinfit: bootstrap interrupted after {boot['n_done']} of {boot['n']} replicates; "
              "the results are saved with the intervals of the finished ones", file=sys.stderr)
        return EXIT_INTERRUPTED
    if not result.converged:
        print(f"kinfit: the fit did not converge: {result.fit['message']}", file=sys.stderr)
        return EXIT_FAILED
    return adequacy_exit(args, result.fit.get("adequacy"))


def add_arguments(p: argparse.ArgumentParser) -> None:
    add_common(p, out=True)
    p.add_argument("--multistart", type=int, default=0, metavar="N",
                   help="extra starts from a Sobol design inside the bounds")
    p.add_argument("--seed", type=int, default=None, help="seed of multistart and bootstrap")
    p.add_argument("--no-profile", action="store_true",
                   help="skip profile-likelihood intervals (linearised only)")
    p.add_argument("--bootstrap", type=int, default=0, metavar="N",
                   help="bootstrap replicates (default 0: none)")
    p.add_argument("--bootstrap-runs", action="store_true",
                   help="resample whole runs instead of residuals")
    p.add_argument("--compare", nargs="+", default=None, metavar="CANDIDATE",
                   help="candidate models RATE_LAW[/FILM[/PELLET]] to compare with the study's")

    add_parallel_arguments(p)
    p.add_argument("--max-nfev", type=int, default=None, metavar="N",
                   help="cap on function evaluations of the optimiser")
    p.add_argument("--quiet", action="store_true", help="no progress bars")
    p.add_argument("--require-adequate", action="store_true",
                   help="exit 1 when a model-adequacy test fails")
