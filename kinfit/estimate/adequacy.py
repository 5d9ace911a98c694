"""Model-adequacy tests on the residuals of a fit, and posterior predictive checks of the same
statistics. Nothing of chemistry lives here: observations come as numbers with a group (the run)
per observation, a cell (replicate set) per observation, and named group-level covariates.

Tests, each with its published form:

- ``residual_scale``: the sum of squared standardised residuals against a chi-square law with
  n - p degrees of freedom, when the noise is stated rather than estimated (the classical
  test of a variance against a stated value; Draper & Smith 1998, sec. 2.1). Upper tail: a
  residual scale larger than the stated noise.
- ``lack_of_fit``: the residual sum of squares split into pure error (between replicates of one
  cell) and lack of fit, F = [SS_lof/(m - p)] / [SS_pe/(n - m)] (Draper & Smith 1998, sec. 2.1,
  "lack of fit and pure error").
- ``serial``: within each group, the Wald-Wolfowitz runs test of the signs of the time-ordered
  residuals (Wald & Wolfowitz 1940), lower tail (too few sign changes: residuals that wander),
  with its exact conditional distribution given the numbers of each sign (Swed & Eisenhart
  1943), as a mid-p value (Lancaster 1961); groups combined by Fisher's method
  (``scipy.stats.combine_pvalues``). Mid-p values have mean 1/2 under the null, so the
  combination stays near its nominal level, where exact discrete p-values would make it very
  conservative with short runs.
- ``trend``: group-level mean standardised residuals regressed on a covariate, ordinary least
  squares, two-sided t test of the slope (``scipy.stats.linregress``), optionally within a
  subset of groups.

Overall verdict: Holm's step-down rule (Holm 1979) across all tests at family level ``alpha``:
the fit is adequate when no test is rejected. This bounds the chance of a false alarm on a
right model by ``alpha`` whatever the dependence between the tests.

Posterior predictive checks (Gelman et al. 2013, *Bayesian Data Analysis*, 3rd ed., ch. 6):
for each posterior draw a replicated data set ``y_rep = f + sd * e`` is drawn and the same
discrepancies are computed on the observed and on the replicated data; the posterior predictive
p-value is the share of draws whose replicated discrepancy is at least as extreme. Such
p-values are not uniform under a right model but concentrated towards 1/2 (BDA3 sec. 6.3), so
the same Holm rule on them is conservative.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import special, stats

from kinfit.errors import StudyError
from kinfit.estimate.problem import ErrorModel

__all__ = [
    "AdequacyTest", "Subset", "standardised_residuals", "scale_test", "lack_of_fit_test",
    "runs_test", "serial_test", "trend_test", "stratified_trend_test", "holm", "residual_tests", "predictive_tests",
    "ALPHA", "MULTIPLICITY_RULE",
]

Array = NDArray[np.float64]

#: Family-wise level of the overall verdict.
ALPHA = 0.05
MULTIPLICITY_RULE = ("Holm step-down across all tests at family-wise level 0.05 (Holm 1979): "
                     "adequate when no test is rejected")


@dataclass(frozen=True)
class AdequacyTest:
    """One test: name, statistic, p-value, the covariate it concerns and the subset of groups.

    Attributes
    ----------
    name : str
        ``residual_scale``, ``lack_of_fit``, ``serial`` or ``trend``.
    statistic : float
        Chi-square, F, Fisher's combined chi-square, or the slope's t.
    p : float
        p-value (frequentist) or posterior predictive p-value.
    factor : str or None
        Covariate of a trend test.
    subset : str or None
        Name of the subset of groups a trend was tested in (None: all groups).
    n : int
        Observations (scale, lack of fit), groups (serial, trend).
    detail : dict
        Degrees of freedom, slope, and the like (plain values).
    rejected : bool
        Rejected by the multiplicity rule (set by :func:`holm`).
    """

    name: str
    statistic: float
    p: float
    factor: str | None = None
    subset: str | None = None
    n: int = 0
    detail: Mapping[str, Any] = field(default_factory=dict)
    rejected: bool = False

    def to_dict(self) -> dict[str, Any]:
        """The contract's fields (name, statistic, p, factor) and the rest, plain types."""
        return {"name": self.name, "statistic": _num(self.statistic), "p": _num(self.p),
                "factor": self.factor, "subset": self.subset, "n": int(self.n),
                "rejected": bool(self.rejected),
                "detail": {k: _num(v) if isinstance(v, float) else v
                           for k, v in self.detail.items()}}


@dataclass(frozen=True)
class Subset:
    """A named subset of groups (boolean mask over groups) a trend is tested in, optionally
    split into strata (an int per group) that each get their own intercept and slope."""

    name: str
    mask: NDArray[np.bool_]
    strata: NDArray[np.int_] | None = None


def _num(v: float) -> float | None:
    return float(v) if np.isfinite(v) else None


# --------------------------------------------------------------------------------------------
# the statistics
# --------------------------------------------------------------------------------------------
def standardised_residuals(y: Array, f: Array, *, error_model: ErrorModel,
                           s_abs: float = 1.0, s_rel: float = 1.0,
                           weights: Array | None = None) -> Array:
    """(y - f) / sd, with sd the error model's standard deviation of each observation.

    Broadcasts over leading axes of ``f`` (parameter sets), with ``s_abs``, ``s_rel`` of shape
    (m, 1) then.

    Examples
    --------
    >>> standardised_residuals(np.array([11.0]), np.array([10.0]),
    ...                        error_model=ErrorModel("proportional"), s_rel=0.1)
    array([1.])
    """
    sd = error_model.sigma(f, s_abs=s_abs, s_rel=s_rel, weights=weights)
    return (np.asarray(y, dtype=float) - f) / sd


def scale_test(z: Array, dof: int) -> AdequacyTest:
    r"""Chi-square test of the residual scale against the stated noise.

    :math:`X^2 = \sum z_i^2 \sim \chi^2_{n-p}` when the model and the stated noise are right;
    p is the upper tail (residuals larger than the noise).

    Examples
    --------
    >>> t = scale_test(np.array([1.0, -1.0, 2.0]), dof=3)
    >>> round(t.statistic, 6), round(t.p, 4)
    (6.0, 0.1116)
    """
    z = np.asarray(z, dtype=float)
    if dof < 1:
        raise StudyError(f"the scale test needs n - p >= 1 degrees of freedom; got {dof}")
    x2 = float(np.sum(z * z))
    return AdequacyTest("residual_scale", x2, float(stats.chi2.sf(x2, dof)), n=z.size,
                        detail={"dof": int(dof), "rms": float(np.sqrt(x2 / z.size))})


def lack_of_fit_test(z: Array, cells: NDArray[np.int_], n_params: int) -> AdequacyTest | None:
    r"""Lack-of-fit F test against pure error (Draper & Smith 1998, sec. 2.1).

    Observations sharing a ``cells`` value are replicates (same conditions). With m cells,
    :math:`SS_{pe} = \sum_i \sum_j (z_{ij} - \bar z_i)^2` on n - m degrees of freedom and
    :math:`SS_{lof} = \sum z^2 - SS_{pe}` on m - p:
    :math:`F = [SS_{lof}/(m-p)] / [SS_{pe}/(n-m)]`. None when there are no replicates or
    m <= p.
    """
    z = np.asarray(z, dtype=float)
    _, inv, counts = np.unique(np.asarray(cells), return_inverse=True, return_counts=True)
    m, n = counts.size, z.size
    if m == n or m <= n_params:
        return None
    means = np.bincount(inv, weights=z) / counts
    ss_pe = float(np.sum((z - means[inv]) ** 2))
    ss_lof = max(float(np.sum(z * z)) - ss_pe, 0.0)
    d1, d2 = m - n_params, n - m
    F = (ss_lof / d1) / (ss_pe / d2) if ss_pe > 0 else np.inf
    return AdequacyTest("lack_of_fit", float(F), float(stats.f.sf(F, d1, d2)), n=n,
                        detail={"df_lack_of_fit": int(d1), "df_pure_error": int(d2),
                                "cells": int(m)})


def _runs_pmf(r: int, n1: int, n2: int) -> float:
    """P(R = r) for the number of runs R of n1 + n2 signs in random order (Swed & Eisenhart
    1943): P(R = 2k) = 2 C(n1-1, k-1) C(n2-1, k-1) / C(n, n1),
    P(R = 2k+1) = [C(n1-1, k-1) C(n2-1, k) + C(n1-1, k) C(n2-1, k-1)] / C(n, n1)."""
    total = special.comb(n1 + n2, n1, exact=True)
    acc = 0
    for x in (r,):
        k = x // 2
        if x < 2:
            continue
        if x % 2 == 0:
            acc += 2 * special.comb(n1 - 1, k - 1, exact=True) * special.comb(n2 - 1, k - 1,
                                                                               exact=True)
        else:
            acc += (special.comb(n1 - 1, k - 1, exact=True) * special.comb(n2 - 1, k, exact=True)
                    + special.comb(n1 - 1, k, exact=True) * special.comb(n2 - 1, k - 1,
                                                                           exact=True))
    return acc / total


def _runs_mid_p(r: int, n1: int, n2: int) -> float:
    """Lower-tail mid-p, P(R < r) + P(R = r)/2 (Lancaster 1961)."""
    below = sum(_runs_pmf(x, n1, n2) for x in range(2, r))
    return float(below + 0.5 * _runs_pmf(r, n1, n2))


def runs_test(z: Array) -> tuple[int, float, float] | None:
    """Wald-Wolfowitz runs test of the signs of a sequence, lower tail.

    Returns (number of runs, exact lower-tail mid-p = P(R < r) + P(R = r)/2 (Lancaster 1961),
    normal-approximation z of Wald & Wolfowitz 1940 without continuity correction), or None when one sign is absent (the test
    is conditional on the counts and then carries no information). Zeros are dropped.

    Examples
    --------
    >>> runs_test(np.array([1.0, 2.0, 3.0, -1.0, -2.0, -3.0]))[:2]
    (2, 0.05)
    """
    s = np.sign(np.asarray(z, dtype=float))
    s = s[s != 0]
    n1, n2 = int(np.sum(s > 0)), int(np.sum(s < 0))
    if n1 == 0 or n2 == 0:
        return None
    r = 1 + int(np.sum(s[1:] != s[:-1]))
    n = n1 + n2
    mean = 2.0 * n1 * n2 / n + 1.0
    var = 2.0 * n1 * n2 * (2.0 * n1 * n2 - n) / (n * n * (n - 1.0))
    zstat = (r - mean) / np.sqrt(var) if var > 0 else np.nan
    return r, _runs_mid_p(r, n1, n2), float(zstat)


def serial_test(z: Array, groups: NDArray[np.int_]) -> AdequacyTest | None:
    """Runs test per group (observations in the order given, which is time order within a
    group), combined over groups by Fisher's method. None when no group can be tested."""
    z = np.asarray(z, dtype=float)
    groups = np.asarray(groups)
    ps, n_runs = [], 0
    for g in np.unique(groups):
        res = runs_test(z[groups == g])
        if res is not None:
            ps.append(res[1])
            n_runs += res[0]
    if not ps:
        return None
    comb = stats.combine_pvalues(ps, method="fisher")
    return AdequacyTest("serial", float(comb.statistic), float(comb.pvalue), n=len(ps),
                        detail={"method": "Wald-Wolfowitz runs test per group (exact mid-p, "
                                "lower tail), combined by Fisher's method",
                                "sign_runs": int(n_runs)})


def group_means(z: Array, groups: NDArray[np.int_], n_groups: int) -> Array:
    """Mean of ``z`` over the last axis within each group index 0..n_groups-1."""
    z = np.asarray(z, dtype=float)
    onehot = (np.asarray(groups)[:, None] == np.arange(n_groups)[None, :]).astype(float)
    counts = onehot.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return (z @ onehot) / counts


def trend_test(values: Array, covariate: Array, *, factor: str,
               subset: str | None = None) -> AdequacyTest | None:
    """OLS of ``values`` on ``covariate``; two-sided t test of the slope
    (``scipy.stats.linregress``). None with fewer than 3 points or fewer than 2 distinct
    covariate values.

    Examples
    --------
    >>> t = trend_test(np.array([0.1, 0.3, 0.2, 0.5]), np.array([1.0, 2.0, 3.0, 4.0]),
    ...                factor="x")
    >>> round(t.statistic, 3)
    2.117
    """
    v = np.asarray(values, dtype=float)
    x = np.asarray(covariate, dtype=float)
    ok = np.isfinite(v) & np.isfinite(x)
    v, x = v[ok], x[ok]
    if v.size < 3 or np.unique(x).size < 2:
        return None
    res = stats.linregress(x, v)
    t = res.slope / res.stderr if res.stderr > 0 else (np.inf if res.slope else 0.0)
    return AdequacyTest("trend", float(t), float(res.pvalue), factor=factor, subset=subset,
                        n=int(v.size), detail={"slope": float(res.slope),
                                               "slope_stderr": float(res.stderr)})


def _design(covariate: Array, strata: NDArray[np.int_]) -> tuple[Array, Array]:
    """Design matrices of the stratified trend: intercepts only, and intercepts plus a slope per
    stratum with at least two distinct covariate values (covariate centred per stratum)."""
    levels = np.unique(strata)
    base = (strata[:, None] == levels[None, :]).astype(float)
    slopes = []
    for j, lev in enumerate(levels):
        m = strata == lev
        if np.unique(covariate[m]).size >= 2:
            xc = np.where(m, covariate - covariate[m].mean(), 0.0)
            slopes.append(xc / np.max(np.abs(xc)))
        del j
    full = np.column_stack([base, *slopes]) if slopes else base
    return base, full


def _residual_maker(X: Array) -> Array:
    """I - X X^+ (the residual projection of least squares on X)."""
    return np.eye(X.shape[0]) - X @ np.linalg.pinv(X)


def stratified_trend_test(values: Array, covariate: Array, strata: NDArray[np.int_], *,
                          factor: str, subset: str | None = None) -> AdequacyTest | None:
    r"""F test that the slopes on ``covariate`` are zero in every stratum (a general linear
    hypothesis in ordinary least squares; Draper & Smith 1998, ch. 9).

    Full model: an intercept and a slope per stratum; reduced model: intercepts only.
    :math:`F = [(RSS_0 - RSS_1)/q] / [RSS_1/(k - r_1)]` with q slopes and r_1 the rank of the
    full design. With one stratum it is the square of the slope's t. None when no stratum has
    two distinct covariate values or no residual degree of freedom is left.
    """
    v = np.asarray(values, dtype=float)
    x = np.asarray(covariate, dtype=float)
    st = np.asarray(strata)
    ok = np.isfinite(v) & np.isfinite(x)
    v, x, st = v[ok], x[ok], st[ok]
    base, full = _design(x, st)
    q = full.shape[1] - base.shape[1]
    r1 = np.linalg.matrix_rank(full)
    d2 = v.size - r1
    if q == 0 or d2 < 1:
        return None
    rss0 = float(np.sum((_residual_maker(base) @ v) ** 2))
    rss1 = float(np.sum((_residual_maker(full) @ v) ** 2))
    F = ((rss0 - rss1) / q) / (rss1 / d2) if rss1 > 0 else np.inf
    return AdequacyTest("trend", float(F), float(stats.f.sf(F, q, d2)), factor=factor,
                        subset=subset, n=int(v.size),
                        detail={"statistic": "F", "df": [int(q), int(d2)],
                                "strata": int(np.unique(st).size)})


def holm(tests: Sequence[AdequacyTest], alpha: float = ALPHA) -> list[AdequacyTest]:
    """The tests with ``rejected`` set by Holm's step-down rule (Holm 1979) at level ``alpha``.

    Sorted p-values p_(1) <= ... <= p_(k) are rejected while p_(i) <= alpha / (k - i + 1).
    """
    k = len(tests)
    order = np.argsort([t.p if np.isfinite(t.p) else 1.0 for t in tests], kind="stable")
    rejected = np.zeros(k, dtype=bool)
    for rank, i in enumerate(order):
        if tests[i].p <= alpha / (k - rank):
            rejected[i] = True
        else:
            break
    return [replace(t, rejected=bool(rejected[i])) for i, t in enumerate(tests)]


def residual_tests(z: Array, groups: NDArray[np.int_], *, n_params: int,
                   covariates: Mapping[str, Array],
                   subsets: Mapping[str, Sequence[Subset]] | None = None,
                   cells: NDArray[np.int_] | None = None, noise_stated: bool = False,
                   alpha: float = ALPHA) -> list[AdequacyTest]:
    """Every applicable test on standardised residuals, with Holm's rule applied.

    Parameters
    ----------
    z : ndarray, shape (n,)
        Standardised residuals, time-ordered within each group.
    groups : ndarray of int, shape (n,)
        Group index 0..G-1 of each observation.
    n_params : int
        Fitted parameters (degrees of freedom of the scale and lack-of-fit tests).
    covariates : mapping of str to ndarray, shape (G,)
        Group-level covariates for the trend tests (constant ones are skipped).
    subsets : mapping of str to sequence of Subset, optional
        Per covariate, subsets of groups in which its trend is tested as well (masks over G).
    cells : ndarray of int, shape (n,), optional
        Replicate cells for the lack-of-fit test.
    noise_stated : bool
        ``z`` is scaled by a stated noise (the scale test applies); otherwise by an estimated
        scale, and the scale test is left out.
    """
    z = np.asarray(z, dtype=float)
    groups = np.asarray(groups)
    n_groups = int(groups.max()) + 1 if groups.size else 0
    out: list[AdequacyTest] = []
    if noise_stated:
        out.append(scale_test(z, z.size - n_params))
    if cells is not None:
        lof = lack_of_fit_test(z, cells, n_params)
        if lof is not None:
            out.append(lof)
    ser = serial_test(z, groups)
    if ser is not None:
        out.append(ser)
    means = group_means(z, groups, n_groups)
    for name, cov in covariates.items():
        cov = np.asarray(cov, dtype=float)
        for sub in (None, *(subsets or {}).get(name, ())):
            mask = np.ones(n_groups, dtype=bool) if sub is None else np.asarray(sub.mask)
            if sub is not None and sub.strata is None and mask.all():
                continue  # the same as the overall test
            label = None if sub is None else sub.name
            if sub is not None and sub.strata is not None:
                t = stratified_trend_test(means[mask], cov[mask], np.asarray(sub.strata)[mask],
                                          factor=name, subset=label)
            else:
                t = trend_test(means[mask], cov[mask], factor=name, subset=label)
            if t is not None:
                out.append(t)
    return holm(out, alpha)


# --------------------------------------------------------------------------------------------
# posterior predictive checks
# --------------------------------------------------------------------------------------------
def _slope_t(v: Array, x: Array) -> Array:
    """|t| of the OLS slope of each row of ``v`` (m, k) on ``x`` (k,)."""
    xc = x - x.mean()
    sxx = float(np.sum(xc * xc))
    k = x.size
    slope = (v - v.mean(axis=1, keepdims=True)) @ xc / sxx
    fitted = v.mean(axis=1, keepdims=True) + slope[:, None] * xc[None, :]
    s2 = np.sum((v - fitted) ** 2, axis=1) / (k - 2)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.abs(slope / np.sqrt(s2 / sxx))


def _stratified_F(v: Array, x: Array, strata: NDArray[np.int_]) -> Array | None:
    """F of :func:`stratified_trend_test` for each row of ``v`` (m, k)."""
    base, full = _design(x, strata)
    q = full.shape[1] - base.shape[1]
    d2 = x.size - np.linalg.matrix_rank(full)
    if q == 0 or d2 < 1:
        return None
    rss0 = np.sum((v @ _residual_maker(base)) ** 2, axis=1)
    rss1 = np.sum((v @ _residual_maker(full)) ** 2, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        return ((rss0 - rss1) / q) / (rss1 / d2)


def _sign_runs(z: Array, groups: NDArray[np.int_]) -> Array:
    """Total number of sign runs over groups, per row of ``z`` (m, n)."""
    s = np.sign(z)
    same_group = groups[1:] == groups[:-1]
    changes = (s[:, 1:] != s[:, :-1]) & same_group[None, :]
    return np.unique(groups).size + changes.sum(axis=1)


def _pure_error_ratio(z: Array, cells: NDArray[np.int_]) -> Array | None:
    _, inv, counts = np.unique(cells, return_inverse=True, return_counts=True)
    if counts.size == cells.size:
        return None
    onehot = (inv[:, None] == np.arange(counts.size)[None, :]).astype(float)
    means = (z @ onehot) / counts
    ss_pe = np.sum((z - means[:, inv]) ** 2, axis=1)
    ss = np.sum(z * z, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (ss - ss_pe) / ss_pe


def predictive_tests(y: Array, f: Array, sd: Array, groups: NDArray[np.int_], *,
                     covariates: Mapping[str, Array],
                     subsets: Mapping[str, Sequence[Subset]] | None = None,
                     cells: NDArray[np.int_] | None = None, rng: np.random.Generator,
                     alpha: float = ALPHA) -> list[AdequacyTest]:
    """Posterior predictive p-values of the residual statistics (Gelman et al. 2013, ch. 6).

    Parameters
    ----------
    y : ndarray, shape (n,)
    f, sd : ndarray, shape (m, n)
        Predictions and standard deviations of each observation under m posterior draws.
    groups, covariates, subsets, cells :
        As in :func:`residual_tests`.
    rng : numpy.random.Generator
        Source of the replicated data.

    Returns
    -------
    list of AdequacyTest
        ``statistic`` holds the observed discrepancy averaged over the draws, ``p`` the
        posterior predictive p-value, Holm's rule applied.
    """
    y = np.asarray(y, dtype=float)
    f = np.atleast_2d(np.asarray(f, dtype=float))
    sd = np.broadcast_to(np.asarray(sd, dtype=float), f.shape)
    groups = np.asarray(groups)
    ok = np.all(np.isfinite(f), axis=1) & np.all(np.isfinite(sd) & (sd > 0), axis=1)
    f, sd = f[ok], sd[ok]
    m = f.shape[0]
    if m == 0:
        return []
    z_obs = (y[None, :] - f) / sd
    z_rep = rng.standard_normal(size=f.shape)
    n_groups = int(groups.max()) + 1
    out: list[AdequacyTest] = []

    def add(name: str, t_obs: Array, t_rep: Array, *, factor: str | None = None,
            subset: str | None = None, lower: bool = False) -> None:
        extreme = t_rep <= t_obs if lower else t_rep >= t_obs
        out.append(AdequacyTest(name, float(np.mean(t_obs)), float(np.mean(extreme)),
                                factor=factor, subset=subset, n=m,
                                detail={"draws": int(m), "kind": "posterior predictive"}))

    add("residual_scale", np.sum(z_obs ** 2, axis=1), np.sum(z_rep ** 2, axis=1))
    if cells is not None:
        r_obs, r_rep = _pure_error_ratio(z_obs, cells), _pure_error_ratio(z_rep, cells)
        if r_obs is not None and r_rep is not None:
            add("lack_of_fit", r_obs, r_rep)
    add("serial", _sign_runs(z_obs, groups).astype(float),
        _sign_runs(z_rep, groups).astype(float), lower=True)
    mo, mr = group_means(z_obs, groups, n_groups), group_means(z_rep, groups, n_groups)
    for name, cov in covariates.items():
        cov = np.asarray(cov, dtype=float)
        for sub in (None, *(subsets or {}).get(name, ())):
            mask = np.ones(n_groups, dtype=bool) if sub is None else np.asarray(sub.mask)
            if (sub is not None and sub.strata is None and mask.all()) or mask.sum() < 3 or \
                    np.unique(cov[mask]).size < 2:
                continue
            label = None if sub is None else sub.name
            if sub is not None and sub.strata is not None:
                st = np.asarray(sub.strata)[mask]
                f_obs = _stratified_F(mo[:, mask], cov[mask], st)
                f_rep = _stratified_F(mr[:, mask], cov[mask], st)
                if f_obs is not None and f_rep is not None:
                    add("trend", f_obs, f_rep, factor=name, subset=label)
            else:
                add("trend", _slope_t(mo[:, mask], cov[mask]), _slope_t(mr[:, mask], cov[mask]),
                    factor=name, subset=label)
    return holm(out, alpha)
