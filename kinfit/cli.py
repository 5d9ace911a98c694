"""The command line: parses arguments and calls the Python API; nothing else lives here.

Exit codes: 0 done; 1 ran but did not converge or failed a criterion asked for; 2 bad input.
"""

from __future__ import annotations

import argparse
import sys
import warnings
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from kinfit.errors import (
    ConvergenceWarning,
    IdentifiabilityWarning,
    KinfitError,
    PlausibilityWarning,
    RegimeWarning,
    StudyError,
)

__all__ = ["main", "build_parser"]

EXIT_OK, EXIT_FAILED, EXIT_BAD_INPUT = 0, 1, 2
EXIT_INTERRUPTED = 130  # Ctrl-C, as shells report SIGINT
#: the warnings kinfit itself gives (everything else a command lets through is a leak)
KINFIT_WARNINGS = (ConvergenceWarning, IdentifiabilityWarning, RegimeWarning,
                   PlausibilityWarning)


class _Parser(argparse.ArgumentParser):
    """argparse that raises StudyError instead of exiting, so every bad input exits 2 alike."""

    def error(self, message: str) -> None:  # type: ignore[override]
        raise StudyError(f"{self.prog}: {message}; see '{self.prog} --help'")


def _cmd_check(args: argparse.Namespace) -> int:
    from kinfit.campaign import campaign_summary
    from kinfit.fitting import main_spec
    from kinfit.study import load_study

    study = load_study(args.study)
    spec = main_spec(study)  # the model choices and the parameter table must fit together
    print(campaign_summary(study))
    print(f"\nmodel: {spec.label}; parameters {', '.join(spec.parameter_names)}")
    from kinfit.simulate import transport_scaling_warning

    warning = transport_scaling_warning(study, spec)
    if warning:
        print(warning)
    print("study is valid")
    return EXIT_OK


def _cmd_simulate(args: argparse.Namespace) -> int:
    from kinfit.outputs import manifest, prepare_out_dir, write_frame_atomic, write_json_atomic
    from kinfit.simulate import runs_frame, simulate
    from kinfit.study import load_study

    study = load_study(args.study)
    sim = simulate(study)
    out = prepare_out_dir(args.out)
    write_frame_atomic(out / "predictions.csv", sim.predictions)
    write_frame_atomic(out / "runs.csv", runs_frame(sim.runs))
    write_json_atomic(out / "simulation.json", {
        "study": study.name, "parameters": dict(study.parameters.values()), "runs": sim.runs,
        "manifest": manifest(files=study.files, base=study.path),
    })
    print(runs_frame(sim.runs).to_string(index=False, float_format=lambda v: f"{v:.4g}"))
    print(f"\nwrote {out / 'predictions.csv'}, {out / 'runs.csv'}, {out / 'simulation.json'}")
    return EXIT_OK


def _fit_options(args: argparse.Namespace):
    from kinfit.fitting import FitOptions

    return FitOptions(multistart=args.multistart, seed=args.seed, profile=not args.no_profile,
                      bootstrap=args.bootstrap,
                      bootstrap_kind="group" if args.bootstrap_runs else "residual",
                      progress=not args.quiet, max_nfev=args.max_nfev)


def _cmd_fit(args: argparse.Namespace) -> int:
    from dataclasses import replace

    from kinfit.fitting import fit
    from kinfit.outputs import prepare_out_dir
    from kinfit.parallel import executor_from_args
    from kinfit.study import load_study

    study = load_study(args.study)
    out = prepare_out_dir(args.out)
    with executor_from_args(args) as executor:
        result = fit(study, replace(_fit_options(args), executor=executor),
                     candidates=args.compare, argv=sys.argv)
    result.save(out)
    print(result.report())
    _print_adequacy(result.fit.get("adequacy"))
    print(f"\nwrote {out / 'results.json'} and {out / 'predictions.csv'}")
    boot = result.extras.get("bootstrap") or {}
    if boot.get("interrupted"):
        print(f"kinfit: bootstrap interrupted after {boot['n_done']} of {boot['n']} replicates; "
              "the results are saved with the intervals of the finished ones", file=sys.stderr)
        return EXIT_INTERRUPTED
    if not result.converged:
        print(f"kinfit: the fit did not converge: {result.fit['message']}", file=sys.stderr)
        return EXIT_FAILED
    return _adequacy_exit(args, result.fit.get("adequacy"))


def _print_adequacy(adequacy: Any) -> None:
    from kinfit.model_checks import adequacy_lines

    lines = adequacy_lines(adequacy)
    if lines:
        print("\n" + "\n".join(lines))


def _adequacy_exit(args: argparse.Namespace, adequacy: Any) -> int:
    """EXIT_FAILED when --require-adequate was given and an adequacy test failed."""
    if getattr(args, "require_adequate", False) and not (adequacy or {}).get("adequate"):
        print(f"kinfit: the model is not adequate: {(adequacy or {}).get('message', '')}",
              file=sys.stderr)
        return EXIT_FAILED
    return EXIT_OK


def _fit_arguments(p: argparse.ArgumentParser) -> None:
    _add_common(p, out=True)
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
    from kinfit.parallel import add_parallel_arguments

    add_parallel_arguments(p)
    p.add_argument("--max-nfev", type=int, default=None, metavar="N",
                   help="cap on function evaluations of the optimiser")
    p.add_argument("--quiet", action="store_true", help="no progress bars")
    p.add_argument("--require-adequate", action="store_true",
                   help="exit 1 when a model-adequacy test fails")


def _cmd_sample(args: argparse.Namespace) -> int:
    from kinfit.bayes import SampleOptions, sample_study
    from kinfit.outputs import prepare_out_dir
    from kinfit.results import FitResult
    from kinfit.study import load_study

    study = load_study(args.study)
    fit_dir = args.fit or args.out
    if fit_dir is None:
        raise StudyError("give --fit DIR (the folder of 'kinfit fit' results)")
    fit = FitResult.load(fit_dir)
    out = prepare_out_dir(args.out or fit_dir)
    options = SampleOptions(walkers=args.walkers, max_steps=args.steps, chunk=args.chunk,
                            tau_multiple=args.tau_multiple, seed=args.seed, resume=args.resume,
                            progress=not args.quiet, moves=args.moves)
    try:
        post, content = sample_study(study, fit, out, options, argv=sys.argv)
    except StudyError as exc:
        raise StudyError(_option_words(str(exc))) from None
    print(post.report())
    print(f"\nwrote {out / 'posterior.json'}, posterior_draws.csv, posterior_bands.csv")
    if post.interrupted:
        print("kinfit: sampling was interrupted; what was sampled is kept (use --resume)",
              file=sys.stderr)
        return EXIT_INTERRUPTED
    if args.require_converged and not post.converged:
        print(f"kinfit: the chain did not converge: {post.verdict}", file=sys.stderr)
        return EXIT_FAILED
    return EXIT_OK


#: the sampler's option names as the command line spells them
_SAMPLER_OPTIONS = {"n_walkers": "--walkers", "max_steps": "--steps", "chunk": "--chunk",
                    "tau_multiple": "--tau-multiple"}


def _option_words(text: str) -> str:
    """A sampler message with its internal option names replaced by the command's options."""
    for name, flag in _SAMPLER_OPTIONS.items():
        text = text.replace(f"the '{name}' option of sample_problem()", f"{flag}")
    return text


def _sample_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("study", type=Path, help="the study file (TOML)")
    p.add_argument("--fit", type=Path, default=None,
                   help="folder with results.json from 'kinfit fit' (default: --out)")
    p.add_argument("--out", type=Path, default=None,
                   help="output folder (default: the --fit folder)")
    p.add_argument("--walkers", type=int, default=None, help="ensemble size")
    from kinfit.bayes import DEFAULT_SEED, MAX_STEPS

    p.add_argument("--steps", type=int, default=MAX_STEPS,
                   help=f"step cap (default {MAX_STEPS})")
    p.add_argument("--chunk", type=int, default=500, help="steps between checkpoints")
    p.add_argument("--tau-multiple", type=float, default=50.0,
                   help="stop when the chain exceeds this many autocorrelation times")
    p.add_argument("--seed", type=int, default=DEFAULT_SEED,
                   help=f"seed (same seed, same chain; default {DEFAULT_SEED})")
    p.add_argument("--resume", action="store_true", help="continue from the checkpoint")
    p.add_argument("--moves", choices=("de", "stretch"), default="de",
                   help="proposal: differential-evolution move (default) or stretch move")
    p.add_argument("--require-converged", action="store_true",
                   help="exit 1 when the chain has not converged")
    p.add_argument("--quiet", action="store_true", help="no progress bar")


def _cmd_run(args: argparse.Namespace) -> int:
    """The whole job: check, fit, sample (until converged or the step cap), diagnose, report."""
    import time

    from kinfit.bayes import SampleOptions, sample_study
    from kinfit.campaign import campaign_summary
    from kinfit.diagnostics import diagnose
    from kinfit.fitting import FitOptions, fit
    from kinfit.outputs import prepare_out_dir
    from kinfit.report import build_report
    from kinfit.study import load_study

    t0 = time.perf_counter()

    def step(text: str) -> None:
        print(f"[{time.perf_counter() - t0:6.1f} s] {text}", flush=True)

    step(f"checking {args.study}")
    study = load_study(args.study)
    print(campaign_summary(study))
    out = prepare_out_dir(args.out)
    step("fitting all runs jointly (least squares, profile-likelihood intervals)")
    result = fit(study, FitOptions(multistart=args.multistart, seed=args.seed, profile=True,
                                   progress=not args.quiet), argv=sys.argv)
    result.save(out)
    print(result.report())
    _print_adequacy(result.fit.get("adequacy"))
    code = EXIT_OK if result.converged else EXIT_FAILED
    if args.steps > 0:
        step(f"sampling the posterior ({args.steps} steps at most)")
        post, content = sample_study(study, result, out, SampleOptions(
            max_steps=args.steps, chunk=min(500, args.steps), seed=args.seed,
            progress=not args.quiet), argv=sys.argv)
        print(post.report())
        _print_adequacy(content.get("adequacy"))
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
        code = _adequacy_exit(args, result.fit.get("adequacy"))
    return code


def _run_arguments(p: argparse.ArgumentParser) -> None:
    _add_common(p, out=True)
    from kinfit.bayes import DEFAULT_SEED

    p.add_argument("--seed", type=int, default=DEFAULT_SEED,
                   help=f"seed (default {DEFAULT_SEED})")
    p.add_argument("--multistart", type=int, default=0, metavar="N",
                   help="extra least-squares starts")
    p.add_argument("--steps", type=int, default=10000,
                   help="posterior step cap; sampling stops earlier once converged (0: no "
                        "sampling; default 10000)")
    p.add_argument("--quiet", action="store_true", help="no progress bars")
    p.add_argument("--require-adequate", action="store_true",
                   help="exit 1 when a model-adequacy test fails")


def _lazy(module: str, function: str) -> Callable[[argparse.Namespace], int]:
    """A command implemented in another module, imported only when it runs."""

    def run(args: argparse.Namespace) -> int:
        from importlib import import_module

        return int(getattr(import_module(module), function)(args))

    return run


def _lazy_arguments(module: str, function: str) -> Callable[[argparse.ArgumentParser], None]:
    def add(p: argparse.ArgumentParser) -> None:
        from importlib import import_module

        getattr(import_module(module), function)(p)

    return add


COMMANDS: dict[str, tuple[str, Callable[[argparse.Namespace], int]]] = {
    "audit": ("audit claimed kinetics against transport criteria and data",
              _lazy("kinfit.audit", "run_audit_command")),
    "predict": ("predict profiles or rates at new conditions, with bands",
                _lazy("kinfit.predict", "run_predict_command")),
    "plan": ("propose the next runs: transport tests and a D-optimal design",
             _lazy("kinfit.plan", "run_plan_command")),
    "report": ("write the reproducible fit report (HTML, Markdown, figures, tables)",
               _lazy("kinfit.report", "run_report_command")),
    "diagnose": ("where transport limits the rate: model-free tests and per-run criteria",
                 _lazy("kinfit.diagnostics", "run_diagnose_command")),
    "criteria": ("transport criteria for one measurement, no fitting",
                 _lazy("kinfit.calculator", "run_criteria_command")),
    "run": ("the whole job on a study: check, fit, sample, diagnose, report", _cmd_run),
    "sample": ("sample the posterior from the fit's optimum (emcee)", _cmd_sample),
    "fit": ("fit all runs jointly: estimates, intervals, identifiability, regimes", _cmd_fit),
    "check": ("validate a study and show what the campaign can tell", _cmd_check),
    "simulate": ("predict every run at the study's parameter values", _cmd_simulate),
}


def _add_common(p: argparse.ArgumentParser, *, out: bool = False) -> None:
    p.add_argument("study", type=Path, help="the study file (TOML)")
    if out:
        p.add_argument("--out", type=Path, default=Path("reports"),
                       help="output folder (default: reports)")


_ORDER = ("check", "simulate", "fit", "sample", "diagnose", "criteria", "report", "run",
          "audit", "predict", "plan")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand."""
    parser = _Parser(prog="kinfit", description="Intrinsic kinetics from porous-catalyst "
                     "campaigns: transport-aware fitting, uncertainty, diagnosis, reports.")
    from kinfit import __version__

    parser.add_argument("--version", action="version", version=f"kinfit {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    names = sorted(COMMANDS, key=lambda n: _ORDER.index(n) if n in _ORDER else len(_ORDER))
    for name in names:
        help_text = COMMANDS[name][0]
        p = sub.add_parser(name, help=help_text, description=help_text)
        _ARGUMENTS.get(name, lambda q: _add_common(q))(p)
    return parser


_ARGUMENTS: dict[str, Callable[[argparse.ArgumentParser], None]] = {
    "simulate": lambda p: _add_common(p, out=True),
    "fit": _fit_arguments,
    "sample": _sample_arguments,
    "run": _run_arguments,
    "diagnose": _lazy_arguments("kinfit.diagnostics", "add_diagnose_arguments"),
    "criteria": _lazy_arguments("kinfit.calculator", "add_criteria_arguments"),
    "report": _lazy_arguments("kinfit.report", "add_report_arguments"),
    "audit": _lazy_arguments("kinfit.audit", "add_audit_arguments"),
    "predict": _lazy_arguments("kinfit.predict", "add_predict_arguments"),
    "plan": _lazy_arguments("kinfit.plan", "add_plan_arguments"),
}


def _show_warning(message: Warning | str, category: type[Warning], filename: str, lineno: int,
                  file: Any = None, line: str | None = None) -> None:
    """Warnings on the command line as one plain line, without source file and code line."""
    print(f"kinfit: warning: {message}", file=sys.stderr if file is None else file)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``kinfit`` console script; returns the exit code."""
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        if not args.command:
            parser.print_help()
            return EXIT_BAD_INPUT
        with warnings.catch_warnings():
            # kinfit's own warnings are shown once each; any other filter (a caller's, or
            # python -W) is left as it is, so a test can turn library warnings into errors
            for category in KINFIT_WARNINGS:
                warnings.filterwarnings("default", category=category)
            warnings.showwarning = _show_warning
            return COMMANDS[args.command][1](args)
    except StudyError as exc:
        print(f"kinfit: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KinfitError as exc:
        print(f"kinfit: failed: {exc}", file=sys.stderr)
        return EXIT_FAILED
    except KeyboardInterrupt:
        print("kinfit: interrupted; outputs written so far are kept", file=sys.stderr)
        return EXIT_INTERRUPTED


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
