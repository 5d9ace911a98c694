"""The transport diagnosis of a campaign, run by run: what the data prove without a model, what
the fitted model says of each run, whether the campaign's kinetics are falsified by transport,
and which stirrer speed and particle size would make the runs intrinsic.

:func:`diagnose` assembles the parts in :mod:`kinfit.analysis.diagnosis` into one frozen
:class:`Diagnosis`, whose :meth:`Diagnosis.to_dict` is diagnosis.json field for field and whose
:meth:`Diagnosis.report` is the console text of ``kinfit diagnose``.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from kinfit.analysis.diagnosis.falsified import FalsifiedResult, falsified_kinetics
from kinfit.analysis.diagnosis.model_free import FactorTest, NotPossible, model_free_tests
from kinfit.analysis.diagnosis.next_runs import NextRun, next_runs
from kinfit.analysis.diagnosis.per_run import N_DRAWS, posterior_matrix, run_diagnostics
from kinfit.analysis.transport_limits import DIAMETER_RANGE, SPEED_RANGE
from kinfit.core.files import (
    draws_file,
    prepare_out_dir,
    recorded_path,
    to_plain,
    write_json_atomic,
)
from kinfit.errors import StudyError
from kinfit.fitting.fit import FitOptions, fit_model, main_spec
from kinfit.fitting.results import FitResult
from kinfit.fitting.saved import model_of_fit
from kinfit.physics.criteria import THRESHOLD_SOURCES, Thresholds
from kinfit.physics.resistances import REGIMES
from kinfit.study.runs import Study

__all__ = ['Diagnosis', 'diagnose', 'read_draws', 'DIAGNOSIS_VERSION', 'SOURCES', 'DRAWS_FILE']

Array = NDArray[np.float64]
DIAGNOSIS_VERSION = 1
#: the posterior draws table that ``kinfit sample`` writes into the fit folder (compressed by
#: default; the plain CSV on request, see :data:`kinfit.core.files.DRAWS_FILES`)
DRAWS_FILE = "posterior_draws.csv.gz"

#: where each part of the diagnosis comes from
SOURCES = {
    **THRESHOLD_SOURCES,
    "model_free_profiles": "extra-sum-of-squares F test of nested least-squares fits, one "
                           "smooth curve against one per level (Bates & Watts 1988; Draper & "
                           "Smith 1998); cubic regression spline chosen by BIC (Schwarz 1978)",
    "model_free_rates": "one-way analysis of variance (Fisher 1925)",
    "model_free_logic": "a rate the stirrer speed does not change rules out a film limit and "
                        "leaves eta open; a rate the particle size does not change, at one "
                        "speed, rules out film and pore limits alike (eta = 1) (common "
                        "practice)",
    "falsified": "strong pore diffusion: E_app = (E + E_D)/2, apparent order (n + 1)/2 "
                 "(Weisz & Prater 1954; Satterfield 1970); film control: E_app near zero, "
                 "apparent first order",
    "next_runs": "root find over stirrer speed and particle diameter with the fitted film law "
                 "and pellet model for Ca < 0.05/|n| and Psi below its limit",
    "carberry_times_order": THRESHOLD_SOURCES["carberry"],
    "weisz_prater_eta": THRESHOLD_SOURCES["weisz_prater"],
    "alpha": "significance level of the model-free tests (0.05, common practice)",
}

_UNITS = {
    "thiele_modulus": "-", "effectiveness_factor": "-", "weisz_prater": "-", "mears": "-",
    "carberry": "-", "observed_rate": "mol/(kg*s)", "surface_concentration": "mol/m^3",
    "kc": "m/s", "temperature": "K", "stirrer_speed": "1/s (revolutions per second)",
    "particle_diameter": "m", "catalyst_loading": "kg/m^3", "initial_concentration": "mol/m^3",
    "activation_energy": "J/mol", "k_apparent": "mol/(kg*s) at the reference concentration",
}


@dataclass(frozen=True)
class Diagnosis:
    """The transport diagnosis of one study (read, never re-run).

    Attributes
    ----------
    study : str
        Study name.
    model_free : tuple of FactorTest
        Tests of runs that differ only in stirrer speed, particle size or loading.
    not_possible : tuple of NotPossible
        Tests the data cannot support, and the runs that would make them possible.
    runs : dict
        run id -> model-based criteria (see :class:`kinfit.analysis.diagnosis.per_run.PerRunResult`).
    intrinsic_runs : tuple of str
        Runs that qualify as intrinsic kinetic data under ``thresholds``.
    falsified : FalsifiedResult
        Apparent against intrinsic activation energy and order.
    next_runs : tuple of NextRun
        Per temperature, the speed and size that would make the runs intrinsic.
    thresholds : dict
        The limits used (numbers) and the settings they come from.
    sources : dict
        Where each criterion, threshold and test comes from.
    model : dict
        The model and fit the model-based part rests on.
    notes : tuple of str
        Caveats (assumptions of the model, study changed since the fit...).
    alpha : float
        Significance level of the model-free tests.
    """

    study: str
    model_free: tuple[FactorTest, ...]
    not_possible: tuple[NotPossible, ...]
    runs: Mapping[str, Mapping[str, Any]]
    intrinsic_runs: tuple[str, ...]
    falsified: FalsifiedResult
    next_runs: tuple[NextRun, ...]
    thresholds: Mapping[str, Any]
    sources: Mapping[str, str]
    model: Mapping[str, Any] = field(default_factory=dict)
    notes: tuple[str, ...] = ()
    alpha: float = 0.05

    def to_dict(self) -> dict[str, Any]:
        """Plain-Python content of diagnosis.json (SI values; ``units`` names them)."""

        return to_plain({
            "kinfit_diagnosis": DIAGNOSIS_VERSION,
            "study": self.study,
            "model_free": [t.to_dict() for t in self.model_free],
            "not_possible": [n.to_dict() for n in self.not_possible],
            "runs": self.runs,
            "intrinsic_runs": list(self.intrinsic_runs),
            "falsified": self.falsified.to_dict(),
            "next_runs": [n.to_dict() for n in self.next_runs],
            "thresholds": self.thresholds,
            "sources": self.sources,
            "model": self.model,
            "notes": list(self.notes),
            "alpha": self.alpha,
            "units": _UNITS,
        })

    def to_frame(self) -> pd.DataFrame:
        """One row per run: the criteria, the resistance shares, the regime and whether the run
        counts as intrinsic (SI; a rate in mol/(kg s), kc in m/s)."""
        rows = []
        for rid, r in self.runs.items():
            shares = r.get("shares") or {}
            rows.append({
                "run": rid, "regime": r.get("regime"),
                "thiele_modulus": r.get("thiele_modulus"),
                "effectiveness_factor": r.get("effectiveness_factor"),
                "weisz_prater": r.get("weisz_prater"), "mears": r.get("mears"),
                "carberry": r.get("carberry"),
                **{f"share_{k}": v for k, v in shares.items()},
                "observed_rate [mol/(kg*s)]": r.get("observed_rate"),
                "kc [m/s]": r.get("kc"), "intrinsic": rid in self.intrinsic_runs,
            })
        return pd.DataFrame(rows)

    def save(self, folder: str | Path) -> Path:
        """Write ``folder/diagnosis.json`` atomically; returns its path."""

        return write_json_atomic(prepare_out_dir(folder) / "diagnosis.json", self.to_dict())

    # ------------------------------------------------------------------ text
    def report(self) -> str:
        """Console text: model-free tests, per-run criteria, falsified kinetics, next runs."""
        lines = [f"transport diagnosis of study '{self.study}'", ""]
        lines.append(f"1. from the data alone (model-free tests, alpha = {self.alpha:g})")
        if not self.model_free:
            lines.append("   no set of runs differs in only one transport factor")
        for t in self.model_free:
            lines.append(f"   - {t.conclusion}")
            lines.append(f"     [{t.test}; F = {t.statistic:.3g} on {t.df[0]}, {t.df[1]} df; "
                         f"runs {', '.join(t.runs)}]")
        for miss in self.not_possible:
            lines.append(f"   - not possible ({miss.factor}): {miss.message}")
        lines.append("")
        label = self.model.get("label", "")
        lines.append(f"2. per run, from the fitted model ({label}; "
                     f"{'converged' if self.model.get('converged') else 'NOT converged'})")
        has_post = any("regime_probability" in r for r in self.runs.values())
        head = (f"   {'run':<10}{'regime':<9}{'eta':>8}{'Thiele':>9}{'W-P':>10}{'Carberry':>10}"
                f"{'Mears':>9}{'film':>7}{'pore':>7}{'react':>7}  intrinsic")
        lines.append(head + ("  P(regime)" if has_post else ""))
        for rid, r in self.runs.items():
            s = r["shares"]
            row = (f"   {rid:<10}{r['regime']:<9}{r['effectiveness_factor']:>8.3f}"
                   f"{r['thiele_modulus']:>9.3g}{r['weisz_prater']:>10.3g}{r['carberry']:>10.3g}"
                   f"{r['mears']:>9.3g}{100 * s['film']:>6.0f}%{100 * s['pore']:>6.0f}%"
                   f"{100 * s['reaction']:>6.0f}%  {'yes' if r['intrinsic'] else 'no':<9}")
            if has_post and "regime_probability" in r:
                pr = r["regime_probability"]
                row += "  " + ", ".join(f"{g} {pr[g]:.2f}" for g in REGIMES if pr.get(g, 0) > 0)
            lines.append(row)
        if has_post:
            lines.append(f"   90 % intervals from {self.model.get('n_draws', 0)} posterior draws "
                         "are in diagnosis.json (runs.*.intervals)")
        th = self.thresholds
        lines.append(f"   thresholds: Carberry < {th['carberry']:.3g} (0.05/|n|), Weisz-Prater "
                     f"< {th['weisz_prater']:.3g} (L = Vp/Sp; Psi_R < "
                     f"{th['weisz_prater_radius']:.3g} with R = dp/2), Mears < {th['mears']:.3g}, "
                     f"eta >= "
                     f"{th['effectiveness_factor']:g}")
        lines.append("   intrinsic runs: " + (", ".join(self.intrinsic_runs) if self.intrinsic_runs
                                              else "none"))
        lines.append("")
        lines.append("3. falsified kinetics (power law with no transport, per speed and size)")
        f = self.falsified
        if f.intrinsic_activation_energy is not None:
            order = "" if f.intrinsic_order is None else f", order {f.intrinsic_order:.3g}"
            lines.append(f"   intrinsic: activation energy "
                         f"{f.intrinsic_activation_energy / 1e3:.4g} kJ/mol{order}")
        for g in f.groups:
            a = g.arrhenius
            ci = "" if a.ci95 is None else f" [{a.ci95[0] / 1e3:.3g}, {a.ci95[1] / 1e3:.3g}]"
            order = ("not identified" if g.apparent_order is None
                     else f"{g.apparent_order:.3g}")
            lines.append(f"   {g.stirrer_speed * 60:.4g} rpm, {g.particle_diameter * 1e6:.4g} um:"
                         f" E_app {a.activation_energy / 1e3:.4g} kJ/mol{ci}, apparent order "
                         f"{order} ({len(g.per_temperature)} temperatures)")
        for s in f.summary:
            lines.append(f"   - {s}")
        for w in f.warnings:
            lines.append(f"   ! {w}")
        lines.append("")
        lines.append("4. next runs (per temperature: speed and size for intrinsic data)")
        for rec in self.next_runs:
            sp = "any" if rec.stirrer_speed is None else f">= {rec.stirrer_speed * 60:.4g} rpm"
            dp = "none found" if rec.particle_diameter is None else (
                f"<= {rec.particle_diameter * 1e6:.4g} µm")
            lines.append(f"   {rec.temperature:.5g} K: stirrer speed {sp}, particles {dp}")
            lines.append(f"     {rec.note}")
        if self.notes:
            lines.append("")
            lines.append("notes:")
            lines.extend(f"   - {note}" for note in self.notes)
        return "\n".join(lines)


# ----------------------------------------------------------------------------- orchestration
def _intrinsic(fit_result: FitResult, runs: Mapping[str, Mapping[str, Any]]
               ) -> tuple[float | None, float | None, float | None]:
    p = fit_result.parameters
    E = E_se = n = None
    if "activation_energy" in p:
        E = float(p["activation_energy"]["estimate"])
        se = p["activation_energy"].get("stderr")
        E_se = None if se is None else float(se)
    if "order" in p:
        n = float(p["order"]["estimate"])
    elif runs:
        n = float(np.median([r["order"] for r in runs.values()]))
    return E, E_se, n


def _threshold_block(thresholds: Thresholds, limits: Mapping[str, float], alpha: float,
                     geometry: str) -> dict[str, Any]:
    return {
        **limits,
        "carberry_times_order": thresholds.carberry,
        "weisz_prater_eta": thresholds.weisz_prater_eta,
        "geometry": geometry,
        "alpha": alpha,
        "note": "carberry = carberry_times_order/|n| with each run's local order (the value "
                "here is at the campaign's median order; runs.*.thresholds hold each run's); "
                "weisz_prater is the limit in the L = Vp/Sp normalisation at which the "
                "first-order eta of the geometry is weisz_prater_eta, weisz_prater_radius "
                "the same limit with R = dp/2; mears uses R = dp/2 and the particle density",
    }


def diagnose(study: Study, fit_result: FitResult | None = None, *, posterior: Any = None,
             posterior_dir: str | Path | None = None,
             thresholds: Thresholds | None = None, alpha: float = 0.05,
             n_draws: int = N_DRAWS, seed: int | None = 0,
             speed_range: tuple[float, float] = SPEED_RANGE,
             diameter_range: tuple[float, float] = DIAMETER_RANGE) -> Diagnosis:
    """Diagnose transport in a campaign, run by run.

    Parameters
    ----------
    study : Study
    fit_result : FitResult, optional
        The fit the model-based part rests on; without it the study's model is fitted first
        (:func:`kinfit.fitting.fit.fit_model`, no profile intervals, no candidate models).
    posterior : Posterior, mapping or ndarray, optional
        Posterior draws of the varying columns (see
        :func:`kinfit.analysis.diagnosis.per_run.posterior_matrix`): adds 90 % intervals of each
        criterion and the probability of each regime per run.
    posterior_dir : path, optional
        A folder where ``kinfit sample`` wrote ``posterior_draws.csv``; its draws are used when
        ``posterior`` is not given (nothing happens when the file is absent).
    thresholds : Thresholds, optional
        Criteria limits (default: Ca < 0.05/|n|, Psi_L at first-order eta 0.95, Mears 0.05 R/L,
        eta >= 0.95).
    alpha : float
        Significance level of the model-free tests.
    n_draws : int
        Posterior draws evaluated (a random subsample).
    seed : int or None
        Seed of that subsample.
    speed_range, diameter_range : (float, float)
        Stirrer speeds (rev/s) and diameters (m) searched for the next runs.

    Returns
    -------
    Diagnosis

    Raises
    ------
    StudyError
        Bad options, or a fit or posterior that does not match the study's model.
    """

    if not (isinstance(alpha, int | float) and 0.0 < alpha < 1.0):
        raise StudyError(f"the significance level (--alpha, alpha) must be a number in (0, 1). "
                         f"Got {alpha!r} instead.")
    if not isinstance(n_draws, int) or n_draws < 1:
        raise StudyError(f"the number of draws (--n-draws, n_draws) must be a whole number "
                         f">= 1. Got {n_draws!r} instead.")
    for name, rng in (("speed_range", speed_range), ("diameter_range", diameter_range)):
        if not (len(rng) == 2 and 0.0 < rng[0] < rng[1] and np.isfinite(rng[1])):
            raise StudyError(f"the '{name}' option of diagnose() must be (low, high) with "
                             f"0 < low < high. Got {rng!r} instead.")
    thresholds = thresholds or Thresholds()
    notes: list[str] = []
    free = model_free_tests(study, alpha=alpha)
    notes.extend(free.notes)
    source = "given"
    if fit_result is None:
        # the study's own model only (candidate models of [fit] compare are not needed here)
        fit_result = fit_model(main_spec(study), study,
                               FitOptions(profile=False, thresholds=thresholds))
        source = "fitted by diagnose (no profile intervals)"
    else:
        if fit_result.study and fit_result.study != study.name:
            notes.append(f"the fit is of study '{fit_result.study}', not '{study.name}'")
        inputs = fit_result.manifest.get("inputs", {}) if fit_result.manifest else {}
        recorded = {recorded_path(k, study.path): v for k, v in study.files.items()}
        changed = [Path(k).name for k, v in recorded.items()
                   if k in inputs and inputs[k].get("sha256") not in (None, v)]
        if changed:
            notes.append(f"input file(s) {changed} changed since the fit; refit before relying "
                         "on the model-based numbers")
    if not fit_result.converged:
        notes.append("the fit did not converge: the model-based numbers are at its last "
                     f"iterate ({fit_result.fit.get('message', '')})")
    model, theta = model_of_fit(study, fit_result)
    if posterior is None and posterior_dir is not None:
        path = draws_file(posterior_dir)
        if path is not None:
            posterior = read_draws(path)
            notes.append(f"posterior draws from {recorded_path(path, study.path)}")
    draws = None if posterior is None else posterior_matrix(model, posterior)
    per_run = run_diagnostics(model, theta, thresholds=thresholds, draws=draws, n_draws=n_draws,
                              seed=seed)
    if per_run.n_failed:
        notes.append(f"{per_run.n_failed} posterior draws gave non-physical parameter values "
                     "and were left out of the intervals")
    if model.spec.pellet == "none":
        notes.append("the model has no pore resistance ([pellet] diffusivity = \"none\"): "
                     "eta = 1 and Weisz-Prater = 0 by assumption, not by evidence")
    if model.spec.film.name == "none":
        notes.append("the model has no film resistance: Carberry = Mears = 0 by assumption")
    E, E_se, n = _intrinsic(fit_result, per_run.runs)
    fals = falsified_kinetics(study, intrinsic_activation_energy=E,
                              intrinsic_activation_energy_stderr=E_se, intrinsic_order=n)
    nxt = next_runs(model, theta, thresholds=thresholds, speed_range=speed_range,
                    diameter_range=diameter_range)
    return Diagnosis(
        study=study.name, model_free=free.tests, not_possible=free.not_possible,
        runs=per_run.runs, intrinsic_runs=per_run.intrinsic_runs, falsified=fals,
        next_runs=tuple(nxt),
        thresholds=_threshold_block(thresholds, per_run.thresholds, alpha, model.spec.geometry),
        sources=dict(SOURCES),
        model={"label": model.spec.label, "converged": fit_result.converged,
               "fit": source, "columns": list(model.columns),
               "estimates": dict(zip(model.columns, map(float, theta), strict=True)),
               "n_draws": per_run.n_draws},
        notes=tuple(notes), alpha=float(alpha),
    )


# ----------------------------------------------------------------------------- command line


def read_draws(path: str | Path) -> dict[str, Array]:
    """Posterior draws from a CSV table, one column per quantity (extra columns such as
    ``step``, ``walker``, ``log_prob`` are ignored later by name).

    Parameters
    ----------
    path : str or Path
        The CSV file (``posterior_draws.csv`` of ``kinfit sample``).

    Returns
    -------
    dict of str to ndarray
        Column name -> draws.

    Raises
    ------
    StudyError
        Missing or unreadable file, or no numeric column.
    """
    import pandas as pd

    path = Path(path)
    if not path.is_file():
        raise StudyError(f"posterior draws file '{path}' does not exist; give the CSV that "
                         "'kinfit sample' wrote (posterior_draws.csv)")
    try:
        frame = pd.read_csv(path)
    except (ValueError, OSError, pd.errors.ParserError) as exc:
        raise StudyError(f"{path}: cannot read the posterior draws as CSV ({exc})") from None
    out: dict[str, Array] = {}
    for col in frame.columns:
        try:
            out[str(col)] = frame[col].to_numpy(dtype=float)
        except (TypeError, ValueError):
            continue
    if not out or len(frame) == 0:
        raise StudyError(f"{path}: no numeric columns of posterior draws")
    return out


