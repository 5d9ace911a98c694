"""How often the demo campaign's intervals contain the generator's truth, over noise replicates.

The demo (``examples/demo``, invented data) is one noise realisation of a stated truth
(``truth.toml``). Whether one realisation's 90 % intervals all contain the truth is a chance
event: with several parameters even perfectly calibrated intervals miss one of them often.
This script repeats the demo's design with fresh noise (same generator rule as
``examples/demo/generate.py``: constant sd 4 mol/m^3, the t = 0 sample drawn around the
nominal C0), fits every replicate by least squares from the study's start values, and counts
how often each central 90 % linearised interval (t-based, Bates & Watts 1988, ch. 2) holds the
truth, and how often all of them do at once. With ``--posterior N`` the first N replicates are
also sampled (emcee, default stopping rule) and the same counts are made for the central 90 %
posterior intervals (slow: about a minute and a half each on this machine).

For calibrated intervals each parameter's rate is 0.90 within its binomial error; the rate at
which all hold at once is below 0.90^p because of the correlations. The last line gives the
smallest per-parameter rate and the all-at-once rate.

Run: ``python tests/benchmarks/bench_demo_coverage.py [--replicates 200] [--seed 1]
[--posterior 0]``.
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from scipy import stats

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from kinfit.errors import ConvergenceWarning  # noqa: E402
from kinfit.estimate.least_squares import fit_problem  # noqa: E402
from kinfit.estimate.sampling import sample_problem  # noqa: E402
from kinfit.fitting import main_spec  # noqa: E402
from kinfit.model import Model, ModelSpec  # noqa: E402
from kinfit.study import load_study  # noqa: E402

SIGMA = 4.0  # mol/m^3, as in examples/demo/generate.py
LEVEL = 0.90


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--replicates", type=int, default=200)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--posterior", type=int, default=0, metavar="N",
                    help="also sample the posterior of the first N replicates")
    args = ap.parse_args()
    demo = ROOT / "examples" / "demo"
    truth_study = load_study(demo / "truth.toml")
    truth_model = Model(ModelSpec.from_study(truth_study), truth_study)
    clean = truth_model.predict(truth_model.x0[None, :])[0]
    truth = dict(zip(truth_model.problem().space.names, truth_model.x0, strict=True))
    c0 = np.array([r.initial_concentration for r in truth_study.runs])
    first = np.concatenate([[0], np.cumsum([r.n_obs for r in truth_study.runs])[:-1]])

    study = load_study(demo / "study.toml")
    problem = Model(main_spec(study), study).problem()
    names = problem.space.names
    x_true = np.array([truth[n] for n in names])
    dof = problem.n_obs - problem.n_params
    tq = stats.t.ppf(0.5 + LEVEL / 2, dof)
    rng = np.random.default_rng(args.seed)
    hits = np.zeros((0, len(names)), dtype=bool)
    post_hits = np.zeros((0, len(names)), dtype=bool)
    t0 = time.perf_counter()
    for i in range(args.replicates):
        y = clean + rng.normal(0.0, SIGMA, clean.size)
        y[first] = c0 + rng.normal(0.0, SIGMA, first.size)
        rep = dataclasses.replace(problem, y=np.maximum(y, 0.0))
        est = fit_problem(rep, warn=False)
        if not est.converged:  # no interval from a failed fit: a miss for every parameter
            print(f"replicate {i}: fit did not converge ({est.message}); counted as a miss")
            hits = np.vstack([hits, np.zeros(len(names), dtype=bool)])
            if i < args.posterior:
                post_hits = np.vstack([post_hits, np.zeros(len(names), dtype=bool)])
            continue
        hits = np.vstack([hits, np.abs(est.x - x_true) <= tq * est.stderr])
        if i < args.posterior:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", ConvergenceWarning)
                post = sample_problem(rep, start=est.x, seed=i, progress=False)
            q = np.quantile(post.draws[:, : len(names)], [0.05, 0.95], axis=0)
            # a posterior that did not converge counts as a miss
            post_hits = np.vstack([post_hits, (q[0] <= x_true) & (x_true <= q[1])
                                   & bool(post.converged)])
            print(f"replicate {i}: posterior {'converged' if post.converged else 'NOT converged'}"
                  f" after {post.chain_shape[0]} steps", flush=True)
    seconds = time.perf_counter() - t0
    _report("linearised (t-based) 90 % intervals", names, hits)
    if post_hits.shape[0]:
        _report("posterior central 90 % intervals", names, post_hits)
    print(f"{seconds:.1f} s")
    rates = hits.mean(axis=0)
    print(f"replicates={hits.shape[0]} min_coverage={rates.min():.3f} "
          f"joint_coverage={np.all(hits, axis=1).mean():.3f}")


def _report(title: str, names: tuple[str, ...], hits: np.ndarray) -> None:
    n = hits.shape[0]
    se = math.sqrt(LEVEL * (1 - LEVEL) / n)
    print(f"\n{title}, {n} replicates (nominal {LEVEL:.2f} +- {se:.3f} binomial se):")
    for name, rate in zip(names, hits.mean(axis=0), strict=True):
        print(f"  {name:<24} {rate:.3f}")
    print(f"  {'all at once':<24} {np.all(hits, axis=1).mean():.3f}")


if __name__ == "__main__":
    main()
