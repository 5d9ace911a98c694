"""Bootstrap intervals: residual or group resampling, refits in an executor, interruptible."""

from __future__ import annotations

from collections.abc import Mapping
from concurrent.futures import Executor
from dataclasses import dataclass, fields
from typing import Any

import numpy as np
from numpy.typing import NDArray
from tqdm.auto import tqdm

from kinfit.errors import StudyError
from kinfit.estimate.identifiability import (  # noqa: F401 - identifiability re-exported
    Identifiability,
    _readonly,
    _to_dict,
    identifiability,
)
from kinfit.estimate.least_squares import fit_problem
from kinfit.estimate.problem import Problem
from kinfit.estimate.result import Estimate
from kinfit.estimate.uncertainty import Intervals, _check_level

__all__ = ['BootstrapResult', 'bootstrap']


BOOTSTRAP_KINDS = ("residual", "group")


@dataclass(frozen=True)
class BootstrapResult:
    """Bootstrap replicates and percentile intervals.

    Attributes
    ----------
    intervals : Intervals
        Percentile intervals from the converged replicates.
    replicates : ndarray, shape (n_boot, p)
        Estimates of every replicate (physical); rows of failed replicates hold NaN.
    converged : ndarray of bool, shape (n_boot,)
    kind : str
        ``"residual"`` or ``"group"``.
    seed : int or None
    n_failed : int
        Replicates that did not converge (left out of the intervals).
    interrupted : bool
        Ctrl-C stopped the bootstrap; the intervals use the replicates finished before it
        (rows of the others hold NaN).
    n_done : int
        Replicates finished.
    """

    intervals: Intervals
    replicates: NDArray[np.float64]
    converged: NDArray[np.bool_]
    kind: str
    seed: int | None
    n_failed: int
    interrupted: bool = False
    n_done: int = 0

    def __post_init__(self) -> None:
        _readonly(self)

    def to_dict(self) -> dict[str, Any]:
        """Plain Python types."""
        return _to_dict(self)


class _Subset:
    """Picklable predictor (or Jacobian) restricted to observation indices."""

    def __init__(self, func: Any, idx: NDArray[np.int_], jacobian: bool = False) -> None:
        self.func, self.idx, self.jacobian = func, idx, jacobian

    def __call__(self, x: NDArray[np.float64]) -> NDArray[np.float64]:
        out = np.asarray(self.func(x))
        return out[self.idx] if self.jacobian else out[:, self.idx]


def _bootstrap_one(task: tuple[Problem, dict[str, Any]]) -> tuple[NDArray[np.float64], bool]:
    problem, options = task
    est = fit_problem(problem, warn=False, **options)
    return np.asarray(est.x, dtype=float), bool(est.converged)


def bootstrap(
    problem: Problem,
    estimate: Estimate,
    *,
    n_boot: int = 200,
    kind: str = "residual",
    seed: int | None = None,
    level: float = 0.95,
    progress: bool = True,
    executor: Executor | None = None,
    fit_options: Mapping[str, Any] | None = None,
) -> BootstrapResult:
    """Residual or whole-group bootstrap of a least-squares estimate.

    Parameters
    ----------
    problem : Problem
        The problem that produced ``estimate``.
    estimate : Estimate
    n_boot : int
        Number of replicates.
    kind : {"residual", "group"}
        ``"residual"``: ``y* = f_hat + e*/sqrt(W)`` with ``e*`` drawn with replacement from the
        centred weighted residuals ``sqrt(W) r`` inflated by ``sqrt(n/(n-p))`` (Davison &
        Hinkley 1997, ch. 6). ``"group"``: whole groups (``problem.groups``, e.g. runs) drawn
        with replacement, all their observations kept.
    seed : int, optional
        Seeds the one Generator that draws every resample, before any fit runs, so the result
        does not depend on the executor.
    level : float
        Coverage of the percentile intervals.
    progress : bool
        Show a tqdm progress bar.
    executor : concurrent.futures.Executor, optional
        Runs the refits in parallel.
    fit_options : mapping, optional
        Extra keyword options for :func:`fit_problem` (e.g. tolerances); each replicate starts
        from the estimate.

    Returns
    -------
    BootstrapResult
    """
    _check_level(level, "bootstrap")
    if not (isinstance(n_boot, int) and n_boot >= 2):
        raise StudyError(
            f"The 'n_boot' option of bootstrap() must be an int >= 2. Got {n_boot!r} instead."
        )
    if kind not in BOOTSTRAP_KINDS:
        raise StudyError(
            f"The 'kind' option of bootstrap() must be a str among {set(BOOTSTRAP_KINDS)}. Got {kind!r} instead."
        )
    if kind == "group" and problem.groups is None:
        raise StudyError(
            "bootstrap(kind='group') needs problem.groups (the run of each observation); none given"
        )
    rng = np.random.default_rng(seed)
    n = problem.n_obs
    f_hat = np.asarray(estimate.fitted, dtype=float)
    options = dict(fit_options or {})
    tasks: list[tuple[Problem, dict[str, Any]]] = []
    if kind == "residual":
        sw = np.sqrt(np.asarray(estimate.fit_weights, dtype=float))
        e = sw * np.asarray(estimate.residuals, dtype=float)
        e = (e - e.mean()) * np.sqrt(n / max(estimate.dof, 1))
        for _ in range(n_boot):
            y_star = f_hat + rng.choice(e, size=n, replace=True) / sw
            tasks.append((_replace(problem, y=y_star, x0=estimate.x), options))
    else:
        groups = np.asarray(problem.groups)
        labels = np.unique(groups)
        members = [np.flatnonzero(groups == g) for g in labels]
        for _ in range(n_boot):
            pick = rng.integers(0, labels.size, size=labels.size)
            idx = np.concatenate([members[i] for i in pick])
            new_groups = np.concatenate([np.full(members[i].size, k) for k, i in enumerate(pick)])
            tasks.append(
                (
                    Problem(
                        predict=_Subset(problem.predict, idx),
                        y=problem.y[idx],
                        space=problem.space,
                        x0=np.asarray(estimate.x),
                        weights=None if problem.weights is None else problem.weights[idx],
                        error_model=problem.error_model,
                        jacobian=None
                        if problem.jacobian is None
                        else _Subset(problem.jacobian, idx, True),
                        groups=new_groups,
                    ),
                    options,
                )
            )
    mapper = executor.map(_bootstrap_one, tasks) if executor else map(_bootstrap_one, tasks)
    out: list[tuple[NDArray[np.float64], bool]] = []
    interrupted = False
    bar = tqdm(total=n_boot, disable=not progress, desc=f"bootstrap ({kind})")
    try:
        for item in mapper:  # in task order, whatever the executor
            out.append(item)
            bar.update(1)
    except KeyboardInterrupt:
        # keep what was finished; closing the map cancels the replicates not yet started
        interrupted = True
        close = getattr(mapper, "close", None)
        if close is not None:
            close()
    finally:
        bar.close()
    n_done = len(out)
    reps = np.full((n_boot, estimate.n_params), np.nan)
    ok = np.zeros(n_boot, dtype=bool)
    for i, (x, c) in enumerate(out):
        reps[i], ok[i] = x, c
    reps = np.where(ok[:, None], reps, np.nan)
    good = reps[ok]
    a = (1 - level) / 2
    if good.shape[0] >= 2:
        lo, hi = np.quantile(good, [a, 1 - a], axis=0)
    else:
        lo = hi = np.full(estimate.n_params, np.nan)
    n_failed = int(np.sum(~ok[:n_done]))
    notes: tuple[str, ...] = (
        (f"{n_failed} of {n_done} replicates did not converge and are left out",)
        if n_failed
        else ()
    )
    if interrupted:
        notes += (f"interrupted after {n_done} of {n_boot} replicates; the intervals use the "
                  f"{int(ok.sum())} finished ones",)
    return BootstrapResult(
        intervals=Intervals(
            names=estimate.names,
            estimate=estimate.x,
            lower=lo,
            upper=hi,
            level=float(level),
            method=f"bootstrap-{kind}",
            lower_closed=np.isfinite(lo),
            upper_closed=np.isfinite(hi),
            notes=notes,
        ),
        replicates=reps,
        converged=ok,
        kind=kind,
        seed=seed,
        n_failed=n_failed,
        interrupted=interrupted,
        n_done=n_done,
    )


def _replace(problem: Problem, **changes: Any) -> Problem:
    kw = {f.name: getattr(problem, f.name) for f in fields(problem)}
    kw.update(changes)
    return Problem(**kw)
