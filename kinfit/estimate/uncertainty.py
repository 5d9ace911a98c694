"""Uncertainty of a least-squares estimate: linearised, profile-likelihood and bootstrap
intervals, and identifiability flags as plain numbers (no chemistry words here; the chemistry
layer translates them).

References
----------
Bates, D. M. & Watts, D. G. (1988). *Nonlinear Regression Analysis and Its Applications*.
Wiley. Ch. 2 (linearised inference) and ch. 6 (profile t).
Davison, A. C. & Hinkley, D. V. (1997). *Bootstrap Methods and their Application*. Cambridge
University Press, ch. 6 (resampling residuals; from memory).
Belsley, D. A., Kuh, E. & Welsch, R. E. (1980). *Regression Diagnostics*. Wiley, ch. 3
(condition indexes of the column-scaled design; from memory).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from concurrent.futures import Executor
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray
from scipy.optimize import brentq
from scipy.stats import t as student_t
from tqdm.auto import tqdm

from kinfit.errors import StudyError
from kinfit.estimate.evaluation import Evaluator
from kinfit.estimate.identifiability import (  # noqa: F401 - identifiability re-exported
    Identifiability,
    _readonly,
    _to_dict,
    identifiability,
)
from kinfit.estimate.problem import Problem
from kinfit.estimate.result import Estimate
from kinfit.estimate.solve import SolverSettings, solve_weighted

__all__ = ['Identifiability', 'Intervals', 'ProfileResult', 'ProfileTrace', 'identifiability', 'linearised_intervals', 'profile_intervals']


def _check_level(level: float, func: str) -> None:
    if not (isinstance(level, float | int) and 0 < level < 1):
        raise StudyError(
            f"The 'level' option of {func}() must be a float in (0, 1). Got {level!r} instead."
        )


# --------------------------------------------------------------------------------------------
# intervals
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Intervals:
    """Confidence intervals, one per parameter (physical units).

    Attributes
    ----------
    names : tuple of str
    estimate, lower, upper : ndarray, shape (p,)
    level : float
        Coverage, e.g. 0.95.
    method : str
        ``"linearised"``, ``"profile"`` or ``"bootstrap-residual"`` / ``"bootstrap-group"``.
    lower_closed, upper_closed : ndarray of bool, shape (p,)
        False where the interval is open-ended: the profile did not reach the critical value
        within the bounds (the end is then the bound, possibly infinite).
    notes : tuple of str
        Plain statements about open ends, failed profile points and the like.
    """

    names: tuple[str, ...]
    estimate: NDArray[np.float64]
    lower: NDArray[np.float64]
    upper: NDArray[np.float64]
    level: float
    method: str
    lower_closed: NDArray[np.bool_]
    upper_closed: NDArray[np.bool_]
    notes: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        _readonly(self)

    def interval(self, name: str) -> tuple[float, float]:
        """``(lower, upper)`` of parameter ``name``."""
        if name not in self.names:
            raise StudyError(
                f"no parameter named '{name}'; the intervals cover {list(self.names)}"
            )
        i = self.names.index(name)
        return float(self.lower[i]), float(self.upper[i])

    def to_frame(self) -> pd.DataFrame:
        """One row per parameter."""
        return pd.DataFrame(
            {
                "estimate": self.estimate,
                "lower": self.lower,
                "upper": self.upper,
                "lower_closed": self.lower_closed,
                "upper_closed": self.upper_closed,
            },
            index=pd.Index(self.names, name="parameter"),
        )

    def to_dict(self) -> dict[str, Any]:
        """Plain Python types."""
        return _to_dict(self)


def linearised_intervals(estimate: Estimate, *, level: float = 0.95) -> Intervals:
    """Marginal intervals ``x_j +- t_{n-p, (1+level)/2} se_j`` (Bates & Watts 1988, ch. 2).

    Parameters
    ----------
    estimate : Estimate
    level : float
        Coverage in (0, 1).

    Returns
    -------
    Intervals
        Symmetric in physical units; ``method = "linearised"``.

    Examples
    --------
    >>> from kinfit.estimate.identifiability import (  # noqa: F401 - identifiability re-exported
    Identifiability,
    _readonly,
    _to_dict,
    identifiability,
)
from kinfit.estimate.problem import Problem, Space
    >>> from kinfit.estimate.least_squares import fit_problem
    >>> x = np.arange(6.0)
    >>> y = np.array([0.1, 1.9, 4.2, 5.8, 8.1, 9.9])
    >>> space = Space(("b0", "b1"), np.full(2, -np.inf), np.full(2, np.inf), ("none", "none"))
    >>> est = fit_problem(Problem(lambda b: b[:, :1] + b[:, 1:] * x, y, space, np.zeros(2)))
    >>> np.round(linearised_intervals(est).interval("b1"), 3).tolist()
    [1.867, 2.088]
    """
    _check_level(level, "linearised_intervals")
    tc = float(student_t.ppf(0.5 + level / 2, estimate.dof)) if estimate.dof > 0 else np.inf
    half = tc * estimate.stderr
    return Intervals(
        names=estimate.names,
        estimate=estimate.x,
        lower=estimate.x - half,
        upper=estimate.x + half,
        level=float(level),
        method="linearised",
        lower_closed=np.isfinite(half),
        upper_closed=np.isfinite(half),
        notes=()
        if np.all(np.isfinite(half))
        else ("singular covariance: some intervals are undefined",),
    )


# --------------------------------------------------------------------------------------------
# profile t
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class ProfileTrace:
    """Profile of one parameter.

    Attributes
    ----------
    name : str
    values : ndarray, shape (k,)
        Fixed values of the profiled parameter (physical), sorted.
    tau : ndarray, shape (k,)
        Profile t: ``sign(v - x_hat) sqrt(S~(v) - S_hat) / s``.
    sse : ndarray, shape (k,)
        Re-minimised weighted SSE ``S~(v)``.
    others : ndarray, shape (k, p)
        All parameters at each profile point (physical).
    """

    name: str
    values: NDArray[np.float64]
    tau: NDArray[np.float64]
    sse: NDArray[np.float64]
    others: NDArray[np.float64]

    def __post_init__(self) -> None:
        _readonly(self)

    def to_dict(self) -> dict[str, Any]:
        """Plain Python types."""
        return _to_dict(self)


@dataclass(frozen=True)
class ProfileResult:
    """Profile-likelihood intervals and the traces behind them.

    Attributes
    ----------
    intervals : Intervals
        ``method = "profile"``.
    traces : tuple of ProfileTrace
    t_crit : float
        ``t_{n-p, (1+level)/2}``.
    sse_min : float
        Lowest weighted SSE met while profiling (below the estimate's SSE when the profile found
        a better optimum; see ``better_optimum``).
    better_optimum : bool
        A profile point had a lower SSE than the estimate: the fit was not at the minimum.
    """

    intervals: Intervals
    traces: tuple[ProfileTrace, ...]
    t_crit: float
    sse_min: float
    better_optimum: bool

    def to_dict(self) -> dict[str, Any]:
        """Plain Python types."""
        return _to_dict(self)


@dataclass(frozen=True)
class _SideResult:
    end: float  # physical end of the interval on this side
    closed: bool
    note: str | None
    values: list[float]
    tau: list[float]
    sse: list[float]
    others: list[NDArray[np.float64]]
    sse_min: float


#: Accuracy of a profile-interval endpoint in profile t (so in standard errors of the
#: parameter): 1e-5, far below the interval's own sampling uncertainty and above the noise of
#: the inner fits' sums of squares (their relative tolerance times the degrees of freedom).
TAU_TOL = 1e-5


def _profile_side(
    task: tuple[Problem, Estimate, int, int, float, int, SolverSettings],
) -> _SideResult:
    """Walk the profile of parameter ``j`` in direction ``d`` until |tau| passes ``t_crit``."""
    problem, est, j, d, tc, max_steps, settings = task
    space = problem.space
    name = space.names[j]
    u_hat = np.asarray(est.x_internal, dtype=float)
    w_fit = np.asarray(est.fit_weights, dtype=float)
    s_hat, s = est.sse, est.sigma
    lb, ub = space.internal_bounds()
    bound = ub[j] if d > 0 else lb[j]
    free = np.ones(space.n, dtype=bool)
    free[j] = False
    ev = Evaluator(problem)

    def inner(v: float, warm: NDArray[np.float64]) -> tuple[float, NDArray[np.float64], bool]:
        u = warm.copy()
        u[j] = v
        if free.any():
            st = solve_weighted(problem, u, w_fit, settings=settings, evaluator=ev, free=free)
            u = st.u
        f, bad = ev(u[None, :])
        if bad[0]:
            return np.inf, u, True
        return float(np.sum(w_fit * (problem.y - f[0]) ** 2)), u, False

    def tau_of(sse: float, v: float) -> float:
        return float(np.sign(v - u_hat[j]) * np.sqrt(max(sse - s_hat, 0.0)) / s)

    dxdu = space.dphysical_dinternal(u_hat)[j]
    se_u = est.stderr[j] / dxdu if np.isfinite(est.stderr[j]) and est.stderr[j] > 0 else np.nan
    if not np.isfinite(se_u) or se_u <= 0:
        se_u = 0.1 * max(1.0, abs(u_hat[j]))
    step = se_u * tc / 3.0
    v_prev, tau_prev, warm = u_hat[j], 0.0, u_hat.copy()
    values: list[float] = []
    taus: list[float] = []
    sses: list[float] = []
    others: list[NDArray[np.float64]] = []
    sse_min = s_hat
    for _ in range(max_steps):
        v = v_prev + d * step
        hit = (d > 0 and v >= bound) or (d < 0 and v <= bound)
        if hit:
            if not np.isfinite(bound):
                hit = False
            else:
                v = float(bound)
        sse, u, failed = inner(v, warm)
        if failed:
            return _SideResult(
                _phys(space, j, v_prev),
                False,
                f"'{name}': the prediction fails beyond {_phys(space, j, v_prev):.6g}; "
                "the interval is cut there",
                values, taus, sses, others, sse_min,
            )  # fmt: skip
        sse_min = min(sse_min, sse)
        tau = tau_of(sse, v)
        values.append(v)
        taus.append(tau)
        sses.append(sse)
        others.append(u)
        if abs(tau) >= tc:
            # bracket [v_prev, v]: |tau| = t_crit, warm-started from the inside point. The
            # endpoint is wanted to TAU_TOL in t (TAU_TOL standard errors in v): first the
            # point interpolated linearly from the walk (tau is nearly linear over one step),
            # then Brent's method only when that point misses, on the part of the bracket left
            warm_in = warm.copy()

            def g(vv: float, warm_in: NDArray[np.float64] = warm_in) -> float:
                return abs(tau_of(inner(vv, warm_in)[0], vv)) - tc

            ga, gb = abs(tau_prev) - tc, abs(tau) - tc
            v_lin = v_prev + (v - v_prev) * (-ga / (gb - ga)) if gb > ga else v
            g_lin = g(v_lin) if v_lin != v else gb
            if abs(g_lin) <= TAU_TOL:
                root = v_lin
            else:
                a, b = (v_lin, v) if g_lin < 0 else (v_prev, v_lin)
                root = brentq(g, min(a, b), max(a, b), xtol=TAU_TOL * se_u, maxiter=100)
            return _SideResult(
                _phys(space, j, root), True, None, values, taus, sses, others, sse_min
            )
        if hit:
            return _SideResult(
                float(space.lower[j] if d < 0 else space.upper[j]),
                False,
                f"'{name}': the profile does not reach t = {tc:.4g} within the bound "
                f"{_phys(space, j, v):.6g} (|t| = {abs(tau):.3g} there): open-ended interval",
                values, taus, sses, others, sse_min,
            )  # fmt: skip
        gain = abs(tau) - abs(tau_prev)
        dv = abs(v - v_prev)
        if gain > 1e-12:
            target = (tc - abs(tau)) / (gain / dv) * 1.2
            step = float(np.clip(target, 0.25 * dv, 4.0 * dv))
        else:
            step = 2.0 * dv
        v_prev, tau_prev, warm = v, tau, u
    end = space.lower[j] if d < 0 else space.upper[j]
    if np.isfinite(bound):
        end = _phys(space, j, v_prev)
    return _SideResult(
        float(end),
        False,
        f"'{name}': the profile does not reach t = {tc:.4g} after {max_steps} steps "
        f"(|t| = {abs(tau_prev):.3g} at {_phys(space, j, v_prev):.6g}): open-ended interval",
        values, taus, sses, others, sse_min,
    )  # fmt: skip


def _phys(space: Any, j: int, v: float) -> float:
    return float(np.exp(v)) if space.is_log[j] else float(v)


def profile_intervals(
    problem: Problem,
    estimate: Estimate,
    *,
    names: Sequence[str] | None = None,
    level: float = 0.95,
    max_steps: int = 40,
    xtol: float = 1e-12,
    ftol: float = 1e-12,
    executor: Executor | None = None,
    progress: bool = False,
) -> ProfileResult:
    """Profile-t intervals (Bates & Watts 1988, ch. 6), re-minimising the other parameters.

    Parameters
    ----------
    problem : Problem
        The problem that produced ``estimate``.
    estimate : Estimate
    names : sequence of str, optional
        Parameters to profile (default all).
    level : float
        Coverage in (0, 1).
    max_steps : int
        Most profile points per side before the interval is declared open.
    xtol, ftol : float
        Tolerances of the inner (conditional) fits.
    executor : concurrent.futures.Executor, optional
        Runs the 2 x len(names) profile sides in parallel; results do not depend on it.
    progress : bool
        Show a tqdm progress bar (on stderr) over the profile sides.

    Returns
    -------
    ProfileResult

    Notes
    -----
    The weights are held at the estimate's final ``fit_weights``, ``S_hat = estimate.sse`` and
    ``s = estimate.sigma``. For parameter j the profile t is

    .. math:: \\tau(v) = \\operatorname{sign}(v - \\hat\\theta_j)\\sqrt{\\tilde S(v) - \\hat S}/s,

    with :math:`\\tilde S` minimised over the others (each point warm-started from the previous
    one; every inner Jacobian is one batched predict call). The interval is
    :math:`|\\tau| \\le t_{n-p,(1+level)/2}`, located by Brent's method between the two profile
    points that bracket it. Steps go in internal coordinates, starting at ``t se / 3`` and
    adapted from the local slope of tau. A side that meets a finite bound first is
    open-ended at that bound; a side that never reaches the critical value within
    ``max_steps`` is open-ended at the bound (possibly infinite).
    """
    _check_level(level, "profile_intervals")
    if not (isinstance(max_steps, int) and max_steps >= 1):
        raise StudyError(
            f"The 'max_steps' option of profile_intervals() must be an int >= 1. Got {max_steps!r} instead."
        )
    all_names = tuple(problem.space.names)
    if tuple(estimate.names) != all_names:
        raise StudyError(
            f"profile_intervals(): the estimate has parameters {list(estimate.names)} but the "
            f"problem has {list(all_names)}; pass the problem that was fitted"
        )
    chosen = list(all_names) if names is None else list(names)
    unknown = [n for n in chosen if n not in all_names]
    if unknown:
        raise StudyError(
            f"profile_intervals(): unknown parameters {unknown}; choose from {list(all_names)}"
        )
    if estimate.dof <= 0:
        raise StudyError("profile_intervals(): no residual degrees of freedom (n <= p); add data")
    tc = float(student_t.ppf(0.5 + level / 2, estimate.dof))
    settings = SolverSettings(method="trf", xtol=xtol, ftol=ftol, gtol=1e-12)
    tasks = [
        (problem, estimate, all_names.index(n), d, tc, max_steps, settings)
        for n in chosen
        for d in (-1, 1)
    ]
    mapper: Iterable[_SideResult] = (
        executor.map(_profile_side, tasks) if executor else map(_profile_side, tasks)
    )
    with tqdm(total=len(tasks), disable=not progress, desc="profile intervals", unit="side",
              leave=False) as bar:
        sides = []
        for side in mapper:  # in task order, whatever the executor
            sides.append(side)
            bar.update(1)
    idx = [all_names.index(n) for n in chosen]
    lower, upper, lo_c, up_c, notes, traces = [], [], [], [], [], []
    sse_min = estimate.sse
    for k, j in enumerate(idx):
        left, right = sides[2 * k], sides[2 * k + 1]
        lower.append(left.end)
        upper.append(right.end)
        lo_c.append(left.closed)
        up_c.append(right.closed)
        notes += [q.note for q in (left, right) if q.note]
        sse_min = min(sse_min, left.sse_min, right.sse_min)
        tau = np.array(left.tau[::-1] + [0.0] + right.tau)
        sse = np.array(left.sse[::-1] + [estimate.sse] + right.sse)
        oth = np.array(left.others[::-1] + [np.asarray(estimate.x_internal)] + right.others)
        traces.append(
            ProfileTrace(
                name=all_names[j],
                values=problem.space.to_physical(oth)[:, j],
                tau=tau,
                sse=sse,
                others=problem.space.to_physical(oth),
            )
        )
    better = sse_min < estimate.sse * (1 - 1e-9) - 1e-300
    if better:
        notes.append(
            f"a profile point reached a lower SSE ({sse_min:.10g} < {estimate.sse:.10g}): the "
            "estimate is not the least-squares minimum; refit (e.g. with multistart)"
        )
    ests = np.asarray(estimate.x)[idx]
    return ProfileResult(
        intervals=Intervals(
            names=tuple(chosen),
            estimate=ests,
            lower=np.array(lower),
            upper=np.array(upper),
            level=float(level),
            method="profile",
            lower_closed=np.array(lo_c),
            upper_closed=np.array(up_c),
            notes=tuple(notes),
        ),
        traces=tuple(traces),
        t_crit=tc,
        sse_min=float(sse_min),
        better_optimum=bool(better),
    )


# --------------------------------------------------------------------------------------------
# bootstrap
# --------------------------------------------------------------------------------------------


