"""The sampler's target: the log-posterior of a :class:`~kinfit.estimate.problem.Problem` over
internal coordinates, with the priors and error scales it needs.

Coordinates are the internal (unconstrained) coordinates of
:class:`~kinfit.estimate.problem.Space` for the problem's parameters, then ``ln s`` for each
error-model scale when the scales are sampled. Priors are densities on physical values, so the
log-Jacobian of each log transform is part of the target.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from kinfit.errors import StudyError
from kinfit.estimate.priors import Prior, prior_table
from kinfit.estimate.problem import Problem

__all__ = ["LogPosterior", "scale_estimate", "scale_values", "problem_priors", "PriorSpec"]

#: What a prior may be given as: a Prior, a study-file string or table, or None (default).
PriorSpec = str | Mapping[str, object] | Prior | None


class LogPosterior:
    """Vectorised log-posterior over the sampler's internal coordinates.

    Coordinates are ``u = Space.to_internal(x)`` for the problem's parameters followed, when
    ``sample_scale``, by ``v = ln s`` for each error-model scale ``s``.

    Parameters
    ----------
    problem : Problem
    priors : tuple of Prior
        One per name of :attr:`names` (the problem's parameters, then the scales when sampled),
        densities on the physical values.
    sample_scale : bool
        Sample the error-model scales (in log space) or hold them at ``scale_values``.
    scale_values : mapping of str to float
        Values of the scales when they are fixed (same unit as the observations; relative
        scales dimensionless).

    Notes
    -----
    .. math::

        \\ln \\pi(u, v) = \\ln L(y \\mid x(u), s(v)) + \\sum_j \\ln p_j(x_j(u))
            + \\sum_{j\\,\\mathrm{log}} u_j + \\sum_k [\\ln p_k(e^{v_k}) + v_k]

    The last terms are the log-Jacobians ``ln |dx/du|`` of the log transforms (the change of
    variables of a density, common practice), so each prior stays a density on the physical
    value. Points outside the physical bounds, and points whose prediction fails or is
    non-finite, get ``-inf``.
    """

    def __init__(
        self,
        problem: Problem,
        priors: Sequence[Prior],
        *,
        sample_scale: bool,
        scale_values: Mapping[str, float],
    ) -> None:
        self.problem = problem
        self.space = problem.space
        self.p = self.space.n
        self.scale_names = problem.error_model.scale_names
        self.sample_scale = bool(sample_scale)
        self.names: tuple[str, ...] = self.space.names + (
            self.scale_names if self.sample_scale else ()
        )
        self.ndim = len(self.names)
        if len(priors) != self.ndim:
            raise ValueError(f"{len(priors)} priors for {self.ndim} coordinates")
        self.priors = tuple(priors)
        self.scale_values = {k: float(scale_values[k]) for k in self.scale_names}
        self._log = self.space.is_log
        # a flat prior with open limits adds nothing inside the bounds: skip it
        self._active = [
            j
            for j, pr in enumerate(self.priors)
            if not (pr.kind == "uniform" and pr.a == -math.inf and pr.b == math.inf)
        ]

    def to_physical(self, u: ArrayLike) -> NDArray[np.float64]:
        """Internal coordinates (..., ndim) to physical values (..., ndim)."""
        u = np.asarray(u, dtype=float)
        x = np.empty_like(u)
        x[..., : self.p] = self.space.to_physical(u[..., : self.p])
        x[..., self.p :] = np.exp(u[..., self.p :])
        return x

    def to_internal(self, x: ArrayLike) -> NDArray[np.float64]:
        """Physical values (..., ndim) to internal coordinates (..., ndim)."""
        x = np.asarray(x, dtype=float)
        u = np.empty_like(x)
        u[..., : self.p] = self.space.to_internal(x[..., : self.p])
        with np.errstate(divide="ignore"):
            u[..., self.p :] = np.log(x[..., self.p :])
        return u

    def _scales(self, x: NDArray[np.float64]) -> tuple[Any, Any]:
        """``s_abs``, ``s_rel`` as (m, 1) columns (or floats when fixed)."""
        vals: dict[str, Any] = dict(self.scale_values)
        if self.sample_scale:
            for k, n in enumerate(self.scale_names):
                vals[n] = x[:, self.p + k][:, None]
        return vals.get("sigma", 1.0), vals.get("sigma_rel", 1.0)

    def log_prior(self, u: ArrayLike) -> NDArray[np.float64]:
        """Log prior density in internal coordinates (priors plus log-Jacobians), shape (m,)."""
        u = np.atleast_2d(np.asarray(u, dtype=float))
        x = self.to_physical(u)
        xp = x[:, : self.p]
        with np.errstate(invalid="ignore"):
            inside = np.all((xp >= self.space.lower) & (xp <= self.space.upper), axis=1)
        lp = np.where(inside, 0.0, -np.inf)
        for j in self._active:
            lp = lp + self.priors[j].logpdf(x[:, j])
        lp = lp + np.sum(u[:, : self.p][:, self._log], axis=1) + np.sum(u[:, self.p :], axis=1)
        return np.where(np.isnan(lp), -np.inf, lp)

    def __call__(self, u: ArrayLike) -> NDArray[np.float64]:
        """Log-posterior (unnormalised) of each row of ``u``, shape (m,); never NaN."""
        u = np.atleast_2d(np.asarray(u, dtype=float))
        lp = self.log_prior(u)
        ok = np.isfinite(lp)
        if np.any(ok):
            x = self.to_physical(u[ok])
            f, bad = self.problem.predict_safe(x[:, : self.p])
            s_abs, s_rel = self._scales(x)
            with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
                ll = self.problem.error_model.loglike(
                    self.problem.y, f, s_abs=s_abs, s_rel=s_rel, weights=self.problem.weights
                )
            ll = np.where(bad | np.isnan(ll), -np.inf, ll)
            lp[ok] = lp[ok] + ll
        return np.where(np.isnan(lp), -np.inf, lp)


def scale_estimate(problem: Problem, x: ArrayLike) -> dict[str, float]:
    """Error-model scales estimated from the residuals at physical point ``x``.

    ``sigma = sqrt(sum w r^2 / (n - p))`` and ``sigma_rel = sqrt(sum w (r/|f|)^2 / (n - p))``;
    the combined model gives each part half of the variance (a starting guess only).

    Raises
    ------
    StudyError
        The prediction at ``x`` fails or the residuals are all zero.
    """
    x = np.asarray(x, dtype=float).reshape(1, -1)
    f, bad = problem.predict_safe(x)
    if bad[0]:
        raise StudyError(
            "the model cannot be evaluated at the starting point, so the error scale cannot be "
            "estimated; give another start or pass scale_start"
        )
    r = problem.y - f[0]
    dof = max(problem.n_obs - problem.n_params, 1)
    mag = np.maximum(np.abs(f[0]), problem.error_model.floor)
    s_abs = math.sqrt(float(np.sum(problem.w * r * r)) / dof)
    s_rel = math.sqrt(float(np.sum(problem.w * (r / mag) ** 2)) / dof)
    kind = problem.error_model.kind
    out = {"constant": {"sigma": s_abs}, "proportional": {"sigma_rel": s_rel}}.get(
        kind, {"sigma": s_abs / math.sqrt(2.0), "sigma_rel": s_rel / math.sqrt(2.0)}
    )
    if not all(v > 0 and math.isfinite(v) for v in out.values()):
        raise StudyError(
            "the residuals at the starting point are all zero or not finite, so the error scale "
            "cannot be estimated; pass scale_start"
        )
    return out


def scale_values(
    problem: Problem, scale_start: object, start: NDArray[np.float64]
) -> dict[str, float]:
    """Error-model scales from ``scale_start`` (mapping, float or sequence) or, when it is None,
    from the residuals at ``start`` (:func:`scale_estimate`); checked finite and > 0."""
    names = problem.error_model.scale_names
    if scale_start is None:
        return scale_estimate(problem, start)
    if isinstance(scale_start, Mapping):
        vals = {str(k): v for k, v in scale_start.items()}
        if set(vals) != set(names):
            raise StudyError(
                f"scale_start names {sorted(vals)} but the '{problem.error_model.kind}' error "
                f"model has scales {list(names)}; give one value for each"
            )
    else:
        arr = np.atleast_1d(np.asarray(scale_start, dtype=float))
        if arr.size != len(names):
            raise StudyError(
                f"scale_start has {arr.size} values but the '{problem.error_model.kind}' error "
                f"model has scales {list(names)}; give one value for each"
            )
        vals = dict(zip(names, arr.tolist(), strict=True))
    out = {}
    for n in names:
        v = float(vals[n])
        if not (v > 0 and math.isfinite(v)):
            raise StudyError(f"scale_start '{n}' must be finite and > 0, got {v:g}")
        out[n] = v
    return out


def problem_priors(
    problem: Problem, priors: Mapping[str, PriorSpec] | None, sample_scale: bool
) -> tuple[Prior, ...]:
    """One prior per sampled coordinate: the problem's parameters, then the error scales when
    ``sample_scale``; scales default to ``p(s) ~ 1/s``."""
    scale_names = problem.error_model.scale_names
    given = dict(priors or {})
    if not sample_scale:
        fixed = sorted(set(given) & set(scale_names))
        if fixed:
            raise StudyError(
                f"a prior is given for {fixed}, but sample_scale is False so the error scale is "
                "fixed; set sample_scale=True or drop the prior"
            )
    names = problem.space.names + (scale_names if sample_scale else ())
    # default for error scales: p(s) ~ 1/s, flat in ln s, the usual noninformative prior of a
    # normal scale (Gelman et al., Bayesian Data Analysis, 3rd ed., 2013, sec. 3.2; section
    # number from memory)
    default = {n: Prior.loguniform() for n in scale_names}
    return prior_table(names, given, default=default)
