"""One weighted least-squares solve from one start (optionally with some parameters fixed), restarted until stationary."""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import least_squares

from kinfit.estimate.evaluation import (
    Evaluator,
    covariance_from_jacobian,
    jacobian_internal,
)
from kinfit.estimate.problem import PENALTY, Problem

__all__ = ['SolverSettings', 'StageResult', 'solve_weighted']


@dataclass(frozen=True)
class SolverSettings:
    """Options of one least-squares solve (plain values; see :func:`fit_problem`)."""

    method: str = "trf"
    max_nfev: int | None = None
    xtol: float = 1e-12
    ftol: float = 1e-12
    gtol: float = 1e-12
    x_scale: Any = "jac"


@dataclass(frozen=True)
class StageResult:
    """Outcome of :func:`solve_weighted` (internal coordinates).

    ``se_internal`` holds approximate standard errors of the free coordinates from the
    optimiser's last Jacobian (NaN for fixed ones or when singular); ``failed`` says the
    prediction fails at ``u``; ``cosine`` is the largest |cos| between a free Jacobian column
    and the residual vector there (0 at a stationary point).
    """

    u: NDArray[np.float64]
    status: int
    message: str
    nfev: int
    njev: int
    active_mask: NDArray[np.int_]
    failed: bool
    se_internal: NDArray[np.float64]
    cosine: float


_MAX_RESTARTS = 5


#: largest |cos| between a Jacobian column and the residual vector accepted as stationary
_COSINE_TOL = 1e-6


def _least_squares_once(
    problem: Problem,
    full: Any,
    idx: NDArray[np.int_],
    z0: NDArray[np.float64],
    sqrtw: NDArray[np.float64],
    lbf: NDArray[np.float64],
    ubf: NDArray[np.float64],
    settings: SolverSettings,
    evaluator: Evaluator,
    max_nfev: int | None,
) -> tuple[Any, float, NDArray[np.float64]]:
    """One scipy solve with residuals normalised to unit RMS at ``z0``; returns the result and
    the largest cosine between a Jacobian column and the residual vector at the end, and the
    approximate standard errors of the free internal coordinates (NaN when singular)."""
    y = problem.y
    f0, bad0 = evaluator(full(z0)[None, :])
    rms = np.sqrt(np.mean((sqrtw * (y - f0[0])) ** 2)) if not bad0[0] else 1.0
    norm = 1.0 / rms if np.isfinite(rms) and rms > 0 else 1.0
    sw = sqrtw * norm
    cap = PENALTY * max(1.0, float(np.max(np.abs(sw * y))))

    def resid(f: NDArray[np.float64], bad: bool) -> NDArray[np.float64]:
        if bad:
            return np.full(y.size, cap)
        return np.clip(sw * (y - f), -cap, cap)

    def fun(z: NDArray[np.float64]) -> NDArray[np.float64]:
        f, bad = evaluator(full(z)[None, :])
        return resid(f[0], bool(bad[0]))

    def jac(z: NDArray[np.float64]) -> NDArray[np.float64]:
        d = jacobian_internal(problem, evaluator, full(z), columns=idx)
        if d is None:
            return np.zeros((y.size, idx.size))
        return -sw[:, None] * d

    kw: dict[str, Any] = dict(
        jac=jac,
        method=settings.method,
        xtol=settings.xtol,
        ftol=settings.ftol,
        gtol=settings.gtol,
        x_scale=settings.x_scale,
        max_nfev=max_nfev,
    )
    if settings.method != "lm":
        kw["bounds"] = (lbf, ubf)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        res = least_squares(fun, z0, **kw)
    jm, r = np.asarray(res.jac), np.asarray(res.fun)
    # a column pressed against an active bound does not count
    zf = np.asarray(res.x, dtype=float)
    near = (np.abs(zf - lbf) <= 1e-8 * np.maximum(1.0, np.abs(zf))) | (
        np.abs(ubf - zf) <= 1e-8 * np.maximum(1.0, np.abs(zf))
    )
    free_cols = (
        np.asarray(getattr(res, "active_mask", np.zeros(idx.size)), dtype=int) == 0
    ) & ~near
    denom = np.linalg.norm(jm, axis=0) * np.linalg.norm(r)
    with np.errstate(invalid="ignore", divide="ignore"):
        cos = np.abs(jm.T @ r) / denom
    cos = np.where(free_cols & (denom > 0), cos, 0.0)
    dof = max(r.size - idx.size, 1)
    cov, _, _ = covariance_from_jacobian(jm, np.ones(r.size), float(r @ r) / dof)
    return res, float(np.max(cos, initial=0.0)), np.sqrt(np.abs(np.diag(cov)))


def solve_weighted(
    problem: Problem,
    u_start: NDArray[np.float64],
    fit_weights: NDArray[np.float64],
    *,
    settings: SolverSettings,
    evaluator: Evaluator,
    free: NDArray[np.bool_] | None = None,
) -> StageResult:
    """Minimise ``sum(W_i (y_i - f_i)^2)`` over the free internal coordinates.

    Parameters
    ----------
    problem : Problem
    u_start : ndarray, shape (p,)
        Internal starting point; fixed parameters keep these values.
    fit_weights : ndarray, shape (n,)
        Weights W (fixed during this solve).
    settings : SolverSettings
    evaluator : Evaluator
        Counts predictions and failures.
    free : ndarray of bool, shape (p,), optional
        Which parameters vary (default all).

    Returns
    -------
    StageResult

    Notes
    -----
    Residuals are divided by their RMS at the start so that scipy's absolute gradient test
    (``gtol``) is scale free. A failed row gives every residual the value
    ``PENALTY * max(1, max|sqrt(W) y|)``; all residuals are clipped to that magnitude.
    """
    p = problem.n_params
    free = np.ones(p, dtype=bool) if free is None else np.asarray(free, dtype=bool)
    idx = np.flatnonzero(free)
    lb, ub = problem.space.internal_bounds()
    sqrtw = np.sqrt(fit_weights)
    u_start = np.clip(np.asarray(u_start, dtype=float), lb, ub)

    def full(z: NDArray[np.float64]) -> NDArray[np.float64]:
        u = u_start.copy()
        u[idx] = z
        return u

    lbf, ubf = lb[idx], ub[idx]
    nfev = njev = 0
    z = u_start[idx]
    for _ in range(_MAX_RESTARTS + 1):
        budget = None if settings.max_nfev is None else settings.max_nfev - nfev
        if budget is not None and budget < 1:
            break
        res, cosine, se = _least_squares_once(
            problem, full, idx, z, sqrtw, lbf, ubf, settings, evaluator, budget
        )
        nfev += int(res.nfev)
        njev += int(res.njev) if res.njev is not None else 0
        z = np.asarray(res.x, dtype=float)
        # scipy's gradient test is absolute; accept it only when the gradient is also small
        # relative to the residual (MINPACK's cosine test), else restart with renormalised
        # residuals from where it stopped
        if res.status != 1 or cosine <= _COSINE_TOL or (budget is not None and res.nfev >= budget):
            break
    u = full(z)
    _, bad_end = evaluator(u[None, :])
    active = np.zeros(p, dtype=int)
    active[idx] = getattr(res, "active_mask", np.zeros(idx.size, dtype=int))
    se_full = np.full(p, np.nan)
    se_full[idx] = se
    return StageResult(
        u=u,
        status=int(res.status),
        message=str(res.message),
        nfev=nfev,
        njev=njev,
        active_mask=active,
        failed=bool(bad_end[0]),
        se_internal=se_full,
        cosine=cosine,
    )
