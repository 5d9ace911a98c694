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
            **c.shares.at(i),
            "observed_rate": float(state.observed.rate[i]),
            "surface_concentration": float(state.observed.surface_concentration[i]),
            "kc": float(state.kc[i]),
            "order": float(c.order[i]),
            "passes": {k: bool(v[i]) for k, v in passes.items()},
            "intrinsic": bool(intrinsic[i]),
            "thresholds": c.limits_at(i),
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


#: temperature span [K] of transport-affected runs above which unscaled transport is flagged
SCALING_SPAN = 10.0


def transport_scaling_warning(study: Study, spec: ModelSpec | None = None) -> str | None:
    """A warning when De and kc are held constant over a temperature span that matters.

    When the study names no liquid, transport is not scaled with temperature (``temperature_scaling =
    "none"``); a liquid's diffusivity rises by about 2 % per K near room temperature
    (Stokes-Einstein, D ~ T/mu), so when the runs that transport affects (regime other than
    "kinetic" at the study's parameter values) span more than :data:`SCALING_SPAN` K the
    intrinsic activation energy takes up the diffusion's own.

    Returns
    -------
    str or None
        The warning text, or None when nothing needs saying.
    """
    from kinfit.errors import KinfitError

    spec = spec or ModelSpec.from_study(study)
    sc = spec.scaling
    transport = spec.pellet != "none" or spec.film.name != "none"
    if not transport or study.fluid.get("solvent") or (sc.pellet == "viscosity"
                                                        and sc.film == "viscosity"):
        return None
    try:
        model = Model(spec, study)
        table = run_table(model, model.x0)
        temps = [r.temperature for r in study.runs if table[r.id]["regime"] != "kinetic"]
        basis = "transport-affected runs at the study's parameter values"
    except KinfitError:
        temps = [r.temperature for r in study.runs]
        basis = "runs"
    if not temps or max(temps) - min(temps) <= SCALING_SPAN:
        return None
    off = [w for w, v in (("[pellet]", sc.pellet if spec.pellet != "none" else "viscosity"),
                          ("[film]", sc.film if spec.film.name != "none" else "viscosity"))
           if v == "none"]
    return (f"warning: the {basis} span {max(temps) - min(temps):.0f} K but "
            f"{' and '.join(off)} temperature_scaling {'are' if len(off) > 1 else 'is'} "
            "\"none\": De and kc are held at "
            "their reference values, so the intrinsic activation energy absorbs the "
            "diffusion's own (about 17 kJ/mol in water at 40-70 degC); name the liquid in "
            "[fluid] (e.g. solvent = \"water\") to scale them with its viscosity, or set "
            "temperature_scaling = \"none\" knowingly")
