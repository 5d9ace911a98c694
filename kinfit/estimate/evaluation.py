"""Evaluating a :class:`~kinfit.estimate.problem.Problem` for the estimators: predictions with
failed rows turned into a large finite penalty (reasons recorded), batched finite-difference
Jacobians in internal coordinates (p + 1 rows forward, 2p + 1 central), and the linearised
covariance from a Jacobian."""

from __future__ import annotations

from collections import Counter

import numpy as np
from numpy.typing import NDArray

from kinfit.estimate.problem import Problem

__all__ = ["Evaluator", "jacobian_internal", "covariance_from_jacobian"]

_EPS = np.finfo(float).eps
_MAX_EXPLAINED = 10  # failed rows whose exception text is captured, per evaluator


# --------------------------------------------------------------------------------------------
# evaluation with penalties
# --------------------------------------------------------------------------------------------
class Evaluator:
    """Batched predictions in internal coordinates, with failed rows counted and explained.

    Parameters
    ----------
    problem : Problem

    Attributes
    ----------
    n_calls : int
        Number of ``predict`` calls made.
    n_penalised : int
        Number of parameter rows whose prediction failed.
    reasons : collections.Counter
        Failure reason -> count.
    """

    def __init__(self, problem: Problem) -> None:
        self.problem = problem
        self.n_calls = 0
        self.n_penalised = 0
        self.reasons: Counter[str] = Counter()
        self._explained = 0

    def __call__(self, u: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
        """Predictions (m, n) and failure mask (m,) for internal rows ``u`` of shape (m, p)."""
        x = self.problem.space.to_physical(np.atleast_2d(u))
        with np.errstate(all="ignore"):
            f, bad = self.problem.predict_safe(x)
        self.n_calls += 1
        if np.any(bad):
            self.n_penalised += int(np.sum(bad))
            for i in np.flatnonzero(bad):
                self.reasons[self._explain(x[i], f[i])] += 1
        return f, bad

    def _explain(self, x: NDArray[np.float64], f: NDArray[np.float64]) -> str:
        n_bad = int(np.sum(~np.isfinite(f)))
        if n_bad < f.size:
            return f"predictor returned non-finite values at {n_bad} of {f.size} observations"
        if self._explained < _MAX_EXPLAINED:
            self._explained += 1
            try:
                with np.errstate(all="ignore"):
                    self.problem.predict(x[None, :])
            except (ArithmeticError, ValueError, RuntimeError) as exc:
                return f"predictor raised {type(exc).__name__}: {exc}"
            return f"predictor returned non-finite values at {f.size} of {f.size} observations"
        return "predictor raised an error or returned only non-finite values"

    def merge(self, other: Evaluator) -> None:
        """Add another evaluator's counts to this one."""
        self.n_calls += other.n_calls
        self.n_penalised += other.n_penalised
        self.reasons.update(other.reasons)


def _format_reasons(reasons: Counter[str]) -> tuple[str, ...]:
    return tuple(f"{text} ({count}x)" for text, count in sorted(reasons.items()))


# --------------------------------------------------------------------------------------------
# Jacobians and covariance
# --------------------------------------------------------------------------------------------
def jacobian_internal(
    problem: Problem,
    evaluator: Evaluator,
    u: NDArray[np.float64],
    *,
    columns: NDArray[np.int_] | None = None,
    central: bool = False,
) -> NDArray[np.float64] | None:
    """Jacobian of the predictions with respect to internal coordinates, ``d f / d u``.

    Uses ``problem.jacobian`` (chained through :meth:`Space.dphysical_dinternal`) when given,
    otherwise finite differences in ONE batched ``predict`` call: p + 1 rows forward, or 2p + 1
    rows central. Steps that would leave the bounds are taken the other way (forward) or
    replaced by a one-sided second-order formula (central). A perturbed row that fails is
    retried once with the opposite step; a column that still fails is set to zero.

    Parameters
    ----------
    problem : Problem
    evaluator : Evaluator
    u : ndarray, shape (p,)
        Internal point.
    columns : ndarray of int, optional
        Parameters to differentiate (default all).
    central : bool
        Central (second-order) differences instead of forward.

    Returns
    -------
    ndarray, shape (n, len(columns)), or None when the prediction at ``u`` itself fails.
    """
    space = problem.space
    p = space.n
    cols = np.arange(p) if columns is None else np.asarray(columns, dtype=int)
    lb, ub = space.internal_bounds()
    if problem.jacobian is not None:
        x = space.to_physical(u)
        try:
            with np.errstate(all="ignore"):
                jac = np.asarray(problem.jacobian(x), dtype=float)
            if jac.shape == (problem.n_obs, p) and np.all(np.isfinite(jac)):
                return jac[:, cols] * space.dphysical_dinternal(u)[cols]
            evaluator.reasons["analytic Jacobian non-finite or mis-shaped; used differences"] += 1
        except (ArithmeticError, ValueError, RuntimeError) as exc:
            evaluator.reasons[
                f"analytic Jacobian raised {type(exc).__name__}; used differences"
            ] += 1
    uc = u[cols]
    h = (_EPS ** (1 / 3) if central else _EPS**0.5) * _typical(problem, u)[cols]
    if not central:
        sign = np.where(uc + h > ub[cols], -1.0, 1.0)
        steps = sign * h
        rows = np.repeat(u[None, :], cols.size + 1, axis=0)
        rows[1 + np.arange(cols.size), cols] += steps
        steps = rows[1 + np.arange(cols.size), cols] - uc  # exactly representable steps
        f, bad = evaluator(rows)
        if bad[0]:
            return None
        redo = np.flatnonzero(bad[1:])
        if redo.size:
            rows2 = np.repeat(u[None, :], redo.size, axis=0)
            rows2[np.arange(redo.size), cols[redo]] -= steps[redo]
            f2, bad2 = evaluator(rows2)
            f[1 + redo] = f2
            steps[redo] = rows2[np.arange(redo.size), cols[redo]] - uc[redo]
            bad[1 + redo] = bad2
        d = (f[1:] - f[0]) / steps[:, None]
        d[bad[1:]] = 0.0
        return d.T
    # central: two rows per column; one-sided second-order near a bound
    kind = np.where(uc + h > ub[cols], -1, np.where(uc - h < lb[cols], 1, 0))
    first = np.where(kind == -1, -h, h)
    second = np.where(kind == 0, -h, 2.0 * np.where(kind == -1, -h, h))
    rows = np.repeat(u[None, :], 2 * cols.size + 1, axis=0)
    k = np.arange(cols.size)
    rows[1 + 2 * k, cols] += first
    rows[2 + 2 * k, cols] += second
    hh = np.abs(rows[1 + 2 * k, cols] - uc)
    f, bad = evaluator(rows)
    if bad[0]:
        return None
    f0, f1, f2 = f[0], f[1::2], f[2::2]
    d = np.empty((cols.size, problem.n_obs))
    c, fw, bw = kind == 0, kind == 1, kind == -1
    d[c] = (f1[c] - f2[c]) / (2.0 * hh[c, None])
    d[fw] = (-3.0 * f0 + 4.0 * f1[fw] - f2[fw]) / (2.0 * hh[fw, None])
    d[bw] = (3.0 * f0 - 4.0 * f1[bw] + f2[bw]) / (2.0 * hh[bw, None])
    failed = bad[1::2] | bad[2::2]
    if np.any(failed):
        fwd = jacobian_internal(
            _without_jacobian(problem), evaluator, u, columns=cols[failed], central=False
        )
        d[failed] = 0.0 if fwd is None else fwd.T
    return d.T


def _typical(problem: Problem, u: NDArray[np.float64]) -> NDArray[np.float64]:
    """Scale of each internal coordinate for difference steps.

    ``max(1, |u|)`` for log parameters (``u = ln x`` has unit scale); for the others
    ``max(|u|, 1e-3 |u0|)`` with ``u0`` the problem's start (1 when both are zero), so that a
    parameter of size 1e-9 gets a step of its own size and one that has run to a zero bound
    keeps a usable step.
    """
    space = problem.space
    u0 = np.abs(space.to_internal(problem.x0))
    au = np.abs(u)
    typ = np.where(space.is_log, np.maximum(1.0, au), np.maximum(au, 1e-3 * u0))
    return np.where(typ > 0, typ, 1.0)


def _without_jacobian(problem: Problem) -> Problem:
    if problem.jacobian is None:
        return problem
    return Problem(
        predict=problem.predict,
        y=problem.y,
        space=problem.space,
        x0=problem.x0,
        weights=problem.weights,
        error_model=problem.error_model,
        groups=problem.groups,
        labels=problem.labels,
    )


def covariance_from_jacobian(
    jacobian: NDArray[np.float64], weights: NDArray[np.float64], sigma2: float
) -> tuple[NDArray[np.float64], int, NDArray[np.float64]]:
    """Linearised covariance ``sigma^2 (J' W J)^{-1}`` by a column-scaled SVD.

    Parameters
    ----------
    jacobian : ndarray, shape (n, p)
        ``d f / d x`` in the coordinates wanted for the covariance.
    weights : ndarray, shape (n,)
        Least-squares weights W.
    sigma2 : float
        Residual variance ``S / (n - p)``.

    Returns
    -------
    covariance : ndarray, shape (p, p)
        All NaN when ``J' W J`` is numerically singular.
    rank : int
        Numerical rank of the column-scaled, weighted Jacobian.
    singular_values : ndarray, shape (p,)
        Singular values of the column-scaled, weighted Jacobian (unit-length columns).

    Notes
    -----
    Columns are scaled to unit length first (this does not change the covariance and keeps the
    SVD accurate for badly scaled parameters); singular values below
    ``max(n, p) * eps * s_max`` count as zero (common practice, as numpy's ``matrix_rank``).
    """
    a = np.sqrt(weights)[:, None] * jacobian
    p = a.shape[1]
    if not np.all(np.isfinite(a)):
        return np.full((p, p), np.nan), 0, np.full(p, np.nan)
    d = np.linalg.norm(a, axis=0)
    d[d == 0] = 1.0
    _, s, vt = np.linalg.svd(a / d, full_matrices=False)
    tol = max(a.shape) * _EPS * (s[0] if s.size else 0.0)
    rank = int(np.sum(s > tol))
    if rank < p:
        return np.full((p, p), np.nan), rank, s
    vs = vt.T / s
    cov = (vs @ vs.T) / np.outer(d, d) * sigma2
    return cov, rank, s
