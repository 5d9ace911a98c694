"""The quick criteria calculator against hand calculations from the published formulas
(Thiele 1939; Aris 1957; Weisz & Prater 1954; Carberry 1976; Mears 1971; Sano, Yamaguchi & Adachi 1974) and the tabulated effectiveness factors."""

from __future__ import annotations

import argparse
import json
import math

import pytest

from kinfit.calculator import (
    add_criteria_arguments,
    criteria_from_measurement,
    format_criteria,
    run_criteria_command,
)
from kinfit.errors import StudyError
from kinfit.transport.properties import make_fluid


def test_hand_calculation_sphere_first_order():
    # Carberry (1976): Ca = r/(kc a_m Cb), a_m = 6/(rho_p dp); Mears (1971) with the particle
    # density: r rho_p R n/(kc Cb); Weisz & Prater (1954): Psi_R = r rho_p R^2/(De Cs),
    # Psi_L = Psi_R (L/R)^2 = Psi_R/9 for a sphere (Weisz & Prater 1954). Hand numbers:
    # a_m = 6/(1500 * 75e-6) = 53.333 m^2/kg; Ca = 0.02/(1e-4 * 53.333 * 500) = 0.0075;
    # Cs = 500 (1 - 0.0075) = 496.25 mol/m^3; Mears = 0.02 * 1500 * 37.5e-6/(1e-4 * 500)
    # = 0.0225; Psi_R = 0.02 * 1500 * (37.5e-6)^2/(1e-9 * 496.25) = 0.0850126
    res = criteria_from_measurement(rate=0.02, particle_diameter=75e-6, particle_density=1500.0,
                                    bulk_concentration=500.0, effective_diffusivity=1e-9,
                                    film_coefficient=1e-4, order=1.0, geometry="sphere")
    assert res["external_area"] == pytest.approx(53.3333333, rel=1e-8)
    assert res["carberry"] == pytest.approx(0.0075, rel=1e-12)
    assert res["surface_concentration"] == pytest.approx(496.25, rel=1e-12)
    assert res["mears"] == pytest.approx(0.0225, rel=1e-12)
    assert res["mears"] == pytest.approx(3 * 1.0 * res["carberry"], rel=1e-12)  # 3 n Ca
    assert res["weisz_prater_radius"] == pytest.approx(0.0850126, rel=1e-6)
    assert res["weisz_prater"] == pytest.approx(res["weisz_prater_radius"] / 9, rel=1e-12)
    # limits for a 5 % rate error: Ca < 0.05/n (Carberry 1976), Mears < 0.15 for a sphere
    # (Mears 1971), Psi_R < 0.767 (first-order sphere eta = 0.95, from the closed form of
    # Thiele 1939), Psi_L = Psi_R/9
    assert res["thresholds"]["carberry"] == pytest.approx(0.05)
    assert res["thresholds"]["weisz_prater_radius"] == pytest.approx(0.7671, abs=2e-4)
    assert res["thresholds"]["weisz_prater"] == pytest.approx(
        res["thresholds"]["weisz_prater_radius"] / 9)
    assert res["thresholds"]["mears"] == pytest.approx(0.15)
    assert res["intrinsic"] is True and res["verdict"].startswith("intrinsic")
    # Weisz-Prater number equals eta Phi^2 for first order, L normalisation (Weisz & Prater
    # 1954)
    assert res["weisz_prater"] == pytest.approx(
        res["effectiveness_factor"] * res["thiele_modulus"] ** 2, rel=1e-8)


def test_thiele_modulus_from_weisz_prater_first_order_sphere():
    # first-order sphere, radius form: Psi_R = 3 (phi_R coth phi_R - 1) = eta phi_R^2 with
    # eta = 0.8059720811 at phi_R = 2 (Thiele 1939; computed from the closed form); in the Aris form
    # Phi = phi_R/3 (Thiele 1939; Aris 1957)
    phi_R, R, De, rho, Cs = 2.0, 5e-5, 1e-9, 1000.0, 100.0
    psi_R = 3.0 * (phi_R / math.tanh(phi_R) - 1.0)
    rate = psi_R * De * Cs / (rho * R**2)
    res = criteria_from_measurement(rate=rate, particle_diameter=2 * R, particle_density=rho,
                                    bulk_concentration=Cs, effective_diffusivity=De)
    assert res["carberry"] is None and res["mears"] is None  # no film data given
    assert res["weisz_prater_radius"] == pytest.approx(psi_R, rel=1e-12)
    assert res["effectiveness_factor"] == pytest.approx(0.8059720811, rel=1e-5)
    assert res["thiele_modulus"] == pytest.approx(phi_R / 3.0, rel=1e-5)
    assert res["intrinsic"] is False and "pore diffusion" in res["verdict"]


@pytest.mark.parametrize(("geometry", "psi_L", "eta"), [
    # Weisz & Prater 1954, values computed from the first-order closed form: eta implied by a given Psi
    ("sphere", 1.0 / 9.0, 0.935278),   # Psi_R = 1
    ("sphere", 0.3 / 9.0, 0.980173),   # Psi_R = 0.3
    ("sphere", 1.0, 0.563259),         # Psi_L = 1
    ("slab", 1.0, 0.694817),
    ("slab", 0.3, 0.902149),
    ("sphere", 3.0, 0.270000),
])
def test_effectiveness_implied_by_weisz_prater(geometry, psi_L, eta):
    L = {"sphere": 1e-4 / 6, "slab": 1e-4 / 2}[geometry]
    De, rho, Cs = 1e-9, 1200.0, 300.0
    rate = psi_L * De * Cs / (rho * L**2)
    res = criteria_from_measurement(rate=rate, particle_diameter=1e-4, particle_density=rho,
                                    bulk_concentration=Cs, effective_diffusivity=De,
                                    geometry=geometry)
    assert res["weisz_prater"] == pytest.approx(psi_L, rel=1e-12)
    assert res["effectiveness_factor"] == pytest.approx(eta, abs=2e-6)


@pytest.mark.parametrize(("order", "phi", "eta"), [
    # slab, generalised modulus (Aris 1965; Bischoff 1965; values from scipy solve_bvp)
    (2.0, 1.0, 0.726468), (2.0, 2.0, 0.462643), (0.5, 1.0, 0.806929), (0.5, 0.5, 0.946294),
])
def test_generalised_modulus_inverted_for_other_orders(order, phi, eta):
    # Psi_L = eta Phi^2 2/(n + 1) for the power law (derived from the generalised modulus)
    L, De, rho, Cs = 5e-5, 1e-9, 1000.0, 200.0
    psi_L = eta * phi**2 * 2.0 / (order + 1.0)
    rate = psi_L * De * Cs / (rho * L**2)
    res = criteria_from_measurement(rate=rate, particle_diameter=2 * L, particle_density=rho,
                                    bulk_concentration=Cs, effective_diffusivity=De,
                                    order=order, geometry="slab")
    assert res["thiele_modulus"] == pytest.approx(phi, rel=2e-5)
    assert res["effectiveness_factor"] == pytest.approx(eta, abs=2e-6)


def test_carberry_limit_scales_with_order():
    # Ca < 0.05/|n| (Carberry 1976; Kapteijn & Moulijn, Handbook of Heterogeneous Catalysis)
    res = criteria_from_measurement(rate=0.01, particle_diameter=1e-4, particle_density=1500.0,
                                    bulk_concentration=500.0, film_coefficient=1e-5, order=2.0)
    assert res["thresholds"]["carberry"] == pytest.approx(0.025)
    assert res["carberry"] == pytest.approx(0.01 / (1e-5 * 40.0 * 500.0))  # a_m = 40 m^2/kg
    assert res["passes"]["carberry"] is False
    assert "film resistance" in res["verdict"] and res["intrinsic"] is False
    assert res["passes"]["weisz_prater"] is None  # no diffusivity: not assessed


@pytest.mark.parametrize(("correlation", "sherwood"), [
    ("sano", 9.4136), ("armenante_kirwan", 9.8842)])
def test_film_from_stirrer_speed_worked_example(correlation, sherwood):
    # worked example (eps = N_p N^3 D^5/V, common practice; Sano, Yamaguchi & Adachi 1974) ([calc]): water-like liquid with nu = 8.927e-7
    # m^2/s, Dm = 1e-9 m^2/s, dp = 50 um, Rushton turbine Np = 5, D = 0.05 m, V = 1 L, N = 10/s:
    # Sh = 9.4136 (Sano, Yamaguchi & Adachi 1974), 9.8842 (Armenante & Kirwan 1989)
    fluid = make_fluid(None, viscosity=8.927e-4, density=1000.0, diffusivity=1e-9)
    res = criteria_from_measurement(
        rate=1e-3, particle_diameter=50e-6, particle_density=1500.0, bulk_concentration=500.0,
        stirrer_speed=10.0, correlation=correlation, fluid=fluid, power_number=5.0,
        impeller_diameter=0.05, liquid_volume=1e-3, temperature=298.15)
    assert res["film_coefficient"] == pytest.approx(sherwood * 1e-9 / 50e-6, rel=1e-4)


@pytest.mark.parametrize(("kwargs", "match"), [
    ({"film_coefficient": 1e-7}, "exceeds what the film can carry"),
    ({"film_coefficient": 1e-4, "stirrer_speed": 10.0}, "not both"),
    ({"stirrer_speed": 10.0}, "needs the power number"),
    ({"geometry": "cube"}, "geometry 'cube' is not recognised"),
    ({"order": 4.0}, "order must be a number in"),
    ({"effective_diffusivity": -1e-9}, "effective diffusivity must be finite and > 0"),
])
def test_bad_inputs_raise_study_error(kwargs, match):
    base = dict(rate=0.02, particle_diameter=75e-6, particle_density=1500.0,
                bulk_concentration=500.0)
    with pytest.raises(StudyError, match=match):
        criteria_from_measurement(**{**base, **kwargs})


def _parser():
    p = argparse.ArgumentParser()
    add_criteria_arguments(p)
    return p


def test_command_parses_units_and_writes_json(tmp_path, capsys):
    # 1.2 mmol/(g min) = 1.2e-3 mol/(1e-3 kg * 60 s) = 0.02 mol/(kg s) (SI definitions)
    out = tmp_path / "crit.json"
    args = _parser().parse_args([
        "--rate", "1.2 mmol/(g*min)", "--diameter", "75 um", "--density", "1.5 g/cm^3",
        "--concentration", "0.5 mol/L", "--diffusivity", "1e-5 cm^2/s", "--kc", "0.01 cm/s",
        "--json", str(out)])
    assert run_criteria_command(args) == 0
    data = json.loads(out.read_text())
    ref = criteria_from_measurement(rate=0.02, particle_diameter=75e-6, particle_density=1500.0,
                                    bulk_concentration=500.0, effective_diffusivity=1e-9,
                                    film_coefficient=1e-4)
    for key in ("weisz_prater", "mears", "carberry", "thiele_modulus", "effectiveness_factor"):
        assert data[key] == pytest.approx(ref[key], rel=1e-10)
    assert data["verdict"] == ref["verdict"]
    assert set(data) >= {"thresholds", "notes", "verdict"}
    text = capsys.readouterr().out
    assert "Carberry" in text and "verdict: intrinsic" in text


def test_command_with_stirrer_speed(capsys):
    args = _parser().parse_args([
        "--rate", "0.2 mol/(kg*s)", "--diameter", "200 um", "--density", "1500 kg/m^3",
        "--concentration", "0.5 mol/L", "--diffusivity", "1e-9 m^2/s", "--speed", "600 rpm",
        "--power-number", "5", "--impeller-diameter", "5 cm", "--liquid-volume", "1 L",
        "--temperature", "50 degC", "--molecular-diffusivity", "2e-9 m^2/s", "--order", "2"])
    assert run_criteria_command(args) == 0
    text = capsys.readouterr().out
    assert "sano correlation at 600 rpm" in text and "not intrinsic" in text


def test_command_rejects_bad_units():
    args = _parser().parse_args(["--rate", "0.02 mol/(kg*s)", "--diameter", "75 kg",
                                 "--density", "1500 kg/m^3", "--concentration", "0.5 mol/L"])
    with pytest.raises(StudyError, match="--diameter"):
        run_criteria_command(args)


def test_report_text_lists_every_criterion():
    res = criteria_from_measurement(rate=0.02, particle_diameter=75e-6, particle_density=1500.0,
                                    bulk_concentration=500.0, effective_diffusivity=1e-9,
                                    film_coefficient=1e-4)
    text = format_criteria(res)
    for word in ("Carberry", "Mears", "Weisz-Prater", "effectiveness factor", "Thiele modulus",
                 "verdict"):
        assert word in text


def test_nothing_assessed_is_said_so_not_kinetic():
    # neither kc nor De given: no resistance share and no regime can be stated (kinfit's
    # results contract: a quantity not assessed is null, never 0 % or "kinetic")
    res = criteria_from_measurement(rate=0.02, particle_diameter=75e-6, particle_density=1500.0,
                                    bulk_concentration=500.0)
    assert res["regime"] is None and res["controlling"] is None
    assert res["shares"] == {"film": None, "pore": None, "reaction": None}
    text = format_criteria(res)
    assert "not assessed" in text and "kinetic" not in text and "0 %" not in text
    json.dumps(res)  # None values serialise as null


def test_film_only_assessed_leaves_the_regime_open():
    # kc given, De not: the pore resistance is unknown, so is every share
    res = criteria_from_measurement(rate=0.02, particle_diameter=75e-6, particle_density=1500.0,
                                    bulk_concentration=500.0, film_coefficient=1e-4)
    assert res["regime"] is None and res["resistances"]["pore"] is None
    assert res["resistances"]["film"] == pytest.approx(1 / (1e-4 * 6 / (1500 * 75e-6)))
