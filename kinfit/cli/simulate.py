"""kinfit simulate: predict every run at the study's parameter values."""

from __future__ import annotations

import argparse

from kinfit.cli.common import EXIT_OK, add_common
from kinfit.core.files import manifest, prepare_out_dir, write_frame_atomic, write_json_atomic
from kinfit.model.simulation import runs_frame, simulate
from kinfit.study.load import load_study

__all__ = ["add_arguments", "run"]


def run(args: argparse.Namespace) -> int:

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


def add_arguments(p: argparse.ArgumentParser) -> None:
    """Arguments of ``kinfit simulate STUDY --out DIR``."""
    add_common(p, out=True)
