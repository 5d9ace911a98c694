"""The validated campaign: frozen runs in SI units, the study, and the sets of runs that differ in one factor."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from kinfit.errors import StudyError
from kinfit.study.parameters import ParameterTable
from kinfit.study.plausibility import uninformative_runs

__all__ = ['Run', 'Study', 'FACTORS', 'comparison_sets', 'ComparisonSet']


RUN_TEXT_COLUMNS = ("run", "group", "note")


#: the factors a campaign varies and that the classic transport tests compare
FACTORS = ("temperature", "stirrer_speed", "particle_diameter", "catalyst_loading",
           "initial_concentration")


def _frozen(a: Any) -> NDArray[np.float64]:
    arr = np.array(a, dtype=float)
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True, slots=True)
class Run:
    """One experiment, all values in SI units.

    Attributes
    ----------
    id : str
    temperature : float
        K.
    stirrer_speed : float
        Revolutions per second.
    particle_diameter : float
        m.
    catalyst_loading : float
        Catalyst mass per liquid volume, kg/m^3.
    initial_concentration : float
        mol/m^3.
    times, concentrations : ndarray
        Observation times (s) and bulk concentrations (mol/m^3) of a profile campaign; empty for
        a rate campaign.
    rates : ndarray
        Observed rates per catalyst mass, mol/(kg s), of a rate campaign; empty otherwise.
    weights : ndarray
        Relative weight of each observation (default 1).
    group : str or None
        Catalyst batch or other group label.
    volume : float or None
        Liquid volume, m^3.
    note : str
    """

    id: str
    temperature: float
    stirrer_speed: float
    particle_diameter: float
    catalyst_loading: float
    initial_concentration: float
    times: NDArray[np.float64]
    concentrations: NDArray[np.float64]
    rates: NDArray[np.float64]
    weights: NDArray[np.float64]
    group: str | None = None
    volume: float | None = None
    note: str = ""

    def __repr__(self) -> str:
        """The run in the lab's units, e.g. ``Run('R01', T=40 degC, N=300 rpm, dp=10 um, w=1
        g/L, C0=0.8 mol/L, 15 points)``; the fields themselves are SI."""
        parts = [f"T={self.temperature - 273.15:.4g} degC",
                 f"N={self.stirrer_speed * 60:.4g} rpm",
                 f"dp={self.particle_diameter * 1e6:.4g} um",
                 f"w={self.catalyst_loading:.4g} g/L",
                 f"C0={self.initial_concentration / 1000:.4g} mol/L"]
        if self.group:
            parts.append(f"group={self.group!r}")
        return f"Run({self.id!r}, {', '.join(parts)}, {self.n_obs} points)"

    @property
    def n_obs(self) -> int:
        """Number of observations of the run."""
        return int(self.rates.size if self.rates.size else self.concentrations.size)

    def factor(self, name: str) -> float:
        """Value of one of :data:`FACTORS`."""
        return float(getattr(self, name))


@dataclass(frozen=True)
class Study:
    """A validated campaign with its model choices, in SI units.

    Attributes
    ----------
    path : Path
        The study file.
    name : str
    kind : {"profile", "rate"}
        Concentration-time profiles in a batch reactor, or initial/differential rates.
    runs : tuple of Run
    catalyst : dict
        ``geometry``, ``particle_density`` (kg/m^3), optional ``porosity``.
    kinetics : dict
        ``rate_law`` and its options, ``reference_temperature`` (K),
        ``reference_concentration`` (mol/m^3), and rate-law specific keys.
    film : dict
        ``model`` and its options (``reference_speed`` in rev/s, ``reference_diameter`` in m).
    pellet : dict
        ``diffusivity``: ``"direct"`` (fit ``effective_diffusivity``) or ``"tortuosity"``
        (De = porosity Dm / tortuosity).
    parameters : ParameterTable
    error_model : str
    fit : dict
        Fit options from the ``[fit]`` section (seed, multistart, ...).
    fluid : dict
        The ``[fluid]`` section (solvent name and property values, SI), for film
        correlations and the tortuosity form of the effective diffusivity.
    files : dict
        Input file path -> SHA-256 hex digest, for the manifest.
    raw : dict
        The parsed TOML, for the record.
    """

    path: Path
    name: str
    kind: str
    runs: tuple[Run, ...]
    catalyst: Mapping[str, Any]
    kinetics: Mapping[str, Any]
    film: Mapping[str, Any]
    pellet: Mapping[str, Any]
    parameters: ParameterTable
    error_model: str = "constant"
    fit: Mapping[str, Any] = field(default_factory=dict)
    fluid: Mapping[str, Any] = field(default_factory=dict)
    files: Mapping[str, str] = field(default_factory=dict)
    raw: Mapping[str, Any] = field(default_factory=dict)

    @property
    def run_ids(self) -> tuple[str, ...]:
        """Run identifiers in table order."""
        return tuple(r.id for r in self.runs)

    @property
    def n_obs(self) -> int:
        """Total number of observations."""
        return sum(r.n_obs for r in self.runs)

    def run(self, run_id: str) -> Run:
        """The run with this id."""
        for r in self.runs:
            if r.id == run_id:
                return r
        raise StudyError(f"run '{run_id}' is not in the study; runs are {list(self.run_ids)}")

    def groups(self) -> tuple[str, ...]:
        """Distinct group labels (runs without a group form the group ``"default"``)."""
        return tuple(dict.fromkeys(r.group or "default" for r in self.runs))

    def varied_factors(self, rtol: float = 0.01) -> dict[str, tuple[float, ...]]:
        """Factors taking more than one value in the campaign, with their distinct values."""
        out = {}
        for f in FACTORS:
            vals = _distinct([r.factor(f) for r in self.runs], rtol)
            if len(vals) > 1:
                out[f] = vals
        return out

    def frame(self) -> pd.DataFrame:
        """One row per run with the factors in SI units and the number of points."""
        rows = []
        for r in self.runs:
            t = r.times
            rows.append({
                "run": r.id, "temperature [K]": r.temperature,
                "stirrer_speed [1/s]": r.stirrer_speed,
                "particle_diameter [m]": r.particle_diameter,
                "catalyst_loading [kg/m^3]": r.catalyst_loading,
                "initial_concentration [mol/m^3]": r.initial_concentration,
                "group": r.group or "", "points": r.n_obs,
                "time_span [s]": float(t.max() - t.min()) if t.size else 0.0,
            })
        return pd.DataFrame(rows)


def _distinct(values: list[float], rtol: float) -> tuple[float, ...]:
    out: list[float] = []
    for v in sorted(values):
        if not out or abs(v - out[-1]) > rtol * max(abs(out[-1]), 1e-300):
            out.append(v)
    return tuple(out)


@dataclass(frozen=True)
class ComparisonSet:
    """Runs that differ only in one factor (the others equal within a tolerance)."""

    factor: str
    runs: tuple[str, ...]
    values: tuple[float, ...]
    fixed: Mapping[str, float]


def comparison_sets(study: Study, factor: str, *, rtol: float = 0.01) -> list[ComparisonSet]:
    """Sets of runs that differ only in ``factor``: the classic transport tests.

    Runs are grouped by the other factors (equal within ``rtol`` relative); a group that holds
    at least two distinct values of ``factor`` is a set. Concentration-profile runs with a
    single point or with points only at t = 0 carry no rate and are kept out.
    """
    if factor not in FACTORS:
        raise StudyError(f"factor '{factor}' is not one of {list(FACTORS)}")
    others = [f for f in FACTORS if f != factor]
    sets: list[ComparisonSet] = []
    used: set[str] = set(uninformative_runs(study.runs))  # no rate information: kept out
    for r in study.runs:
        if r.id in used:
            continue
        members = [
            s for s in study.runs
            if s.id not in used and (s.group or "") == (r.group or "") and all(
                abs(s.factor(f) - r.factor(f)) <= rtol * abs(r.factor(f)) for f in others
            )
        ]
        vals = _distinct([m.factor(factor) for m in members], rtol)
        if len(vals) >= 2:
            used.update(m.id for m in members)
            sets.append(ComparisonSet(
                factor, tuple(m.id for m in members), vals, {f: r.factor(f) for f in others}
            ))
    return sets
