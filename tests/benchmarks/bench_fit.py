"""Benchmark: the demo campaign's joint fit (7 varying parameters), single start, no interval
computations: wall time and function evaluations.

Run from the repository root:  python3 tests/benchmarks/bench_fit.py
Last line: fit_seconds=<t> nfev=<n>   (target: under 5 s on a 2-core machine)
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from kinfit.estimate.least_squares import fit_problem  # noqa: E402
from kinfit.fitting.fit import main_spec  # noqa: E402
from kinfit.model.compiled import Model  # noqa: E402
from kinfit.study.load import load_study  # noqa: E402


def main() -> None:
    study = load_study(ROOT / "examples" / "demo" / "study.toml")
    model = Model(main_spec(study), study)
    problem = model.problem()
    model.predict(problem.x0[None, :])  # load the pellet table once, outside the timing
    t0 = time.perf_counter()
    est = fit_problem(problem)
    seconds = time.perf_counter() - t0
    print(f"{len(study.runs)} runs, {problem.n_obs} points, {problem.n_params} parameters")
    print(f"converged: {est.converged} ({est.message})")
    for name, value, se in zip(est.names, est.x, est.stderr, strict=True):
        print(f"  {name:<24} {value:12.5g} +- {se:.3g}")
    print(f"fit_seconds={seconds:.3f} nfev={est.nfev}")


if __name__ == "__main__":
    main()
