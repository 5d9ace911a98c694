"""The joint fit of a study: build the model, run the chemistry-free estimator, add intervals
(linearised, profile likelihood, bootstrap on request), identifiability in the trade's words,
per-run criteria and regime, and model comparison across candidate models.
"""

from __future__ import annotations

from collections.abc import Sequence
from concurrent.futures import Executor
from dataclasses import dataclass, field, replace
from dataclasses import replace as dc_replace
from typing import Any

import lmfit
import numpy as np

from kinfit.core.files import manifest
from kinfit.errors import StudyError, did_you_mean
from kinfit.estimate.bootstrap import bootstrap
from kinfit.estimate.compare import akaike_weights, f_test, likelihood_ratio_test
from kinfit.estimate.identifiability import identifiability
from kinfit.estimate.least_squares import fit_problem
from kinfit.estimate.result import Estimate
from kinfit.estimate.uncertainty import linearised_intervals, profile_intervals
from kinfit.fitting.identifiability import identifiability_warnings
from kinfit.fitting.model_checks import fit_adequacy
from kinfit.fitting.results import FitResult
from kinfit.model.candidates import candidate_defaults
from kinfit.model.compiled import Model, ModelSpec
from kinfit.model.simulation import point_table, run_table
from kinfit.physics.criteria import Thresholds
from kinfit.study.lmfit_bridge import table_from_lmfit
from kinfit.study.parameters import ParameterTable
from kinfit.study.runs import Study

__all__ = ["FitOptions", "fit", "fit_model", "fit_models", "main_spec", "parse_candidate",
           "comparison_rows"]


@dataclass(frozen=True)
class FitOptions:
    """Options of a fit (values only; checked when the fit starts).

    Attributes
    ----------
    multistart : int
        Extra starts from a Sobol design inside the bounds (0: the study's values only).
    seed : int or None
        Seed of the multistart design and the bootstrap.
    profile : bool
        Compute profile-likelihood intervals.
    bootstrap : int
        Bootstrap replicates (0: none).
    bootstrap_kind : {"residual", "group"}
        Resample residuals, or whole runs.
    progress : bool
        Progress bars for long computations.
    thresholds : Thresholds
        Criteria limits for the per-run table.
    executor : Executor or None
        Runs independent refits in parallel.
    max_nfev : int or None
    """

    multistart: int = 0
    seed: int | None = None
    profile: bool = True
    bootstrap: int = 0
    bootstrap_kind: str = "residual"
    progress: bool = False
    thresholds: Thresholds = field(default_factory=Thresholds)
    executor: Executor | None = None
    max_nfev: int | None = None

    def check(self) -> None:
        """Raise StudyError for invalid option values."""
        if not isinstance(self.multistart, int) or self.multistart < 0:
            raise StudyError(f"the 'multistart' option of fit() must be an int >= 0. Got "
                             f"{self.multistart!r} instead.")
        if not isinstance(self.bootstrap, int) or self.bootstrap < 0:
            raise StudyError(f"the 'bootstrap' option of fit() must be an int >= 0. Got "
                             f"{self.bootstrap!r} instead.")
        if self.bootstrap_kind not in ("residual", "group"):
            raise StudyError("the 'bootstrap_kind' option of fit() must be 'residual' or "
                             f"'group'. Got {self.bootstrap_kind!r} instead.")


def _film_options(film: Any) -> dict[str, Any]:
    """The film model's plain options (reference speed and diameter, SI) for the record."""
    out = dict(getattr(film, "options", {}) or {})
    for key in ("reference_speed", "reference_diameter", "power_number", "impeller_diameter",
                "liquid_volume", "slip_velocity", "superficial_velocity", "correlation"):
        if hasattr(film, key) and key not in out:
            out[key] = getattr(film, key)
    return {k: v for k, v in out.items() if isinstance(v, int | float | str)}


def _describe(spec: ModelSpec, study: Study) -> dict[str, Any]:
    law = spec.rate_law
    return {
        "label": spec.label,
        "rate_law": law.name,
        "rate_law_options": getattr(law, "options", {}),
        "film": spec.film.name,
        "film_options": _film_options(spec.film),
        "pellet": spec.pellet,
        "geometry": spec.geometry,
        "particle_density": spec.particle_density,
        "reactor": spec.reactor,
        "error_model": study.error_model,
        "temperature_scaling": spec.scaling.describe(spec.film.name),
        "equations": {
            "rate": "r = k(T) (Cs/C_ref)^n, k(T) = k_ref exp(-Ea/R (1/T - 1/T_ref))"
            if law.name == "power" else f"rate law '{law.name}'",
            "film": "kc a_m (Cb - Cs) = eta(Cs) r(Cs)",
            "film_coefficient": "kc = kc_ref (N/N_ref)^a (dp/dp_ref)^(-b)"
            if spec.film.name == "agitation" else f"film model '{spec.film.name}'",
            "pellet": "eta from the pellet diffusion-reaction equation (generalised modulus)"
            if spec.pellet != "none" else "no internal resistance (eta = 1)",
            "reactor": "dCb/dt = -w r_obs(Cb)" if spec.reactor == "batch"
            else "r_obs measured at the initial concentration",
        },
    }


def _parameters(model: Model, est: Estimate, lin, prof, boot) -> dict[str, dict[str, Any]]:
    spec = model.spec
    out: dict[str, dict[str, Any]] = {}
    for j, col in enumerate(est.names):
        p = spec.parameters[model.column_parameter[j]]
        entry: dict[str, Any] = {
            "estimate": float(est.x[j]), "unit": p.unit,
            "stderr": float(est.stderr[j]) if np.isfinite(est.stderr[j]) else None,
            "ci95_linear": [float(lin.lower[j]), float(lin.upper[j])],
            "vary": True, "start": float(est.x_start[j]) if est.x_start is not None else None,
            "bounds": [p.min, p.max], "scope": p.scope, "transform": p.transform,
            "at_bound": bool(est.at_bound[j]),
        }
        entry["ci95"], entry["ci_method"] = entry["ci95_linear"], "linear"
        if prof is not None:
            iv = prof.intervals
            lo = float(iv.lower[j]) if iv.lower_closed[j] else None
            hi = float(iv.upper[j]) if iv.upper_closed[j] else None
            entry["ci95_profile"] = [lo, hi]
            entry["ci95"], entry["ci_method"] = [lo, hi], "profile"
        if boot is not None:
            entry["ci95_bootstrap"] = [float(boot.intervals.lower[j]),
                                       float(boot.intervals.upper[j])]
        out[col] = entry
    for name in spec.parameter_names:
        p = spec.parameters[name]
        if not p.vary:
            out[name] = {"estimate": p.value, "unit": p.unit, "stderr": None, "ci95": None,
                         "ci_method": None, "vary": False}
    return out


def fit_model(spec: ModelSpec, study: Study, options: FitOptions | None = None, *,
              argv: Sequence[str] | None = None) -> FitResult:
    """Fit one model to a study.

    Parameters
    ----------
    spec : ModelSpec
    study : Study
    options : FitOptions

    Returns
    -------
    FitResult
    """
    options = options or FitOptions()
    options.check()
    model = Model(spec, study)
    problem = model.problem()
    est = fit_problem(problem, multistart=options.multistart, seed=options.seed,
                      max_nfev=options.max_nfev, executor=options.executor)
    lin = linearised_intervals(est)
    prof = None
    if options.profile and est.converged:
        prof = profile_intervals(problem, est, executor=options.executor,
                                 progress=options.progress)
    boot = None
    if options.bootstrap:
        boot = bootstrap(problem, est, n_boot=options.bootstrap, kind=(
            "group" if options.bootstrap_kind == "group" else "residual"), seed=options.seed,
            progress=options.progress, executor=options.executor)
    runs = run_table(model, est.x, thresholds=options.thresholds)
    flags = identifiability(est)
    warnings_ = identifiability_warnings(study, flags, runs)
    stats = est.statistics
    fit_block = {
        "converged": bool(est.converged), "status": int(est.status), "message": est.message,
        "n_obs": int(est.n_obs), "n_params": int(est.n_params), "dof": int(est.dof),
        "sse": float(est.sse), "sigma": float(est.sigma), "loglike": float(stats.loglike),
        "aic": float(stats.aic), "aicc": float(stats.aicc), "bic": float(stats.bic),
        "k": int(stats.k), "nfev": int(est.nfev), "n_starts": int(est.n_starts),
        "n_distinct_optima": int(est.n_distinct_optima), "error_model": est.error_model,
        "error_scales": dict(zip(est.scale_names, map(float, est.scale), strict=True)),
        "n_penalised": int(est.n_penalised), "penalty_reasons": list(est.penalty_reasons),
        "information_criteria": "Gaussian likelihood with the error scale estimated: "
        "-2 ln L = n [ln(2 pi SSE/n) + 1] (constant error); k = parameters + error scales",
        "adequacy": fit_adequacy(model, study, est, runs, weights=problem.weights),
    }
    if prof is not None and prof.better_optimum:
        fit_block["message"] = (f"{est.message}; profiling found a lower SSE than the fit "
                                "(not at the minimum)")
    pred = point_table(model, est.x, np.asarray(est.fitted))
    obs_col = "concentration" if spec.reactor == "batch" else "rate"
    pred.insert(2, f"observed_{obs_col}", model.y)
    pred.insert(3, "residual", np.asarray(est.residuals))
    extras: dict[str, Any] = {}
    if prof is not None:
        extras["profiles"] = {t.name: {"values": t.values.tolist(), "tau": t.tau.tolist()}
                              for t in prof.traces}
        extras["profile_t_crit"] = float(prof.t_crit)
    if boot is not None:
        extras["bootstrap"] = {"kind": boot.kind, "n": int(boot.replicates.shape[0]),
                               "n_done": int(boot.n_done), "n_failed": int(boot.n_failed),
                               "interrupted": bool(boot.interrupted),
                               "notes": list(boot.intervals.notes)}
        if boot.interrupted:
            fit_block["message"] = f"{fit_block['message']}; {boot.intervals.notes[-1]}"
    extras["covariance"] = np.asarray(est.covariance).tolist()
    return FitResult(
        study=study.name, model=_describe(spec, study),
        parameters=_parameters(model, est, lin, prof, boot), runs=runs, fit=fit_block,
        correlation={"names": list(est.names), "matrix": np.asarray(est.correlation).tolist()},
        identifiability=tuple(warnings_),
        manifest=manifest(files=study.files, seed=options.seed, argv=argv, base=study.path,
                          extra={"options": {"multistart": options.multistart,
                                             "profile": options.profile,
                                             "bootstrap": options.bootstrap,
                                             "bootstrap_kind": options.bootstrap_kind}}),
        predictions=pred, **extras,
    )


def parse_candidate(text: str, study: Study) -> ModelSpec:
    """A candidate model written ``RATE_LAW[/FILM[/PELLET]]``, e.g. ``power/none/direct``.

    Parameters the candidate needs come from the study's table, or from
    :func:`kinfit.model.candidates.candidate_defaults` when the table lacks them; parameters it does
    not use are left out. The label is the full ``RATE_LAW/FILM/PELLET``.
    """
    parts = [p.strip() for p in text.split("/")]
    if not 1 <= len(parts) <= 3 or not all(parts):
        raise StudyError(f"candidate '{text}' must be written RATE_LAW[/FILM[/PELLET]], "
                         "for example 'power/agitation/none'")
    law = parts[0]
    film = parts[1] if len(parts) > 1 else None
    pellet = parts[2] if len(parts) > 2 else None
    if law == "expression" and study.kinetics.get("rate_law") != "expression":
        raise StudyError(f"candidate '{text}': an expression rate law needs its formula and "
                         "its parameters, which a candidate name cannot carry; write it as the "
                         "study's [kinetics] and compare the present law as the candidate")
    probe = ModelSpec.from_study(study, rate_law=law, film=film, pellet=pellet,
                                 parameters=study.parameters, check=False)
    needed = probe.parameter_names
    defaults = candidate_defaults(law, study)
    missing = [n for n in needed if n not in study.parameters and n not in defaults]
    if missing:
        raise StudyError(f"candidate '{text}' needs parameter '{missing[0]}', which the study "
                         f"lacks and which has no default; add [parameters.{missing[0]}]")
    table = ParameterTable([study.parameters[n] if n in study.parameters else defaults[n]
                            for n in needed]
                           + [study.parameters[n] for n in ("sigma", "sigma_rel")
                              if n in study.parameters])
    return ModelSpec.from_study(study, rate_law=law, film=film, pellet=pellet,
                                parameters=table, label=probe.label)


def main_spec(study: Study, candidates: Sequence[str] = ()) -> ModelSpec:
    """The study's own model, with the parameter table cut to what it uses.

    Parameters that neither the study's model nor any candidate uses are rejected.
    """
    base = ModelSpec.from_study(study, check=False)
    used = set(base.parameter_names) | {"sigma", "sigma_rel"}
    for text in candidates:
        used |= set(parse_candidate(text, study).parameter_names)
    extra = [n for n in study.parameters if n not in used]
    if extra:
        raise StudyError(
            f"unknown parameter '{extra[0]}'{did_you_mean(extra[0], used)} for the model "
            f"({base.label}); the model uses "
            f"{sorted(base.parameter_names)} (and error scales sigma, sigma_rel)"
        )
    keep = [n for n in study.parameters if n in base.parameter_names or
            n in ("sigma", "sigma_rel")]
    return ModelSpec.from_study(study, parameters=study.parameters.subset(keep))


def fit(study: Study, options: FitOptions | None = None, *,
        candidates: Sequence[str] | None = None, argv: Sequence[str] | None = None,
        parameters: lmfit.Parameters | None = None) -> FitResult:
    """Fit the study's model (and candidate models, compared by AICc and BIC).

    Parameters
    ----------
    study : Study
    options : FitOptions
    candidates : sequence of str, optional
        Further models written ``RATE_LAW[/FILM[/PELLET]]``; the study's own model is always
        the first row of the comparison.
    argv : sequence of str, optional
        Command line recorded in the manifest.
    parameters : lmfit.Parameters, optional
        Starting values, bounds and vary flags (SI) replacing the study's, matched by name
        (for example ``previous.to_parameters()``); see
        :func:`kinfit.study.lmfit_bridge.table_from_lmfit`.

    Returns
    -------
    FitResult
        The study's model, with ``comparison`` filled when candidates were given.
    """
    if parameters is not None:
        study = dc_replace(study, parameters=table_from_lmfit(study.parameters, parameters))
    candidates = list(candidates or study.fit.get("compare", []) or [])
    spec = main_spec(study, candidates)
    result = fit_model(spec, study, options, argv=argv)
    if not candidates:
        return result
    options = options or FitOptions()
    specs = [spec] + [parse_candidate(c, study) for c in candidates]
    others = fit_models(specs[1:], study, replace(options, profile=False, bootstrap=0),
                        executor=options.executor)
    rows = comparison_rows([result, *others], [s.label for s in specs],
                           [set(s.parameter_names) for s in specs])
    return replace(result, comparison=tuple(rows))


def comparison_rows(results: Sequence[FitResult], labels: Sequence[str],
                    parameter_sets: Sequence[set[str]]) -> list[dict[str, Any]]:
    """SSE, AICc, BIC and Akaike weights (Burnham & Anderson 2002) for fits of the same data,
    with a likelihood-ratio test against the first model when one nests the other; the
    arithmetic is :mod:`kinfit.estimate.compare`'s, shared with :func:`compare_fits
    <kinfit.estimate.compare.compare_fits>`."""
    delta, weights = akaike_weights([r.fit["aicc"] for r in results])
    rows = []
    first = results[0]
    for i, (r, label) in enumerate(zip(results, labels, strict=True)):
        row = {"model": label, "sse": r.fit["sse"], "n_params": r.fit["n_params"],
               "aic": r.fit["aic"], "aicc": r.fit["aicc"], "bic": r.fit["bic"],
               "delta_aicc": float(delta[i]), "akaike_weight": float(weights[i]),
               "converged": r.fit["converged"]}
        if i > 0:
            small, big = (r, first) if r.fit["n_params"] < first.fit["n_params"] else (first, r)
            sets = (parameter_sets[i], parameter_sets[0])
            nested = sets[0] <= sets[1] or sets[1] <= sets[0]
            df = abs(big.fit["n_params"] - small.fit["n_params"])
            if nested and df > 0:
                lr, lr_p = likelihood_ratio_test(small.fit["loglike"], big.fit["loglike"], df)
                row["likelihood_ratio"] = {"statistic": lr, "df": int(df), "p_value": lr_p,
                                           "against": labels[0]}
                dof = big.fit["n_obs"] - big.fit["n_params"]
                F, f_p = f_test(small.fit["sse"], big.fit["sse"], df, dof)
                row["f_test"] = {"statistic": F, "df": [int(df), int(dof)], "p_value": f_p,
                                 "against": labels[0]}
        rows.append(row)
    return rows


def _fit_one(task: tuple[ModelSpec, Study, FitOptions]) -> FitResult:
    """Fit one candidate (module level, so that process pools can pickle it)."""
    spec, study, options = task
    return fit_model(spec, study, options)


def fit_models(
    specs: Sequence[ModelSpec],
    study: Study,
    options: FitOptions | None = None,
    *,
    executor: Executor | None = None,
) -> list[FitResult]:
    """Fit several candidate models of one study, one candidate per task.

    Parameters
    ----------
    specs : sequence of ModelSpec
        The candidates (e.g. from :func:`kinfit.fitting.fit.parse_candidate`).
    study : Study
    options : FitOptions, optional
        Options of every fit. Their own ``executor`` is dropped: each candidate runs whole in
        one worker (executors do not nest across processes).
    executor : concurrent.futures.Executor, optional
        Where the candidates run; None fits them one after another here.

    Returns
    -------
    list of FitResult
        In the order of ``specs``, the same whatever the executor.

    Examples
    --------
    >>> fit_models([], None)
    []
    """
    if not specs:
        return []
    opts = replace(options or FitOptions(), executor=None)
    tasks = [(spec, study, opts) for spec in specs]
    if executor is None:
        return [_fit_one(t) for t in tasks]
    return list(executor.map(_fit_one, tasks))
