"""Weighted and generalised nonlinear least squares for any vectorised :class:`Problem`.

The optimiser works in the internal coordinates of :class:`~kinfit.estimate.problem.Space`
(``u = ln x`` for log parameters). Every finite-difference Jacobian is one batched ``predict``
call (p + 1 rows forward, 2p + 1 rows central for the final covariance). Rows the predictor
cannot compute become a large finite residual, never NaN. The proportional and combined error
models are fitted by iteratively reweighted generalised least squares with the scales estimated
by maximum likelihood (Carroll & Ruppert 1988, *Transformation and Weighting in Regression*,
Chapman & Hall, ch. 2-3). Multistart uses a scrambled Sobol design screened in one batched call.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable
from concurrent.futures import Executor
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.stats import qmc

from kinfit.errors import ConvergenceWarning, StudyError
from kinfit.estimate.evaluation import (
    Evaluator,
    _format_reasons,
    covariance_from_jacobian,
    jacobian_internal,
)
from kinfit.estimate.problem import Problem
from kinfit.estimate.result import Estimate
from kinfit.estimate.solve import SolverSettings, solve_weighted
from kinfit.estimate.statistics import (
    fit_statistics,
    ml_error_scales,
    relative_weights,
)

__all__ = ['FIT_METHODS', 'Estimate', 'Evaluator', 'covariance_from_jacobian', 'fit_problem', 'jacobian_internal', 'warn_not_converged']

FIT_METHODS = ("trf", "dogbox", "lm")
#: Two optima are the same when their SSE agree to this relative tolerance ...
SSE_RTOL = 1e-6
#: ... and their internal coordinates agree to this tolerance (relative to max(1, |u|)).
PARAM_RTOL = 1e-4
#: ... or to this fraction of their approximate standard error, whichever is larger.
SE_FRACTION = 0.01
#: Largest |cos| between a Jacobian column and the residuals accepted at a converged point.
STATIONARITY_TOL = 1e-4
#: A parameter is "unmoved" when it changed by less than this (relative, internal coordinates).
UNMOVED_RTOL = 1e-10


# --------------------------------------------------------------------------------------------
# one weighted least-squares solve (optionally with some parameters fixed)
# --------------------------------------------------------------------------------------------


# --------------------------------------------------------------------------------------------
# one start: iteratively reweighted generalised least squares
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Run:
    u_start: NDArray[np.float64]
    u: NDArray[np.float64]
    fit_weights: NDArray[np.float64]
    status: int
    message: str
    nfev: int
    njev: int
    active_mask: NDArray[np.int_]
    cycles: int
    irls_converged: bool
    failed: bool
    objective: float
    sse_user: float
    se_internal: NDArray[np.float64]
    cosine: float
    evaluator: Evaluator


def _objective(
    problem: Problem, f: NDArray[np.float64], fit_weights: NDArray[np.float64]
) -> float:
    """Criterion used to rank optima: weighted SSE (constant model) or -2 ln L (others)."""
    em = problem.error_model
    if em.kind == "constant":
        return float(np.sum(fit_weights * (problem.y - f) ** 2))
    sc = ml_error_scales(em, problem.y, f, problem.weights)
    ll = em.loglike(
        problem.y,
        f,
        s_abs=sc.get("sigma", 1.0),
        s_rel=sc.get("sigma_rel", 1.0),
        weights=problem.weights,
    )
    return float(-2.0 * ll)


def _fit_from_start(task: tuple[Problem, NDArray[np.float64], SolverSettings, int, float]) -> _Run:
    """Fit from one internal start (module level so that process executors can pickle it)."""
    problem, u_start, settings, irls_max, irls_tol = task
    ev = Evaluator(problem)
    em = problem.error_model
    w = problem.w
    weights = w.copy()
    u = np.asarray(u_start, dtype=float)
    nfev = njev = cycles = 0
    irls_ok = True
    while True:
        st = solve_weighted(problem, u, weights, settings=settings, evaluator=ev)
        nfev, njev, cycles = nfev + st.nfev, njev + st.njev, cycles + 1
        if em.kind == "constant" or st.failed:
            break
        f, _ = ev(st.u[None, :])
        scales = ml_error_scales(em, problem.y, f[0], problem.weights)
        new_weights = relative_weights(em, f[0], scales, problem.weights)
        change = float(np.max(np.abs(st.u - u) / np.maximum(1.0, np.abs(u))))
        if cycles > 1 and change <= irls_tol:
            break
        if cycles >= irls_max:
            irls_ok = False
            break
        u, weights = st.u, new_weights
    f, bad = ev(st.u[None, :])
    failed = bool(bad[0])
    obj = np.inf if failed else _objective(problem, f[0], weights)
    sse_user = np.inf if failed else float(np.sum(w * (problem.y - f[0]) ** 2))
    return _Run(
        u_start=np.asarray(u_start, dtype=float),
        u=st.u,
        fit_weights=weights,
        status=st.status,
        message=st.message,
        nfev=nfev,
        njev=njev,
        active_mask=st.active_mask,
        cycles=cycles,
        irls_converged=irls_ok,
        failed=failed,
        objective=obj,
        sse_user=sse_user,
        se_internal=st.se_internal,
        cosine=st.cosine,
        evaluator=ev,
    )


def _distinct_optima(runs: list[_Run]) -> list[_Run]:
    """One representative per distinct optimum, best first."""
    reps: list[_Run] = []
    for r in sorted(runs, key=lambda q: q.objective):
        for q in reps:
            same_sse = abs(r.sse_user - q.sse_user) <= SSE_RTOL * max(
                abs(r.sse_user), abs(q.sse_user), 1e-300
            )
            tol = np.maximum(
                PARAM_RTOL * np.maximum(1.0, np.abs(q.u)),
                SE_FRACTION * np.nan_to_num(q.se_internal),
            )
            same_x = np.all(np.abs(r.u - q.u) <= tol)
            if same_sse and same_x:
                break
        else:
            reps.append(r)
    return reps


def _sobol_starts(
    problem: Problem, u0: NDArray[np.float64], n: int, seed: Any, halfwidth: Any
) -> NDArray[np.float64]:
    """``n`` scrambled Sobol points in the internal box (bounds, or ``u0 +- halfwidth``)."""
    space = problem.space
    lb, ub = space.internal_bounds()
    if halfwidth is None:
        hw = np.where(space.is_log, np.log(10.0), np.maximum(1.0, np.abs(u0)))
    else:
        hw = np.broadcast_to(np.asarray(halfwidth, dtype=float), u0.shape)
    lo = np.where(np.isfinite(lb), lb, np.minimum(u0 - hw, ub - 2 * hw))
    hi = np.where(np.isfinite(ub), ub, np.maximum(u0 + hw, lo + 2 * hw))
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    engine = qmc.Sobol(d=space.n, scramble=True, rng=rng)
    pts = engine.random_base2(int(np.ceil(np.log2(max(n, 1)))))[:n]
    return lo + pts * (hi - lo)


# --------------------------------------------------------------------------------------------
# the engine
# --------------------------------------------------------------------------------------------
def _check(ok: bool, name: str, expected: str, got: Any) -> None:
    if not ok:
        raise StudyError(
            f"The '{name}' option of fit_problem() must be {expected}. Got {got!r} instead."
        )


def _is_int(v: Any) -> bool:
    return isinstance(v, int | np.integer) and not isinstance(v, bool)


def warn_not_converged(
    solver: str, status: int, message: str, remedy: str, *, stacklevel: int = 3
) -> None:
    """Emit the one :class:`ConvergenceWarning` form: solver, status, message and remedy."""
    warnings.warn(
        f"{solver} did not converge (status {status}): {message}. {remedy}",
        ConvergenceWarning,
        stacklevel=stacklevel,
    )


def fit_problem(
    problem: Problem,
    *,
    method: str = "trf",
    multistart: int = 0,
    seed: int | np.random.Generator | None = None,
    max_nfev: int | None = None,
    xtol: float = 1e-12,
    ftol: float = 1e-12,
    gtol: float = 1e-12,
    x_scale: str | float = "jac",
    n_refine: int | None = None,
    box_halfwidth: float | NDArray[np.float64] | None = None,
    irls_max_iter: int = 30,
    irls_tol: float = 1e-8,
    executor: Executor | None = None,
    warn: bool = True,
) -> Estimate:
    """Fit a vectorised problem by (generalised) nonlinear least squares.

    Parameters
    ----------
    problem : Problem
        Predictor, data, parameter space, start, weights and error model.
    method : {"trf", "dogbox", "lm"}
        scipy ``least_squares`` method; ``"lm"`` only when no parameter has a finite internal
        bound.
    multistart : int
        Number of scrambled Sobol points (``scipy.stats.qmc.Sobol``) drawn in the internal box;
        0 fits from ``problem.x0`` only. All points are screened in one batched ``predict``
        call by their weighted SSE; the best ``n_refine`` are refined besides ``x0``.
    seed : int or numpy.random.Generator, optional
        Seeds the Sobol scrambling (record it for reproducibility).
    max_nfev : int, optional
        Evaluation limit of each least-squares stage (scipy's default when None).
    xtol, ftol, gtol : float
        scipy tolerances (the residuals are normalised to unit RMS at each stage start, so
        ``gtol`` is scale free).
    x_scale : "jac" or float
        scipy's variable scaling.
    n_refine : int, optional
        Design points refined (default ``max(1, ceil(multistart / 4))``).
    box_halfwidth : float or ndarray, optional
        Half-width of the internal box on sides without a finite bound. Default: ``ln 10`` (a
        decade each way) for log parameters, ``max(1, |x0|)`` for the others.
    irls_max_iter : int
        Most reweighting cycles (proportional and combined error models).
    irls_tol : float
        Reweighting stops when no internal coordinate changes by more than
        ``irls_tol * max(1, |u|)`` between cycles.
    executor : concurrent.futures.Executor, optional
        Runs the refinements of different starts in parallel; the result does not depend on it.
    warn : bool
        Emit :class:`~kinfit.errors.ConvergenceWarning` when the fit did not converge.

    Returns
    -------
    Estimate

    Raises
    ------
    StudyError
        For an invalid option or a start that maps to an infinite internal coordinate.

    Notes
    -----
    Constant error model: ordinary or weighted least squares, ``sigma^2 = S/(n-p)``.
    Proportional and combined: iteratively reweighted generalised least squares (Carroll &
    Ruppert 1988, ch. 2): cycle 1 is weighted LS with the user's weights; each further cycle
    fixes ``W_i = w_i / v_i(f(x_prev))`` from the ML scales (:func:`ml_error_scales`) and
    refits, warm-started. The linearised covariance is ``S/(n-p) (J' W J)^{-1}`` in every case
    (Bates & Watts 1988, ch. 2), with ``J`` from central differences (2p + 1 rows) or the
    analytic Jacobian.

    Examples
    --------
    >>> from kinfit.estimate.problem import Problem, Space
    >>> t = np.linspace(0.0, 4.0, 9)
    >>> def predict(x):
    ...     return x[:, :1] * np.exp(-x[:, 1:2] * t)
    >>> y = predict(np.array([[2.0, 0.7]]))[0] + 0.01 * np.sin(7 * t)
    >>> space = Space(("a", "k"), np.zeros(2), np.full(2, np.inf), ("log", "log"))
    >>> est = fit_problem(Problem(predict, y, space, np.array([1.0, 1.0])))
    >>> est.converged, np.round(est.x, 2).tolist()
    (True, [2.0, 0.7])
    """
    _check(
        isinstance(problem, Problem),
        "problem",
        "a kinfit.estimate.problem.Problem",
        type(problem).__name__,
    )
    _check(method in FIT_METHODS, "method", f"a str among {set(FIT_METHODS)}", method)
    _check(_is_int(multistart) and multistart >= 0, "multistart", "an int >= 0", multistart)
    _check(
        max_nfev is None or (_is_int(max_nfev) and max_nfev >= 1),
        "max_nfev",
        "None or an int >= 1",
        max_nfev,
    )
    for name, tol in (("xtol", xtol), ("ftol", ftol), ("gtol", gtol), ("irls_tol", irls_tol)):
        _check(isinstance(tol, float | int) and 0 <= tol < 1, name, "a float in [0, 1)", tol)
    _check(
        _is_int(irls_max_iter) and irls_max_iter >= 1,
        "irls_max_iter",
        "an int >= 1",
        irls_max_iter,
    )
    _check(
        n_refine is None or (_is_int(n_refine) and n_refine >= 1),
        "n_refine",
        "None or an int >= 1",
        n_refine,
    )
    _check(
        seed is None or _is_int(seed) or isinstance(seed, np.random.Generator),
        "seed",
        "None, an int or a numpy.random.Generator",
        seed,
    )
    space = problem.space
    lb, ub = space.internal_bounds()
    if method == "lm" and (np.any(np.isfinite(lb)) or np.any(np.isfinite(ub))):
        finite = [
            n
            for n, a, b in zip(space.names, lb, ub, strict=True)
            if np.isfinite(a) or np.isfinite(b)
        ]
        raise StudyError(
            f"The 'method' option of fit_problem() is 'lm', which cannot honour bounds, but "
            f"parameters {finite} have finite bounds; use method 'trf' or remove the bounds."
        )
    u0 = space.to_internal(problem.x0)
    if not np.all(np.isfinite(u0)):
        bad = [n for n, v in zip(space.names, u0, strict=True) if not np.isfinite(v)]
        raise StudyError(
            f"parameters {bad}: a log-transformed parameter cannot start at 0; give a positive "
            "starting value"
        )
    settings = SolverSettings(method, max_nfev, float(xtol), float(ftol), float(gtol), x_scale)
    screen = Evaluator(problem)
    starts = [u0]
    n_screened = 0
    if multistart > 0:
        design = _sobol_starts(problem, u0, multistart, seed, box_halfwidth)
        f, failed = screen(design)
        n_screened = design.shape[0]
        score = np.where(failed, np.inf, np.sum(problem.w * (problem.y - f) ** 2, axis=1))
        score = np.where(np.isfinite(score), score, np.inf)
        keep = n_refine if n_refine is not None else max(1, int(np.ceil(multistart / 4)))
        order = np.argsort(score, kind="stable")[:keep]
        starts += [design[i] for i in order if np.isfinite(score[i])] or [design[order[0]]]
    tasks = [(problem, s, settings, irls_max_iter, float(irls_tol)) for s in starts]
    mapper: Iterable[_Run] = (
        executor.map(_fit_from_start, tasks) if executor else map(_fit_from_start, tasks)
    )
    runs = list(mapper)
    for r in runs:
        screen.merge(r.evaluator)
    ok = [r for r in runs if not r.failed]
    best = min(ok or runs, key=lambda r: r.objective)
    reps = _distinct_optima(ok)
    seed_out = int(seed) if isinstance(seed, int | np.integer) else None
    est = _finalise(problem, best, settings, screen, reps, len(starts), n_screened, seed_out)
    if warn and not est.converged:
        warn_not_converged(
            f"least squares ({method})",
            est.status,
            est.message,
            "Try another start, multistart > 0, a larger max_nfev, or check that the data "
            "determine every parameter.",
        )
    return est


def _finalise(
    problem: Problem,
    best: _Run,
    settings: SolverSettings,
    ev: Evaluator,
    reps: list[_Run],
    n_starts: int,
    n_screened: int,
    seed: int | None,
) -> Estimate:
    space = problem.space
    p, n = problem.n_params, problem.n_obs
    u = best.u
    x = space.to_physical(u)
    f_rows, bad = ev(u[None, :])
    f = f_rows[0]
    notes = []
    if not best.irls_converged:
        notes.append("the reweighting cycles did not settle")
    jac = None if bad[0] else jacobian_internal(problem, ev, u, central=True)
    if jac is None:
        notes.append("the prediction fails at the final point, so no covariance is available")
        jac_phys = np.full((n, p), np.nan)
    else:
        jac_phys = jac / space.dphysical_dinternal(u)
    w_fit = best.fit_weights
    stats = fit_statistics(
        problem.y,
        f,
        n_params=p,
        error_model=problem.error_model,
        weights=problem.weights,
        fit_weights=w_fit,
    )
    cov, rank, _ = covariance_from_jacobian(jac_phys, w_fit, stats.sigma**2)
    if rank < p and jac is not None:
        notes.append(f"the weighted Jacobian has rank {rank} < {p}: the covariance is singular")
    with np.errstate(invalid="ignore", divide="ignore"):
        se = np.sqrt(np.diag(cov))
        corr = cov / np.outer(se, se)
    em = problem.error_model
    if bad[0]:
        scale_ml = np.full(len(em.scale_names), np.nan)
        scale = scale_ml
    else:
        sc = ml_error_scales(em, problem.y, f, problem.weights)
        scale_ml = np.array([sc[k] for k in em.scale_names])
        sd = em.sigma(
            f, s_abs=sc.get("sigma", 1.0), s_rel=sc.get("sigma_rel", 1.0), weights=problem.weights
        )
        factor = (
            np.sqrt(np.sum(((problem.y - f) / sd) ** 2) / stats.dof) if stats.dof > 0 else np.nan
        )
        scale = scale_ml * factor
    lb, ub = space.internal_bounds()
    tol = 1e-8 * np.maximum(1.0, np.abs(u))
    at_bound = (best.active_mask != 0) | (np.abs(u - lb) <= tol) | (np.abs(ub - u) <= tol)
    unmoved = np.abs(u - best.u_start) <= UNMOVED_RTOL * np.maximum(1.0, np.abs(best.u_start))
    sw = np.sqrt(w_fit)
    # an (almost) exact fit leaves residuals of rounding size, whose direction means nothing
    exact_fit = bool(
        np.linalg.norm(sw * (problem.y - f)) <= 1e-10 * np.linalg.norm(sw * problem.y)
    )
    stationary = best.cosine <= STATIONARITY_TOL or exact_fit
    converged = (
        best.status > 0 and best.irls_converged and not best.failed and not bad[0] and stationary
    )
    if best.status <= 0:
        notes.append("the evaluation limit was reached" if best.status == 0 else "improper input")
    elif not stationary and not bad[0]:
        where = " next to a region where the predictor fails" if ev.n_penalised else ""
        notes.append(
            f"the optimiser stalled{where}: the gradient is not small there (largest cosine "
            f"between a Jacobian column and the residuals {best.cosine:.2g} > {STATIONARITY_TOL:g})"
        )
    message = best.message + ("; " + "; ".join(notes) if notes else "")
    return Estimate(
        names=tuple(space.names),
        transforms=tuple(space.transform),
        x=x,
        x_internal=u,
        x_start=space.to_physical(best.u_start),
        converged=bool(converged),
        status=best.status,
        message=message,
        method=settings.method,
        nfev=best.nfev,
        njev=best.njev,
        n_obs=n,
        n_params=p,
        dof=n - p,
        observed=problem.y,
        fitted=f,
        residuals=problem.y - f,
        fit_weights=w_fit,
        sse=stats.sse,
        jacobian=jac_phys,
        covariance=cov,
        stderr=se,
        correlation=corr,
        sigma=stats.sigma,
        error_model=em.kind,
        scale_names=tuple(em.scale_names),
        scale=scale,
        scale_ml=scale_ml,
        statistics=stats,
        rank=rank,
        n_starts=n_starts,
        n_screened=n_screened,
        n_distinct_optima=len(reps),
        optima_sse=np.array([r.sse_user for r in reps]),
        n_penalised=ev.n_penalised,
        penalty_reasons=_format_reasons(ev.reasons),
        at_bound=at_bound,
        unmoved=unmoved,
        irls_cycles=best.cycles,
        seed=seed,
    )
