"""kinfit run: the whole job (check, fit, sample, diagnose, report)."""

from __future__ import annotations

import argparse
import sys

from kinfit.analysis.diagnosis.diagnosis import diagnose
from kinfit.cli.common import (
    EXIT_FAILED,
    EXIT_INTERRUPTED,
    EXIT_OK,
    add_common,
    adequacy_exit,
    print_adequacy,
)
from kinfit.cli.options import add_parallel_arguments
from kinfit.core.executors import available_workers, make_executor
from kinfit.core.files import prepare_out_dir
from kinfit.fitting.fit import FitOptions, fit
from kinfit.fitting.posterior import DEFAULT_SEED, SampleOptions, sample_study
from kinfit.report.build import build_report
from kinfit.study.campaign import campaign_summary
from kinfit.study.load import load_study

__all__ = ["add_arguments", "run"]


def run(args: argparse.Namespace) -> int:
    """The whole job: check, fit, sample (until converged or the step cap), diagnose, report."""
    import time


    t0 = time.perf_counter()

    def step(text: str) -> None:
        print(f"[{time.perf_counter() - t0:6.1f} s] {text}", flush=True)

    step(f"checking {args.study}")
    study = load_study(args.study)
    print(campaign_summary(study))
    out = prepare_out_dir(args.out)
    step("fitting all runs jointly (least squares, profile-likelihood intervals)")

    # the profile sides (and multistart refits) go to a local pool over the available cores
    # unless told otherwise (--workers 1: in this process)
    workers = args.workers if args.workers is not None else min(available_workers(), 4)
    with make_executor(workers=None if args.scheduler else workers,
                       scheduler=args.scheduler) as executor:
        result = fit(study, FitOptions(multistart=args.multistart, seed=args.seed,
                                       profile=True, progress=not args.quiet,
                                       executor=executor), argv=sys.argv)
    result.save(out)
    print(result.report())
    print_adequacy(result.fit.get("adequacy"))
    code = EXIT_OK if result.converged else EXIT_FAILED
    if args.steps > 0:
        step(f"sampling the posterior ({args.steps} steps at most)")
        post, content = sample_study(study, result, out, SampleOptions(
            max_steps=args.steps, chunk=min(500, args.steps), seed=args.seed,
            progress=not args.quiet, draws_csv=args.draws_csv), argv=sys.argv)
        print(post.report())
        print_adequacy(content.get("adequacy"))
        if post.interrupted:
            # what was sampled is checkpointed; the report is still written from it
            code = EXIT_INTERRUPTED
    step("diagnosing transport run by run")
    diagnosis = diagnose(study, result, posterior_dir=out)
    diagnosis.save(out)
    print(diagnosis.report())
    step("writing the report")
    written = build_report(study, out, out, argv=sys.argv)
    step(f"done: {written.html}")
    if code == EXIT_INTERRUPTED:
        print("kinfit: sampling was interrupted; the report shows the chain so far. To go on: "
              f"kinfit sample {args.study} --fit {out} --resume --steps {args.steps} --seed "
              f"{args.seed}, then kinfit report {args.study} --fit {out} --out {out}",
              file=sys.stderr)
    if code == EXIT_OK:
        code = adequacy_exit(args, result.fit.get("adequacy"))
    return code


def add_arguments(p: argparse.ArgumentParser) -> None:
    add_common(p, out=True)

    p.add_argument("--seed", type=int, default=DEFAULT_SEED,
                   help=f"seed (default {DEFAULT_SEED})")
    p.add_argument("--multistart", type=int, default=0, metavar="N",
                   help="extra least-squares starts")
    p.add_argument("--steps", type=int, default=10000,
                   help="posterior step cap; sampling stops earlier once converged (0: no "
                        "sampling; default 10000)")
    p.add_argument("--draws-csv", action="store_true",
                   help="write the posterior draws as plain CSV (default: compressed CSV)")

    add_parallel_arguments(p)
    p.add_argument("--quiet", action="store_true", help="no progress bars")
    p.add_argument("--require-adequate", action="store_true",
                   help="exit 1 when a model-adequacy test fails")
