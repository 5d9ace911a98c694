"""Generate the demo campaign (INVENTED DATA) from stated true parameters with kinfit's physics.

Scenario (invented, corresponds to no real catalyst or process): liquid-phase hydrogenation of
a substrate "A" over a porous supported-palladium catalyst (spheres, particle density
1500 kg/m^3) in a 0.3 L stirred slurry autoclave under constant hydrogen pressure, hydrogen in
excess so that the rate is of pseudo-order 1.5 in A. 24 runs: 3 temperatures x 2 stirrer speeds
x 2 particle diameters x 2 catalyst loadings, 15 samples a run. Small particles at high speed
are kinetic; large particles are pore-limited; small particles at low speed and high temperature
lean on the film.

Noise model: normal, constant standard deviation SIGMA (mol/m^3), independent; seed SEED.

Run from the repository root:  python3 examples/demo/generate.py
It writes runs.csv and observations.csv beside this file. truth.toml holds the true parameters
(a study file that `kinfit simulate` reproduces the noiseless profiles from); study.toml holds
the fit's start values.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
SEED = 20261201
SIGMA = 4.0  # mol/m^3, constant measurement noise
TEMPERATURES_C = (40.0, 55.0, 70.0)
SPEEDS_RPM = (300.0, 1200.0)
DIAMETERS_UM = (10.0, 250.0)
LOADINGS_G_L = (1.0, 2.5)
C0_MOL_L = 0.8
N_SAMPLES = 15
TARGET_CONVERSION = 0.85


def _write_runs() -> pd.DataFrame:
    rows = []
    i = 0
    for T in TEMPERATURES_C:
        for N in SPEEDS_RPM:
            for dp in DIAMETERS_UM:
                for w in LOADINGS_G_L:
                    i += 1
                    rows.append({
                        "run": f"R{i:02d}", "temperature [degC]": T, "stirrer_speed [rpm]": N,
                        "particle_diameter [um]": dp, "catalyst_loading [g/L]": w,
                        "initial_concentration [mol/L]": C0_MOL_L,
                        "note": "invented demo data",
                    })
    runs = pd.DataFrame(rows)
    runs.to_csv(HERE / "runs.csv", index=False)
    return runs


def _write_observations(runs: pd.DataFrame, times_min: dict[str, np.ndarray],
                        conc_mol_m3: dict[str, np.ndarray] | None) -> None:
    rows = []
    for rid in runs["run"]:
        t = times_min[rid]
        c = conc_mol_m3[rid] if conc_mol_m3 else np.full(t.size, C0_MOL_L * 1000.0)
        rows += [{"run": rid, "time [min]": round(float(ti), 3),
                  "concentration [mol/m^3]": round(float(ci), 3)} for ti, ci in zip(t, c)]
    pd.DataFrame(rows).to_csv(HERE / "observations.csv", index=False)


def main() -> None:
    from kinfit.model.compiled import Model, ModelSpec
    from kinfit.study.load import load_study

    runs = _write_runs()
    # provisional sampling plan on a long horizon, to find each run's duration
    long = {rid: np.linspace(0.0, 2000.0, 400) for rid in runs["run"]}
    _write_observations(runs, long, None)
    truth = load_study(HERE / "truth.toml")
    model = Model(ModelSpec.from_study(truth), truth)
    theta = model.x0[None, :]
    pred = model.predict(theta)[0]
    times: dict[str, np.ndarray] = {}
    for i, rid in enumerate(truth.run_ids):
        sel = model.run_index == i
        t = model.times[sel] / 60.0
        c = pred[sel] / (C0_MOL_L * 1000.0)
        hit = np.nonzero(c <= 1.0 - TARGET_CONVERSION)[0]
        t_end = t[hit[0]] if hit.size else t[-1]
        t_end = max(5.0, float(np.ceil(t_end / 5.0) * 5.0))
        times[rid] = np.linspace(0.0, t_end, N_SAMPLES)
    _write_observations(runs, times, None)
    truth = load_study(HERE / "truth.toml")
    model = Model(ModelSpec.from_study(truth), truth)
    clean = model.predict(model.x0[None, :])[0]
    rng = np.random.default_rng(SEED)
    noisy = clean + rng.normal(loc=0.0, scale=SIGMA, size=clean.size)
    noisy[np.concatenate([[0], np.cumsum([r.n_obs for r in truth.runs])[:-1]])] = (
        C0_MOL_L * 1000.0 + rng.normal(loc=0.0, scale=SIGMA, size=len(truth.runs)))
    noisy = np.maximum(noisy, 0.0)
    conc = {rid: noisy[model.run_index == i] for i, rid in enumerate(truth.run_ids)}
    _write_observations(runs, times, conc)
    state = model.run_states(model.x0)
    for rid, reg, eta, ca in zip(state.run_ids, state.criteria.regime,
                                 state.criteria.effectiveness_factor, state.criteria.carberry):
        print(f"{rid}: regime {reg:8s} eta {eta:.3f} Ca {ca:.3f}")


if __name__ == "__main__":
    main()
