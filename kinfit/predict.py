"""Predictions at new conditions from a fitted campaign: concentration profiles (batch) or
observed rates (rate campaign) at other particle sizes, stirrer speeds, temperatures, loadings
and concentrations, with 90 % bands from the posterior draws or, without them, from the
linearised covariance; the effectiveness factor and the regime at each condition; a warning for
every factor outside the campaign's range, and a refusal to carry a film coefficient that was
fitted only to film-limited data to other speeds or sizes.

New conditions become :class:`~kinfit.study.Run` records of a study built with
``dataclasses.replace``, so the same compiled, vectorised physics (:class:`~kinfit.model.Model`)
predicts them as it fitted the campaign.

Bands (central 90 % of the mean response over parameter draws):

- posterior: a seeded subsample of ``posterior_draws.csv`` in the fit folder (written by
  ``kinfit sample``);
- covariance: multivariate normal draws in the optimiser's internal coordinates (ln x for
  log-transformed parameters), ``u ~ N(u_hat, D^-1 C D^-1)`` with ``D = diag(dx/du)`` and ``C``
  the linearised covariance of the fit (Bates & Watts 1988, ch. 2); draws outside the bounds
  are dropped.
"""

from __future__ import annotations

import argparse
import re
import sys
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from kinfit.criteria import REGIMES, Thresholds
from kinfit.errors import KinfitError, ModelError, RegimeWarning, SolverError, StudyError
from kinfit.model import Model, ModelSpec
from kinfit.results import FitResult
from kinfit.study import FACTORS, Run, Study
from kinfit.units import parse_header, parse_quantity, to_si

__all__ = [
    "Condition", "FittedModel", "Prediction", "ExtrapolationRefused", "FACTOR_KINDS",
    "FACTOR_ALIASES", "PAD_RUN", "campaign_defaults", "parse_conditions", "read_conditions",
    "conditions_from_argument", "conditions_study", "display", "load_fitted",
    "covariance_draws",
    "posterior_draws", "parse_times", "predict_conditions", "film_information",
    "outside_ranges", "add_predict_arguments", "run_predict_command",
]

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
RANGE_RTOL = 0.01
#: share of the information about kc_ref coming from film-regime runs above which the film
#: coefficient counts as "fitted only to film-limited data"
FILM_INFORMATION_SHARE = 0.9
_PHYSICS_ERRORS = (ModelError, SolverError, ArithmeticError, ValueError, RuntimeError)


class ExtrapolationRefused(KinfitError):
    """A prediction that would carry a film coefficient fitted only to film-limited data to
    another stirrer speed or particle size (pass ``allow_extrapolation=True`` to override).

    Attributes
    ----------
    reasons : list of str
        One sentence per refused condition.

    Examples
    --------
    >>> str(ExtrapolationRefused(["condition 'P1': dp 500 um outside 30-250 um"]))
    "condition 'P1': dp 500 um outside 30-250 um"
    """

    def __init__(self, reasons: Sequence[str]) -> None:
        self.reasons = list(reasons)
        super().__init__("; ".join(self.reasons))


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
    try:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False, skipinitialspace=True,
                            comment="#")
    except (ValueError, OSError, pd.errors.ParserError) as exc:
        raise StudyError(f"{path.name}: cannot read the table ({exc})") from None
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
                                 "goes in the header)", file=path.name, row=i + 1,
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
    StudyError
        The fit has no usable covariance.
    """
    cov_u = fitted.internal_covariance()
    if cov_u is None:
        raise StudyError("the fit has no covariance (singular information); run "
                         "'kinfit sample' for posterior draws, or fix the unidentified "
                         "parameters")
    space = fitted.model.space()
    u_hat = space.to_internal(fitted.theta)
    sym = 0.5 * (cov_u + cov_u.T)
    u = rng.multivariate_normal(u_hat, sym, size=n, method="eigh")
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


# ------------------------------------------------------------------------------ range checks
def outside_ranges(study: Study, condition: Condition, *, rtol: float = RANGE_RTOL
                   ) -> list[dict[str, Any]]:
    """Factors of ``condition`` outside the campaign's [min, max] (relative tolerance ``rtol``),
    each ``{factor, value, min, max}`` in SI."""
    out = []
    for f in FACTORS:
        v = np.array([r.factor(f) for r in study.runs], dtype=float)
        lo, hi = float(v.min()), float(v.max())
        x = condition.factors()[f]
        if x < lo * (1 - rtol) or x > hi * (1 + rtol):
            out.append({"factor": f, "value": x, "min": lo, "max": hi})
    return out


def film_information(fitted: FittedModel) -> dict[str, Any]:
    """Where the information about the fitted film coefficient comes from.

    The Fisher information of each ``kc_ref`` column in internal coordinates,
    ``sum_i w_i J_i^2 / sigma_i^2``, is split between the runs by their regime at the estimate.

    Returns
    -------
    dict
        ``fitted`` (bool: kc_ref varies), ``all_film`` (every run's regime is "film"),
        ``film_share`` (share of the kc_ref information from film-regime runs, or None),
        ``film_only`` (all_film or film_share >= :data:`FILM_INFORMATION_SHARE`), ``regimes``.
    """
    from kinfit.estimate.evaluation import Evaluator, jacobian_internal

    model = fitted.model
    regimes = {rid: str(fitted.fit.runs.get(rid, {}).get("regime", "")) for rid in model.run_ids}
    if not regimes or any(not v for v in regimes.values()):
        from kinfit.simulate import run_table

        regimes = {k: v["regime"] for k, v in run_table(model, fitted.theta).items()}
    cols = [j for j, c in enumerate(model.column_parameter) if c == "kc_ref"]
    all_film = all(v == "film" for v in regimes.values())
    out: dict[str, Any] = {"fitted": bool(cols), "all_film": all_film, "film_share": None,
                           "regimes": regimes}
    if cols:
        problem = model.problem(x0=fitted.theta)
        u = problem.space.to_internal(fitted.theta)
        jac = jacobian_internal(problem, Evaluator(problem), u, columns=np.array(cols))
        if jac is not None:
            sd = fitted.sigma(model.y, model.weights)
            info = np.sum((jac / sd[:, None]) ** 2, axis=1)
            film_rows = np.array([regimes[model.run_ids[i]] == "film" for i in model.run_index])
            total = float(info.sum())
            out["film_share"] = float(info[film_rows].sum() / total) if total > 0 else None
    share = out["film_share"]
    out["film_only"] = bool(cols) and (all_film or (share is not None
                                                    and share >= FILM_INFORMATION_SHARE))
    return out


# ------------------------------------------------------------------------------ prediction
@dataclass(frozen=True)
class Prediction:
    """Predictions at new conditions.

    Attributes
    ----------
    study : str
    kind : {"profile", "rate"}
    conditions : tuple of Condition
    frame : DataFrame
        Long form: ``condition``, factors (SI), ``time [s]`` (profiles), the estimate at the
        fitted values ``concentration [mol/m^3]`` (or ``rate [mol/(kg*s)]``) and the band
        quantiles ``concentration_q05 [mol/m^3]``, ``..._q50``, ``..._q95``.
    summary : dict
        condition id -> factors, ``defaulted``, ``outside_range``, ``initial_rate``
        {estimate, q05, q50, q95}, ``effectiveness_factor`` {estimate, q05, q95}, ``regime``,
        ``regime_probability``, the per-run criteria of the results contract, ``refused``.
    band : dict
        ``source`` ("posterior" or "covariance"), ``level``, ``draws``, ``failed``.
    film : dict
        :func:`film_information` of the fit.
    warnings : tuple of str
    """

    study: str
    kind: str
    conditions: tuple[Condition, ...]
    frame: pd.DataFrame
    summary: Mapping[str, Mapping[str, Any]]
    band: Mapping[str, Any]
    film: Mapping[str, Any]
    warnings: tuple[str, ...] = ()
    manifest: Mapping[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """Plain-Python content of predictions.json."""
        from kinfit.outputs import to_plain

        return to_plain({
            "kinfit_predictions": 1, "study": self.study, "kind": self.kind,
            "band": self.band, "film_information": self.film,
            "conditions": self.summary, "warnings": list(self.warnings),
            "units": {"temperature": "K", "stirrer_speed": "1/s (revolutions per second)",
                      "particle_diameter": "m", "catalyst_loading": "kg/m^3",
                      "initial_concentration": "mol/m^3", "time": "s",
                      "concentration": "mol/m^3", "rate": "mol/(kg*s)"},
            "manifest": self.manifest,
        })

    def save(self, folder: str | Path) -> Path:
        """Write predictions.csv and predictions.json atomically into ``folder``."""
        from kinfit.outputs import write_frame_atomic, write_json_atomic

        folder = Path(folder)
        write_frame_atomic(folder / "predictions.csv", self.frame)
        return write_json_atomic(folder / "predictions.json", self.to_dict())

    def report(self) -> str:
        """Console summary: one block per condition."""
        lo, hi = _quantile_names(self.band.get("level", 0.9))
        lines = [f"predictions for study '{self.study}': {len(self.conditions)} condition(s); "
                 f"{self.band['level']:.0%} bands from {self.band['source']} "
                 f"({self.band['draws']} draws)"]
        for c in self.conditions:
            s = self.summary[c.id]
            r = s["initial_rate"]
            eta = s["effectiveness_factor"]
            lines.append("")
            lines.append(f"  {c.id}: {c.label()}"
                         + (f"  (defaults: {', '.join(c.defaulted)})" if c.defaulted else ""))
            lines.append(f"    initial rate {r['estimate']:.4g} mol/(kg s) "
                         f"[{r[lo]:.4g}, {r[hi]:.4g}]; eta {eta['estimate']:.3f} "
                         f"[{eta[lo]:.3f}, {eta[hi]:.3f}]; regime {s['regime']}")
            for o in s["outside_range"]:
                f_ = o["factor"]
                lines.append(f"    outside the campaign: {display(f_, o['value'])} (campaign "
                             f"{display(f_, o['min'], symbol=False)} to "
                             f"{display(f_, o['max'], symbol=False)})")
        for w in self.warnings:
            lines.append(f"  warning: {w}")
        return "\n".join(lines)


def _quantile_names(level: float) -> tuple[str, str]:
    a = round(100 * (1 - level) / 2)
    return f"q{a:02d}", f"q{100 - a:02d}"


def predict_conditions(study: Study, fit: FitResult, conditions: Sequence[Condition], *,
                       fit_dir: str | Path | None = None, times: Array | None = None,
                       n_draws: int = 400, seed: int | None = None, level: float = 0.90,
                       allow_extrapolation: bool = False,
                       thresholds: Thresholds | None = None) -> Prediction:
    """Predict the study's model at new conditions with bands.

    Parameters
    ----------
    study : Study
        The fitted campaign.
    fit : FitResult
        Its fit (``kinfit fit``).
    conditions : sequence of Condition
    fit_dir : path, optional
        Folder of the fit; its ``posterior_draws.csv`` (``kinfit sample``) gives the bands when
        present, else the covariance does.
    times : ndarray, optional
        Sampling times (s) of the predicted profiles; default 21 points from 0 to the longest
        run of the campaign. Ignored for a rate campaign.
    n_draws : int
        Parameter draws for the bands.
    seed : int, optional
        Seed of the draws.
    level : float
        Central band probability (default 0.90).
    allow_extrapolation : bool
        Predict even where a film coefficient fitted only to film-limited data would be
        carried to another stirrer speed or particle size.
    thresholds : Thresholds, optional
        Criteria limits of the per-condition table.

    Returns
    -------
    Prediction

    Raises
    ------
    ExtrapolationRefused
        See ``allow_extrapolation``.
    StudyError
        Bad conditions, options or fit.

    Warns
    -----
    RegimeWarning
        A condition outside the campaign's range of a factor.
    """
    if not isinstance(n_draws, int) or n_draws < 20:
        raise StudyError(f"the 'n_draws' option of predict_conditions() must be an int >= 20. "
                         f"Got {n_draws!r} instead.")
    if not 0.5 <= level < 1:
        raise StudyError(f"the 'level' option must lie in [0.5, 1). Got {level!r} instead.")
    conditions = tuple(conditions)
    _unique_ids(conditions)
    fitted = load_fitted(study, fit)
    notes: list[str] = []
    film = film_information(fitted)
    refused: list[str] = []
    refused_ids: set[str] = set()
    outside = {c.id: outside_ranges(study, c) for c in conditions}
    for c in conditions:
        for o in outside[c.id]:
            f_ = o["factor"]
            text = (f"condition '{c.id}': {f_} {display(f_, o['value'], symbol=False)} lies "
                    f"outside the campaign's range {display(f_, o['min'], symbol=False)} to "
                    f"{display(f_, o['max'], symbol=False)}: the prediction extrapolates the "
                    "fitted laws")
            notes.append(text)
            warnings.warn(text, RegimeWarning, stacklevel=2)
        film_factors = [o for o in outside[c.id]
                        if o["factor"] in ("stirrer_speed", "particle_diameter")]
        if film["film_only"] and film_factors:
            why = ("every run of the campaign was film-limited" if film["all_film"] else
                   f"{film['film_share']:.0%} of the information about kc_ref came from "
                   "film-limited runs")
            refused_ids.add(c.id)
            refused.append(
                f"condition '{c.id}': {', '.join(o['factor'] for o in film_factors)} outside "
                f"the campaign, but {why}, so the film coefficient (and the kinetics behind "
                "it) is not known at other speeds or sizes; pass --allow-extrapolation "
                "(allow_extrapolation=True) to predict anyway")
    if refused and not allow_extrapolation:
        raise ExtrapolationRefused(refused)
    if refused:
        notes.extend(f"extrapolated on request: {r}" for r in refused)
    if study.kind == "profile":
        if times is None:
            t_max = max(float(r.times.max()) for r in study.runs if r.times.size)
            times = np.linspace(0.0, t_max, 21)
        times = np.asarray(times, dtype=float)
    model = fitted.model_at(conditions, times=times)
    theta = fitted.theta_for(model, fitted.theta)[0]
    rng = np.random.default_rng(seed)
    draws, source = None, "covariance"
    if fit_dir is not None:
        draws = posterior_draws(fitted, Path(fit_dir) / "posterior_draws.csv", n_draws, rng)
        source = "posterior" if draws is not None else "covariance"
    if draws is None:
        draws = covariance_draws(fitted, n_draws, rng)
    rows = fitted.theta_for(model, draws)
    f_hat, ok_hat = _predict_rows(model, theta[None, :])
    if not ok_hat[0]:
        raise StudyError("the model cannot be evaluated at these conditions at the fitted "
                         "values; check the conditions")
    f, ok = _predict_rows(model, rows)
    n_failed = int(np.sum(~ok))
    if np.sum(ok) < 10:
        raise StudyError(f"only {int(np.sum(ok))} of {rows.shape[0]} parameter draws could "
                         "be evaluated at these conditions; the bands cannot be computed")
    lo_name, hi_name = _quantile_names(level)
    alpha = (1 - level) / 2
    q = np.quantile(f[ok], [alpha, 0.5, 1 - alpha], axis=0)
    frame = _frame(model, conditions, f_hat[0], q, lo_name, hi_name)
    summary = _summaries(model, theta, rows[ok], conditions, outside, refused_ids, alpha,
                         lo_name, hi_name, thresholds)
    from kinfit.outputs import manifest

    return Prediction(
        study=study.name, kind=study.kind, conditions=conditions, frame=frame, summary=summary,
        band={"source": source, "level": level, "draws": int(rows.shape[0]),
              "failed": n_failed, "seed": seed,
              "meaning": f"central {level:.0%} of the mean response over parameter draws"},
        film=film, warnings=tuple(notes),
        manifest=manifest(files=study.files, seed=seed, argv=None),
    )


def _frame(model: Model, conditions: Sequence[Condition], f_hat: Array, q: Array,
           lo_name: str, hi_name: str) -> pd.DataFrame:
    by_id = {c.id: c for c in conditions}
    ids = np.asarray(model.run_ids)[model.run_index]
    keep = ids != PAD_RUN
    ids, f_hat, q = ids[keep], f_hat[keep], q[:, keep]
    frame = pd.DataFrame({"condition": ids})
    for f_ in FACTORS:
        unit = {"temperature": "K", "stirrer_speed": "1/s", "particle_diameter": "m",
                "catalyst_loading": "kg/m^3", "initial_concentration": "mol/m^3"}[f_]
        frame[f"{f_} [{unit}]"] = [getattr(by_id[i], f_) for i in ids]
    if model.spec.reactor == "batch":
        frame["time [s]"] = model.times[keep]
        name, unit = "concentration", "mol/m^3"
    else:
        name, unit = "rate", "mol/(kg*s)"
    frame[f"{name} [{unit}]"] = f_hat
    for label, row in zip((lo_name, "q50", hi_name), q, strict=True):
        frame[f"{name}_{label} [{unit}]"] = row
    return frame


def _summaries(model: Model, theta: Array, rows: Array, conditions: Sequence[Condition],
               outside: Mapping[str, list], refused: set[str], alpha: float, lo_name: str,
               hi_name: str, thresholds: Thresholds | None) -> dict[str, dict[str, Any]]:
    from kinfit.simulate import run_table

    table = run_table(model, theta, thresholds=thresholds)
    sub = rows[:: max(1, rows.shape[0] // 60)]
    rates, etas, regimes = [], [], []
    for row in sub:
        try:
            with np.errstate(all="ignore"):
                st = model.run_states(row)
        except _PHYSICS_ERRORS:
            continue
        rates.append(st.observed.rate)
        etas.append(st.criteria.effectiveness_factor)
        regimes.append(st.criteria.regime)
    rates_a, etas_a, reg_a = np.array(rates), np.array(etas), np.array(regimes)
    out = {}
    for i, c in enumerate(conditions):
        t = table[c.id]
        entry: dict[str, Any] = {
            **c.factors(), "group": c.group, "defaulted": list(c.defaulted),
            "outside_range": outside[c.id],
            "extrapolated_on_request": c.id in refused,
            "regime": t["regime"], "criteria": t,
        }
        if rates_a.size:
            rq = np.quantile(rates_a[:, i], [alpha, 0.5, 1 - alpha])
            eq = np.quantile(etas_a[:, i], [alpha, 1 - alpha])
            labels = list(reg_a[:, i])
            entry["regime_probability"] = {r: labels.count(r) / len(labels) for r in REGIMES}
        else:
            rq = eq = np.full(3, np.nan)
            entry["regime_probability"] = None
        entry["initial_rate"] = {"estimate": t["observed_rate"], lo_name: float(rq[0]),
                                 "q50": float(rq[1]), hi_name: float(rq[-1]),
                                 "unit": "mol/(kg*s)"}
        entry["effectiveness_factor"] = {"estimate": t["effectiveness_factor"],
                                         lo_name: float(eq[0]), hi_name: float(eq[-1])}
        out[c.id] = entry
    return out


# ------------------------------------------------------------------------------ command line
def add_predict_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``kinfit predict STUDY --fit DIR --at CONDITIONS``."""
    parser.add_argument("study", type=Path, help="the fitted study file (TOML)")
    parser.add_argument("--fit", type=Path, required=True,
                        help="folder with results.json of 'kinfit fit' (and posterior_draws.csv "
                             "of 'kinfit sample', used for the bands when present)")
    parser.add_argument("--at", action="append", required=True, metavar="CONDITIONS",
                        help="a CSV table of conditions (runs-table columns with units) or "
                             "inline conditions such as \"dp=500 um, N=800 rpm, T=70 degC\" "
                             "(keys T, N, dp, w, C0 or the full factor names; several "
                             "separated by ';'; unspecified factors take the campaign value "
                             "nearest the median); may be repeated")
    parser.add_argument("--times", default=None,
                        help="sampling times of the profiles, e.g. \"0, 10, 30, 60 min\" "
                             "(default: 21 points up to the campaign's longest run)")
    parser.add_argument("--draws", type=int, default=400,
                        help="parameter draws for the bands (default 400)")
    parser.add_argument("--seed", type=int, default=None, help="seed of the draws")
    parser.add_argument("--allow-extrapolation", action="store_true",
                        help="predict even when a film coefficient fitted only to film-limited "
                             "data would be carried to another stirrer speed or particle size")
    parser.add_argument("--out", type=Path, default=None,
                        help="output folder (default: FIT/predict)")


def run_predict_command(args: argparse.Namespace) -> int:
    """Run ``kinfit predict``; returns the exit code (1 when the extrapolation is refused)."""
    from kinfit.outputs import prepare_out_dir
    from kinfit.study import load_study

    study = load_study(args.study)
    fit = FitResult.load(args.fit)
    conditions: list[Condition] = []
    for text in args.at:
        conditions += conditions_from_argument(text, study, first_index=len(conditions) + 1)
    times = parse_times(args.times) if args.times else None
    out = Path(args.out) if args.out is not None else Path(args.fit) / "predict"
    if out.resolve() == Path(args.fit).resolve():
        raise StudyError(f"--out {out} is the fit folder, whose predictions.csv belongs to the "
                         "fit; choose another folder")
    try:
        pred = predict_conditions(study, fit, conditions, fit_dir=args.fit, times=times,
                                  n_draws=args.draws, seed=args.seed,
                                  allow_extrapolation=args.allow_extrapolation)
    except ExtrapolationRefused as exc:
        for reason in exc.reasons:
            print(f"kinfit: refused: {reason}", file=sys.stderr)
        return 1
    pred = replace(pred, manifest={**pred.manifest, "command": list(sys.argv)})
    prepare_out_dir(out)
    pred.save(out)
    print(pred.report())
    print(f"\nwrote {out / 'predictions.csv'} and {out / 'predictions.json'}")
    return 0
