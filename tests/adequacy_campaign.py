"""An invented slurry campaign for the adequacy tests and their benchmark (INVENTED data).

16 batch runs in water: 40, 50, 60, 70 degC x 300 / 900 rpm x 10 / 200 um spheres, loading
1.0 or 2.0 g/L and starting concentration 0.5 or 1.0 mol/L in a balanced pattern, 8 samples a
run over 60 min; a first-order power law with Ea = 72 kJ/mol, film by the agitation law and
pore diffusion fitted directly. Noise 6 mol/m^3 (constant).

Two truths:
- ``transport="blind"``: effective diffusivity and film coefficient independent of temperature
  (the fitted model is then right);
- ``transport="viscosity"``: De(T) = De_ref (T/T_ref) mu(T_ref)/mu(T) and
  kc(T) = kc_ref (D(T)/D_ref)^(2/3) (nu(T)/nu_ref)^(-5/12) (Stokes-Einstein and the
  Sano et al. 1974 slurry form), water viscosity and density from the IAPWS formulations in
  the ``chemicals`` library (Huber et al. 2009; Wagner & Pruss 2002), fitted with
  temperature-blind transport (the fitted model is then wrong).

The generator writes per-run values of De and kc_ref through a study with ``scope = "run"``
for those two parameters, so it uses kinfit's own batch model for the profiles.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
from studies import numbered, profile_rows, profiles_csv, runs_csv, study_text, write_study

__all__ = ["TRUTH", "NOISE", "T_REF_C", "design", "water_factors", "write_campaign",
           "fitting_study", "truth_profiles"]

T_REF_C = 55.0
NOISE = 6.0  # mol/m^3
TRUTH = {"k_ref": "2.0 mol/(kg*s)", "activation_energy": "72 kJ/mol", "order": 1.0,
         "effective_diffusivity": "1e-10 m^2/s", "kc_ref": "2e-5 m/s",
         "agitation_exponent": 0.6, "size_exponent": 0.5}
_TIMES_MIN = np.linspace(0.0, 100.0, 15)


def design() -> list[tuple[object, ...]]:
    """(run, T [degC], N [rpm], dp [um], loading [g/L], C0 [mol/L]) rows."""
    rows = [(T, N, dp, w, 0.8) for T in (40.0, 55.0, 70.0) for N in (300.0, 1200.0)
            for dp in (10.0, 250.0) for w in (1.0, 2.5)]
    return numbered(rows)


def water_factors(T_c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """De(T)/De_ref and kc(T)/kc_ref for water, reference 55 degC (see the module note)."""
    from chemicals.iapws import iapws95_rho
    from chemicals.viscosity import mu_IAPWS

    def props(T: float) -> tuple[float, float]:
        rho = iapws95_rho(T, 101325.0)
        return mu_IAPWS(T, rho), rho

    T = np.asarray(T_c, dtype=float) + 273.15
    T0 = T_REF_C + 273.15
    mu0, rho0 = props(T0)
    mu = np.array([props(t)[0] for t in T])
    rho = np.array([props(t)[1] for t in T])
    d_ratio = (T / T0) * mu0 / mu
    nu_ratio = (mu / rho) / (mu0 / rho0)
    return d_ratio, d_ratio ** (2.0 / 3.0) * nu_ratio ** (-5.0 / 12.0)


def _obs_template(rows: list[tuple[object, ...]]) -> str:
    return profiles_csv([(r[0], f"{t:.4f}", "100.0") for r in rows for t in _TIMES_MIN])


def truth_profiles(folder: Path, *, transport: str) -> tuple[Any, np.ndarray]:
    """The model (of the fitting study) and the noise-free profiles of the chosen truth."""
    from kinfit.model import Model, ModelSpec
    from kinfit.study import load_study

    rows = design()
    params: dict[str, object] = dict(TRUTH)
    params["effective_diffusivity"] = {"value": TRUTH["effective_diffusivity"], "scope": "run"}
    params["kc_ref"] = {"value": TRUTH["kc_ref"], "scope": "run"}
    gen = write_study(folder / "truth", study_text(params, reference_temperature=f"{T_REF_C} degC",
                                                  pellet="direct"),
                      runs_csv(rows), _obs_template(rows))
    study = load_study(gen)
    model = Model(ModelSpec.from_study(study), study)
    theta = model.x0.copy()
    if transport == "viscosity":
        d_ratio, kc_ratio = water_factors(np.array([float(r[1]) for r in rows]))
    elif transport == "blind":
        d_ratio = kc_ratio = np.ones(len(rows))
    else:
        raise ValueError(f"transport must be 'blind' or 'viscosity', got {transport!r}")
    cols = list(model.columns)
    for i, rid in enumerate(model.run_ids):
        theta[cols.index(f"effective_diffusivity[{rid}]")] *= d_ratio[i]
        theta[cols.index(f"kc_ref[{rid}]")] *= kc_ratio[i]
    return model, model.predict(theta[None, :])[0]


def fitting_study(*, noise_stated: bool = True) -> str:
    """The study text fitted to the campaign: temperature-blind transport, starts off the truth,
    and the noise stated as a fixed sigma when ``noise_stated``."""
    params: dict[str, object] = {
        "k_ref": {"value": "1 mol/(kg*s)", "min": "1e-4 mol/(kg*s)", "max": "100 mol/(kg*s)"},
        "activation_energy": {"value": "60 kJ/mol", "min": "5 kJ/mol", "max": "200 kJ/mol"},
        "order": {"value": 1.0, "min": 0.2, "max": 2.5},
        "effective_diffusivity": {"value": "2e-10 m^2/s", "min": "1e-12 m^2/s",
                                  "max": "1e-8 m^2/s"},
        "kc_ref": {"value": "3e-5 m/s", "min": "1e-7 m/s", "max": "1e-2 m/s"},
        "agitation_exponent": {"value": 0.5, "min": 0.0, "max": 1.5},
        "size_exponent": {"value": 0.5, "vary": False},
    }
    if noise_stated:
        params["sigma"] = {"value": f"{NOISE} mol/m^3", "vary": False}
    return study_text(params, reference_temperature=f"{T_REF_C} degC", pellet="direct",
                      comment="INVENTED campaign for the adequacy tests")


def write_campaign(folder: Path, y: np.ndarray, model: Any, *, noise_stated: bool = True
                   ) -> Path:
    """Write the fitting study with observations ``y`` (mol/m^3); return its path."""
    obs = profiles_csv(profile_rows(model, y, fmt=".8g"))
    return write_study(folder, fitting_study(noise_stated=noise_stated), runs_csv(design()),
                       obs)
