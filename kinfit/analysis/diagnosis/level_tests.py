"""Nested least-squares tests of factor levels: the extra-sum-of-squares F test on spline fits of the profiles."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy import stats
from scipy.interpolate import BSpline

Array = NDArray[np.float64]

__all__ = ['NestedTest', 'extra_sum_of_squares', 'spline_design']


@dataclass(frozen=True)
class NestedTest:
    """Extra-sum-of-squares F test of a reduced (pooled) against a full (separate) model.

    Attributes
    ----------
    statistic : float
        F.
    df : tuple of int
        (numerator, denominator) degrees of freedom.
    p_value : float
    sse_reduced, sse_full : float
        Weighted residual sums of squares (units of the response squared).
    """

    statistic: float
    df: tuple[int, int]
    p_value: float
    sse_reduced: float
    sse_full: float


def extra_sum_of_squares(sse_reduced: float, dof_reduced: int, sse_full: float, dof_full: int,
                         *, noise: tuple[float, int] | None = None) -> NestedTest:
    """F test of nested least-squares fits (Bates & Watts 1988; from memory).

    Parameters
    ----------
    sse_reduced, dof_reduced : float, int
        Residual sum of squares and residual degrees of freedom of the reduced model.
    sse_full, dof_full : float, int
        The same for the full model (dof_full < dof_reduced).
    noise : (float, int), optional
        An outside estimate of the noise (sum of squares, degrees of freedom) used as the
        denominator instead of the full model's residuals.

    Returns
    -------
    NestedTest
    """
    df1 = int(dof_reduced - dof_full)
    ss_den, df2 = (sse_full, int(dof_full)) if noise is None else (noise[0], int(noise[1]))
    if df1 <= 0 or df2 <= 0:
        raise ValueError(f"degrees of freedom must be positive, got ({df1}, {df2})")
    extra = max(sse_reduced - sse_full, 0.0)
    scale = max(abs(sse_reduced), 1e-300)
    if ss_den <= 1e-28 * scale or ss_den <= 0.0:
        # noise-free data: identical curves give no extra sum of squares at all
        F, p = (0.0, 1.0) if extra <= 1e-12 * scale else (np.inf, 0.0)
    else:
        F = (extra / df1) / (ss_den / df2)
        p = float(stats.f.sf(F, df1, df2))
    return NestedTest(float(F), (df1, df2), float(p), float(sse_reduced), float(sse_full))


def spline_design(x: Array, degree: int, knots: Sequence[float]) -> Array:
    """Design matrix (n, degree + 1 + len(knots)) of a clamped B-spline basis on [0, 1].

    Parameters
    ----------
    x : ndarray
        Abscissae scaled to [0, 1].
    degree : int
        Polynomial degree (3: cubic).
    knots : sequence of float
        Interior knots, strictly inside (0, 1), increasing.
    """
    t = np.r_[np.zeros(degree + 1), np.asarray(knots, dtype=float), np.ones(degree + 1)]
    xc = np.clip(np.asarray(x, dtype=float), 0.0, 1.0)
    return BSpline.design_matrix(xc, t, degree).toarray()


def _spline_basis(degree: int, knots: tuple[float, ...]) -> Callable[[Array], Array]:
    """The design-matrix function of one spline basis."""
    def basis(x: Array) -> Array:
        return spline_design(x, degree, knots)
    return basis


def _wls(X: Array, y: Array, sw: Array) -> tuple[float, int, Array]:
    """Weighted least squares: (SSE, rank, coefficients)."""
    coef, _, rank, _ = np.linalg.lstsq(X * sw[:, None], y * sw, rcond=None)
    res = (y - X @ coef) * sw
    return float(res @ res), int(rank), np.asarray(coef, dtype=np.float64)


@dataclass(frozen=True)
class _LevelFit:
    sse_pooled: float
    rank_pooled: int
    sse_separate: float
    rank_separate: int
    coefs: list[Array]
    basis: Callable[[Array], Array]
    label: str


def _fit_levels(x: Array, y: Array, sw: Array, level: NDArray[np.int_], n_levels: int,
                basis: Callable[[Array], Array], label: str) -> _LevelFit:
    X = basis(x)
    sse_p, rank_p, _ = _wls(X, y, sw)
    sse_s, rank_s, coefs = 0.0, 0, []
    for g in range(n_levels):
        m = level == g
        s, r, c = _wls(X[m], y[m], sw[m])
        sse_s += s
        rank_s += r
        coefs.append(c)
    return _LevelFit(sse_p, rank_p, sse_s, rank_s, coefs, basis, label)


def _select_basis(x: Array, y: Array, sw: Array, level: NDArray[np.int_], n_levels: int
                  ) -> _LevelFit | None:
    """The spline basis (degree, interior knots) with the lowest BIC of the pooled fit."""
    counts = np.bincount(level, minlength=n_levels)
    n_min = int(counts.min())
    ux = np.unique(x)
    candidates: list[tuple[int, tuple[float, ...]]] = [(1, ()), (2, ()), (3, ())]
    for k in range(1, 5):
        quantiles = np.unique(np.quantile(ux, np.arange(1, k + 1) / (k + 1)))
        knots = tuple(float(v) for v in quantiles if 0.0 < v < 1.0)
        if len(knots) == k:
            candidates.append((3, knots))
    best: tuple[float, _LevelFit] | None = None
    n = x.size
    for degree, knots in candidates:
        size = degree + 1 + len(knots)
        if size > n_min - 2:
            continue
        fit = _fit_levels(x, y, sw, level, n_levels, _spline_basis(degree, knots),
                          f"degree {degree}, {len(knots)} interior knots")
        if n - fit.rank_separate <= 0:
            continue
        bic = n * np.log(max(fit.sse_pooled, 1e-300) / n) + fit.rank_pooled * np.log(n)
        if best is None or bic < best[0] - 1e-9:
            best = (bic, fit)
    return None if best is None else best[1]
