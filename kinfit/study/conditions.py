"""Conditions to predict at (parsed from the command line or a table), studies built from
them, the fitted model rebuilt from saved results, and parameter draws from a posterior or the
covariance: what ``kinfit predict`` and ``kinfit plan`` share.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from kinfit.core.units import parse_header, parse_quantity, to_si
from kinfit.errors import StudyError
from kinfit.study.runs import FACTORS, Run, Study
from kinfit.study.tables import read_table, table_line

__all__ = ['Condition', 'FACTOR_KINDS', 'FACTOR_ALIASES', 'PAD_RUN', 'campaign_defaults', 'parse_conditions', 'read_conditions', 'conditions_from_argument', 'conditions_study', 'display', 'parse_times']

Array = NDArray[np.float64]

#: quantity kind of each factor of the runs table
FACTOR_KINDS = {"temperature": "temperature", "stirrer_speed": "speed",
                "particle_diameter": "length", "catalyst_loading": "loading",
                "initial_concentration": "concentration"}
#: short names accepted in an inline condition (exact match), besides the full factor names
FACTOR_ALIASES = {"T": "temperature", "N": "stirrer_speed", "dp": "particle_diameter",
                  "w": "catalyst_loading", "C0": "initial_concentration",
                  **{f: f for f in FACTORS}}
#: relative tolerance when comparing a condition with the campaign's range

# ------------------------------------------------------------------------------ conditions
@dataclass(frozen=True)
class Condition:
    """One set of conditions to predict at, SI units.

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
        kg/m^3.
    initial_concentration : float
        mol/m^3.
    group : str or None
        Catalyst batch (needed when the fit has per-group parameters and several groups).
    defaulted : tuple of str
        Factors not given, taken from the campaign (:func:`campaign_defaults`).
    """

    id: str
    temperature: float
    stirrer_speed: float
    particle_diameter: float
    catalyst_loading: float
    initial_concentration: float
    group: str | None = None
    defaulted: tuple[str, ...] = ()

    def factors(self) -> dict[str, float]:
        """Factor name -> SI value."""
        return {f: float(getattr(self, f)) for f in FACTORS}

    def label(self) -> str:
        """Short text such as ``T 70 degC, N 800 rpm, dp 500 um, w 2 g/L, C0 0.5 mol/L``."""
        return ", ".join(display(f, getattr(self, f)) for f in FACTORS)


_DISPLAY = {"temperature": ("T", "degC"), "stirrer_speed": ("N", "rpm"),
            "particle_diameter": ("dp", "um"), "catalyst_loading": ("w", "g/L"),
            "initial_concentration": ("C0", "mol/L")}


def display(factor: str, value: float, *, symbol: bool = True) -> str:
    """A factor's SI value in the lab's units.

    Examples
    --------
    >>> display("stirrer_speed", 10.0)
    'N 600 rpm'
    >>> display("temperature", 343.15, symbol=False)
    '70 degC'
    """
    sym, unit = _DISPLAY[factor]
    v = {"temperature": value - 273.15, "stirrer_speed": value * 60.0,
         "particle_diameter": value * 1e6, "catalyst_loading": value,
         "initial_concentration": value / 1000.0}[factor]
    return f"{sym} {v:.4g} {unit}" if symbol else f"{v:.4g} {unit}"


def campaign_defaults(study: Study) -> dict[str, float]:
    """For each factor, the campaign value nearest the median of the runs' values: what an
    unspecified factor of a condition takes."""
    out = {}
    for f in FACTORS:
        v = np.array([r.factor(f) for r in study.runs], dtype=float)
        med = float(np.median(v))
        out[f] = float(v[np.argmin(np.abs(v - med))])
    return out


def _condition(values: Mapping[str, float], study: Study, cid: str, group: str | None
               ) -> Condition:
    defaults = campaign_defaults(study)
    given = {f: float(values[f]) for f in FACTORS if f in values}
    defaulted = tuple(f for f in FACTORS if f not in given)
    full = {**defaults, **given}
    for f in ("temperature", "particle_diameter", "catalyst_loading", "initial_concentration"):
        if not full[f] > 0:
            raise StudyError(f"condition '{cid}': {f} must be > 0, got {full[f]:g} (SI)")
    if full["stirrer_speed"] < 0:
        raise StudyError(f"condition '{cid}': stirrer_speed must be >= 0")
    return Condition(cid, full["temperature"], full["stirrer_speed"], full["particle_diameter"],
                     full["catalyst_loading"], full["initial_concentration"], group, defaulted)


def parse_conditions(text: str, study: Study, *, first_index: int = 1) -> list[Condition]:
    """Conditions written inline, e.g. ``"dp=500 um, N=800 rpm, T=70 degC"``.

    Several conditions are separated by ``;``. Keys are the factor names of the runs table or
    the short names ``T``, ``N``, ``dp``, ``w``, ``C0``; also ``id`` and ``group``. Each value
    carries its unit. Factors not given take the campaign value nearest the median
    (:func:`campaign_defaults`) and are listed in :attr:`Condition.defaulted`.

    Raises
    ------
    StudyError
        Unknown key, a repeated key, a value without a readable unit, or an empty condition.

    Examples
    --------
    Given a loaded ``study``::

        parse_conditions("T=70 degC, N=800 rpm; T=80 degC", study)
    """
    out: list[Condition] = []
    parts = [p for p in (s.strip() for s in str(text).split(";")) if p]
    if not parts:
        raise StudyError(f"--at '{text}': no condition given; write for example "
                         "\"dp=500 um, N=800 rpm, T=70 degC\"")
    for k, part in enumerate(parts):
        cid = f"P{first_index + k}"
        values: dict[str, float] = {}
        group = None
        for item in (s.strip() for s in part.split(",")):
            if not item:
                continue
            if "=" not in item:
                raise StudyError(f"condition '{part}': '{item}' is not of the form key=value "
                                 "(for example 'N=800 rpm')")
            key, value = (s.strip() for s in item.split("=", 1))
            if key == "id":
                cid = value
                continue
            if key == "group":
                group = value or None
                continue
            if key not in FACTOR_ALIASES:
                raise StudyError(
                    f"condition '{part}': key '{key}' is not recognised; use one of "
                    f"{sorted(FACTOR_ALIASES)} or 'id', 'group'")
            name = FACTOR_ALIASES[key]
            if name in values:
                raise StudyError(f"condition '{part}': {name} is given twice; keep one")
            values[name] = parse_quantity(value, FACTOR_KINDS[name],
                                          where=f"condition '{part}', {key}")
        out.append(_condition(values, study, cid, group))
    _unique_ids(out)
    return out


def _unique_ids(conditions: Sequence[Condition]) -> None:
    seen: set[str] = set()
    for c in conditions:
        if c.id == PAD_RUN:
            raise StudyError(f"condition id '{PAD_RUN}' is reserved; choose another id")
        if c.id in seen:
            raise StudyError(f"condition id '{c.id}' appears twice; give each condition its "
                             "own id")
        seen.add(c.id)


def read_conditions(path: str | Path, study: Study) -> list[Condition]:
    """Conditions from a CSV table in the runs-table vocabulary (units in headers).

    Columns: optional ``run`` (the condition id) and ``group``; any of ``temperature [..]``,
    ``stirrer_speed [..]``, ``particle_diameter [..]``, ``catalyst_loading [..]``,
    ``initial_concentration [..]``. A missing factor column takes the campaign default.

    Raises
    ------
    StudyError
        Missing file, unknown column, a column without a unit, a cell that is not a number; the
        message names the file, row and column.
    """
    path = Path(path)
    if not path.is_file():
        raise StudyError(f"conditions table '{path}' does not exist; check the path")
    frame = read_table(path)
    cols: dict[str, tuple[str, str | None]] = {}
    for header in frame.columns:
        h = parse_header(str(header), where=path.name)
        if h.name not in FACTORS and h.name not in ("run", "group", "note"):
            raise StudyError(f"unknown column '{header}'; allowed columns are "
                             f"{['run', 'group', 'note', *FACTORS]}", file=path.name)
        if h.name in FACTORS and not h.unit:
            raise StudyError(f"column '{header}' has no unit; write it as '{h.name} [unit]'",
                             file=path.name)
        cols[h.name] = (str(header), h.unit)
    if len(frame) == 0:
        raise StudyError("the conditions table has no rows", file=path.name)
    out = []
    for i in range(len(frame)):
        cid = str(frame[cols["run"][0]].iloc[i]).strip() if "run" in cols else f"P{i + 1}"
        group = (str(frame[cols["group"][0]].iloc[i]).strip() or None) if "group" in cols \
            else None
        values = {}
        for f in FACTORS:
            if f not in cols:
                continue
            header, unit = cols[f]
            cell = str(frame[header].iloc[i]).strip()
            try:
                number = float(cell)
            except ValueError:
                raise StudyError(f"'{cell}' is not a number; write a plain number (the unit "
                                 "goes in the header)", file=path.name, row=table_line(frame, i),
                                 column=header) from None
            values[f] = float(to_si(number, unit or "", FACTOR_KINDS[f],
                                    where=f"{path.name}, column '{header}'"))
        out.append(_condition(values, study, cid or f"P{i + 1}", group))
    _unique_ids(out)
    return out


def conditions_from_argument(text: str, study: Study, *, first_index: int = 1
                             ) -> list[Condition]:
    """``--at`` value: a ``.csv`` path (read with :func:`read_conditions`) or inline text."""
    if str(text).strip().lower().endswith(".csv"):
        return read_conditions(Path(text.strip()), study)
    return parse_conditions(text, study, first_index=first_index)


def parse_times(text: str) -> Array:
    """Sampling times written ``"0, 10, 20, 40 min"`` (numbers, then one unit), in s.

    Examples
    --------
    >>> parse_times("0, 10, 30 min").tolist()
    [0.0, 600.0, 1800.0]
    """
    m = re.match(r"^\s*([-+0-9.eE,\s]+?)\s*([A-Za-z].*)$", str(text))
    if not m:
        raise StudyError(f"--times '{text}': write comma-separated numbers followed by one "
                         "unit, for example \"0, 10, 20, 40 min\"")
    try:
        nums = np.array([float(s) for s in m.group(1).split(",") if s.strip()], dtype=float)
    except ValueError:
        raise StudyError(f"--times '{text}': '{m.group(1)}' is not a list of numbers") from None
    if nums.size == 0 or np.any(nums < 0) or np.any(np.diff(nums) <= 0):
        raise StudyError(f"--times '{text}': times must be >= 0 and increasing")
    return np.asarray(to_si(nums, m.group(2).strip(), "time", where=f"--times '{text}'"))


def _frozen(a: Any) -> Array:
    arr = np.array(a, dtype=float)
    arr.setflags(write=False)
    return arr


#: id of the run that pads a study of new conditions to at least as many points as parameters
PAD_RUN = "_pad"


def conditions_study(study: Study, conditions: Sequence[Condition], *,
                     times: Array | Sequence[Array] | None = None, name: str | None = None,
                     min_points: int = 0) -> Study:
    """A study whose runs are the given conditions (same sections as ``study``).

    Each run gets placeholder observations (the initial concentration, or a zero rate) at
    ``times`` (s; one array for all, or one per condition) so that a :class:`Model` compiled on
    it predicts exactly those points. A rate campaign gets one point per condition. When the
    points number fewer than ``min_points`` (a Model needs at least as many as it has varying
    parameters), a last run :data:`PAD_RUN`, a copy of the first condition, makes up the rest;
    its predictions mean nothing and are left out by every caller.
    """
    if not conditions:
        raise StudyError("no condition to predict at")
    conditions = list(conditions)
    profile = study.kind == "profile"
    if profile:
        if times is None:
            raise StudyError("sampling times are needed to predict the profiles of a batch "
                             "campaign")
        per = ([np.asarray(t, dtype=float) for t in times] if isinstance(times, list | tuple)
               else [np.asarray(times, dtype=float)] * len(conditions))
        if len(per) != len(conditions):
            raise StudyError(f"{len(per)} time arrays for {len(conditions)} conditions")
    else:
        per = [np.zeros(1)] * len(conditions)  # one rate per condition
    points = sum(t.size for t in per)
    if points < min_points:
        conditions.append(replace(conditions[0], id=PAD_RUN))
        per.append(np.zeros(min_points - points))
    runs = []
    for c, t in zip(conditions, per, strict=True):
        if profile:
            times_, conc, rates = t, np.full(t.size, c.initial_concentration), np.array([])
        else:
            times_, conc, rates = np.array([]), np.array([]), np.zeros(t.size)
        runs.append(Run(
            id=c.id, temperature=c.temperature, stirrer_speed=c.stirrer_speed,
            particle_diameter=c.particle_diameter, catalyst_loading=c.catalyst_loading,
            initial_concentration=c.initial_concentration, times=_frozen(times_),
            concentrations=_frozen(conc), rates=_frozen(rates),
            weights=_frozen(np.ones(t.size)), group=c.group, note="prediction"))
    return replace(study, runs=tuple(runs), name=name or f"{study.name} (new conditions)")


# ------------------------------------------------------------------------------ the fitted model


# ------------------------------------------------------------------------------ draws


