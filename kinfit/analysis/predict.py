"""Predictions at new conditions from a fitted campaign: concentration profiles (batch) or
observed rates (rate campaign) at other particle sizes, stirrer speeds, temperatures, loadings
and concentrations, with 90 % bands from the posterior draws or, without them, from the
linearised covariance; the effectiveness factor and the regime at each condition; the
just-suspended check of slurry conditions (Zwietering 1958). A condition outside the
campaign's range of a factor, or one that would carry a film coefficient fitted only to
film-limited data elsewhere, is refused unless ``extrapolate=True`` (``--extrapolate``), and
every output then marks it as extrapolated.

New conditions become :class:`~kinfit.study.load.Run` records of a study built with
``dataclasses.replace``, so the same compiled, vectorised physics (:class:`~kinfit.model.compiled.Model`)
predicts them as it fitted the campaign.

Bands (central 90 % of the mean response over parameter draws):

- posterior: a seeded subsample of ``posterior_draws.csv`` in the fit folder (written by
  ``kinfit sample``);
- covariance: multivariate normal draws in the optimiser's internal coordinates (ln x for
  log-transformed parameters), ``u ~ N(u_hat, D^-1 C D^-1)`` with ``D = diag(dx/du)`` and ``C``
  the linearised covariance of the fit (Bates & Watts 1988, ch. 2); draws outside the bounds
  are dropped.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from kinfit.analysis.suspension import suspension_check
from kinfit.core.files import (
    draws_file,
    manifest,
    to_plain,
    write_frame_atomic,
    write_json_atomic,
)
from kinfit.errors import KinfitError, RegimeWarning, StudyError
from kinfit.estimate.evaluation import Evaluator, jacobian_internal
from kinfit.fitting.results import FitResult
from kinfit.fitting.saved import (
    _PHYSICS_ERRORS,
    FittedModel,
    covariance_draws,
    load_fitted,
    posterior_draws,
    predict_rows,
)
from kinfit.model.compiled import Model
from kinfit.model.simulation import run_table
from kinfit.physics.criteria import Thresholds
from kinfit.physics.resistances import REGIMES
from kinfit.study.conditions import (
    FACTOR_ALIASES,
    FACTOR_KINDS,
    PAD_RUN,
    Condition,
    _unique_ids,
    campaign_defaults,
    conditions_from_argument,
    conditions_study,
    display,
    parse_conditions,
    parse_times,
    read_conditions,
)
from kinfit.study.runs import FACTORS, Study

__all__ = ['Condition', 'FittedModel', 'Prediction', 'ExtrapolationRefused', 'FACTOR_KINDS', 'FACTOR_ALIASES', 'PAD_RUN', 'campaign_defaults', 'parse_conditions', 'read_conditions', 'conditions_from_argument', 'conditions_study', 'display', 'load_fitted', 'covariance_draws', 'posterior_draws', 'parse_times', 'predict_conditions', 'film_information', 'outside_ranges']

Array = NDArray[np.float64]

RANGE_RTOL = 0.01
#: share of the information about kc_ref coming from film-regime runs above which the film
#: coefficient counts as "fitted only to film-limited data"
FILM_INFORMATION_SHARE = 0.9


class ExtrapolationRefused(KinfitError):
    """A prediction that would carry a film coefficient fitted only to film-limited data to
    another stirrer speed or particle size, or a condition outside the campaign's range of a
    factor (pass ``extrapolate=True`` to override).

    Attributes
    ----------
    reasons : list of str
        One sentence per refused condition.

    Examples
    --------
    >>> str(ExtrapolationRefused(["condition 'P1': dp 500 um outside 30-250 um"]))
    "condition 'P1': dp 500 um outside 30-250 um"
    """

    def __init__(self, reasons: Sequence[str]) -> None:
        self.reasons = list(reasons)
        super().__init__("; ".join(self.reasons))


# ------------------------------------------------------------------------------ range checks
def outside_ranges(study: Study, condition: Condition, *, rtol: float = RANGE_RTOL
                   ) -> list[dict[str, Any]]:
    """Factors of ``condition`` outside the campaign's [min, max] (relative tolerance ``rtol``),
    each ``{factor, value, min, max}`` in SI."""
    out = []
    for f in FACTORS:
        v = np.array([r.factor(f) for r in study.runs], dtype=float)
        lo, hi = float(v.min()), float(v.max())
        x = condition.factors()[f]
        if x < lo * (1 - rtol) or x > hi * (1 + rtol):
            out.append({"factor": f, "value": x, "min": lo, "max": hi})
    return out


def film_information(fitted: FittedModel) -> dict[str, Any]:
    """Where the information about the fitted film coefficient comes from.

    The Fisher information of each ``kc_ref`` column in internal coordinates,
    ``sum_i w_i J_i^2 / sigma_i^2``, is split between the runs by their regime at the estimate.

    Returns
    -------
    dict
        ``fitted`` (bool: kc_ref varies), ``all_film`` (every run's regime is "film"),
        ``film_share`` (share of the kc_ref information from film-regime runs, or None),
        ``film_only`` (all_film or film_share >= :data:`FILM_INFORMATION_SHARE`), ``regimes``.
    """

    model = fitted.model
    regimes = {rid: str(fitted.fit.runs.get(rid, {}).get("regime", "")) for rid in model.run_ids}
    if not regimes or any(not v for v in regimes.values()):

        regimes = {k: v["regime"] for k, v in run_table(model, fitted.theta).items()}
    cols = [j for j, c in enumerate(model.column_parameter) if c == "kc_ref"]
    all_film = all(v == "film" for v in regimes.values())
    out: dict[str, Any] = {"fitted": bool(cols), "all_film": all_film, "film_share": None,
                           "regimes": regimes}
    if cols:
        problem = model.problem(x0=fitted.theta)
        u = problem.space.to_internal(fitted.theta)
        jac = jacobian_internal(problem, Evaluator(problem), u, columns=np.array(cols))
        if jac is not None:
            sd = fitted.sigma(model.y, model.weights)
            info = np.sum((jac / sd[:, None]) ** 2, axis=1)
            film_rows = np.array([regimes[model.run_ids[i]] == "film" for i in model.run_index])
            total = float(info.sum())
            out["film_share"] = float(info[film_rows].sum() / total) if total > 0 else None
    share = out["film_share"]
    out["film_only"] = bool(cols) and (all_film or (share is not None
                                                    and share >= FILM_INFORMATION_SHARE))
    return out


#: why a prediction outside the campaign's range of each factor is not warranted
_OUTSIDE_WHY = {
    "temperature": "the rate constant's Arrhenius law and the transport properties were fitted "
                   "only inside that range; beyond it the mechanism, an adsorption step or a "
                   "new transport limit may change the apparent activation energy",
    "stirrer_speed": "the agitation law of the film coefficient was fitted only inside that "
                     "range; beyond it the film coefficient (and, at low speed, the suspension "
                     "of the catalyst) is not known",
    "particle_diameter": "the film coefficient's size law and the pore-diffusion length were "
                         "fitted only inside that range; beyond it the effectiveness factor "
                         "and the film resistance are extrapolated",
    "catalyst_loading": "the campaign measured the rate per catalyst mass only inside that "
                        "range; beyond it gas-liquid transfer or suspension may limit the rate",
    "initial_concentration": "the rate law's order was fitted only inside that range; beyond "
                             "it saturation or inhibition may bend the rate",
}


def _film_why(film: Mapping[str, Any]) -> str:
    return ("every run of the campaign was film-limited" if film["all_film"] else
            f"{film['film_share']:.0%} of the information about kc_ref came from "
            "film-limited runs")


def _refusal_reasons(c: Condition, outside: Sequence[Mapping[str, Any]],
                     film: Mapping[str, Any]) -> list[str]:
    """One sentence per reason not to trust a prediction at ``c``: a factor outside the
    campaign, and a film coefficient known only from film-limited runs carried elsewhere."""
    out = []
    for o in outside:
        f_ = o["factor"]
        out.append(f"condition '{c.id}': {display(f_, o['value'])} lies outside the campaign's "
                   f"{display(f_, o['min'], symbol=False)} to "
                   f"{display(f_, o['max'], symbol=False)}: {_OUTSIDE_WHY[f_]}")
    film_factors = [o["factor"] for o in outside
                    if o["factor"] in ("stirrer_speed", "particle_diameter")]
    if film["film_only"] and film_factors:
        out.append(f"condition '{c.id}': {' and '.join(film_factors)} outside the campaign, "
                   f"but {_film_why(film)}, so the film coefficient (and the kinetics behind "
                   "it) is not known at other speeds or sizes")
    return out


def _check_covariance(fitted: FittedModel, film: Mapping[str, Any]) -> None:
    """Refuse bands from a covariance that is not positive semi-definite (unidentified
    parameters), saying why in the trade's terms."""
    cov = fitted.internal_covariance()
    if cov is None:
        return
    sym = 0.5 * (cov + cov.T)
    lam = np.linalg.eigvalsh(sym) if np.all(np.isfinite(sym)) else np.array([-1.0])
    if lam.min() >= -1e-8 * max(abs(lam.max()), 1e-300):
        return
    cause = (f"{_film_why(film)}, so the film hides the kinetics and the parameters behind it "
             "are not identified" if film["film_only"] else
             "some parameters are not identified by the data (see the identifiability notes "
             "of 'kinfit fit')")
    raise KinfitError(f"the fit's covariance is not positive definite: {cause}; no band can "
                      "be given; fix the unidentified parameters (vary = false) or run "
                      "'kinfit sample' for posterior draws")


# ------------------------------------------------------------------------------ prediction
@dataclass(frozen=True)
class Prediction:
    """Predictions at new conditions.

    Attributes
    ----------
    study : str
    kind : {"profile", "rate"}
    conditions : tuple of Condition
    frame : DataFrame
        Long form: ``condition``, factors (SI), ``time [s]`` (profiles), the estimate at the
        fitted values ``concentration [mol/m^3]`` (or ``rate [mol/(kg*s)]``) and the band
        quantiles ``concentration_q05 [mol/m^3]``, ``..._q50``, ``..._q95``.
    summary : dict
        condition id -> factors, ``defaulted``, ``outside_range``, ``initial_rate``
        {estimate, q05, q50, q95}, ``effectiveness_factor`` {estimate, q05, q95}, ``regime``,
        ``regime_probability``, the per-run criteria of the results contract, ``refused``.
    band : dict
        ``source`` ("posterior" or "covariance"), ``level``, ``draws``, ``failed``.
    film : dict
        :func:`film_information` of the fit.
    warnings : tuple of str
    extrapolated : bool
        Some condition was predicted outside what the campaign warrants (``extrapolate=True``);
        every output then says so.
    """

    study: str
    kind: str
    conditions: tuple[Condition, ...]
    frame: pd.DataFrame
    summary: Mapping[str, Mapping[str, Any]]
    band: Mapping[str, Any]
    film: Mapping[str, Any]
    warnings: tuple[str, ...] = ()
    manifest: Mapping[str, Any] = field(default_factory=dict)
    extrapolated: bool = False

    def to_dict(self) -> dict[str, Any]:
        """Plain-Python content of predictions.json."""

        return to_plain({
            "kinfit_predictions": 1, "study": self.study, "kind": self.kind,
            "extrapolated": self.extrapolated,
            "band": self.band, "film_information": self.film,
            "conditions": self.summary, "warnings": list(self.warnings),
            "units": {"temperature": "K", "stirrer_speed": "1/s (revolutions per second)",
                      "particle_diameter": "m", "catalyst_loading": "kg/m^3",
                      "initial_concentration": "mol/m^3", "time": "s",
                      "concentration": "mol/m^3", "rate": "mol/(kg*s)"},
            "manifest": self.manifest,
        })

    def save(self, folder: str | Path) -> Path:
        """Write predictions.csv and predictions.json atomically into ``folder``."""

        folder = Path(folder)
        write_frame_atomic(folder / "predictions.csv", self.frame)
        return write_json_atomic(folder / "predictions.json", self.to_dict())

    def report(self) -> str:
        """Console summary: one block per condition."""
        lo, hi = _quantile_names(self.band.get("level", 0.9))
        lines = [f"predictions for study '{self.study}': {len(self.conditions)} condition(s); "
                 f"{self.band['level']:.0%} bands from {self.band['source']} "
                 f"({self.band['draws']} draws)"]
        if self.extrapolated:
            lines.append("EXTRAPOLATED: some conditions lie where the campaign does not warrant "
                         "a prediction (--extrapolate); their numbers are not backed by data")
        for c in self.conditions:
            s = self.summary[c.id]
            r = s["initial_rate"]
            eta = s["effectiveness_factor"]
            lines.append("")
            lines.append(f"  {c.id}: {c.label()}"
                         + (f"  (defaults: {', '.join(c.defaulted)})" if c.defaulted else "")
                         + ("  [EXTRAPOLATED]" if s["extrapolated_on_request"] else ""))
            lines.append(f"    initial rate {r['estimate']:.4g} mol/(kg s) "
                         f"[{r[lo]:.4g}, {r[hi]:.4g}]; eta {eta['estimate']:.3f} "
                         f"[{eta[lo]:.3f}, {eta[hi]:.3f}]; regime {s['regime']}")
            susp = s.get("suspension")
            if susp:
                m = susp["message"]
                lines.append(f"    {m}" if m.startswith(("suspension", "not a slurry"))
                             else f"    suspension: {m}")
        # the reasons and warnings themselves go to stderr once (warnings.warn), not here
        return "\n".join(lines)


def _quantile_names(level: float) -> tuple[str, str]:
    a = round(100 * (1 - level) / 2)
    return f"q{a:02d}", f"q{100 - a:02d}"


def predict_conditions(study: Study, fit: FitResult, conditions: Sequence[Condition], *,
                       fit_dir: str | Path | None = None, times: Array | None = None,
                       n_draws: int = 400, seed: int | None = None, level: float = 0.90,
                       extrapolate: bool = False,
                       thresholds: Thresholds | None = None) -> Prediction:
    """Predict the study's model at new conditions with bands.

    Parameters
    ----------
    study : Study
        The fitted campaign.
    fit : FitResult
        Its fit (``kinfit fit``).
    conditions : sequence of Condition
    fit_dir : path, optional
        Folder of the fit; its ``posterior_draws.csv`` (``kinfit sample``) gives the bands when
        present, else the covariance does.
    times : ndarray, optional
        Sampling times (s) of the predicted profiles; default 21 points from 0 to the longest
        run of the campaign. Ignored for a rate campaign.
    n_draws : int
        Parameter draws for the bands.
    seed : int, optional
        Seed of the draws.
    level : float
        Central band probability (default 0.90).
    extrapolate : bool
        Predict even outside the campaign's range of a factor, or where a film coefficient
        fitted only to film-limited data would be carried elsewhere; every output then marks
        the result as extrapolated.
    thresholds : Thresholds, optional
        Criteria limits of the per-condition table.

    Returns
    -------
    Prediction

    Raises
    ------
    ExtrapolationRefused
        A condition outside the campaign's range of a factor, or a film coefficient fitted
        only to film-limited runs carried elsewhere, without ``extrapolate``.
    KinfitError
        The fit's uncertainty gives no band (a covariance that is not positive definite).
    StudyError
        Bad conditions, options or fit.

    Warns
    -----
    RegimeWarning
        Once per reason of an extrapolation made on request, and for a slurry condition
        below the just-suspended speed (Zwietering 1958, :mod:`kinfit.analysis.suspension`).
    """
    if not isinstance(n_draws, int) or n_draws < 20:
        raise StudyError(f"the number of parameter draws (--draws, n_draws) must be a whole "
                         f"number >= 20. Got {n_draws!r} instead.")
    if not 0.5 <= level < 1:
        raise StudyError(f"the band level must lie in [0.5, 1). Got {level!r} instead.")
    conditions = tuple(conditions)
    _unique_ids(conditions)
    fitted = load_fitted(study, fit)
    film = film_information(fitted)
    outside = {c.id: outside_ranges(study, c) for c in conditions}
    reasons = {c.id: _refusal_reasons(c, outside[c.id], film) for c in conditions}
    if film["film_only"]:
        # inside the ranges, a condition the film does not control leans on kinetics that
        # film-limited runs measure only as a lower bound

        probe = fitted.model_at(conditions, times=None if study.kind == "rate"
                                else np.array([0.0, 1.0]))
        with np.errstate(all="ignore"):
            table = run_table(probe, fitted.theta_for(probe, fitted.theta)[0])
        for c in conditions:
            if table[c.id]["regime"] != "film":
                reasons[c.id].append(
                    f"condition '{c.id}': the film coefficient was fitted from film-limited "
                    f"runs ({_film_why(film)}), so the intrinsic rate is known only as a lower "
                    f"bound, yet at this condition the regime would be "
                    f"'{table[c.id]['regime']}' and the prediction rests on that rate")
    refused = [r for c in conditions for r in reasons[c.id]]
    if refused and not extrapolate:
        raise ExtrapolationRefused(refused)
    extrapolated = {c.id for c in conditions if reasons[c.id]}
    notes = [f"EXTRAPOLATED on request: {r}" for r in refused]
    suspension = {c.id: suspension_check(study, temperature=c.temperature,
                                         stirrer_speed=c.stirrer_speed,
                                         particle_diameter=c.particle_diameter,
                                         catalyst_loading=c.catalyst_loading)
                  for c in conditions}
    notes += [f"condition '{cid}': {s.message}" for cid, s in suspension.items()
              if s.suspended is False]
    for text in notes:
        warnings.warn(text, RegimeWarning, stacklevel=2)
    if study.kind == "profile":
        if times is None:
            t_max = max(float(r.times.max()) for r in study.runs if r.times.size)
            times = np.linspace(0.0, t_max, 21)
        times = np.asarray(times, dtype=float)
    model = fitted.model_at(conditions, times=times)
    _check_covariance(fitted, film)
    theta = fitted.theta_for(model, fitted.theta)[0]
    rng = np.random.default_rng(seed)
    draws, source = None, "covariance"
    if fit_dir is not None:
        found = draws_file(fit_dir)
        draws = None if found is None else posterior_draws(fitted, found, n_draws, rng)
        source = "posterior" if draws is not None else "covariance"
    if draws is None:
        draws = covariance_draws(fitted, n_draws, rng)
    rows = fitted.theta_for(model, draws)
    f_hat, ok_hat = predict_rows(model, theta[None, :])
    if not ok_hat[0]:
        raise StudyError("the model cannot be evaluated at these conditions at the fitted "
                         "values; check the conditions")
    f, ok = predict_rows(model, rows)
    n_failed = int(np.sum(~ok))
    if np.sum(ok) < 10:
        raise KinfitError(f"only {int(np.sum(ok))} of {rows.shape[0]} parameter draws could be "
                          "evaluated at these conditions, so no band can be given; the fit's "
                          "uncertainty is too wide here (unidentified parameters: see the "
                          "identifiability notes of 'kinfit fit')")
    lo_name, hi_name = _quantile_names(level)
    alpha = (1 - level) / 2
    q = np.quantile(f[ok], [alpha, 0.5, 1 - alpha], axis=0)
    frame = _frame(model, conditions, f_hat[0], q, lo_name, hi_name)
    summary = _summaries(model, theta, rows[ok], conditions, outside, extrapolated, alpha,
                         lo_name, hi_name, thresholds)
    for c in conditions:
        summary[c.id]["extrapolation_reasons"] = list(reasons[c.id])
        summary[c.id]["suspension"] = suspension[c.id].to_dict()
    frame.insert(1, "extrapolated", [i in extrapolated for i in frame["condition"]])

    return Prediction(
        study=study.name, kind=study.kind, conditions=conditions, frame=frame, summary=summary,
        band={"source": source, "level": level, "draws": int(rows.shape[0]),
              "failed": n_failed, "seed": seed,
              "meaning": f"central {level:.0%} of the mean response over parameter draws"},
        film=film, warnings=tuple(notes), extrapolated=bool(extrapolated),
        manifest=manifest(files=study.files, seed=seed, argv=None, base=study.path),
    )


def _frame(model: Model, conditions: Sequence[Condition], f_hat: Array, q: Array,
           lo_name: str, hi_name: str) -> pd.DataFrame:
    by_id = {c.id: c for c in conditions}
    ids = np.asarray(model.run_ids)[model.run_index]
    keep = ids != PAD_RUN
    ids, f_hat, q = ids[keep], f_hat[keep], q[:, keep]
    frame = pd.DataFrame({"condition": ids})
    for f_ in FACTORS:
        unit = {"temperature": "K", "stirrer_speed": "1/s", "particle_diameter": "m",
                "catalyst_loading": "kg/m^3", "initial_concentration": "mol/m^3"}[f_]
        frame[f"{f_} [{unit}]"] = [getattr(by_id[i], f_) for i in ids]
    if model.spec.reactor == "batch":
        frame["time [s]"] = model.times[keep]
        name, unit = "concentration", "mol/m^3"
    else:
        name, unit = "rate", "mol/(kg*s)"
    frame[f"{name} [{unit}]"] = f_hat
    for label, row in zip((lo_name, "q50", hi_name), q, strict=True):
        frame[f"{name}_{label} [{unit}]"] = row
    return frame


def _summaries(model: Model, theta: Array, rows: Array, conditions: Sequence[Condition],
               outside: Mapping[str, list], refused: set[str], alpha: float, lo_name: str,
               hi_name: str, thresholds: Thresholds | None) -> dict[str, dict[str, Any]]:

    table = run_table(model, theta, thresholds=thresholds)
    sub = rows[:: max(1, rows.shape[0] // 60)]
    rates, etas, regimes = [], [], []
    for row in sub:
        try:
            with np.errstate(all="ignore"):
                st = model.run_states(row)
        except _PHYSICS_ERRORS:
            continue
        rates.append(st.observed.rate)
        etas.append(st.criteria.effectiveness_factor)
        regimes.append(st.criteria.regime)
    rates_a, etas_a, reg_a = np.array(rates), np.array(etas), np.array(regimes)
    out = {}
    for i, c in enumerate(conditions):
        t = table[c.id]
        entry: dict[str, Any] = {
            **c.factors(), "group": c.group, "defaulted": list(c.defaulted),
            "outside_range": outside[c.id],
            "extrapolated_on_request": c.id in refused,
            "regime": t["regime"], "criteria": t,
        }
        if rates_a.size:
            rq = np.quantile(rates_a[:, i], [alpha, 0.5, 1 - alpha])
            eq = np.quantile(etas_a[:, i], [alpha, 1 - alpha])
            labels = list(reg_a[:, i])
            entry["regime_probability"] = {r: labels.count(r) / len(labels) for r in REGIMES}
        else:
            rq = eq = np.full(3, np.nan)
            entry["regime_probability"] = None
        entry["initial_rate"] = {"estimate": t["observed_rate"], lo_name: float(rq[0]),
                                 "q50": float(rq[1]), hi_name: float(rq[-1]),
                                 "unit": "mol/(kg*s)"}
        entry["effectiveness_factor"] = {"estimate": t["effectiveness_factor"],
                                         lo_name: float(eq[0]), hi_name: float(eq[-1])}
        out[c.id] = entry
    return out


# ------------------------------------------------------------------------------ command line


