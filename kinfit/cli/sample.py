"""kinfit sample: sample the posterior from the fit's optimum."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from kinfit.cli.common import EXIT_FAILED, EXIT_INTERRUPTED, EXIT_OK
from kinfit.core.files import prepare_out_dir
from kinfit.errors import StudyError
from kinfit.fitting.posterior import DEFAULT_SEED, MAX_STEPS, SampleOptions, sample_study
from kinfit.fitting.results import FitResult
from kinfit.study.load import load_study

__all__ = ["add_arguments", "run"]


def run(args: argparse.Namespace) -> int:

    study = load_study(args.study)
    fit_dir = args.fit or args.out
    if fit_dir is None:
        raise StudyError("give --fit DIR (the folder of 'kinfit fit' results)")
    fit = FitResult.load(fit_dir)
    out = prepare_out_dir(args.out or fit_dir)
    options = SampleOptions(walkers=args.walkers, max_steps=args.steps, chunk=args.chunk,
                            tau_multiple=args.tau_multiple, seed=args.seed, resume=args.resume,
                            progress=not args.quiet, moves=args.moves,
                            draws_csv=args.draws_csv)
    try:
        post, content = sample_study(study, fit, out, options, argv=sys.argv)
    except StudyError as exc:
        raise StudyError(_option_words(str(exc))) from None
    print(post.report())
    draws = "posterior_draws.csv" if args.draws_csv else "posterior_draws.csv.gz"
    print(f"\nwrote {out / 'posterior.json'}, {draws}, posterior_bands.csv")
    if post.interrupted:
        print("kinfit: sampling was interrupted; what was sampled is kept (use --resume)",
              file=sys.stderr)
        return EXIT_INTERRUPTED
    if args.require_converged and not post.converged:
        print(f"kinfit: the chain did not converge: {post.verdict}", file=sys.stderr)
        return EXIT_FAILED
    return EXIT_OK


def add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("study", type=Path, help="the study file (TOML)")
    p.add_argument("--fit", type=Path, default=None,
                   help="folder with results.json from 'kinfit fit' (default: --out)")
    p.add_argument("--out", type=Path, default=None,
                   help="output folder (default: the --fit folder)")
    p.add_argument("--walkers", type=int, default=None, help="ensemble size")

    p.add_argument("--steps", type=int, default=MAX_STEPS,
                   help=f"step cap (default {MAX_STEPS})")
    p.add_argument("--chunk", type=int, default=500, help="steps between checkpoints")
    p.add_argument("--tau-multiple", type=float, default=50.0,
                   help="stop when the chain exceeds this many autocorrelation times")
    p.add_argument("--seed", type=int, default=DEFAULT_SEED,
                   help=f"seed (same seed, same chain; default {DEFAULT_SEED})")
    p.add_argument("--resume", action="store_true", help="continue from the checkpoint")
    p.add_argument("--moves", choices=("de-laplace", "de", "stretch"), default="de-laplace",
                   help="proposal: differential-evolution move mixed with an independence move "
                        "from the fit's curvature (default), differential evolution alone, or "
                        "the stretch move")
    p.add_argument("--require-converged", action="store_true",
                   help="exit 1 when the chain has not converged")
    p.add_argument("--draws-csv", action="store_true",
                   help="write the draws as plain posterior_draws.csv (default: compressed "
                        "posterior_draws.csv.gz)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")


#: the sampler's option names as the command line spells them
_SAMPLER_OPTIONS = {"n_walkers": "--walkers", "max_steps": "--steps", "chunk": "--chunk",
                    "tau_multiple": "--tau-multiple"}


def _option_words(text: str) -> str:
    """A sampler message with its internal option names replaced by the command's options."""
    for name, flag in _SAMPLER_OPTIONS.items():
        text = text.replace(f"the '{name}' option of sample_problem()", f"{flag}")
    return text
