"""Monte Carlo coverage of kinfit's 95 % intervals (not collected as a unit test).

Model: y = a exp(-k t) + e, a = 2, k = 0.8, t = 12 points on [0, 4], e ~ N(0, sigma^2) with
sigma known to the generator (0.05 by default, or larger to make the model more nonlinear).
For every replicate the script fits through ``fit_problem`` and records whether the
linearised (t-based) and profile-t intervals contain the truth; optionally the residual
bootstrap too. It prints the coverage with its binomial standard error next to the nominal
level. Profile intervals should sit closer to 0.95 than linearised ones when the noise is
large (Bates & Watts 1988, ch. 6; Donaldson & Schnabel 1987, *Technometrics* 29, 67-82).

Run: ``python tests/benchmarks/bench_coverage.py --replicates 300 --sigma 0.05``
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from kinfit.estimate.least_squares import fit_problem
from kinfit.estimate.problem import Problem, Space
from kinfit.estimate.uncertainty import bootstrap, linearised_intervals, profile_intervals

__all__ = ["main"]

T = np.linspace(0.0, 4.0, 12)
TRUTH = np.array([2.0, 0.8])


def decay(x: np.ndarray) -> np.ndarray:
    return x[:, :1] * np.exp(-x[:, 1:2] * T)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--replicates", type=int, default=300)
    ap.add_argument("--sigma", type=float, default=0.05)
    ap.add_argument("--seed", type=int, default=2024)
    ap.add_argument(
        "--bootstrap", type=int, default=0, help="bootstrap replicates per fit (0: skip)"
    )
    args = ap.parse_args()
    rng = np.random.default_rng(args.seed)
    space = Space(("a", "k"), np.zeros(2), np.full(2, np.inf), ("log", "log"))
    f_true = decay(TRUTH[None, :])[0]
    hits = {"linearised": np.zeros(2), "profile": np.zeros(2), "bootstrap": np.zeros(2)}
    n_ok = 0
    t0 = time.perf_counter()
    for _ in range(args.replicates):
        y = f_true + rng.normal(loc=0.0, scale=args.sigma, size=T.size)
        problem = Problem(decay, y, space, np.ones(2))
        est = fit_problem(problem, warn=False)
        if not est.converged:  # a fit that did not converge gives no interval: a miss
            continue
        n_ok += 1
        for name, iv in (
            ("linearised", linearised_intervals(est)),
            ("profile", profile_intervals(problem, est).intervals),
        ):
            hits[name] += (iv.lower <= TRUTH) & (TRUTH <= iv.upper)
        if args.bootstrap:
            bs = bootstrap(
                problem, est, n_boot=args.bootstrap, seed=int(rng.integers(2**31)), progress=False
            )
            iv = bs.intervals
            hits["bootstrap"] += (iv.lower <= TRUTH) & (TRUTH <= iv.upper)
    elapsed = time.perf_counter() - t0
    se = np.sqrt(0.95 * 0.05 / args.replicates)
    print(
        f"replicates: {n_ok} converged of {args.replicates}; sigma = {args.sigma}; {elapsed:.1f} s"
    )
    print(f"nominal 0.950, binomial standard error {se:.3f}")
    for name, h in hits.items():
        if name == "bootstrap" and not args.bootstrap:
            continue
        cov = h / args.replicates  # non-converged replicates count as misses
        print(f"{name:>11s}: coverage a = {cov[0]:.3f}, k = {cov[1]:.3f}")


if __name__ == "__main__":
    main()
