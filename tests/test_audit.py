"""`kinfit audit`: claims made from synthetic campaigns of known regime (kinfit's own physics at
stated true values, seeded noise) must get the verdict the regime implies.

Facts checked (sources in each test): film control shows as a Carberry number near 1 and an
apparent activation energy near zero (Carberry 1976; common practice); strong pore diffusion
halves the activation energy (Weisz & Prater 1954; Satterfield 1970; Aris 1965; Bischoff 1965:
E_app/E = 0.526 at phi_R = 20); a claim at the true values of kinetic-regime data lies inside
the joint 95 % region (Beale 1960; Bates & Watts 1988).
"""

from __future__ import annotations

import argparse
import math
import warnings
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from studies import noisy_batch_campaign, numbered, study_text

from kinfit.audit import (
    FILM_EA_LIMIT,
    VERDICTS,
    add_audit_arguments,
    audit_claims,
    load_claims,
    run_audit_command,
)
from kinfit.errors import StudyError
from kinfit.fitting import FitOptions, fit_model, main_spec
from kinfit.model import ModelSpec


def truth_study(k: float, Ea: float, n: float, De: float, kc: float, dp: float) -> str:
    """The study at the true values: k_ref [mol/(kg s)], Ea [kJ/mol], order, De [m^2/s] and kc
    [m/s] (both fixed), agitation film referred to 800 rpm and the campaign's diameter dp
    [um]."""
    return study_text(
        {"k_ref": f"{k} mol/(kg*s)", "activation_energy": f"{Ea} kJ/mol", "order": n,
         "effective_diffusivity": f"{De} m^2/s", "kc_ref": f"{kc} m/s",
         "agitation_exponent": 0.5, "size_exponent": 0.5},
        vary={"effective_diffusivity": False, "kc_ref": False, "agitation_exponent": False,
              "size_exponent": False},
        reference_temperature="60 degC", reference_speed="800 rpm",
        reference_diameter=f"{dp} um", pellet="direct", observations="observations.csv",
    )


CLAIM = """\
[claim]
name = "supplier"
k_ref = "{k!r} mol/(kg*s)"
reference_temperature = "60 degC"
activation_energy = "{Ea!r} J/mol"
order = {n!r}
effective_diffusivity = "{De} m^2/s"
[catalyst]
geometry = "sphere"
particle_density = "1500 kg/m^3"
[film]
kc = "{kc} m/s"
[data]
runs = "runs.csv"
observations = "observations.csv"
"""

#: regimes of the synthetic campaigns (true values; De and kc are known to the auditor)
FILM = dict(k=10.0, Ea=70, n=1.0, De=1e-8, kc=1e-5, dp=100)
KINETIC = dict(k=0.02, Ea=70, n=1.0, De=5e-10, kc=2e-4, dp=20)
PORE = dict(k=1.0, Ea=80, n=1.0, De=2e-10, kc=1e-3, dp=500)


def campaign(folder: Path, truth: dict, *, sigma: float = 3.0, seed: int = 7):
    """Six batch runs (50, 60, 70 degC x 0.5, 1 mol/L) at one speed and one particle size,
    generated with Model.predict at the true values plus seeded Gaussian noise."""
    runs = numbered((T, 800, truth["dp"], 2, c0) for T in (50, 60, 70) for c0 in (0.5, 1.0))
    return noisy_batch_campaign(folder, truth_study(**truth), runs, np.linspace(0.0, 120.0, 9),
                                sigma=sigma, seed=seed, spec=main_spec)


def apparent_fit(study) -> dict[str, float]:
    """What a supplier reports: a power law fitted with no film and no pellet."""
    bare = replace(study, film={"model": "none"}, pellet={"diffusivity": "none"})
    spec = ModelSpec.from_study(bare, parameters=study.parameters.subset(
        ["k_ref", "activation_energy", "order"]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fit_model(spec, bare, FitOptions(profile=False)).estimates()


def write_claim(folder: Path, values: dict, truth: dict) -> Path:
    path = folder / "claim.toml"
    path.write_text(CLAIM.format(k=values["k_ref"], Ea=values["activation_energy"],
                                 n=values["order"], De=truth["De"], kc=truth["kc"]))
    return path


def test_film_limited_claim_is_transport_contaminated(tmp_path):
    # film control: Ca = 1 - Cs/Cb near 1 (Carberry 1976) and E_app near zero because the film
    # coefficient of the agitation law does not depend on temperature (common practice)
    study, model = campaign(tmp_path, FILM)
    from kinfit.simulate import run_table

    truth_runs = run_table(model, model.x0)
    assert all(r["regime"] == "film" for r in truth_runs.values())  # the fixture's regime
    claimed = apparent_fit(study)
    assert claimed["activation_energy"] < FILM_EA_LIMIT
    result = audit_claims(write_claim(tmp_path, claimed, FILM))
    c = result.claims[0]
    assert c.verdict == "transport-contaminated"
    assert any("Carberry" in e for e in c.evidence)
    assert c.signatures["film"]["found"] is True
    cas = [r["observable"]["carberry"] for r in c.conditions["runs"].values()]
    assert max(cas) > 0.5  # most of the driving force is spent in the film


def test_kinetic_regime_claim_at_true_values_is_consistent(tmp_path):
    # kinetic regime (eta > 0.99, Ca < 0.01 by construction): the true values must pass every
    # criterion and lie inside the joint 95 % region of both refits (Beale 1960)
    study, model = campaign(tmp_path, KINETIC)
    st = model.run_states(model.x0)
    assert np.all(st.criteria.effectiveness_factor > 0.99)
    assert np.all(st.criteria.carberry < 0.01)
    truth = {"k_ref": KINETIC["k"], "activation_energy": KINETIC["Ea"] * 1e3,
             "order": KINETIC["n"]}
    c = audit_claims(write_claim(tmp_path, truth, KINETIC)).claims[0]
    assert c.verdict == "consistent with intrinsic kinetics", c.evidence
    assert not c.evidence and not c.missing
    for r in c.reproduction.values():
        assert r["inside_joint_region"] and r["p_value"] > 0.05
        assert r["sse_claim"] <= r["joint_region_bound"]


def test_joint_region_bound_follows_beale(tmp_path):
    # S_hat [1 + p/(n-p) F(p, n-p; 0.95)] (Beale 1960), computed here with scipy directly
    from scipy import stats

    study, _ = campaign(tmp_path, KINETIC)
    claimed = apparent_fit(study)
    c = audit_claims(write_claim(tmp_path, claimed, KINETIC)).claims[0]
    r = c.reproduction["as_observed"]
    n, p = r["n_obs"], r["n_params"]
    assert (n, p) == (54, 3)
    bound = r["sse_optimum"] * (1 + p / (n - p) * stats.f.ppf(0.95, p, n - p))
    assert r["joint_region_bound"] == pytest.approx(bound, rel=1e-12)
    # the apparent fit's own optimum is the claim: LR = 0, p = 1
    assert r["likelihood_ratio"] == pytest.approx(0.0, abs=1e-4)
    assert r["p_value"] == pytest.approx(1.0, abs=1e-3)


def test_pore_limited_claim_with_half_activation_energy_is_flagged(tmp_path):
    # strong pore diffusion: E_app = E/2 (Weisz & Prater 1954; Satterfield 1970); for a
    # first-order sphere E_app/E = 0.526 at phi_R = 20 (Aris 1965; Bischoff 1965 [calc])
    study, model = campaign(tmp_path, PORE)
    st = model.run_states(model.x0)
    assert np.all(st.criteria.regime == "pore")
    claimed = apparent_fit(study)
    ratio = claimed["activation_energy"] / (PORE["Ea"] * 1e3)
    assert 0.45 < ratio < 0.6
    c = audit_claims(write_claim(tmp_path, claimed, PORE)).claims[0]
    assert c.verdict == "transport-contaminated"
    sig = c.signatures["pore_activation_energy"]
    assert sig["found"] is True
    assert sig["ratio"] == pytest.approx(0.5, abs=0.1)
    assert sig["intrinsic"] == pytest.approx(PORE["Ea"] * 1e3, rel=0.05)
    assert any("about half" in e for e in c.evidence)
    assert any("Weisz-Prater" in e for e in c.evidence)
    # the transport-aware refit rejects the claimed (apparent) values
    assert c.reproduction["transport_aware"]["rejected"]
    assert not c.reproduction["as_observed"]["rejected"]


CONDITIONS_ONLY = """\
[claim]
name = "brochure"
k_ref = "0.05 mol/(kg*s)"
reference_temperature = "60 degC"
activation_energy = "60 kJ/mol"
order = 1
[catalyst]
geometry = "sphere"
particle_density = "1500 kg/m^3"
[conditions]
temperature = ["50 degC", "70 degC"]
stirrer_speed = "600 rpm"
particle_diameter = "100 um"
catalyst_loading = "2 g/L"
initial_concentration = "0.5 mol/L"
{extra}
"""


def test_claim_without_film_pellet_or_data_is_not_testable(tmp_path):
    path = tmp_path / "claim.toml"
    path.write_text(CONDITIONS_ONLY.format(extra=""))
    c = audit_claims(path).claims[0]
    assert c.verdict == "not testable with these data"
    text = " ".join(c.missing)
    assert "film coefficient" in text and "effective diffusivity" in text and "data" in text
    assert all(r["observable"]["carberry"] is None for r in c.conditions["runs"].values())


def test_observable_criteria_against_hand_formulas(tmp_path):
    # Ca = r/(kc a_m Cb) with a_m = 6/(rho_p dp) (Carberry 1976); Psi_L = r rho_p L^2/(De Cs)
    # with L = dp/6 and Cs = Cb (1 - Ca) (Weisz & Prater 1954, Aris normalisation);
    # Mears = r rho_p (dp/2) n/(kc Cb) (Mears 1971)
    path = tmp_path / "claim.toml"
    path.write_text(CONDITIONS_ONLY.format(extra='[film]\nkc = "5e-5 m/s"\n[pellet]\n'
                                                 'effective_diffusivity = "4e-10 m^2/s"'))
    c = audit_claims(path).claims[0]
    R = 8.314462618
    for run in c.conditions["runs"].values():
        T, dp, Cb = run["temperature"], run["particle_diameter"], run["initial_concentration"]
        r = 0.05 * math.exp(-60e3 / R * (1 / T - 1 / 333.15)) * (Cb / 1000.0)
        a_m = 6.0 / (1500.0 * dp)
        ca = r / (5e-5 * a_m * Cb)
        assert run["observable"]["carberry"] == pytest.approx(ca, rel=1e-9)
        psi = r * 1500.0 * (dp / 6) ** 2 / (4e-10 * Cb * (1 - ca))
        assert run["observable"]["weisz_prater"] == pytest.approx(psi, rel=1e-9)
        assert run["observable"]["mears"] == pytest.approx(r * 1500 * dp / 2 / (5e-5 * Cb),
                                                           rel=1e-9)
    assert c.verdict in VERDICTS


def test_rate_constant_and_pre_exponential_forms(tmp_path):
    # r = k' C^n gives k_ref = k' C_ref^n (derived); k_ref = A exp(-Ea/(R T_ref)) (Arrhenius)
    base = CONDITIONS_ONLY.format(extra="")
    path = tmp_path / "claim.toml"
    path.write_text(base.replace('k_ref = "0.05 mol/(kg*s)"',
                                 'rate_constant = "2e-5 m^3/(kg*s)"'))
    assert load_claims(path).claims[0].k_ref == pytest.approx(0.02, rel=1e-12)
    path.write_text(base.replace('k_ref = "0.05 mol/(kg*s)"\nreference_temperature = "60 degC"',
                                 'pre_exponential_factor = "3e8 mol/(kg*s)"'))
    claim = load_claims(path).claims[0]
    T_ref = 1.0 / np.mean([1 / 323.15, 1 / 343.15])  # harmonic mean (Schwaab & Pinto 2007)
    assert claim.reference_temperature == pytest.approx(T_ref, rel=1e-12)
    assert claim.k_ref == pytest.approx(3e8 * math.exp(-60e3 / (8.314462618 * T_ref)),
                                        rel=1e-9)


@pytest.mark.parametrize("edit, match", [
    (("order = 1\n", ""), r"claim.toml \[claim 'brochure'\]: 'order' is missing"),
    (("order = 1", "order = 4"), r"order = 4 lies outside \[0, 3\]"),
    (("[conditions]", "[data]\nruns = \"r.csv\"\nobservations = \"o.csv\"\n[conditions]"),
     r"either \[conditions\] or \[data\]"),
    (("stirrer_speed = \"600 rpm\"", "stirrer_speed = \"600 kg\""), r"stirrer_speed"),
    (("[catalyst]", "[catalist]\n[catalyst]"), r"unknown section\(s\) \['catalist'\]"),
])
def test_bad_claim_files_name_the_problem(tmp_path, edit, match):
    path = tmp_path / "claim.toml"
    path.write_text(CONDITIONS_ONLY.format(extra="").replace(*edit))
    with pytest.raises(StudyError, match=match):
        load_claims(path)


def test_film_coefficient_needs_exponents_when_speeds_differ(tmp_path):
    text = CONDITIONS_ONLY.format(extra='[film]\nkc = "5e-5 m/s"').replace(
        'stirrer_speed = "600 rpm"', 'stirrer_speed = ["300 rpm", "900 rpm"]')
    path = tmp_path / "claim.toml"
    path.write_text(text)
    with pytest.raises(StudyError, match=r"\[film\]: the runs use several values of "
                                         r"stirrer_speed; give the speed"):
        audit_claims(path)
    path.write_text(text.replace('kc = "5e-5 m/s"', 'kc = "5e-5 m/s"\nspeed = "600 rpm"\n'
                                 'agitation_exponent = 0.5'))
    runs = audit_claims(path).claims[0].conditions["runs"]
    kc = sorted(r["observable"]["kc"] for r in runs.values())
    # agitation law kc = kc_ref (N/N_ref)^a (common practice)
    assert kc[0] == pytest.approx(5e-5 * 0.5**0.5) and kc[-1] == pytest.approx(5e-5 * 1.5**0.5)


def test_command_writes_reports_and_exit_codes(tmp_path, capsys):
    study, _ = campaign(tmp_path, PORE)
    path = write_claim(tmp_path, apparent_fit(study), PORE)
    parser = argparse.ArgumentParser()
    add_audit_arguments(parser)
    out = tmp_path / "out"
    assert run_audit_command(parser.parse_args([str(path), "--out", str(out)])) == 0
    assert (out / "audit.json").is_file() and (out / "audit.md").is_file()
    import json

    data = json.loads((out / "audit.json").read_text())
    assert data["claims"][0]["verdict"] == "transport-contaminated"
    assert "transport-contaminated" in (out / "audit.md").read_text()
    args = parser.parse_args([str(path), "--out", str(out), "--require-consistent"])
    assert run_audit_command(args) == 1
    assert "not every claim" in capsys.readouterr().err


def test_invented_example_claim():
    # the demo claim (examples/claim, invented data from truth.toml: Ea 76 kJ/mol, order 1.6,
    # strong pore diffusion): the datasheet's apparent values carry the pore signatures,
    # E_app ~ E/2 and order (n + 1)/2 = 1.3 (Weisz & Prater 1954); the transport-corrected
    # revision is reproduced by the transport-aware refit
    path = Path(__file__).resolve().parents[1] / "examples" / "claim" / "claim.toml"
    sheet, revised = audit_claims(path).claims
    assert sheet.verdict == "transport-contaminated"
    assert sheet.signatures["pore_activation_energy"]["found"] is True
    assert sheet.signatures["pore_order"]["found"] is True
    assert sheet.signatures["pore_order"]["expected_apparent"] == pytest.approx(1.3, abs=0.05)
    assert revised.verdict == "consistent with intrinsic kinetics"
    assert revised.reproduction["transport_aware"]["inside_joint_region"]
