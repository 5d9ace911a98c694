"""kinfit plan: the next runs."""

from __future__ import annotations

import argparse
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np

from kinfit.analysis.design import _levels, default_grid
from kinfit.analysis.plan import plan_runs, transport_tests
from kinfit.core.files import (
    prepare_out_dir,
    recorded_command,
)
from kinfit.core.units import to_si
from kinfit.errors import StudyError
from kinfit.fitting.results import FitResult
from kinfit.fitting.saved import load_fitted
from kinfit.study.load import load_study

__all__ = ["add_arguments", "run"]


def _levels_option(text: str | None, kind: str, name: str) -> tuple[float, ...] | None:

    if text is None:
        return None
    import re

    m = re.match(r"^\s*([-+0-9.eE,\s]+?)\s*([A-Za-z].*)$", text)
    if not m:
        raise StudyError(f"--{name} '{text}': write comma-separated numbers followed by one "
                         "unit, for example \"300, 600, 1200 rpm\"")
    try:
        nums = [float(s) for s in m.group(1).split(",") if s.strip()]
    except ValueError:
        raise StudyError(f"--{name} '{text}': '{m.group(1)}' is not a list of numbers") from None
    return tuple(float(v) for v in to_si(np.array(nums), m.group(2).strip(), kind,
                                         where=f"--{name}"))


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``kinfit plan STUDY --fit DIR [--runs K]``."""
    parser.add_argument("study", type=Path, help="the fitted study file (TOML)")
    parser.add_argument("--fit", type=Path, required=True,
                        help="folder with results.json of 'kinfit fit'")
    parser.add_argument("--runs", type=int, default=4, metavar="K",
                        help="number of further runs to choose (default 4)")
    parser.add_argument("--temperatures", default=None,
                        help="candidate temperatures, e.g. \"40, 55, 70 degC\" (default: the "
                             "campaign's)")
    parser.add_argument("--speeds", default=None,
                        help="candidate stirrer speeds, e.g. \"300, 600, 1200 rpm\" (default: "
                             "the campaign's and the Carberry speed)")
    parser.add_argument("--diameters", default=None,
                        help="candidate particle diameters, e.g. \"30, 100, 250 um\" (default: "
                             "the campaign's and the Weisz-Prater diameter)")
    parser.add_argument("--loadings", default=None,
                        help="candidate catalyst loadings, e.g. \"1, 2.5 g/L\"")
    parser.add_argument("--concentrations", default=None,
                        help="candidate initial concentrations, e.g. \"0.4, 0.8 mol/L\"")
    parser.add_argument("--seed", type=int, default=0,
                        help="seed of the random designs compared with (default 0)")
    parser.add_argument("--out", type=Path, default=None,
                        help="output folder (default: FIT/plan)")


def run(args: argparse.Namespace) -> int:
    """Run ``kinfit plan``; returns the exit code."""

    study = load_study(args.study)
    fit = FitResult.load(args.fit)
    given = {"temperature": _levels_option(args.temperatures, "temperature", "temperatures"),
             "stirrer_speed": _levels_option(args.speeds, "speed", "speeds"),
             "particle_diameter": _levels_option(args.diameters, "length", "diameters"),
             "catalyst_loading": _levels_option(args.loadings, "loading", "loadings"),
             "initial_concentration": _levels_option(args.concentrations, "concentration",
                                                     "concentrations")}
    grid = None
    if any(v is not None for v in given.values()):
        fitted = load_fitted(study, fit)
        rec = transport_tests(fitted)["recommended"]
        base = default_grid(study, speed=rec["stirrer_speed"], diameter=rec["particle_diameter"])
        grid = replace(base, **{k: _levels(v) for k, v in given.items() if v is not None})
    plan = plan_runs(study, fit, n_runs=args.runs, grid=grid, seed=args.seed)
    plan = replace(plan, manifest={**plan.manifest, "command": recorded_command(sys.argv)})
    out = Path(args.out) if args.out is not None else Path(args.fit) / "plan"
    prepare_out_dir(out)
    plan.save(out)
    print(plan.report())
    print(f"\nwrote {out / 'plan.json'}, {out / 'plan_runs.csv'} and {out / 'plan.md'}")
    return 0
