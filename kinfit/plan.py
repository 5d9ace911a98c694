"""What to run next, from a fitted campaign: the stirrer speeds and particle diameters that make
the agitation and particle-size tests conclusive, and a D-optimal choice of further runs with
the expected shrinkage of every parameter's 95 % interval.

Transport tests (per campaign run, with the fitted model):

- agitation test: the speeds at which a run's predicted profile differs from the one at its
  own speed by more than the noise, ``max_t |dC| > z sqrt(2) sigma`` with z = 1.96 (two
  measurements, each with the fit's error model; common practice), and the smallest speed that
  brings the Carberry number below 0.05/|n| (Carberry 1976; Kapteijn & Moulijn, Handbook of
  Heterogeneous Catalysis);
- particle-size test: the largest particle diameter whose Weisz-Prater number lies below its
  limit (Weisz & Prater 1954; limit in the L = Vp/Sp normalisation of :mod:`kinfit.criteria`).

Both are found by bisection in log N or log dp for all runs at once (Ca falls with N, Psi rises
with dp).

D-optimal design (Kiefer & Wolfowitz 1959; Fedorov 1972, *Theory of Optimal Experiments*;
Atkinson & Donev 1992, *Optimum Experimental Designs*; from memory): the Fisher information of a
candidate run is ``M_c = J_c' W_c J_c`` with ``J_c`` the finite-difference Jacobian in the
optimiser's internal coordinates (one batched predict call of p + 1 rows over the whole
candidate grid) and ``W_c = 1/sigma_i^2`` from the fit's error model. The campaign's own
information ``M_0`` is computed the same way. k runs are chosen greedily to maximise
``log det(M_0 + sum M_c)`` and then improved by Fedorov exchanges; the expected 95 % half-width
of each parameter is ``t sqrt(diag(M^-1))`` (Bates & Watts 1988, ch. 2), before and after.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from itertools import product
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray
from scipy import stats

from kinfit.conditions import PAD_RUN, Condition, FittedModel, display, load_fitted
from kinfit.criteria import Thresholds
from kinfit.errors import StudyError
from kinfit.model import Model
from kinfit.results import FitResult
from kinfit.sieves import (
    ASTM_E11_APERTURES,
    SPEED_STEP,
    practical_speed,
    sieve_fraction,
    speed_grid,
)
from kinfit.study import FACTORS, Study

__all__ = ["SPEED_RANGE", "DIAMETER_RANGE", "NOISE_Z", "CandidateGrid", "Plan",
           "default_grid", "campaign_conditions", "transport_tests", "information",
           "d_optimal", "plan_runs", "add_plan_arguments", "run_plan_command"]

Array = NDArray[np.float64]
#: stirrer speeds searched, rev/s (10 to 3000 rpm: lab autoclaves, common practice)
SPEED_RANGE = (10.0 / 60.0, 3000.0 / 60.0)
#: particle diameters searched, m (1 um to 10 mm)
DIAMETER_RANGE = (1e-6, 1e-2)
#: two-sided 95 % normal quantile used for "differs beyond the noise"
NOISE_Z = 1.959963984540054
_BISECTIONS = 40


def campaign_conditions(study: Study) -> list[Condition]:
    """The campaign's runs as :class:`~kinfit.predict.Condition` records (same ids)."""
    return [Condition(r.id, r.temperature, r.stirrer_speed, r.particle_diameter,
                      r.catalyst_loading, r.initial_concentration, r.group) for r in study.runs]


def _campaign_times(study: Study) -> list[Array]:
    return [np.asarray(r.times, dtype=float) for r in study.runs]


def _typical_times(study: Study) -> Array | None:
    """The sampling times of the campaign run with the median number of points."""
    if study.kind != "profile":
        return None
    order = sorted(study.runs, key=lambda r: r.n_obs)
    return np.asarray(order[len(order) // 2].times, dtype=float)


# ------------------------------------------------------------------------------ transport tests
def _states(fitted: FittedModel, conditions: Sequence[Condition], thresholds: Thresholds
            ) -> tuple[Any, Model, Array]:
    times = None if fitted.study.kind != "profile" else [np.zeros(1)] * len(conditions)
    model = fitted.model_at(conditions, times=times)
    theta = fitted.theta_for(model, fitted.theta)[0]
    return model.run_states(theta, thresholds=thresholds), model, theta


def _bisect_log(met: Callable[[Array], NDArray[np.bool_]], lo: float, hi: float, n: int, *,
                met_above: bool) -> Array:
    """Per item, the boundary of the region where ``met`` holds, by bisection in log x.

    ``met_above``: the criterion holds for x above the boundary (speed) and the smallest such x
    is returned; otherwise it holds below (diameter) and the largest such x is returned. NaN
    where it holds nowhere in [lo, hi]; lo (hi) where it holds everywhere.
    """
    a, b = np.full(n, np.log(lo)), np.full(n, np.log(hi))
    ok_lo, ok_hi = met(np.exp(a)), met(np.exp(b))
    for _ in range(_BISECTIONS):
        mid = 0.5 * (a + b)
        ok = met(np.exp(mid))
        good_side = ok if met_above else ~ok
        b = np.where(good_side, mid, b)
        a = np.where(good_side, a, mid)
    if met_above:
        out = np.where(ok_lo, lo, np.where(ok_hi, np.exp(b), np.nan))
    else:
        out = np.where(ok_hi, hi, np.where(ok_lo, np.exp(a), np.nan))
    return out


def transport_tests(fitted: FittedModel, *, thresholds: Thresholds | None = None,
                    diameter: float | None = None) -> dict[str, Any]:
    """Speeds and diameters that make the agitation and particle-size tests conclusive.

    Parameters
    ----------
    fitted : FittedModel
    thresholds : Thresholds, optional
    diameter : float, optional
        Particle diameter (m) at which the Carberry speed is also computed (default: the
        recommended diameter).

    Returns
    -------
    dict
        ``runs``: run id -> ``carberry``, ``carberry_limit``, ``weisz_prater``,
        ``weisz_prater_limit``, ``speed_for_carberry`` (rev/s at the run's own diameter, None
        when no speed in :data:`SPEED_RANGE` suffices), ``speed_for_carberry_at_diameter``,
        ``diameter_for_weisz_prater`` (m, None when none in :data:`DIAMETER_RANGE`),
        ``speed_difference_above`` / ``speed_difference_below`` (the nearest speeds, above and
        below the run's, whose profile differs beyond the noise, None when none does);
        ``recommended``: ``particle_diameter`` (smallest over runs), ``stirrer_speed`` (largest
        Carberry speed over runs at that diameter), ``conclusive`` flags and sentences.
    """
    thresholds = thresholds or Thresholds()
    conds = campaign_conditions(fitted.study)
    n = len(conds)
    base, _, _ = _states(fitted, conds, thresholds)
    crit = base.criteria

    def with_factor(name: str, values: Array) -> list[Condition]:
        return [replace(c, **{name: float(v)})  # type: ignore[arg-type]
                for c, v in zip(conds, values, strict=True)]

    def carberry_met(N: Array, dp: Array | None = None) -> NDArray[np.bool_]:
        cs = with_factor("stirrer_speed", N)
        if dp is not None:
            cs = [replace(c, particle_diameter=float(d)) for c, d in zip(cs, dp, strict=True)]
        return _states(fitted, cs, thresholds)[0].criteria.passes()["carberry"]

    def wp_met(dp: Array) -> NDArray[np.bool_]:
        return _states(fitted, with_factor("particle_diameter", dp),
                       thresholds)[0].criteria.passes()["weisz_prater"]

    has_pellet = fitted.spec.pellet != "none"
    has_film = fitted.spec.film.name != "none"
    d_wp = (_bisect_log(wp_met, *DIAMETER_RANGE, n, met_above=False) if has_pellet
            else np.full(n, DIAMETER_RANGE[1]))
    n_ca = (_bisect_log(carberry_met, *SPEED_RANGE, n, met_above=True) if has_film
            else np.full(n, SPEED_RANGE[0]))
    finite = d_wp[np.isfinite(d_wp)]
    dp_limit = float(np.min(finite)) if finite.size == n else None
    fraction = None
    if diameter is not None:
        rec_dp = diameter
    elif dp_limit is not None:
        # a sieve fraction whose coarsest particle still meets the limit
        rec_dp, _, fraction = sieve_fraction(dp_limit)
    else:
        rec_dp = None
    n_ca_rec = np.full(n, np.nan)
    if rec_dp is not None and has_film:
        n_ca_rec = _bisect_log(lambda N: carberry_met(N, np.full(n, rec_dp)), *SPEED_RANGE, n,
                               met_above=True)
    above, below = _difference_speeds(fitted, conds)
    size_up, size_down = _difference_diameters(fitted, conds)
    limits = crit.thresholds
    runs = {}
    for i, c in enumerate(conds):
        runs[c.id] = {
            "size_test": _size_statement(c, size_up[i], size_down[i]),
            "size_difference_above": _num(size_up[i]),
            "size_difference_below": _num(size_down[i]),
            "agitation_test": _agitation_statement(c, above[i], below[i],
                                                   _campaign_speed(fitted)),
            "carberry": float(crit.carberry[i]), "carberry_limit": limits["carberry"],
            "weisz_prater": float(crit.weisz_prater[i]),
            "weisz_prater_limit": limits["weisz_prater"],
            "speed_for_carberry": _speed(n_ca[i]),
            "speed_for_carberry_at_diameter": _speed(n_ca_rec[i]),
            "diameter_for_weisz_prater": _num(d_wp[i]),
            "speed_difference_above": _num(above[i]), "speed_difference_below": _num(below[i]),
        }
    rec_n = None
    if rec_dp is not None and np.all(np.isfinite(n_ca_rec)):
        rec_n = practical_speed(float(np.max(n_ca_rec)), up=True)
    rec = _recommendation(fitted, runs, rec_dp, rec_n, has_pellet, has_film)
    rec["particle_fraction"] = fraction
    rec["diameter_limit"] = dp_limit
    if fraction is not None and rec["text"]:
        rec["text"][0] = (f"particles of {display('particle_diameter', dp_limit, symbol=False)} "
                          "or smaller keep every run below the Weisz-Prater limit (Weisz & "
                          f"Prater 1954): use the {fraction}")
    return {"runs": runs, "recommended": rec}


def _fraction_label(d: float) -> str:
    """The sieve fraction whose mean aperture is ``d``."""
    a = ASTM_E11_APERTURES
    for lo, hi in zip(a[:-1], a[1:], strict=True):
        if abs(0.5 * (lo + hi) - d) <= 1e-9 * d:
            return f"{lo * 1e6:.4g}-{hi * 1e6:.4g} um fraction"
    return display("particle_diameter", d, symbol=False)


def _size_statement(c: Condition, above: float, below: float) -> str:
    """Whether a particle-size test at this run's conditions can show anything."""
    own = display("particle_diameter", c.particle_diameter, symbol=False)
    moves = [_fraction_label(v) for v in (below, above) if np.isfinite(v)]
    if moves:
        return (f"conclusive: the {' or the '.join(moves)} instead of {own} changes the "
                "profile beyond the noise; at a fixed speed this covers film and pores "
                "together")
    a = ASTM_E11_APERTURES
    return (f"not conclusive: no sieve fraction from {a[0] * 1e6:.0f} um to {a[-1] * 1e3:g} mm "
            f"changes the profile beyond the noise at {own}, so equal profiles there would "
            "prove nothing")


def _agitation_statement(c: Condition, above: float, below: float, lowest: float) -> str:
    """Whether a speed test at this run's conditions can show anything, in one sentence."""
    own = display("stirrer_speed", c.stirrer_speed, symbol=False)
    moves = [display("stirrer_speed", v, symbol=False) for v in (below, above)
             if np.isfinite(v)]
    if moves:
        return (f"conclusive: a run at {' or '.join(moves)} instead of {own} changes the "
                "profile beyond the noise, so a speed test here shows whether the film matters "
                "(it leaves pore diffusion open)")
    return (f"not conclusive: no speed from {display('stirrer_speed', lowest, symbol=False)} "
            f"(the campaign's lowest) to {SPEED_RANGE[1] * 60:g} rpm changes the profile "
            f"beyond the noise at {own}, so equal profiles there would prove nothing")


def _campaign_speed(fitted: FittedModel) -> float:
    return float(min(r.stirrer_speed for r in fitted.study.runs))


def _speed(v: float) -> float | None:
    """A Carberry speed rounded up to the 50 rpm grid (faster is the safe side)."""
    return practical_speed(float(v), up=True) if np.isfinite(v) else None


def _num(v: float) -> float | None:
    return float(v) if np.isfinite(v) else None


def _recommendation(fitted: FittedModel, runs: dict[str, dict[str, Any]], dp: float | None,
                    N: float | None, has_pellet: bool, has_film: bool) -> dict[str, Any]:
    text = []
    if not has_pellet:
        text.append("the model has no pellet resistance (eta = 1): no particle-size limit")
    elif dp is None:
        text.append(f"no particle diameter down to {DIAMETER_RANGE[0] * 1e6:g} um brings "
                    "every run below the Weisz-Prater limit")
    else:
        text.append(f"particles of {display('particle_diameter', dp, symbol=False)} or smaller "
                    "keep every run below the Weisz-Prater limit (Weisz & Prater 1954)")
    if not has_film:
        text.append("the model has no film resistance: no stirrer-speed limit")
    elif N is None:
        text.append(f"no stirrer speed up to {SPEED_RANGE[1] * 60:g} rpm brings every run "
                    "below the Carberry limit with those particles")
    else:
        text.append(f"at {display('stirrer_speed', N, symbol=False)} or faster every run stays "
                    "below the Carberry limit 0.05/|n| (Carberry 1976)"
                    + (" with those particles" if dp is not None else ""))
        low = _campaign_speed(fitted)
        if N < low:
            text.append(f"that speed lies below the campaign's lowest "
                        f"({display('stirrer_speed', low, symbol=False)}), where the agitation "
                        "law is extrapolated and the particles may not be suspended (Zwietering "
                        "1958): stir at no less than the campaign's lowest speed")
            N_rec = low
        else:
            N_rec = N
        return {"particle_diameter": dp, "carberry_speed": N, "stirrer_speed": N_rec,
                "text": text + _agitation_text(runs),
                "agitation_test_conclusive_runs": _conclusive(runs)}
    return {"particle_diameter": dp, "carberry_speed": N, "stirrer_speed": N,
            "text": text + _agitation_text(runs), "agitation_test_conclusive_runs":
            _conclusive(runs)}


def _conclusive(runs: dict[str, dict[str, Any]]) -> list[str]:
    return [rid for rid, r in runs.items() if r["speed_difference_above"] is not None
            or r["speed_difference_below"] is not None]


def _agitation_text(runs: dict[str, dict[str, Any]]) -> list[str]:
    diff = _conclusive(runs)
    rest = [rid for rid in runs if rid not in diff]
    if diff:
        text = (f"an agitation test is conclusive (profiles differ beyond the noise at a "
                f"practical speed) for {len(diff)} of {len(runs)} runs: {', '.join(diff)}")
        if rest:
            text += f"; not conclusive for {', '.join(rest)}"
        return [text + " (per run below)"]
    return ["no practical speed changes any run's profile beyond the noise: equal profiles at "
            "two speeds would show only that kc does not matter there, and leave eta open "
            "(common practice)"]


def _difference_speeds(fitted: FittedModel, conds: Sequence[Condition]) -> tuple[Array, Array]:
    """Per run, the nearest speeds above and below its own (on the 50 rpm grid, from the
    campaign's lowest speed to the top of :data:`SPEED_RANGE`) at which its predicted profile
    differs from the one at its own speed by more than z sqrt(2) sigma."""
    # practical speeds, not below the campaign's lowest (slower: the agitation law is
    # extrapolated and the catalyst may settle)
    grid = np.array(speed_grid(max(_campaign_speed(fitted), SPEED_STEP), SPEED_RANGE[1]))
    return _differences(fitted, conds, "stirrer_speed", grid)


def _difference_diameters(fitted: FittedModel, conds: Sequence[Condition]
                          ) -> tuple[Array, Array]:
    """Per run, the nearest sieve fractions (mean apertures of adjacent ASTM E11 sieves) above
    and below its own size at which its predicted profile differs beyond the noise."""
    a = np.array(ASTM_E11_APERTURES)
    return _differences(fitted, conds, "particle_diameter", 0.5 * (a[:-1] + a[1:]))


def _differences(fitted: FittedModel, conds: Sequence[Condition], factor: str, grid: Array
                 ) -> tuple[Array, Array]:
    """Nearest values of ``factor`` on ``grid``, above and below each run's own, at which the
    run's predicted profile differs from its own by more than z sqrt(2) sigma (NaN: none)."""
    study = fitted.study
    n = len(conds)
    copies = [replace(c, id=f"{c.id}@{j}", **{factor: float(v)})  # type: ignore[arg-type]
              for c in conds for j, v in enumerate(grid)]
    own = [replace(c, id=f"{c.id}@own") for c in conds]
    times = None
    if study.kind == "profile":
        t = _campaign_times(study)
        times = [t[i] for i in range(n) for _ in grid] + t
    model = fitted.model_at(copies + own, times=times)
    theta = fitted.theta_for(model, fitted.theta)
    with np.errstate(all="ignore"):
        f = model.predict(theta)[0]
    above, below = np.full(n, np.nan), np.full(n, np.nan)
    counts = [c.size for c in (times or [np.zeros(1)] * (len(copies) + n))]
    starts = np.concatenate([[0], np.cumsum(counts)])
    g = len(grid)
    for i, c in enumerate(conds):
        k0 = n * g + i
        ref = f[starts[k0]:starts[k0 + 1]]
        noise = NOISE_Z * np.sqrt(2.0) * fitted.sigma(ref)
        differs = np.zeros(g, dtype=bool)
        for j in range(g):
            k = i * g + j
            differs[j] = np.any(np.abs(f[starts[k]:starts[k + 1]] - ref) > noise)
        own_value = getattr(c, factor)
        up = np.flatnonzero(differs & (grid > own_value * (1 + 1e-9)))
        down = np.flatnonzero(differs & (grid < own_value * (1 - 1e-9)))
        if up.size:
            above[i] = grid[up[0]]
        if down.size:
            below[i] = grid[down[-1]]
    return above, below


# ------------------------------------------------------------------------------ information
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
    from kinfit.estimate.evaluation import Evaluator, jacobian_internal

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


# ------------------------------------------------------------------------------ the plan
@dataclass(frozen=True)
class Plan:
    """Proposed next runs.

    Attributes
    ----------
    study : str
    tests : dict
        :func:`transport_tests`.
    chosen : tuple of Condition
        The D-optimal runs, in the order chosen.
    design : dict
        ``logdet_before``, ``logdet_after``, ``random`` {``logdet`` per random design, ``mean``,
        ``max``, ``n``}, ``candidates``, ``grid``, ``times``, ``coordinates``.
    shrinkage : dict
        parameter -> ``estimate``, ``unit``, ``half_width_before``, ``half_width_after``,
        ``ratio``, ``half_width_random`` (mean over the random designs).
    """

    study: str
    tests: dict[str, Any]
    chosen: tuple[Condition, ...]
    design: dict[str, Any]
    shrinkage: dict[str, dict[str, Any]]
    manifest: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """Plain-Python content of plan.json."""
        from kinfit.outputs import to_plain

        return to_plain({
            "kinfit_plan": 1, "study": self.study, "transport_tests": self.tests,
            "runs": [{"id": c.id, **c.factors(), "label": c.label()} for c in self.chosen],
            "design": self.design, "shrinkage": self.shrinkage,
            "units": {"temperature": "K", "stirrer_speed": "1/s (revolutions per second)",
                      "particle_diameter": "m", "catalyst_loading": "kg/m^3",
                      "initial_concentration": "mol/m^3"},
            "manifest": self.manifest,
        })

    def runs_frame(self) -> pd.DataFrame:
        """The chosen runs as a runs table in the study vocabulary (lab units)."""
        return pd.DataFrame({
            "run": [f"N{i + 1}" for i in range(len(self.chosen))],
            "temperature [degC]": [c.temperature - 273.15 for c in self.chosen],
            "stirrer_speed [rpm]": [c.stirrer_speed * 60 for c in self.chosen],
            "particle_diameter [um]": [c.particle_diameter * 1e6 for c in self.chosen],
            "catalyst_loading [g/L]": [c.catalyst_loading for c in self.chosen],
            "initial_concentration [mol/L]": [c.initial_concentration / 1000
                                              for c in self.chosen],
            "note": ["proposed by kinfit plan (D-optimal)"] * len(self.chosen),
        })

    def report(self) -> str:
        """Markdown summary (also the console text)."""
        d = self.design
        lines = [f"# Next runs for study '{self.study}'", "", "## Transport tests", ""]
        lines += [f"- {t}" for t in self.tests["recommended"]["text"]]
        lines += ["", "| run | Carberry (limit) | N for Carberry | Weisz-Prater (limit) | "
                  "dp for Weisz-Prater | N differing beyond noise (below / above) | "
                  "agitation test | size test |", "|---|---|---|---|---|---|---|---|"]
        for rid, r in self.tests["runs"].items():
            def sp(v: float | None) -> str:
                return "none" if v is None else display("stirrer_speed", v, symbol=False)
            dpw = r["diameter_for_weisz_prater"]
            lines.append(
                f"| {rid} | {r['carberry']:.3g} ({r['carberry_limit']:.3g}) | "
                f"{sp(r['speed_for_carberry'])} | {r['weisz_prater']:.3g} "
                f"({r['weisz_prater_limit']:.3g}) | "
                f"{'none' if dpw is None else display('particle_diameter', dpw, symbol=False)}"
                f" | {sp(r['speed_difference_below'])} / {sp(r['speed_difference_above'])} | "
                f"{r['agitation_test'].split(':')[0]} | {r['size_test'].split(':')[0]} |")
        lines += [""] + [f"- {rid}: agitation test {r['agitation_test']}; size test "
                         f"{r['size_test']}" for rid, r in self.tests["runs"].items()]
        rnd = d["random"]
        lines += ["", f"## D-optimal choice of {len(self.chosen)} run(s) from "
                  f"{d['candidates']} candidates", "",
                  f"log det of the information ({d['coordinates']}): {d['logdet_before']:.4g} "
                  f"now, {d['logdet_after']:.4g} with these runs; random choices of the same "
                  f"size give {rnd['mean']:.4g} on average (best {rnd['max']:.4g}, "
                  f"{rnd['n']} draws).", ""]
        lines += [f"{i + 1}. {c.label()}" for i, c in enumerate(self.chosen)]
        lines += ["", "| parameter | estimate | 95 % half-width now | after | ratio | "
                  "after a random choice |", "|---|---|---|---|---|---|"]
        for name, s in self.shrinkage.items():
            ratio = "-" if s["ratio"] is None else f"{s['ratio']:.2f}"
            lines.append(f"| {name} | {s['estimate']:.4g} {s['unit']} | "
                         f"{_hw(s['half_width_before'])} | {_hw(s['half_width_after'])} | "
                         f"{ratio} | {_hw(s['half_width_random'])} |")
        lines += ["", "Expected half-widths assume the estimates and the noise stay as fitted "
                  "(linearised information; Bates & Watts 1988).", ""]
        from kinfit.outputs import cautions_markdown

        lines += cautions_markdown()
        return "\n".join(lines)

    def save(self, folder: str | Path) -> Path:
        """Write plan.json, plan_runs.csv and plan.md atomically into ``folder``."""
        from kinfit.outputs import write_frame_atomic, write_json_atomic, write_text_atomic

        folder = Path(folder)
        write_frame_atomic(folder / "plan_runs.csv", self.runs_frame())
        write_text_atomic(folder / "plan.md", self.report() + "\n")
        return write_json_atomic(folder / "plan.json", self.to_dict())


def _hw(v: float | None) -> str:
    return "unbounded" if v is None else f"{v:.3g}"


def _half_widths(fitted: FittedModel, m: Array, dof: int) -> NDArray[Any]:
    """95 % half-widths (physical) from information m (internal coordinates)."""
    space = fitted.model.space()
    d = space.dphysical_dinternal(space.to_internal(fitted.theta))
    try:
        cov = np.linalg.inv(m)
        se = np.sqrt(np.diag(cov))
    except np.linalg.LinAlgError:
        se = np.full(m.shape[0], np.inf)
    if np.linalg.matrix_rank(m) < m.shape[0]:
        se = np.full(m.shape[0], np.inf)
    t = stats.t.ppf(0.975, max(dof, 1))
    return t * se * np.abs(d)


def plan_runs(study: Study, fit: FitResult, *, n_runs: int = 4,
              grid: CandidateGrid | None = None, seed: int | None = 0, n_random: int = 20,
              thresholds: Thresholds | None = None) -> Plan:
    """Propose the next runs of a fitted campaign.

    Parameters
    ----------
    study : Study
    fit : FitResult
    n_runs : int
        Runs to choose (k).
    grid : CandidateGrid, optional
        Candidate levels; default :func:`default_grid` with the recommended speed and diameter.
    seed : int, optional
        Seed of the random designs the D-optimal choice is compared with.
    n_random : int
        Number of random designs.
    thresholds : Thresholds, optional

    Returns
    -------
    Plan
    """
    if not isinstance(n_runs, int) or n_runs < 1:
        raise StudyError(f"the number of runs to plan (--runs, n_runs) must be a whole number "
                         f">= 1. Got {n_runs!r} instead.")
    fitted = load_fitted(study, fit)
    tests = transport_tests(fitted, thresholds=thresholds)
    rec = tests["recommended"]
    grid = grid or default_grid(study, speed=rec["stirrer_speed"],
                                diameter=rec["particle_diameter"])
    group = study.runs[0].group  # per-group parameters take this batch's values
    cands = grid.conditions(group=group)
    times = _typical_times(study)
    m_c = information(fitted, cands, times=times)
    m0 = information(fitted).sum(axis=0)
    chosen, ld_after = d_optimal(m0, m_c, n_runs)
    ld_before = float(_logdet(m0))
    rng = np.random.default_rng(seed)
    k = len(cands)
    randoms = [rng.choice(k, size=n_runs, replace=k < n_runs) for _ in range(n_random)]
    ld_random = [float(_logdet(m0 + m_c[r].sum(axis=0))) for r in randoms]
    n_new = n_runs * (1 if times is None else times.size)
    p = len(fitted.columns)
    dof0 = study.n_obs - p
    before = _half_widths(fitted, m0, dof0)
    after = _half_widths(fitted, m0 + m_c[chosen].sum(axis=0), dof0 + n_new)
    rand_hw = np.mean([_half_widths(fitted, m0 + m_c[r].sum(axis=0), dof0 + n_new)
                       for r in randoms], axis=0)
    shrink = {}
    for j, c in enumerate(fitted.columns):
        par = fitted.spec.parameters[fitted.model.column_parameter[j]]
        b, a = before[j], after[j]
        shrink[c] = {"estimate": float(fitted.theta[j]), "unit": par.unit,
                     "half_width_before": _num(b), "half_width_after": _num(a),
                     "ratio": float(a / b) if np.isfinite(a) and np.isfinite(b) and b > 0
                     else None, "half_width_random": _num(rand_hw[j])}
    from kinfit.outputs import manifest

    picked = tuple(replace(cands[i], id=f"N{n + 1}") for n, i in enumerate(chosen))
    return Plan(
        study=study.name, tests=tests, chosen=picked,
        design={"logdet_before": ld_before, "logdet_after": ld_after,
                "random": {"logdet": ld_random, "mean": float(np.mean(ld_random)),
                           "max": float(np.max(ld_random)), "n": n_random, "seed": seed},
                "candidates": k, "grid": grid.to_dict(), "group": group,
                "times": None if times is None else times.tolist(),
                "coordinates": "internal coordinates of the optimiser (ln x for log-"
                               "transformed parameters)",
                "criterion": "D-optimal: maximise log det(M0 + sum M_c), greedy then Fedorov "
                             "exchange (Fedorov 1972; Atkinson & Donev 1992)"},
        shrinkage=shrink, manifest=manifest(files=study.files, seed=seed, argv=None,
                                                     base=study.path),
    )


# ------------------------------------------------------------------------------ command line
def _levels_option(text: str | None, kind: str, name: str) -> tuple[float, ...] | None:
    from kinfit.units import to_si

    if text is None:
        return None
    import re

    m = re.match(r"^\s*([-+0-9.eE,\s]+?)\s*([A-Za-z].*)$", text)
    if not m:
        raise StudyError(f"--{name} '{text}': write comma-separated numbers followed by one "
                         "unit, for example \"300, 600, 1200 rpm\"")
    try:
        nums = [float(s) for s in m.group(1).split(",") if s.strip()]
    except ValueError:
        raise StudyError(f"--{name} '{text}': '{m.group(1)}' is not a list of numbers") from None
    return tuple(float(v) for v in to_si(np.array(nums), m.group(2).strip(), kind,
                                         where=f"--{name}"))


def add_plan_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``kinfit plan STUDY --fit DIR [--runs K]``."""
    parser.add_argument("study", type=Path, help="the fitted study file (TOML)")
    parser.add_argument("--fit", type=Path, required=True,
                        help="folder with results.json of 'kinfit fit'")
    parser.add_argument("--runs", type=int, default=4, metavar="K",
                        help="number of further runs to choose (default 4)")
    parser.add_argument("--temperatures", default=None,
                        help="candidate temperatures, e.g. \"40, 55, 70 degC\" (default: the "
                             "campaign's)")
    parser.add_argument("--speeds", default=None,
                        help="candidate stirrer speeds, e.g. \"300, 600, 1200 rpm\" (default: "
                             "the campaign's and the Carberry speed)")
    parser.add_argument("--diameters", default=None,
                        help="candidate particle diameters, e.g. \"30, 100, 250 um\" (default: "
                             "the campaign's and the Weisz-Prater diameter)")
    parser.add_argument("--loadings", default=None,
                        help="candidate catalyst loadings, e.g. \"1, 2.5 g/L\"")
    parser.add_argument("--concentrations", default=None,
                        help="candidate initial concentrations, e.g. \"0.4, 0.8 mol/L\"")
    parser.add_argument("--seed", type=int, default=0,
                        help="seed of the random designs compared with (default 0)")
    parser.add_argument("--out", type=Path, default=None,
                        help="output folder (default: FIT/plan)")


def run_plan_command(args: argparse.Namespace) -> int:
    """Run ``kinfit plan``; returns the exit code."""
    from kinfit.outputs import prepare_out_dir, recorded_command
    from kinfit.study import load_study

    study = load_study(args.study)
    fit = FitResult.load(args.fit)
    given = {"temperature": _levels_option(args.temperatures, "temperature", "temperatures"),
             "stirrer_speed": _levels_option(args.speeds, "speed", "speeds"),
             "particle_diameter": _levels_option(args.diameters, "length", "diameters"),
             "catalyst_loading": _levels_option(args.loadings, "loading", "loadings"),
             "initial_concentration": _levels_option(args.concentrations, "concentration",
                                                     "concentrations")}
    grid = None
    if any(v is not None for v in given.values()):
        fitted = load_fitted(study, fit)
        rec = transport_tests(fitted)["recommended"]
        base = default_grid(study, speed=rec["stirrer_speed"], diameter=rec["particle_diameter"])
        grid = replace(base, **{k: _levels(v) for k, v in given.items() if v is not None})
    plan = plan_runs(study, fit, n_runs=args.runs, grid=grid, seed=args.seed)
    plan = replace(plan, manifest={**plan.manifest, "command": recorded_command(sys.argv)})
    out = Path(args.out) if args.out is not None else Path(args.fit) / "plan"
    prepare_out_dir(out)
    plan.save(out)
    print(plan.report())
    print(f"\nwrote {out / 'plan.json'}, {out / 'plan_runs.csv'} and {out / 'plan.md'}")
    return 0
