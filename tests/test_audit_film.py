"""The audit's film signature in a liquid: a film-controlled campaign in water shows the
film's own apparent activation energy (about 17 kJ/mol), not zero."""

from __future__ import annotations

import warnings
from dataclasses import replace

import numpy as np
from studies import noisy_batch_campaign, numbered, study_text

from kinfit.audit import audit_claims
from kinfit.audit_film import FILM_EA_LIMIT
from kinfit.fitting import FitOptions, fit_model, main_spec
from kinfit.model import ModelSpec
from kinfit.simulate import run_table

CLAIM = """\
[claim]
name = "supplier"
k_ref = "{k!r} mol/(kg*s)"
reference_temperature = "60 degC"
activation_energy = "{Ea!r} J/mol"
order = {n!r}
effective_diffusivity = "1e-8 m^2/s"
[catalyst]
geometry = "sphere"
particle_density = "1500 kg/m^3"
[film]
kc = "1e-5 m/s"
[fluid]
solvent = "water"
[data]
runs = "runs.csv"
observations = "observations.csv"
"""


def test_film_controlled_claim_in_water_shows_the_films_activation_energy(tmp_path):
    # invented film-controlled campaign in water (Ca near 1): the rate is kc a_m Cb, so its
    # apparent activation energy is the film's, D^(2/3) nu^(-5/12) with D ~ T/mu (Sano,
    # Yamaguchi & Adachi 1974 form; Wilke & Chang 1955), about 17 kJ/mol, above the fixed
    # 15 kJ/mol "near zero" cut (common practice) that would miss it
    truth = study_text(
        {"k_ref": "40 mol/(kg*s)", "activation_energy": "70 kJ/mol", "order": 1.0,
         "effective_diffusivity": "1e-8 m^2/s", "kc_ref": "1e-5 m/s",
         "agitation_exponent": 0.5, "size_exponent": 0.5},
        vary={"effective_diffusivity": False, "kc_ref": False, "agitation_exponent": False,
              "size_exponent": False},
        reference_temperature="60 degC", reference_speed="800 rpm", reference_diameter="100 um",
        pellet="direct", observations="observations.csv",
        sections='\n[fluid]\nsolvent = "water"\n')
    runs = numbered((T, 800, 100, 2, c0) for T in (40, 55, 70) for c0 in (0.5, 1.0))
    study, model = noisy_batch_campaign(tmp_path, truth, runs, np.linspace(0.0, 120.0, 9),
                                        sigma=2.0, seed=5, spec=main_spec)
    assert all(r["regime"] == "film" for r in run_table(model, model.x0).values())
    bare = replace(study, film={"model": "none"}, pellet={"diffusivity": "none"})
    spec = ModelSpec.from_study(bare, parameters=study.parameters.subset(
        ["k_ref", "activation_energy", "order"]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        claimed = fit_model(spec, bare, FitOptions(profile=False)).estimates()
    assert FILM_EA_LIMIT < claimed["activation_energy"] < 20e3  # what the supplier saw
    path = tmp_path / "claim.toml"
    path.write_text(CLAIM.format(k=claimed["k_ref"], Ea=claimed["activation_energy"],
                                 n=claimed["order"]))
    c = audit_claims(path).claims[0]
    sig = c.signatures["film"]
    assert sig["found"] is True, sig["text"]
    lo, hi = sig["film_activation_energy"]["interval"]
    assert 13e3 < lo <= sig["film_activation_energy"]["estimate"] <= hi < 19e3
    assert sig["film_runs"]  # the transport-aware refit labels runs film
    assert c.verdict == "transport-contaminated"
