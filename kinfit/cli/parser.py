"""The command line: the parser and the dispatch to one module per command (each with
``add_arguments(parser)`` and ``run(args) -> exit code``); all printing lives in this folder.

Exit codes: 0 done; 1 ran but did not converge or failed a criterion asked for; 2 bad input.
"""

from __future__ import annotations

import argparse
import sys
import warnings
from collections.abc import Sequence
from types import ModuleType
from typing import Any

from kinfit.cli import (
    audit,
    check,
    criteria,
    diagnose,
    fit,
    plan,
    predict,
    report,
    run,
    sample,
    simulate,
)
from kinfit.cli.common import EXIT_BAD_INPUT, EXIT_FAILED, EXIT_INTERRUPTED
from kinfit.core.version import __version__
from kinfit.errors import (
    ConvergenceWarning,
    IdentifiabilityWarning,
    KinfitError,
    PlausibilityWarning,
    RegimeWarning,
    StudyError,
)

__all__ = ["main", "build_parser", "KINFIT_WARNINGS"]

#: the warnings kinfit itself gives (everything else a command lets through is a leak)
KINFIT_WARNINGS = (ConvergenceWarning, IdentifiabilityWarning, RegimeWarning,
                   PlausibilityWarning)


class _Parser(argparse.ArgumentParser):
    """argparse that raises StudyError instead of exiting, so every bad input exits 2 alike."""

    def error(self, message: str) -> None:  # type: ignore[override]
        raise StudyError(f"{self.prog}: {message}; see '{self.prog} --help'")


#: command name -> (one-line help, module with ``add_arguments(parser)`` and ``run(args)``)
COMMANDS: dict[str, tuple[str, ModuleType]] = {
    "check": ("validate a study and show what the campaign can tell", check),
    "simulate": ("predict every run at the study's parameter values", simulate),
    "fit": ("fit all runs jointly: estimates, intervals, identifiability, regimes", fit),
    "sample": ("sample the posterior from the fit's optimum (emcee)", sample),
    "diagnose": ("where transport limits the rate: model-free tests and per-run criteria",
                 diagnose),
    "criteria": ("transport criteria for one measurement, no fitting", criteria),
    "report": ("write the reproducible fit report (HTML, Markdown, figures, tables)", report),
    "run": ("the whole job on a study: check, fit, sample, diagnose, report", run),
    "audit": ("audit claimed kinetics against transport criteria and data", audit),
    "predict": ("predict profiles or rates at new conditions, with bands", predict),
    "plan": ("propose the next runs: transport tests and a D-optimal design", plan),
}


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand."""
    parser = _Parser(prog="kinfit", description="Intrinsic kinetics from porous-catalyst "
                     "campaigns: transport-aware fitting, uncertainty, diagnosis, reports.")

    parser.add_argument("--version", action="version", version=f"kinfit {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name, (help_text, command) in COMMANDS.items():
        command.add_arguments(sub.add_parser(name, help=help_text, description=help_text))
    return parser


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
            return int(COMMANDS[args.command][1].run(args))
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
