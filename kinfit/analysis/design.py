"""The D-optimal choice of further runs: a candidate grid and the Fisher information of the fitted model."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from itertools import product

import numpy as np
from numpy.typing import NDArray

from kinfit.errors import StudyError
from kinfit.estimate.evaluation import Evaluator, jacobian_internal
from kinfit.fitting.saved import FittedModel
from kinfit.study.conditions import PAD_RUN, Condition
from kinfit.study.runs import FACTORS, Study

Array = NDArray[np.float64]

__all__ = ['CandidateGrid', 'default_grid', 'information', 'd_optimal']


@dataclass(frozen=True)
class CandidateGrid:
    """Levels of each factor; the candidates are their full factorial (SI units)."""

    temperature: tuple[float, ...]
    stirrer_speed: tuple[float, ...]
    particle_diameter: tuple[float, ...]
    catalyst_loading: tuple[float, ...]
    initial_concentration: tuple[float, ...]

    def conditions(self, *, group: str | None = None) -> list[Condition]:
        """Every combination, ids ``C1``, ``C2``, ..."""
        levels = [getattr(self, f) for f in FACTORS]
        return [Condition(f"C{k + 1}", group=group, **dict(zip(FACTORS, combo, strict=True)))
                for k, combo in enumerate(product(*levels))]

    def to_dict(self) -> dict[str, list[float]]:
        """Factor -> levels (SI)."""
        return {f: list(getattr(self, f)) for f in FACTORS}


def _levels(values: Sequence[float], extra: float | None = None) -> tuple[float, ...]:
    out: list[float] = []
    for v in sorted([*values, *([extra] if extra is not None else [])]):
        if not out or abs(v - out[-1]) > 0.01 * abs(out[-1]):
            out.append(float(v))
    return tuple(out)


def default_grid(study: Study, *, speed: float | None = None, diameter: float | None = None
                 ) -> CandidateGrid:
    """The campaign's levels of every factor, plus the recommended speed and diameter."""
    def vals(f: str) -> list[float]:
        return [r.factor(f) for r in study.runs]

    return CandidateGrid(_levels(vals("temperature")), _levels(vals("stirrer_speed"), speed),
                         _levels(vals("particle_diameter"), diameter),
                         _levels(vals("catalyst_loading")),
                         _levels(vals("initial_concentration")))


def information(fitted: FittedModel, conditions: Sequence[Condition] | None = None, *,
                times: Array | Sequence[Array] | None = None) -> Array:
    """Fisher information of each run, (R, p, p), in the fit's internal coordinates.

    ``M_r = sum_{i in r} J_i J_i' / sigma_i^2`` with J from forward differences (one predict
    call of p + 1 rows) at the fitted values; the columns are the fit's, whatever columns the
    runs' own model has (by name). Without ``conditions`` the campaign's runs.
    """

    if conditions is None:
        model = fitted.model
    else:
        model = fitted.model_at(conditions, times=times)
    theta = fitted.theta_for(model, fitted.theta)[0]
    problem = model.problem(x0=theta)
    u = problem.space.to_internal(theta)
    jac = jacobian_internal(problem, Evaluator(problem), u)
    if jac is None:
        raise StudyError("the model cannot be evaluated at the fitted values for these runs")
    f = model.predict(theta[None, :])[0]
    a = jac / fitted.sigma(f, model.weights)[:, None]
    R, q = len(model.run_ids), a.shape[1]
    local = np.zeros((R, q, q))
    np.add.at(local, model.run_index, a[:, :, None] * a[:, None, :])
    idx = [fitted.columns.index(c) for c in model.columns]
    p = len(fitted.columns)
    out = np.zeros((R, p, p))
    ix = np.asarray(idx)
    out[:, ix[:, None], ix[None, :]] = local
    real = [i for i, rid in enumerate(model.run_ids) if rid != PAD_RUN]
    return out[real]


def _logdet(m: Array) -> Array:
    sign, ld = np.linalg.slogdet(m)
    return np.where(sign > 0, ld, -np.inf)


def d_optimal(m0: Array, candidates: Array, k: int, *, max_passes: int = 20
              ) -> tuple[list[int], float]:
    """k distinct candidates maximising ``log det(m0 + sum M_c)``: greedy, then Fedorov
    exchanges until no single exchange improves it. A run proposed twice would be a replicate,
    which a plan asks for explicitly, not by accident.

    Parameters
    ----------
    m0 : ndarray, shape (p, p)
        Information already in hand (must be positive definite, or become so).
    candidates : ndarray, shape (K, p, p)
    k : int

    Returns
    -------
    chosen : list of int
    logdet : float

    Examples
    --------
    >>> m0 = 0.1 * np.eye(2)
    >>> cands = np.array([np.diag([1.0, 0.0]), np.diag([0.0, 1.0]), np.diag([0.1, 0.1])])
    >>> d_optimal(m0, cands, 2)[0]
    [0, 1]
    """
    if k < 1:
        raise StudyError(f"the number of runs to plan must be >= 1. Got {k!r} instead.")
    if k > candidates.shape[0]:
        raise StudyError(f"{k} runs asked for but only {candidates.shape[0]} distinct candidate "
                         "conditions; ask for fewer runs or give more levels")
    chosen: list[int] = []
    m = m0.copy()
    for _ in range(k):
        ld = _logdet(m[None] + candidates)
        ld[chosen] = -np.inf
        j = int(np.argmax(ld))
        chosen.append(j)
        m = m + candidates[j]
    current = float(_logdet(m))
    for _ in range(max_passes):
        improved = False
        for i in range(k):
            rest = m - candidates[chosen[i]]
            ld = _logdet(rest[None] + candidates)
            ld[[c for n_, c in enumerate(chosen) if n_ != i]] = -np.inf
            j = int(np.argmax(ld))
            if ld[j] > current + 1e-10 * max(1.0, abs(current)):
                chosen[i], m, current, improved = j, rest + candidates[j], float(ld[j]), True
        if not improved:
            break
    return chosen, current
