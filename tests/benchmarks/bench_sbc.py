"""Full simulation-based calibration of the posterior sampler on first-order decay.

Talts, Betancourt, Simpson, Vehtari & Gelman (2018), "Validating Bayesian inference algorithms
with simulation-based calibration", arXiv:1804.06788, Algorithm 1: for each replicate draw the
parameters from the prior, simulate data, sample the posterior, and record the rank of each true
value among L posterior draws. If the sampler is right the ranks are uniform on 0..L; a
chi-square test over B bins checks it.

Model (invented for the check): C(t) = C0 exp(-k t) at 10 times, Gaussian noise of unknown
scale sigma, sampled together with k and C0. Priors: k ~ lognormal(median 0.1 1/s, sd_log 0.3),
C0 ~ normal(1.0, 0.1) mol/m3, sigma ~ lognormal(median 0.03, sd_log 0.3) mol/m3.

A negative control repeats the run with the sampler told a noise scale 0.4 times the truth
(sigma fixed), which must fail the test: it shows the check has power.

Run: ``python tests/benchmarks/bench_sbc.py [--replicates 200] [--seed 1] [--control 60]
[--stop-rule converged|autocorrelation] [--moves de-laplace|de|stretch]``.
Prints the rank histogram, the chi-square p-value per parameter, and the time per replicate.
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
from scipy import optimize, stats

from kinfit.errors import ConvergenceWarning
from kinfit.estimate.priors import Prior
from kinfit.estimate.problem import Problem, Space
from kinfit.estimate.sampling import sample_problem

__all__ = ["run_sbc", "main"]

T = np.array([0.0, 1, 2, 4, 6, 8, 12, 16, 20, 30])
SPACE = Space(("k", "C0"), np.array([0.0, 0.0]), np.array([np.inf, np.inf]), ("log", "none"))
PRIORS = {
    "k": Prior.lognormal(median=0.1, sd_log=0.3),
    "C0": Prior.normal(1.0, 0.1),
    "sigma": Prior.lognormal(median=0.03, sd_log=0.3),
}


def predict(x: np.ndarray) -> np.ndarray:
    """C0 exp(-k t) for parameter rows (k, C0); shape (m, 10)."""
    return x[:, 1:2] * np.exp(-x[:, 0:1] * T)


def run_sbc(
    replicates: int,
    seed: int,
    *,
    L: int = 99,
    bins: int = 20,
    sigma_factor: float | None = None,
    stop_rule: str = "converged",
    moves: str = "de-laplace",
) -> dict[str, object]:
    """Ranks of the truth among L posterior draws for each replicate.

    Parameters
    ----------
    replicates : int
    seed : int
        Seed of the replicate generator; replicate r samples with seed ``seed * 100000 + r``.
    L : int
        Posterior draws per rank (evenly spaced through the kept draws).
    bins : int
        Histogram bins for the chi-square test.
    sigma_factor : float, optional
        Negative control: fix sigma at this multiple of the true value instead of sampling it.
    stop_rule : str
        Passed to :func:`sample_problem` (the default rule, or emcee's length rule alone).
    moves : str
        Passed to :func:`sample_problem` (the sampler's proposal moves).
    """
    rng = np.random.default_rng(seed)
    names = ["k", "C0"] + (["sigma"] if sigma_factor is None else [])
    ranks = np.empty((replicates, len(names)), dtype=int)
    unconverged = 0
    t0 = time.perf_counter()
    for r in range(replicates):
        truth = np.array(
            [
                PRIORS["k"].rvs(rng, 1)[0],
                PRIORS["C0"].rvs(rng, 1, lower=0.0)[0],
                PRIORS["sigma"].rvs(rng, 1)[0],
            ]
        )
        y = predict(truth[None, :2])[0] + truth[2] * rng.standard_normal(T.size)
        fit = optimize.least_squares(
            lambda p, y=y: predict(p[None])[0] - y,
            [0.1, 1.0],
            bounds=([1e-9, 0.0], [np.inf, np.inf]),
        )
        prob = Problem(predict, y, SPACE, fit.x)
        kwargs: dict[str, object] = {}
        if sigma_factor is None:
            kwargs["priors"] = PRIORS
        else:
            kwargs.update(
                priors={n: PRIORS[n] for n in ("k", "C0")},
                sample_scale=False,
                scale_start=[sigma_factor * truth[2]],
            )
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            post = sample_problem(
                prob,
                start=fit.x,
                n_walkers=16,
                max_steps=6000,
                seed=seed * 100000 + r,
                progress=False,
                stop_rule=stop_rule,
                moves=moves,
                **kwargs,  # type: ignore[arg-type]
            )
        unconverged += not post.converged
        pick = post.draws[np.linspace(0, post.n_draws - 1, L).astype(int)]
        ranks[r] = np.sum(pick < truth[: len(names)], axis=0)
    elapsed = time.perf_counter() - t0
    out: dict[str, object] = {
        "names": names,
        "ranks": ranks,
        "seconds_per_replicate": elapsed / replicates,
        "unconverged": unconverged,
    }
    pvals = {}
    for j, n in enumerate(names):
        counts = np.histogram(ranks[:, j], bins=bins, range=(0, L + 1))[0]
        pvals[n] = (float(stats.chisquare(counts).pvalue), counts)
    out["pvalues"] = pvals
    return out


def _print(title: str, res: dict[str, object]) -> None:
    print(f"\n{title}")
    print(
        f"  {res['seconds_per_replicate']:.3f} s per replicate; "
        f"{res['unconverged']} replicates flagged not converged"
    )
    for name, (p, counts) in res["pvalues"].items():  # type: ignore[union-attr]
        print(f"  {name:<6} chi-square p = {p:.4f}   counts per bin: {' '.join(map(str, counts))}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--replicates", type=int, default=200)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--control", type=int, default=60, help="replicates of the negative control")
    ap.add_argument("--stop-rule", default="converged", choices=["converged", "autocorrelation"])
    ap.add_argument("--moves", default="de-laplace", choices=["de-laplace", "de", "stretch"])
    args = ap.parse_args()
    res = run_sbc(args.replicates, args.seed, stop_rule=args.stop_rule, moves=args.moves)
    _print(
        f"SBC, {args.replicates} replicates, k, C0 and sigma sampled, stop rule "
        f"'{args.stop_rule}', moves '{args.moves}' (expect p > 0.01):",
        res,
    )
    if args.control > 0:
        ctl = run_sbc(
            args.control, args.seed + 1, bins=10, sigma_factor=0.4, stop_rule=args.stop_rule,
            moves=args.moves,
        )
        _print(
            f"negative control, {args.control} replicates, sigma fixed at 0.4x the truth "
            "(expect p << 0.01):",
            ctl,
        )


if __name__ == "__main__":
    main()
