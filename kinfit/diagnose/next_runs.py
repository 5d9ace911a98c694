"""What to run next: per temperature, the stirrer speed and particle diameter at which the runs
would be free of film and pore limits by the stated criteria, computed with the fitted model
(rate law, film law and pellet) by a root find over the speed N and the diameter dp.

Criteria: Carberry number Ca < 0.05/|n| (Carberry 1976; Kapteijn & Moulijn, Handbook of
Heterogeneous Catalysis) and Weisz-Prater number below its limit (Weisz & Prater 1954; the limit
in the L = Vp/Sp normalisation of :mod:`kinfit.criteria`). Ca falls with N (the film coefficient
rises with agitation) and, at eta near 1, rises with dp (the external area per mass falls as
1/dp); the Weisz-Prater number rises with dp. So each criterion has one boundary, found by
bisection in log N or log dp for all runs at once.

The recommendation per temperature is a pair: particles no larger than ``particle_diameter``
(the largest size meeting Weisz-Prater, not larger than the campaign's largest at that
temperature) stirred at no less than ``stirrer_speed`` (the smallest speed meeting Carberry with
those particles), for every initial concentration run at that temperature.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
from numpy.typing import NDArray

from kinfit.criteria import Thresholds
from kinfit.model import Model

__all__ = ["NextRun", "next_runs", "SPEED_RANGE", "DIAMETER_RANGE"]

Array = NDArray[np.float64]
#: stirrer speeds searched, rev/s (10 to 3000 rpm: the range of lab autoclaves, common practice)
SPEED_RANGE = (10.0 / 60.0, 3000.0 / 60.0)
#: particle diameters searched, m (1 um to 10 mm)
DIAMETER_RANGE = (1e-6, 1e-2)
_ITERATIONS = 32


@dataclass(frozen=True)
class NextRun:
    """Conditions that would make the runs at one temperature intrinsic.

    Attributes
    ----------
    temperature : float
        K.
    stirrer_speed : float or None
        Smallest speed meeting the Carberry criterion, rev/s (None: no speed suffices, or the
        model has no film resistance).
    particle_diameter : float or None
        Largest diameter to use, m (None: no size in the searched range suffices).
    largest_particle_diameter : float or None
        Largest diameter meeting Weisz-Prater without the cap at the campaign's sizes, m (None
        when the model has no pore resistance or no size suffices).
    carberry, weisz_prater : float or None
        The worst run's numbers at the recommendation.
    runs : tuple of str
        The runs at this temperature the recommendation covers.
    note : str
    """

    temperature: float
    stirrer_speed: float | None
    particle_diameter: float | None
    largest_particle_diameter: float | None
    carberry: float | None
    weisz_prater: float | None
    runs: tuple[str, ...]
    note: str

    def to_dict(self) -> dict[str, Any]:
        """Plain-type form (an entry of ``next_runs`` in diagnosis.json)."""
        return {
            "temperature": self.temperature, "stirrer_speed": self.stirrer_speed,
            "particle_diameter": self.particle_diameter,
            "largest_particle_diameter": self.largest_particle_diameter,
            "carberry": self.carberry, "weisz_prater": self.weisz_prater,
            "runs": list(self.runs), "note": self.note,
        }


class _Evaluator:
    """Criteria of every run of the study with the stirrer speeds and diameters replaced."""

    def __init__(self, model: Model, theta: Array, thresholds: Thresholds) -> None:
        self.model, self.theta, self.thresholds = model, np.asarray(theta, dtype=float), thresholds
        self.N0 = model.N.copy()
        self.dp0 = model.dp.copy()

    def __call__(self, N: Array, dp: Array) -> tuple[Array, Array, Array, Array]:
        study = self.model.study
        runs = tuple(replace(r, stirrer_speed=float(N[i]), particle_diameter=float(dp[i]))
                     for i, r in enumerate(study.runs))
        virtual = Model(self.model.spec, replace(study, runs=runs), grid=self.model.grid)
        c = virtual.run_states(self.theta, thresholds=self.thresholds).criteria
        R = len(runs)
        ca_lim = np.broadcast_to(c.carberry_limit, (R,))
        wp_lim = np.full(R, c.thresholds["weisz_prater"])
        return np.asarray(c.carberry), np.asarray(c.weisz_prater), ca_lim, wp_lim

    def carberry_ok(self, N: Array, dp: Array) -> NDArray[np.bool_]:
        """Whether each run meets the Carberry criterion at (N, dp)."""
        ca, _, lim, _ = self(N, dp)
        return ca < lim

    def weisz_prater_ok(self, N: Array, dp: Array) -> NDArray[np.bool_]:
        """Whether each run meets the Weisz-Prater criterion at (N, dp)."""
        _, wp, _, lim = self(N, dp)
        return wp < lim


def _boundary(passes: Callable[[Array], NDArray[np.bool_]], lo: float, hi: float, R: int, *,
              increasing: bool) -> tuple[Array, NDArray[np.bool_], NDArray[np.bool_]]:
    """Per run, the boundary between failing and passing in [lo, hi] (log bisection).

    ``increasing``: passing for large values (find the smallest passing value); otherwise
    passing for small values (find the largest passing value). Returns the boundary, whether it
    passes everywhere in the range, and whether it fails everywhere.
    """
    a = np.full(R, np.log(lo))
    b = np.full(R, np.log(hi))
    at_lo = passes(np.exp(a))
    at_hi = passes(np.exp(b))
    everywhere = at_lo & at_hi
    nowhere = ~at_lo & ~at_hi
    for _ in range(_ITERATIONS):
        mid = 0.5 * (a + b)
        ok = passes(np.exp(mid))
        if increasing:
            b = np.where(ok, mid, b)
            a = np.where(ok, a, mid)
        else:
            a = np.where(ok, mid, a)
            b = np.where(ok, b, mid)
    found = np.exp(b if increasing else a)
    found = np.where(everywhere, lo if increasing else hi, found)
    return found, everywhere, nowhere


def _rpm(v: float) -> str:
    return f"{v * 60:.4g} rpm"


def _um(v: float) -> str:
    return f"{v * 1e6:.4g} µm"


def next_runs(model: Model, theta: Array, *, thresholds: Thresholds | None = None,
              speed_range: tuple[float, float] = SPEED_RANGE,
              diameter_range: tuple[float, float] = DIAMETER_RANGE, rtol: float = 0.01
              ) -> list[NextRun]:
    """Per temperature, the stirrer speed and particle size that would make the runs intrinsic.

    Parameters
    ----------
    model : Model
        The fitted model (its film law and pellet are used to extrapolate).
    theta : ndarray, shape (p,)
        Fitted values of ``model.columns``.
    thresholds : Thresholds, optional
        The limits (default: Ca < 0.05/|n|, Psi_L at first-order eta 0.95).
    speed_range : (float, float)
        Speeds searched, rev/s (default 10 to 3000 rpm).
    diameter_range : (float, float)
        Diameters searched, m.
    rtol : float
        Relative tolerance within which two temperatures count as equal.

    Returns
    -------
    list of NextRun
        One per temperature level of the study, in increasing temperature.
    """
    thresholds = thresholds or Thresholds()
    ev = _Evaluator(model, theta, thresholds)
    R = len(model.run_ids)
    N0, dp0 = ev.N0, ev.dp0
    film = model.spec.film.name != "none"
    pore = model.spec.pellet != "none"
    n_lo, n_hi = speed_range
    d_lo, d_hi = diameter_range

    # 1. Weisz-Prater: the largest diameter that passes, at each run's own speed
    if pore:
        dp_wp, _, wp_nowhere = _boundary(lambda d: ev.weisz_prater_ok(N0, d), d_lo, d_hi, R,
                                         increasing=False)
    else:
        dp_wp, wp_nowhere = np.full(R, np.inf), np.zeros(R, dtype=bool)

    temps: list[float] = []
    for T in sorted(model.T):
        if not temps or abs(T - temps[-1]) > rtol * temps[-1]:
            temps.append(float(T))
    level = np.array([int(np.argmin([abs(T - t) for t in temps])) for T in model.T])
    dp_eval = np.empty(R)
    dp_cap = np.empty(len(temps))
    for j in range(len(temps)):
        m = level == j
        dp_cap[j] = min(float(np.min(dp_wp[m])), float(np.max(dp0[m])))
        dp_eval[m] = dp_cap[j]
    dp_eval = np.where(np.isfinite(dp_eval), dp_eval, dp0)

    # 2. Carberry: the smallest speed that passes with those particles
    if film:
        N_req, ca_everywhere, ca_nowhere = _boundary(
            lambda N: ev.carberry_ok(N, dp_eval), n_lo, n_hi, R, increasing=True)
        # 3. where no speed suffices: the largest diameter that passes at the top speed
        dp_film, _, film_nowhere = _boundary(
            lambda d: ev.carberry_ok(np.full(R, n_hi), d), d_lo, d_hi, R, increasing=False)
    else:
        N_req = np.full(R, np.nan)
        ca_everywhere = np.ones(R, dtype=bool)
        ca_nowhere = film_nowhere = np.zeros(R, dtype=bool)
        dp_film = np.full(R, np.inf)

    out: list[NextRun] = []
    for j, T in enumerate(temps):
        m = np.nonzero(level == j)[0]
        ids = tuple(model.run_ids[i] for i in m)
        notes: list[str] = []
        speed: float | None
        diameter: float | None = float(dp_cap[j]) if np.isfinite(dp_cap[j]) else None
        largest = float(np.min(dp_wp[m])) if pore and not np.any(wp_nowhere[m]) else None
        if pore and np.any(wp_nowhere[m]):
            diameter = None
            notes.append(f"no particle size down to {_um(d_lo)} meets Weisz-Prater: the "
                         "fitted diffusivity is too small for these rates; check the "
                         "diffusivity or lower the temperature")
        elif pore:
            if largest is not None and diameter is not None and largest > diameter * (1 + rtol):
                notes.append(f"the campaign's particles (up to {_um(diameter)}) meet "
                             f"Weisz-Prater; particles up to {_um(largest)} would")
            else:
                notes.append(f"particles no larger than {_um(largest or 0.0)} meet "
                             "Weisz-Prater")
        else:
            notes.append("the model has no pore resistance (eta = 1 by assumption): the "
                         "particle size is limited by the film only")
        if not film:
            speed = None
            notes.append("the model has no film resistance: any stirrer speed")
        elif np.any(ca_nowhere[m]):
            speed = n_hi
            dp_alt = float(np.min(dp_film[m])) if not np.any(film_nowhere[m]) else None
            if dp_alt is None:
                diameter = None
                notes.append(f"no speed up to {_rpm(n_hi)} and no particle size down to "
                             f"{_um(d_lo)} meets Carberry: the film limits at any practical "
                             "agitation; lower the temperature or the catalyst activity")
            else:
                diameter = min(diameter, dp_alt) if diameter is not None else dp_alt
                notes.append(f"no speed up to {_rpm(n_hi)} suffices with "
                             f"{_um(float(dp_cap[j]))} particles; at {_rpm(n_hi)} particles "
                             f"no larger than {_um(dp_alt)} meet Carberry")
        else:
            speed = float(np.max(N_req[m]))
            lo_c, hi_c = float(np.min(N0[m])), float(np.max(N0[m]))
            if np.all(ca_everywhere[m]):
                notes.append(f"the film is negligible at any speed from {_rpm(n_lo)} (by the "
                             "fitted film law, extrapolated below the campaign's "
                             f"{_rpm(lo_c)})")
            elif speed > hi_c * (1 + rtol) or speed < lo_c * (1 - rtol):
                notes.append(f"{_rpm(speed)} extrapolates the fitted film law beyond the "
                             f"campaign's speeds ({_rpm(lo_c)}-{_rpm(hi_c)})")
        ca = wp = None
        if diameter is not None:
            N_chk = np.where(level == j, speed if speed is not None else 1.0, N0)
            d_chk = np.where(level == j, diameter, dp0)
            cav, wpv, ca_l, wp_l = ev(N_chk, d_chk)
            ca, wp = float(np.max(cav[m])), float(np.max(wpv[m]))
            fails = [name for name, bad in (("Carberry", ca >= ca_l[m][0]),
                                            ("Weisz-Prater", wp >= wp_l[m][0])) if bad]
            if fails and (speed is not None or not film):
                notes.append(f"check: {' and '.join(fails)} still not met at the "
                             "recommendation (the criteria interact through the surface "
                             "concentration)")
        out.append(NextRun(float(T), speed, diameter, largest, ca, wp, ids, "; ".join(notes)))
    return out
