"""Conditions to predict at (parsed from the command line or a table), studies built from
them, the fitted model rebuilt from saved results, and parameter draws from a posterior or the
covariance: what ``kinfit predict`` and ``kinfit plan`` share.
"""

from __future__ import annotations

import re
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from kinfit.errors import KinfitError, ModelError, RegimeWarning, SolverError, StudyError
from kinfit.model import Model, ModelSpec
from kinfit.results import FitResult
from kinfit.study import FACTORS, Run, Study, read_table, table_line
from kinfit.units import parse_header, parse_quantity, to_si

__all__ = [
    "Condition", "FittedModel", "FACTOR_KINDS", "FACTOR_ALIASES", "PAD_RUN",
    "campaign_defaults", "parse_conditions", "read_conditions", "conditions_from_argument",
    "conditions_study", "display", "load_fitted", "covariance_draws", "posterior_draws",
    "parse_times",
]

Array = NDArray[np.float64]
_PHYSICS_ERRORS = (ModelError, SolverError, ArithmeticError, ValueError, RuntimeError)

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
@dataclass(frozen=True)
class FittedModel:
    """The study's model at the fitted values, able to predict at other conditions.

    Attributes
    ----------
    study : Study
    spec : ModelSpec
        The study's model with the fitted shared values in its parameter table (the film's
        reference speed and diameter are the campaign's, whatever the new conditions are).
    model : Model
        Compiled on the campaign's runs.
    theta : ndarray, shape (p,)
        Fitted values of ``model.columns`` (physical).
    covariance : ndarray, shape (p, p), or None
        Linearised covariance of ``theta`` (physical), None when the fit has none.
    fit : FitResult
    """

    study: Study
    spec: ModelSpec
    model: Model
    theta: Array
    covariance: Array | None
    fit: FitResult

    @property
    def columns(self) -> tuple[str, ...]:
        """Names of the varying columns."""
        return self.model.columns

    def model_at(self, conditions: Sequence[Condition], *,
                 times: Array | Sequence[Array] | None = None) -> Model:
        """The same model compiled on new conditions."""
        return Model(self.spec, conditions_study(self.study, conditions, times=times,
                                                 min_points=len(self.columns)))

    def theta_for(self, other: Model, rows: Array) -> Array:
        """Parameter rows (m, p) of this fit mapped onto the columns of ``other``, by name.

        Raises
        ------
        StudyError
            A column of ``other`` the fit has no value for (a per-run parameter, or a group the
            campaign does not have).
        """
        rows = np.atleast_2d(np.asarray(rows, dtype=float))
        idx = []
        for c in other.columns:
            if c not in self.columns:
                base = c.split("[")[0]
                scope = self.spec.parameters[base].scope
                raise StudyError(
                    f"parameter '{base}' is fitted per {scope}, and the fit has no value of "
                    f"'{c}'; give each condition a group the campaign has "
                    f"({list(self.study.groups())})" if scope == "group" else
                    f"parameter '{base}' is fitted per run, so it has no value at new "
                    "conditions; refit with a shared (or per-group) scope")
            idx.append(self.columns.index(c))
        return rows[:, idx]

    def internal_covariance(self) -> Array | None:
        """The covariance in internal coordinates, ``D^-1 C D^-1`` with ``D = dx/du``."""
        if self.covariance is None:
            return None
        space = self.model.space()
        d = space.dphysical_dinternal(space.to_internal(self.theta))
        return self.covariance / np.outer(d, d)

    def sigma(self, f: Array, weights: Array | None = None) -> Array:
        """Standard deviation of an observation predicted as ``f`` (the fit's error model and
        scales)."""
        from kinfit.estimate.problem import ErrorModel

        em = ErrorModel(self.fit.fit.get("error_model", self.study.error_model))
        scales = self.fit.fit.get("error_scales") or {}
        s_abs = scales.get("sigma", self.fit.fit.get("sigma", 1.0))
        return em.sigma(f, s_abs=s_abs, s_rel=scales.get("sigma_rel", 1.0), weights=weights)


def load_fitted(study: Study, fit: FitResult) -> FittedModel:
    """The study's model at the fit's estimates.

    Raises
    ------
    StudyError
        The fit lacks a varying column of the study's model (a fit of another model or an
        edited study).
    """
    from kinfit.fitting import main_spec

    spec0 = main_spec(study)
    model0 = Model(spec0, study)
    est = fit.estimates()
    missing = [c for c in model0.columns if c not in est]
    if missing:
        raise StudyError(
            f"the fit results have no estimate of '{missing[0]}', which the study's model "
            f"varies; they hold {sorted(est)}; refit with 'kinfit fit {study.path}'")
    theta = np.array([est[c] for c in model0.columns], dtype=float)
    shared = {n: est[n] for n in spec0.parameter_names
              if spec0.parameters[n].vary and spec0.parameters[n].scope == "shared"}
    spec = replace(spec0, parameters=spec0.parameters.with_values(shared))
    model = Model(spec, study)
    cov = None
    raw = fit.extras.get("covariance") if fit.extras else None
    names = list(fit.correlation.get("names", [])) if fit.correlation else []
    if raw is not None and names and all(c in names for c in model.columns):
        full = np.array(raw, dtype=float)
        if full.shape == (len(names), len(names)):
            idx = [names.index(c) for c in model.columns]
            cov = full[np.ix_(idx, idx)]
            if not np.all(np.isfinite(cov)):
                cov = None
    return FittedModel(study, spec, model, theta, cov, fit)


# ------------------------------------------------------------------------------ draws
def covariance_draws(fitted: FittedModel, n: int, rng: np.random.Generator) -> Array:
    """Multivariate normal draws of the fitted columns in internal coordinates, (m, p)
    physical, m <= n (draws outside the bounds are dropped).

    Raises
    ------
    KinfitError
        The fit has no usable covariance (singular or not positive semi-definite).
    """
    cov_u = fitted.internal_covariance()
    if cov_u is None:
        raise KinfitError("the fit has no covariance (singular information), so no band can "
                          "be given; run 'kinfit sample' for posterior draws, or fix the "
                          "unidentified parameters (vary = false)")
    space = fitted.model.space()
    u_hat = space.to_internal(fitted.theta)
    sym = 0.5 * (cov_u + cov_u.T)
    lam, vec = np.linalg.eigh(sym)
    if lam.min() < -1e-8 * max(abs(lam.max()), 1e-300):
        raise KinfitError("the fit's covariance is not positive definite (unidentified "
                          "parameters), so no band can be given; fix them (vary = false) or "
                          "run 'kinfit sample' for posterior draws")
    # round-off negatives to zero: a positive semi-definite factor L with L L^T = sym
    factor = vec * np.sqrt(np.clip(lam, 0.0, None))
    u = u_hat + rng.standard_normal((n, u_hat.size)) @ factor.T
    x = space.to_physical(u)
    return x[space.contains(x)]


def posterior_draws(fitted: FittedModel, path: str | Path, n: int, rng: np.random.Generator
                    ) -> Array | None:
    """A seeded subsample (m <= n, physical) of ``posterior_draws.csv``, or None when the file
    is absent or lacks a fitted column."""
    path = Path(path)
    if not path.is_file():
        return None
    try:
        frame = pd.read_csv(path)
    except (ValueError, OSError, pd.errors.ParserError) as exc:
        raise StudyError(f"{path}: cannot read the posterior draws ({exc})") from None
    if not all(c in frame.columns for c in fitted.columns):
        missing = [c for c in fitted.columns if c not in frame.columns]
        warnings.warn(f"{path.name} lacks column(s) {missing} of the fitted model; using the "
                      "covariance instead", RegimeWarning, stacklevel=3)
        return None
    draws = frame[list(fitted.columns)].to_numpy(dtype=float)
    draws = draws[np.all(np.isfinite(draws), axis=1)]
    if draws.shape[0] == 0:
        return None
    pick = rng.choice(draws.shape[0], size=min(n, draws.shape[0]), replace=False)
    return draws[np.sort(pick)]


def _predict_rows(model: Model, rows: Array) -> tuple[Array, NDArray[np.bool_]]:
    """Predictions (m, n) and a mask of rows that could be computed."""
    rows = np.atleast_2d(rows)
    try:
        with np.errstate(all="ignore"):
            f = np.asarray(model.predict(rows), dtype=float)
        return f, np.all(np.isfinite(f), axis=1)
    except _PHYSICS_ERRORS:
        out = np.full((rows.shape[0], model.n_obs), np.nan)
        for i, row in enumerate(rows):
            try:
                with np.errstate(all="ignore"):
                    out[i] = model.predict(row[None, :])[0]
            except _PHYSICS_ERRORS:
                pass
        return out, np.all(np.isfinite(out), axis=1)
