"""Predict every run of a study at given parameter values: profiles (or rates), the transport
state at each point, and per-run criteria and regime. Used by ``kinfit simulate`` to plan
campaigns and make synthetic data, and by the fit to report per-run criteria."""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from kinfit.criteria import Thresholds
from kinfit.model import Model, ModelSpec
from kinfit.parameters import ParameterTable
from kinfit.study import Study

__all__ = ["Simulation", "simulate", "run_table", "point_table"]


@dataclass(frozen=True)
class Simulation:
    """Predictions of a study at one parameter set.

    Attributes
    ----------
    predictions : DataFrame
        One row per observation: run, time, predicted concentration (or rate), eta, Thiele
        modulus, surface concentration, observed rate.
    runs : dict
        Run id -> criteria at the run's initial conditions (results-contract keys).
    """

    predictions: pd.DataFrame
    runs: dict[str, dict[str, Any]]


def run_table(model: Model, theta_row: NDArray[np.float64], *,
              thresholds: Thresholds | None = None) -> dict[str, dict[str, Any]]:
    """Per-run criteria and regime at each run's initial conditions (results contract)."""
    state = model.run_states(theta_row, thresholds=thresholds)
    c = state.criteria
    passes = c.passes()
    intrinsic = c.intrinsic()
    out: dict[str, dict[str, Any]] = {}
    for i, rid in enumerate(state.run_ids):
        out[rid] = {
            "thiele_modulus": float(c.thiele_modulus[i]),
            "effectiveness_factor": float(c.effectiveness_factor[i]),
            "weisz_prater": float(c.weisz_prater[i]),
            "mears": float(c.mears[i]),
            "carberry": float(c.carberry[i]),
            "regime": str(c.regime[i]),
            "shares": {"film": float(c.film_share[i]), "pore": float(c.pore_share[i]),
                       "reaction": float(c.reaction_share[i])},
            "observed_rate": float(state.observed.rate[i]),
            "surface_concentration": float(state.observed.surface_concentration[i]),
            "kc": float(state.kc[i]),
            "order": float(c.order[i]),
            "passes": {k: bool(v[i]) for k, v in passes.items()},
            "intrinsic": bool(intrinsic[i]),
            "thresholds": c.thresholds,
        }
    return out


def point_table(model: Model, theta_row: NDArray[np.float64], predicted: NDArray[np.float64]
                ) -> pd.DataFrame:
    """Per-observation predictions and transport state."""
    batch = model.spec.reactor == "batch"
    conc = predicted if batch else model.C0[model.run_index]
    state, kc = model.point_states(theta_row, conc)
    frame = pd.DataFrame({
        "run": np.asarray(model.run_ids)[model.run_index],
        "time [s]": model.times,
    })
    if batch:
        frame["concentration [mol/m^3]"] = predicted
    else:
        frame["rate [mol/(kg*s)]"] = predicted
    frame["effectiveness_factor [-]"] = state.effectiveness
    frame["thiele_modulus [-]"] = state.thiele_modulus
    frame["surface_concentration [mol/m^3]"] = state.surface_concentration
    frame["observed_rate [mol/(kg*s)]"] = state.rate
    frame["kc [m/s]"] = kc
    return frame


def simulate(study: Study, *, spec: ModelSpec | None = None,
             thresholds: Thresholds | None = None) -> Simulation:
    """Predict every run at the study's parameter values (``value`` of each parameter),
    whatever their ``vary`` flags say: simulating at known values needs nothing to vary."""
    if spec is None:
        # the model's columns are its varying parameters; marking all of them varying makes
        # the column vector the full set of study values, which is what is predicted at
        table = ParameterTable([replace(study.parameters[n], vary=True)
                                for n in study.parameters])
        spec = ModelSpec.from_study(study, parameters=table)
    model = Model(spec, study)
    theta = model.x0
    pred = model.predict(theta[None, :])[0]
    return Simulation(point_table(model, theta, pred), run_table(model, theta,
                                                                 thresholds=thresholds))


def runs_frame(runs: dict[str, dict[str, Any]]) -> pd.DataFrame:
    """The per-run dictionary as a flat table."""
    rows = []
    for rid, d in runs.items():
        rows.append({
            "run": rid, "regime": d["regime"], "thiele_modulus [-]": d["thiele_modulus"],
            "effectiveness_factor [-]": d["effectiveness_factor"],
            "weisz_prater [-]": d["weisz_prater"], "mears [-]": d["mears"],
            "carberry [-]": d["carberry"], "film_share [-]": d["shares"]["film"],
            "pore_share [-]": d["shares"]["pore"], "reaction_share [-]": d["shares"]["reaction"],
            "intrinsic": d["intrinsic"],
        })
    return pd.DataFrame(rows)


__all__ += ["runs_frame"]
