"""What a report reads: the study, the saved fit (results.json, predictions.csv), and, when
present, the posterior files and the diagnosis written into the same folder. Nothing is refitted:
the fitted model is rebuilt from the study and the saved estimates only to draw smooth curves,
and it is checked against the saved fitted values.

Optional files are read defensively (their writers may add or rename fields); a file that is
present but unreadable is an error naming the file and the fix, never silently skipped.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from kinfit.core.files import draws_file, file_sha256
from kinfit.errors import KinfitError, StudyError
from kinfit.fitting.results import FitResult
from kinfit.fitting.saved import model_of_fit
from kinfit.study.load import load_study
from kinfit.study.runs import Study

__all__ = ["ReportInputs", "load_inputs", "OPTIONAL_FILES"]

#: optional files of a fit folder, read when present
OPTIONAL_FILES = ("posterior.json", "posterior_draws.csv.gz", "posterior_draws.csv",
                  "posterior_bands.csv", "diagnosis.json")
_CURVE_POINTS = 160


@dataclass(frozen=True)
class ReportInputs:
    """Everything a report is built from.

    Attributes
    ----------
    study : Study
    result : FitResult
    fit_dir : Path
    posterior : dict or None
        posterior.json.
    draws : DataFrame or None
        posterior_draws.csv: one column per sampled quantity (physical values), optional
        ``step``, ``walker``, ``log_prob``.
    bands : DataFrame or None
        posterior_bands.csv: ``run``, ``time [s]``, ``q05``, ``q50``, ``q95`` (mol/m^3).
    diagnosis : dict or None
        diagnosis.json.
    observations : DataFrame
        Per observation: ``run``, ``time [s]``, ``observed``, ``fitted``, ``residual``.
    curves : dict
        run -> (times in s, concentrations in mol/m^3) of the smooth fitted profile (batch
        campaigns, when the model could be rebuilt).
    model_check : float or None
        Largest relative difference between the rebuilt model at the estimates and the saved
        fitted values (None when not rebuilt).
    spec : ModelSpec or None
        The fitted model's choices, rebuilt from the study and results.json.
    notes : tuple of str
        What could not be read or drawn, and why, for the report.
    input_hashes : dict
        File name in the fit folder -> SHA-256 of every file the report read.
    """

    study: Study
    result: FitResult
    fit_dir: Path
    posterior: Mapping[str, Any] | None
    draws: pd.DataFrame | None
    bands: pd.DataFrame | None
    diagnosis: Mapping[str, Any] | None
    observations: pd.DataFrame
    curves: Mapping[str, tuple[NDArray[np.float64], NDArray[np.float64]]]
    model_check: float | None
    spec: Any
    notes: tuple[str, ...] = ()
    input_hashes: Mapping[str, str] = field(default_factory=dict)

    @property
    def batch(self) -> bool:
        """Whether the campaign has concentration profiles (batch reactor)."""
        return self.result.model.get("reactor", "batch") == "batch"


def _read_json(path: Path) -> dict[str, Any]:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise StudyError(f"{path}: not valid JSON ({exc.msg}, line {exc.lineno}); rerun the "
                         "command that wrote it, or remove the file") from None
    if not isinstance(data, dict):
        raise StudyError(f"{path}: expected a JSON object at the top level, found "
                         f"{type(data).__name__}; rerun the command that wrote it")
    return data


def _read_csv(path: Path, required: tuple[str, ...]) -> pd.DataFrame:
    try:
        frame = pd.read_csv(path)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise StudyError(f"{path}: cannot be read as CSV ({exc}); rerun the command that wrote "
                         "it, or remove the file") from None
    missing = [c for c in required if c not in frame.columns]
    if missing:
        raise StudyError(f"{path}: column '{missing[0]}' is missing (found "
                         f"{list(frame.columns)}); rerun the command that wrote it")
    return frame


def _observation_frame(result: FitResult) -> pd.DataFrame:
    pred = result.predictions
    if pred is None:
        raise StudyError("predictions.csv is missing beside results.json; rerun 'kinfit fit' "
                         "to write it (the report plots the data and the fitted values)")
    obs_col = next((c for c in pred.columns if c.startswith("observed_")), None)
    fit_col = next((c for c in ("concentration [mol/m^3]", "rate [mol/(kg*s)]")
                    if c in pred.columns), None)
    for name, col in (("observed_*", obs_col), ("fitted value", fit_col)):
        if col is None:
            raise StudyError(f"predictions.csv has no {name} column (columns "
                             f"{list(pred.columns)}); rerun 'kinfit fit'")
    for col in ("run", "time [s]", "residual"):
        if col not in pred.columns:
            raise StudyError(f"predictions.csv has no '{col}' column; rerun 'kinfit fit'")
    return pd.DataFrame({
        "run": pred["run"].astype(str), "time [s]": pred["time [s]"].astype(float),
        "observed": pred[obs_col].astype(float), "fitted": pred[fit_col].astype(float),
        "residual": pred["residual"].astype(float),
    })


def _curves(study: Study, result: FitResult, obs: pd.DataFrame):
    """Smooth profiles at the estimates, and the check against the saved fitted values."""

    model, theta1 = model_of_fit(study, result)
    spec = model.spec
    theta = theta1[None, :]
    check = None
    if model.n_obs == len(obs):
        pred = np.asarray(model.predict(theta))[0]
        scale = np.maximum(np.abs(obs["fitted"].to_numpy(float)), 1e-12 + np.max(
            np.abs(obs["fitted"].to_numpy(float))) * 1e-9)
        check = float(np.max(np.abs(pred - obs["fitted"].to_numpy(float)) / scale))
    curves = {}
    if spec.reactor == "batch":
        times, index = [], []
        for i, run in enumerate(study.runs):
            t_end = float(run.times.max()) if run.times.size else 0.0
            t = np.linspace(0.0, t_end, _CURVE_POINTS)
            times.append(t)
            index.append(np.full(t.size, i))
        t_all = np.concatenate(times)
        c_all = np.asarray(model.predict_profiles(theta, t_all, np.concatenate(index)))[0]
        start = 0
        for rid, t in zip(study.run_ids, times, strict=True):
            curves[rid] = (t, c_all[start:start + t.size])
            start += t.size
    return spec, curves, check


def _check_runs(study: Study, result: FitResult, obs: pd.DataFrame) -> None:
    saved = list(result.runs)
    if set(saved) != set(study.run_ids):
        extra = sorted(set(saved) - set(study.run_ids))
        lack = sorted(set(study.run_ids) - set(saved))
        detail = (f"run '{extra[0]}' is in the results but not in the study" if extra else
                  f"run '{lack[0]}' is in the study but not in the results")
        raise StudyError(f"the fit folder does not belong to study '{study.name}': {detail}; "
                         "give the study the fit was made from, or refit it")
    unknown = sorted(set(obs["run"]) - set(study.run_ids))
    if unknown:
        raise StudyError(f"predictions.csv names run '{unknown[0]}', which the study lacks; "
                         "refit the study")


def load_inputs(study: Study | str | Path, fit_dir: str | Path) -> ReportInputs:
    """Read the study and everything the fit folder holds for a report.

    Parameters
    ----------
    study : Study or path
        The study (or its TOML file) the fit was made from.
    fit_dir : path
        Folder with results.json and predictions.csv (from ``kinfit fit``), optionally
        posterior.json, posterior_draws.csv, posterior_bands.csv and diagnosis.json.

    Returns
    -------
    ReportInputs

    Raises
    ------
    StudyError
        No results in ``fit_dir``, a results file of another study, or an unreadable file.
    """
    if not isinstance(study, Study):
        study = load_study(study)
    fit_dir = Path(fit_dir)
    result = FitResult.load(fit_dir)
    obs = _observation_frame(result)
    _check_runs(study, result, obs)
    notes: list[str] = []
    hashes = {name: file_sha256(fit_dir / name) for name in ("results.json", "predictions.csv")}
    posterior = draws = bands = diagnosis = None
    if (fit_dir / "posterior.json").is_file():
        posterior = _read_json(fit_dir / "posterior.json")
    found = draws_file(fit_dir)
    if found is not None:
        draws = _read_csv(found, ())
    if (fit_dir / "posterior_bands.csv").is_file():
        bands = _read_csv(fit_dir / "posterior_bands.csv", ("run", "time [s]", "q05", "q95"))
        bands = bands.assign(run=bands["run"].astype(str))
    if (fit_dir / "diagnosis.json").is_file():
        diagnosis = _read_json(fit_dir / "diagnosis.json")
    for name in OPTIONAL_FILES:
        if (fit_dir / name).is_file():
            hashes[name] = file_sha256(fit_dir / name)
    spec, curves, check = None, {}, None
    try:
        spec, curves, check = _curves(study, result, obs)
    except (KinfitError, ImportError, ValueError, FloatingPointError) as exc:
        notes.append(f"the fitted model could not be rebuilt from the study ({exc}); the "
                     "fitted values are drawn at the observation times only")
    if check is not None and check > 1e-6:
        notes.append(f"the model rebuilt from the study differs from the saved fitted values "
                     f"by up to {check:.2g} (relative): the study, its data or kinfit changed "
                     "since the fit; rerun 'kinfit fit' before using this report")
    return ReportInputs(study=study, result=result, fit_dir=fit_dir, posterior=posterior,
                        draws=draws, bands=bands, diagnosis=diagnosis, observations=obs,
                        curves=curves, model_check=check, spec=spec, notes=tuple(notes),
                        input_hashes=hashes)
