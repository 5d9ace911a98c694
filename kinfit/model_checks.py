"""Whether the data reject the fitted model, said in the trade's terms (chemistry side of the
adequacy tests in :mod:`kinfit.estimate.adequacy`).

The campaign's factors (temperature, stirrer speed, particle size, catalyst loading, starting
concentration, and gas pressure where runs carry it) are the covariates of the trend tests;
each is also tested within the runs where a trend would point to a transport cause:

- temperature within the pore-affected and the film-affected runs (transport properties that
  change with temperature, through the solvent's viscosity);
- stirrer speed within the film-affected runs (the film law's agitation exponent);
- particle size within the film- and pore-affected runs;
- starting concentration within the pore-affected runs (the order, or adsorption, seen
  through the pore).

A run is "pore-affected" ("film-affected") when the pore (film) share of its resistance at the
estimate is at least :data:`AFFECTED_SHARE`, that is when the run is not transport-free by the
5 % rule of the regime labels. Temperature enters the regression as it is (K); the other
factors as logarithms, since their effects are multiplicative.

Each failed test is named with its likely cause and the study option that would test it.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
from numpy.typing import NDArray

from kinfit.estimate.adequacy import (
    ALPHA,
    MULTIPLICITY_RULE,
    AdequacyTest,
    Subset,
    predictive_tests,
    residual_tests,
    standardised_residuals,
)
from kinfit.estimate.problem import ErrorModel

__all__ = ["fit_adequacy", "posterior_adequacy", "adequacy_lines", "AFFECTED_SHARE",
           "CAMPAIGN_FACTORS"]

#: Share of the overall resistance from which a run counts as affected by that transport step.
AFFECTED_SHARE = 0.05

#: Factors tested, as Run attributes; ``gas_pressure`` only where the runs carry it.
CAMPAIGN_FACTORS = ("temperature", "stirrer_speed", "particle_diameter", "catalyst_loading",
                    "initial_concentration", "gas_pressure")

_WORDS = {
    "temperature": "temperature",
    "stirrer_speed": "stirrer speed",
    "particle_diameter": "particle size",
    "catalyst_loading": "catalyst loading",
    "initial_concentration": "starting concentration",
    "gas_pressure": "gas pressure",
}

_SUBSETS = {
    "temperature": ("pore", "film"),
    "stirrer_speed": ("film",),
    "particle_diameter": ("pore", "film"),
    "initial_concentration": ("pore",),
}


def _covariates(study: Any) -> dict[str, NDArray[np.float64]]:
    out: dict[str, NDArray[np.float64]] = {}
    for name in CAMPAIGN_FACTORS:
        vals = [getattr(r, name, None) for r in study.runs]
        if any(v is None for v in vals):
            continue
        x = np.array(vals, dtype=float)
        if not np.all(np.isfinite(x)):
            continue
        if name != "temperature":
            if np.any(x <= 0):
                continue
            x = np.log(x)
        if np.ptp(x) > 1e-9 * max(1.0, float(np.max(np.abs(x)))):
            out[name] = x
    return out


def _subsets(runs: Mapping[str, Mapping[str, Any]], study: Any) -> dict[str, list[Subset]]:
    """Per factor, the transport-affected runs, overall and stratified by the settings of the
    other transport factors (stirrer speed, particle size; one intercept and slope per
    setting): a transport property's temperature dependence shows at fixed agitation and
    size, while across them the trends can cancel."""
    run_ids = study.run_ids
    shares = {k: np.array([float((runs[r].get("shares") or {}).get(k, 0.0)) for r in run_ids])
              for k in ("pore", "film")}
    masks = {k: v >= AFFECTED_SHARE for k, v in shares.items()}
    setting = {"stirrer_speed": np.array([r.stirrer_speed * 60.0 for r in study.runs]),
               "particle_diameter": np.array([r.particle_diameter * 1e6 for r in study.runs])}
    out: dict[str, list[Subset]] = {}
    for factor, kinds in _SUBSETS.items():
        values = np.array([float(getattr(r, factor)) for r in study.runs])
        others = [o for o in setting if o != factor]
        keys = [tuple(float(f"{setting[o][i]:.4g}") for o in others) for i in range(len(values))]
        strata = np.unique(np.array(keys), axis=0, return_inverse=True)[1].reshape(-1)
        fixed = " and ".join(_WORDS[o] for o in others)
        subs: list[Subset] = []
        for kind in kinds:
            subs.append(Subset(f"{kind}-affected runs", masks[kind]))
            if np.unique(strata[masks[kind]]).size > 1:
                subs.append(Subset(f"{kind}-affected runs at fixed {fixed}", masks[kind],
                                   strata))
        out[factor] = [s for s in subs if s.mask.sum() >= 3
                       and np.unique(values[s.mask]).size >= 2 and not
                       (s.mask.all() and s.strata is None)]
    return out


def _cells(model: Any) -> NDArray[np.int_]:
    """Replicate cells: observations at the same run conditions and the same time."""
    cond = np.column_stack([model.T, model.N, model.dp, model.w, model.C0])[model.run_index]
    key = np.column_stack([cond, model.times])
    key = np.array([[float(f"{v:.9g}") for v in row] for row in key])
    _, inv = np.unique(key, axis=0, return_inverse=True)
    return inv.reshape(-1)


def _stated_scales(study: Any, error_model: ErrorModel) -> dict[str, float] | None:
    """The noise the study states (error scales given with ``vary = false``), else None."""
    out = {}
    for name in error_model.scale_names:
        if name not in study.parameters:
            return None
        p = study.parameters[name]
        if p.vary:
            return None
        out[name] = float(p.value)
    return out


def _cause(test: AdequacyTest, study: Any) -> str:
    """The failed test in the trade's words, with the study option that would test it."""
    name, factor, subset = test.name, test.factor, test.subset or ""
    if name == "residual_scale":
        rms = test.detail.get("rms")
        times = f" ({rms:.2g} times the stated noise)" if isinstance(rms, float) else ""
        return ("the residuals are larger than the stated noise" + times + ": the noise model "
                "or the model form is wrong (try [error] model = \"proportional\" or "
                "\"combined\", or compare models with --compare)")
    if name == "lack_of_fit":
        return ("the model misses the means of replicate measurements beyond their pure error: "
                "the model form is wrong (compare rate laws, film and pellet models with "
                "--compare)")
    if name == "serial":
        return ("the residuals wander in time within runs (too few sign changes): the shape of "
                "the rate law in concentration is wrong (let order vary, or try "
                "rate_law = \"langmuir_hinshelwood\" or \"reversible\" in [kinetics])")
    where = f" in the {subset}" if subset else ""
    word = _WORDS.get(factor or "", factor or "")
    if factor == "temperature":
        if "pore" in subset or "film" in subset:
            section = "[pellet]" if "pore" in subset else "[film]"
            return (f"the residuals trend with temperature{where}: transport properties that "
                    "change with temperature (diffusivity and film coefficient through the "
                    f"solvent's viscosity); set temperature_scaling = \"viscosity\" in {section}"
                    + (" and [film]" if section == "[pellet]" else ""))
        return ("the residuals trend with temperature: the temperature dependence is wrong "
                "(transport properties that change with temperature, temperature_scaling = "
                "\"viscosity\" in [pellet] and [film]; or an adsorption enthalpy, "
                "rate_law = \"langmuir_hinshelwood\")")
    if factor == "stirrer_speed":
        return (f"the residuals trend with stirrer speed{where}: the film law's agitation "
                "exponent is wrong (let agitation_exponent vary, or change [film] model, e.g. "
                "\"correlation\")")
    if factor == "particle_diameter":
        return (f"the residuals trend with particle size{where}: the size dependence of film or "
                "pore transport is wrong (let size_exponent and effective_diffusivity vary; "
                "check [pellet] diffusivity and the catalyst geometry)")
    if factor == "initial_concentration":
        return (f"the residuals trend with starting concentration{where}: the order or "
                "adsorption is wrong (let order vary, or try rate_law = "
                "\"langmuir_hinshelwood\" in [kinetics])")
    if factor == "catalyst_loading":
        return (f"the residuals trend with catalyst loading{where}: the rate is not "
                "proportional to the catalyst mass (gas-liquid transfer in a three-phase "
                "slurry, or a poison in the feed; check kla_ref and the loading column)")
    if factor == "gas_pressure":
        return (f"the residuals trend with gas pressure{where}: the gas order or the "
                "solubility is wrong (let gas_order vary)")
    return f"the residuals trend with {word}{where}"


def _verdict(tests: list[AdequacyTest], study: Any, *, kind: str) -> dict[str, Any]:
    failed = [t for t in tests if t.rejected]
    if not tests:
        message = "no adequacy test applies to this campaign"
    elif not failed:
        message = (f"no {kind} test rejects the model ({len(tests)} tests, Holm's rule at "
                   f"family-wise {ALPHA:g})")
    else:
        causes = list(dict.fromkeys(_cause(t, study) for t in failed))
        message = ("the data reject the model, so the intervals hold only if the model is "
                   "right: " + "; ".join(causes))
    return {"adequate": not failed, "tests": [t.to_dict() for t in tests], "message": message,
            "alpha": ALPHA, "rule": MULTIPLICITY_RULE, "kind": kind,
            "failed": list(dict.fromkeys(_cause(t, study) for t in failed))}


def fit_adequacy(model: Any, study: Any, est: Any, runs: Mapping[str, Mapping[str, Any]], *,
                 weights: NDArray[np.float64] | None = None) -> dict[str, Any]:
    """The ``fit.adequacy`` block of results.json for a least-squares estimate.

    Parameters
    ----------
    model : Model
    study : Study
    est : Estimate
        The least-squares estimate (residuals, fitted values, error scales).
    runs : mapping
        The per-run table at the estimate (resistance shares).
    weights : ndarray, shape (n,), optional
        The problem's precision weights.

    Returns
    -------
    dict
        ``adequate``, ``tests`` (name, statistic, p, factor, subset, ...), ``message``, and
        the rule used.
    """
    em = ErrorModel(est.error_model)
    stated = _stated_scales(study, em)
    scales = stated or dict(zip(est.scale_names, map(float, est.scale), strict=True))
    z = standardised_residuals(np.asarray(est.observed), np.asarray(est.fitted), error_model=em,
                               s_abs=scales.get("sigma", 1.0), s_rel=scales.get("sigma_rel", 1.0),
                               weights=weights)
    if not np.all(np.isfinite(z)):
        return {"adequate": None, "tests": [], "alpha": ALPHA, "rule": MULTIPLICITY_RULE,
                "kind": "least squares", "failed": [],
                "message": "the residuals are not finite at the estimate; no adequacy test"}
    tests = residual_tests(z, model.run_index, n_params=int(est.n_params),
                           covariates=_covariates(study),
                           subsets=_subsets(runs, study), cells=_cells(model),
                           noise_stated=stated is not None)
    out = _verdict(tests, study, kind="least-squares")
    out["noise"] = ("stated in the study" if stated is not None
                    else "estimated from the residuals (no scale test)")
    return out


def posterior_adequacy(model: Any, study: Any, post: Any, runs: Mapping[str, Mapping[str, Any]],
                       *, n_draws: int = 200, rng: np.random.Generator) -> dict[str, Any]:
    """Posterior predictive checks of the same statistics (posterior.json ``adequacy``).

    Parameters
    ----------
    model : Model
    study : Study
    post : Posterior
        Draws (model columns then error scales), the error model and fixed scales.
    runs : mapping
        The per-run table of the fit (resistance shares, for the regime subsets).
    n_draws : int
        Posterior draws used (a random subsample without replacement).
    rng : numpy.random.Generator
    """
    draws = np.asarray(post.draws)
    m = min(int(n_draws), draws.shape[0])
    pick = np.sort(rng.choice(draws.shape[0], size=m, replace=False))
    theta = draws[pick]
    f, _ = model.problem().predict_safe(theta[:, : post.n_model])  # failed rows are dropped
    vals: dict[str, Any] = dict(post.settings.scale_values)
    for k, name in enumerate(post.names[post.n_model:]):
        vals[name] = theta[:, post.n_model + k][:, None]
    sd = post.error_model.sigma(f, s_abs=vals.get("sigma", 1.0),
                                s_rel=vals.get("sigma_rel", 1.0), weights=model.weights)
    tests = predictive_tests(model.y, f, sd, model.run_index, covariates=_covariates(study),
                             subsets=_subsets(runs, study), cells=_cells(model),
                             rng=rng)
    out = _verdict(tests, study, kind="posterior predictive")
    out["draws"] = int(m)
    out["method"] = ("posterior predictive p-values (Gelman et al. 2013, ch. 6): replicated data "
                     "from each draw with its error scales; the share of draws whose replicated "
                     "statistic is at least as extreme as the observed one")
    return out


def adequacy_lines(adequacy: Mapping[str, Any] | None) -> list[str]:
    """A short console block: the verdict and only the failing tests."""
    if not adequacy:
        return []
    verdict = adequacy.get("adequate")
    head = ("model adequacy: adequate" if verdict else
            "model adequacy: NOT ADEQUATE" if verdict is False else "model adequacy: not tested")
    n = len(adequacy.get("tests", []))
    lines = [f"{head} ({n} {adequacy.get('kind', '')} tests, Holm's rule at family-wise "
             f"{adequacy.get('alpha', ALPHA):g})"]
    for t in adequacy.get("tests", []):
        if t.get("rejected"):
            where = f" [{t['factor']}" + (f", {t['subset']}" if t.get("subset") else "") + "]" \
                if t.get("factor") else ""
            stat = t.get("statistic")
            lines.append(f"  failed: {t['name']}{where}: statistic "
                         f"{stat if stat is None else format(stat, '.4g')}, p {t['p']:.3g}")
    for cause in adequacy.get("failed", []):
        lines.append(f"  - {cause}")
    return lines
