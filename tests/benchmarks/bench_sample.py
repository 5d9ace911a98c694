"""Benchmark: posterior sampling of the demo campaign, 32 walkers x 5000 steps (a fixed
length: the stopping rule is set never to fire), started at the least-squares optimum.

Run from the repository root:  python3 tests/benchmarks/bench_sample.py
Last line: sample_seconds=<t> evals_per_s=<r>   (target: under 60 s on a 2-core machine)
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from kinfit.estimate.least_squares import fit_problem  # noqa: E402
from kinfit.estimate.sampling import sample_problem  # noqa: E402
from kinfit.fitting.fit import main_spec  # noqa: E402
from kinfit.model.compiled import Model  # noqa: E402
from kinfit.study.load import load_study  # noqa: E402

WALKERS, STEPS = 32, 5000


class Counting:
    """Counts likelihood evaluations (parameter sets) passed to the predictor."""

    def __init__(self, predict):
        self.predict, self.rows = predict, 0

    def __call__(self, theta):
        self.rows += len(theta)
        return self.predict(theta)


def main() -> None:
    study = load_study(ROOT / "examples" / "demo" / "study.toml")
    model = Model(main_spec(study), study)
    problem = model.problem()
    est = fit_problem(problem)
    counter = Counting(model.predict)
    from dataclasses import replace

    counted = replace(problem, predict=counter)
    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        post = sample_problem(counted, start=est.x, n_walkers=WALKERS, max_steps=STEPS,
                              chunk=1000, seed=1, checkpoint=Path(tmp) / "chain.npz",
                              progress=False, start_sd=est.stderr,
                              stop_rule="autocorrelation", tau_multiple=1e12)
        seconds = time.perf_counter() - t0
    print(post.report())
    print(f"{counter.rows} likelihood evaluations in {seconds:.1f} s")
    print(f"sample_seconds={seconds:.2f} evals_per_s={counter.rows / seconds:.0f}")


if __name__ == "__main__":
    main()
