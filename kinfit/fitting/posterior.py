"""Posterior sampling of a study (chemistry side): priors from the study file, the sampler
started at the least-squares optimum, posterior predictive bands per run, and per-run derived
quantities (eta, Weisz-Prater, Carberry) with the probability of each regime.

Writes, into the fit folder: posterior.json (results contract), posterior_draws.csv.gz (or
posterior_draws.csv on request), posterior_bands.csv, posterior.nc (NetCDF-4 with ArviZ's
groups) and the sampler
checkpoint posterior_checkpoint.npz (kept, so ``--resume`` continues it).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from kinfit.core.files import (
    DRAWS_FILES,
    manifest,
    recorded_path,
    write_frame_atomic,
    write_json_atomic,
)
from kinfit.estimate.posterior import Posterior
from kinfit.estimate.sampling import sample_problem
from kinfit.fitting.model_checks import posterior_adequacy
from kinfit.fitting.results import FitResult
from kinfit.fitting.saved import model_of_fit
from kinfit.model.compiled import Model
from kinfit.model.simulation import run_table
from kinfit.physics.criteria import Thresholds
from kinfit.physics.resistances import REGIMES
from kinfit.study.runs import Study

__all__ = ["SampleOptions", "sample_study", "posterior_run_summaries", "DEFAULT_SEED", "MAX_STEPS"]

_DERIVED = ("effectiveness_factor", "thiele_modulus", "weisz_prater", "carberry", "mears")


#: default seed of sampling (and of ``kinfit run``): same study, same chain
DEFAULT_SEED = 20261201
#: default step cap of sampling, as the README states
MAX_STEPS = 10_000


@dataclass(frozen=True)
class SampleOptions:
    """Options of ``kinfit sample`` (values only).

    Attributes
    ----------
    walkers : int or None
        Ensemble size (default: the sampler's choice, at least 2 x dimensions).
    max_steps : int
        Step cap.
    chunk : int
        Steps between checkpoints and convergence checks.
    tau_multiple : float
        Stop when the chain is longer than this multiple of the autocorrelation time.
    seed : int or None
        Seed of the walkers' start and moves (default :data:`DEFAULT_SEED`, so that a
        standalone ``kinfit sample`` is reproducible like ``kinfit run``; None draws one).
    resume : bool
        Continue from the checkpoint in the output folder.
    progress : bool
    n_predictive : int
        Draws used for predictive bands and derived quantities.
    stop_rule : str
        The sampler's stopping rule (see :func:`kinfit.estimate.sampling.sample_problem`).
    moves : str
        The sampler's proposal moves (same reference).
    draws_csv : bool
        Write the draws as plain ``posterior_draws.csv`` instead of the compressed
        ``posterior_draws.csv.gz``.
    """

    walkers: int | None = None
    max_steps: int = MAX_STEPS
    chunk: int = 500
    tau_multiple: float = 50.0
    seed: int | None = DEFAULT_SEED
    resume: bool = False
    progress: bool = True
    n_predictive: int = 200
    stop_rule: str = "converged"
    moves: str = "de-laplace"
    draws_csv: bool = False


def posterior_run_summaries(model: Model, draws: np.ndarray, *,
                            thresholds: Thresholds | None = None) -> dict[str, dict[str, Any]]:
    """Per-run derived quantities over posterior draws: median, q05, q95 of each criterion
    and the probability of each regime."""
    tables = [run_table(model, row, thresholds=thresholds) for row in draws]
    out: dict[str, dict[str, Any]] = {}
    for rid in model.run_ids:
        entry: dict[str, Any] = {}
        for key in _DERIVED:
            v = np.array([t[rid][key] for t in tables], dtype=float)
            entry[key] = {"median": float(np.median(v)), "q05": float(np.quantile(v, 0.05)),
                          "q95": float(np.quantile(v, 0.95))}
        labels = [t[rid]["regime"] for t in tables]
        entry["regime_probability"] = {r: labels.count(r) / len(labels) for r in REGIMES}
        out[rid] = entry
    return out


def sample_study(study: Study, fit: FitResult, out: Path, options: SampleOptions | None = None,
                 *, argv: Sequence[str] | None = None) -> tuple[Posterior, dict[str, Any]]:
    """Sample the posterior of the study's model, starting at the fit's estimates.

    Returns
    -------
    posterior : Posterior
    content : dict
        What was written to posterior.json.
    """
    options = options or SampleOptions()
    model, start = model_of_fit(study, fit)
    spec = model.spec
    problem = model.problem()
    priors = {c: spec.parameters[p].prior for c, p in zip(model.columns, model.column_parameter,
                                                          strict=True)
              if spec.parameters[p].prior is not None}
    for name in ("sigma", "sigma_rel"):
        if name in study.parameters and study.parameters[name].prior is not None:
            priors[name] = study.parameters[name].prior
    scales = fit.fit.get("error_scales") or None
    post = sample_problem(
        problem, start=start, priors=priors or None, scale_start=scales,
        n_walkers=options.walkers, max_steps=options.max_steps, chunk=options.chunk,
        tau_multiple=options.tau_multiple, seed=options.seed,
        checkpoint=out / "posterior_checkpoint.npz", resume=options.resume,
        progress=options.progress, stop_rule=options.stop_rule, moves=options.moves,
    )
    rng = np.random.default_rng(options.seed)
    # predictive band of the mean response at the observation times, and on a fine grid
    bands = post.predictive(model.predict, options.n_predictive, rng)
    frame = pd.DataFrame({"run": np.asarray(model.run_ids)[model.run_index],
                          "time [s]": model.times, "q05": bands.q05, "q50": bands.q50,
                          "q95": bands.q95})
    if spec.reactor == "batch":
        grid_t, grid_r = [], []
        for i, run in enumerate(study.runs):
            t = np.linspace(0.0, float(run.times.max()), 40)
            grid_t.append(t)
            grid_r.append(np.full(t.size, i))
        gt, gr = np.concatenate(grid_t), np.concatenate(grid_r)
        fine = post.predictive(lambda th: model.predict_profiles(th, gt, gr),
                               options.n_predictive, np.random.default_rng(options.seed))
        frame = pd.DataFrame({"run": np.asarray(model.run_ids)[gr], "time [s]": gt,
                              "q05": fine.q05, "q50": fine.q50, "q95": fine.q95})
    write_frame_atomic(out / "posterior_bands.csv", frame)
    # the draws table: compressed by default, plain CSV on request; one of the two only
    keep, drop = DRAWS_FILES[::-1] if options.draws_csv else DRAWS_FILES
    write_frame_atomic(out / keep, post.draws_frame())
    (out / drop).unlink(missing_ok=True)
    post.to_netcdf(out / "posterior.nc")  # NetCDF-4, ArviZ's groups (h5netcdf is declared)
    pick = rng.choice(post.n_draws, size=min(options.n_predictive // 2 or 1, post.n_draws),
                      replace=False)
    derived = posterior_run_summaries(model, np.asarray(post.draws)[pick][:, : post.n_model])
    diag = post.diagnostics
    content = {
        "parameters": post.summary(),
        "sampler": {**post.settings.to_dict(), "checkpoint": recorded_path(
            out / "posterior_checkpoint.npz", study.path)},
        "convergence": {
            "converged": bool(post.converged), "reasons": list(post.reasons),
            "verdict": post.verdict, "acceptance_fraction": float(post.acceptance_fraction),
            "tau": dict(zip(post.names, map(float, post.tau), strict=True)),
            "chain_shape": list(post.chain_shape), "interrupted": bool(post.interrupted),
        },
        "runs": derived,
        "predictive": {"band": "central 90 % of the mean response", "draws": bands.n_draws,
                       "failed": bands.n_failed},
        "adequacy": posterior_adequacy(model, study, post, fit.runs, n_draws=options.n_predictive,
                                       rng=rng),
        "manifest": manifest(files=study.files, seed=options.seed, argv=argv,
                             base=study.path),
    }
    del diag
    write_json_atomic(out / "posterior.json", content)
    return post, content
