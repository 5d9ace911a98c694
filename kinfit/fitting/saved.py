"""The one loader of a saved fit: the study's model at the estimates of results.json, its
covariance, and parameter draws (used by sampling, diagnosis, prediction, planning and the
report alike)."""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from kinfit.errors import KinfitError, ModelError, RegimeWarning, SolverError, StudyError
from kinfit.estimate.problem import ErrorModel
from kinfit.fitting.fit import main_spec
from kinfit.fitting.results import FitResult
from kinfit.model.compiled import Model, ModelSpec
from kinfit.study.conditions import Array, Condition, conditions_study
from kinfit.study.runs import Study

__all__ = ["FittedModel", "fitted_theta", "model_of_fit", "load_fitted", "covariance_draws",
           "posterior_draws", "predict_rows"]


_PHYSICS_ERRORS = (ModelError, SolverError, ArithmeticError, ValueError, RuntimeError)


@dataclass(frozen=True)
class FittedModel:
    """The study's model at the fitted values, able to predict at other conditions.

    Attributes
    ----------
    study : Study
    spec : ModelSpec
        The study's model with the fitted shared values in its parameter table (the film's
        reference speed and diameter are the campaign's, whatever the new conditions are).
    model : Model
        Compiled on the campaign's runs.
    theta : ndarray, shape (p,)
        Fitted values of ``model.columns`` (physical).
    covariance : ndarray, shape (p, p), or None
        Linearised covariance of ``theta`` (physical), None when the fit has none.
    fit : FitResult
    """

    study: Study
    spec: ModelSpec
    model: Model
    theta: Array
    covariance: Array | None
    fit: FitResult

    @property
    def columns(self) -> tuple[str, ...]:
        """Names of the varying columns."""
        return self.model.columns

    def model_at(self, conditions: Sequence[Condition], *,
                 times: Array | Sequence[Array] | None = None) -> Model:
        """The same model compiled on new conditions."""
        return Model(self.spec, conditions_study(self.study, conditions, times=times,
                                                 min_points=len(self.columns)))

    def theta_for(self, other: Model, rows: Array) -> Array:
        """Parameter rows (m, p) of this fit mapped onto the columns of ``other``, by name.

        Raises
        ------
        StudyError
            A column of ``other`` the fit has no value for (a per-run parameter, or a group the
            campaign does not have).
        """
        rows = np.atleast_2d(np.asarray(rows, dtype=float))
        idx = []
        for c in other.columns:
            if c not in self.columns:
                base = c.split("[")[0]
                scope = self.spec.parameters[base].scope
                raise StudyError(
                    f"parameter '{base}' is fitted per {scope}, and the fit has no value of "
                    f"'{c}'; give each condition a group the campaign has "
                    f"({list(self.study.groups())})" if scope == "group" else
                    f"parameter '{base}' is fitted per run, so it has no value at new "
                    "conditions; refit with a shared (or per-group) scope")
            idx.append(self.columns.index(c))
        return rows[:, idx]

    def internal_covariance(self) -> Array | None:
        """The covariance in internal coordinates, ``D^-1 C D^-1`` with ``D = dx/du``."""
        if self.covariance is None:
            return None
        space = self.model.space()
        d = space.dphysical_dinternal(space.to_internal(self.theta))
        return self.covariance / np.outer(d, d)

    def sigma(self, f: Array, weights: Array | None = None) -> Array:
        """Standard deviation of an observation predicted as ``f`` (the fit's error model and
        scales)."""

        em = ErrorModel(self.fit.fit.get("error_model", self.study.error_model))
        scales = self.fit.fit.get("error_scales") or {}
        s_abs = scales.get("sigma", self.fit.fit.get("sigma", 1.0))
        return em.sigma(f, s_abs=s_abs, s_rel=scales.get("sigma_rel", 1.0), weights=weights)


def fitted_theta(model: Model, fit: FitResult) -> Array:
    """The fit's estimates of ``model.columns``, in that order (physical values).

    Raises
    ------
    StudyError
        The fit lacks a varying column of the model (a fit of another model, or a study edited
        since the fit); the message names the column, what the fit holds and the fix.
    """
    est = fit.estimates()
    missing = [c for c in model.columns if c not in est]
    if missing:
        raise StudyError(
            f"the fit results have no estimate of '{missing[0]}', which the study's model "
            f"varies; they hold {sorted(est)}; refit with 'kinfit fit {model.study.path}'")
    return np.array([est[c] for c in model.columns], dtype=float)


def model_of_fit(study: Study, fit: FitResult) -> tuple[Model, Array]:
    """The study's own model (:func:`kinfit.fitting.fit.main_spec`) and the fit's estimates of
    its varying columns: what every reader of a saved fit starts from.

    Raises
    ------
    StudyError
        See :func:`fitted_theta`.
    """
    model = Model(main_spec(study), study)
    return model, fitted_theta(model, fit)


def load_fitted(study: Study, fit: FitResult) -> FittedModel:
    """The study's model at the fit's estimates, with the covariance, able to predict at new
    conditions.

    Raises
    ------
    StudyError
        The fit lacks a varying column of the study's model (a fit of another model or an
        edited study).
    """
    model0, theta = model_of_fit(study, fit)
    spec0 = model0.spec
    est = fit.estimates()
    shared = {n: est[n] for n in spec0.parameter_names
              if spec0.parameters[n].vary and spec0.parameters[n].scope == "shared"}
    spec = replace(spec0, parameters=spec0.parameters.with_values(shared))
    model = Model(spec, study)
    cov = None
    raw = fit.covariance
    names = list(fit.correlation.get("names", [])) if fit.correlation else []
    if raw is not None and names and all(c in names for c in model.columns):
        full = np.array(raw, dtype=float)
        if full.shape == (len(names), len(names)):
            idx = [names.index(c) for c in model.columns]
            cov = full[np.ix_(idx, idx)]
            if not np.all(np.isfinite(cov)):
                cov = None
    return FittedModel(study, spec, model, theta, cov, fit)


def covariance_draws(fitted: FittedModel, n: int, rng: np.random.Generator) -> Array:
    """Multivariate normal draws of the fitted columns in internal coordinates, (m, p)
    physical, m <= n (draws outside the bounds are dropped).

    Raises
    ------
    KinfitError
        The fit has no usable covariance (singular or not positive semi-definite).
    """
    cov_u = fitted.internal_covariance()
    if cov_u is None:
        raise KinfitError("the fit has no covariance (singular information), so no band can "
                          "be given; run 'kinfit sample' for posterior draws, or fix the "
                          "unidentified parameters (vary = false)")
    space = fitted.model.space()
    u_hat = space.to_internal(fitted.theta)
    sym = 0.5 * (cov_u + cov_u.T)
    lam, vec = np.linalg.eigh(sym)
    if lam.min() < -1e-8 * max(abs(lam.max()), 1e-300):
        raise KinfitError("the fit's covariance is not positive definite (unidentified "
                          "parameters), so no band can be given; fix them (vary = false) or "
                          "run 'kinfit sample' for posterior draws")
    # round-off negatives to zero: a positive semi-definite factor L with L L^T = sym
    factor = vec * np.sqrt(np.clip(lam, 0.0, None))
    u = u_hat + rng.standard_normal((n, u_hat.size)) @ factor.T
    x = space.to_physical(u)
    return x[space.contains(x)]


def posterior_draws(fitted: FittedModel, path: str | Path, n: int, rng: np.random.Generator
                    ) -> Array | None:
    """A seeded subsample (m <= n, physical) of ``posterior_draws.csv``, or None when the file
    is absent or lacks a fitted column."""
    path = Path(path)
    if not path.is_file():
        return None
    try:
        frame = pd.read_csv(path)
    except (ValueError, OSError, pd.errors.ParserError) as exc:
        raise StudyError(f"{path}: cannot read the posterior draws ({exc})") from None
    if not all(c in frame.columns for c in fitted.columns):
        missing = [c for c in fitted.columns if c not in frame.columns]
        warnings.warn(f"{path.name} lacks column(s) {missing} of the fitted model; using the "
                      "covariance instead", RegimeWarning, stacklevel=3)
        return None
    draws = frame[list(fitted.columns)].to_numpy(dtype=float)
    draws = draws[np.all(np.isfinite(draws), axis=1)]
    if draws.shape[0] == 0:
        return None
    pick = rng.choice(draws.shape[0], size=min(n, draws.shape[0]), replace=False)
    return draws[np.sort(pick)]


def predict_rows(model: Model, rows: Array) -> tuple[Array, NDArray[np.bool_]]:
    """Predictions (m, n) and a mask of rows that could be computed."""
    rows = np.atleast_2d(rows)
    try:
        with np.errstate(all="ignore"):
            f = np.asarray(model.predict(rows), dtype=float)
        return f, np.all(np.isfinite(f), axis=1)
    except _PHYSICS_ERRORS:
        out = np.full((rows.shape[0], model.n_obs), np.nan)
        for i, row in enumerate(rows):
            try:
                with np.errstate(all="ignore"):
                    out[i] = model.predict(row[None, :])[0]
            except _PHYSICS_ERRORS:
                pass
        return out, np.all(np.isfinite(out), axis=1)
