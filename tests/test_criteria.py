"""Criteria, regime labels and the coupled observed rate against published results."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, special

from kinfit.criteria import Thresholds, compute_criteria, regime_label
from kinfit.kinetics import PowerLaw
from kinfit.resistances import KINETIC_SHARE, resistance_shares
from kinfit.transport.film import characteristic_length, external_area
from kinfit.transport.surface import PelletRate, observed_rate

LAW = PowerLaw(reference_temperature=330.0)


def _state(k, n, kfa, Cb, *, De=None, dp=1e-4, rho=1500.0, geometry="sphere"):
    L = characteristic_length(geometry, dp)
    p = {"k_ref": k, "activation_energy": 0.0, "order": n}
    pr = PelletRate(LAW, p, np.float64(330.0), None, De, L, rho, geometry)
    Cb = np.asarray(Cb, dtype=float)
    return observed_rate(Cb, pr, kfa), pr


def test_regime_rule_of_the_contract():
    # kinfit's results contract: "kinetic" only at a reaction share >= 0.95 (observed rate
    # within 5 % of the intrinsic one); "film"/"pore" above one half; else "mixed"
    labels = regime_label(np.array([0.6, 0.1, 0.2, 0.4, 0.03, 0.05]),
                          np.array([0.2, 0.7, 0.1, 0.3, 0.02, 0.0]),
                          np.array([0.2, 0.2, 0.7, 0.3, 0.95, 0.95]))
    assert labels.tolist() == ["film", "pore", "mixed", "mixed", "kinetic", "kinetic"]


@settings(max_examples=300, deadline=None)
@given(st.floats(0.0, 1.0), st.floats(0.0, 1.0), st.floats(1e-6, 1.0))
def test_kinetic_exactly_when_the_reaction_share_reaches_095(a, b, c):
    # the contract's rule as a property: label "kinetic" if and only if reaction share >= 0.95,
    # over shares built from arbitrary positive resistances (no outside source applies)
    total = a + b + c
    film, pore, react = a / total, b / total, c / total
    label = regime_label(film, pore, react).item()
    assert (label == "kinetic") == (react >= 0.95)
    if label != "kinetic":
        assert label == ("film" if film > 0.5 else "pore" if pore > 0.5 else "mixed")


def test_reaction_share_is_observed_over_intrinsic_at_bulk_first_order():
    # first order behind film and pores: the resistances in series sum to (Cb - C_eq)/r_obs, so
    # the reaction share 1/k1 over the sum equals r_obs/r(Cb) (derived; Satterfield 1970,
    # overall factor Omega = eta/(1 + eta phi^2/Bi))
    De, dp, rho, kfa = 2e-10, 2e-4, 1500.0, 3e-4
    Cb = np.array([100.0, 400.0])
    obs, _ = _state(0.4, 1.0, kfa, Cb, De=De, dp=dp, rho=rho)
    sh = resistance_shares(intrinsic_rate=obs.intrinsic_rate,
                           surface_concentration=obs.surface_concentration,
                           effectiveness=obs.effectiveness, conductance=kfa)
    np.testing.assert_allclose(sh.reaction, obs.rate / (0.4 * Cb / 1000.0), rtol=1e-9)
    assert 0.2 < sh.film[0] < 0.8 and sh.pore[0] > 0.05  # both resistances matter here


def test_unassessed_resistance_is_not_counted_as_zero():
    # a missing film or pore resistance leaves the shares unknown (no outside source applies)
    sh = resistance_shares(intrinsic_rate=1.0, surface_concentration=1.0, effectiveness=0.99,
                           conductance=None)
    assert sh.at() == {"shares": {"film": None, "pore": None, "reaction": None},
                       "regime": None, "controlling": None}
    assert np.isfinite(sh.resistances["pore"]) and np.isnan(sh.resistances["film"])
    assert KINETIC_SHARE == 0.95


def test_carberry_identity_and_mears_relation():
    # steady film: Ca = 1 - Cs/Cb exactly (derived from kc a (Cb - Cs) = r_obs; Carberry 1976);
    # with the particle density the Mears number equals 3 n Ca for spheres (Mears 1971,
    # Carberry 1976, derived)
    dp, rho, n = 1e-4, 1500.0, 1.5
    a_m = external_area("sphere", dp, rho)
    kc = 3e-5
    obs, _ = _state(0.2, n, kc * a_m, np.array([200.0, 800.0]), dp=dp, rho=rho)
    crit = compute_criteria(
        observed_rate=obs.rate, bulk_concentration=np.array([200.0, 800.0]),
        surface_concentration=obs.surface_concentration, intrinsic_rate=obs.intrinsic_rate,
        effectiveness=obs.effectiveness, thiele_modulus=obs.thiele_modulus, kc=kc,
        particle_diameter=dp, particle_density=rho, effective_diffusivity=None,
        geometry="sphere", order=n)
    np.testing.assert_allclose(crit.carberry, 1 - obs.surface_concentration / [200.0, 800.0],
                               rtol=1e-10)
    np.testing.assert_allclose(crit.mears, 3 * n * crit.carberry, rtol=1e-10)


def test_carberry_threshold_scales_with_order():
    # Ca < 0.05/|n| for a 5 % rate error (Kapteijn & Moulijn, Handbook of Heterogeneous
    # Catalysis, 2008; Carberry 1976; Mears 1971): the rate deficit 1 - (1 - Ca)^n at the threshold
    for n, deficit in [(1.0, 0.05), (2.0, 0.04938), (0.5, 0.05132)]:
        ca = Thresholds().to_dict("sphere", n)["carberry"]
        assert 1 - (1 - ca) ** n == pytest.approx(deficit, abs=5e-5)


def _eta_first_order(phi, geometry):
    # closed forms in the L = Vp/Sp normalisation (Thiele 1939; Aris 1975), written here
    # independently of kinfit: slab tanh(phi)/phi, cylinder I1(2 phi)/(phi I0(2 phi)), sphere
    # (1/phi)(coth(3 phi) - 1/(3 phi))
    if geometry == "slab":
        return np.tanh(phi) / phi
    if geometry == "cylinder":
        return special.i1e(2 * phi) / (phi * special.i0e(2 * phi))
    return (1 / np.tanh(3 * phi) - 1 / (3 * phi)) / phi


@pytest.mark.parametrize(("geometry", "r_over_l"), [("sphere", 3.0), ("cylinder", 2.0),
                                                    ("slab", 1.0)])
def test_weisz_prater_threshold_is_eta_095_in_every_geometry(geometry, r_over_l):
    # Psi_L = eta phi_L^2 for first order (Weisz & Prater 1954); the limit is Psi_L where
    # eta = 0.95, computed here by hand from the closed forms; R/L = 3, 2, 1 for sphere,
    # cylinder, slab with R = dp/2 (derived from Vp/Sp)
    phi = optimize.brentq(lambda x: _eta_first_order(x, geometry) - 0.95, 1e-3, 10.0,
                          xtol=1e-15)
    t = Thresholds()
    assert t.weisz_prater(geometry) == pytest.approx(0.95 * phi**2, rel=1e-9)
    assert t.weisz_prater_radius_limit(geometry) == pytest.approx(
        0.95 * phi**2 * r_over_l**2, rel=1e-9)


def test_weisz_prater_thresholds_hand_values():
    # hand values: slab, tanh(phi)/phi = 0.95 at phi = 0.39945 (two Newton steps on the
    # series 1 - phi^2/3 + 2 phi^4/15 ...), Psi_L = 0.95 phi^2 = 0.1516; sphere Psi_R = 0.767
    # and cylinder Psi_R = 0.407 from the same construction; Aris (1975) Table values give
    # eta(slab, Psi_L = 0.15) = 0.9505 just above 0.95, so the slab limit lies just above 0.15
    t = Thresholds()
    assert t.weisz_prater("slab") == pytest.approx(0.15159, abs=2e-5)
    assert t.weisz_prater_radius_limit("sphere") == pytest.approx(0.7671, abs=2e-4)
    assert t.weisz_prater_radius_limit("cylinder") == pytest.approx(0.4071, abs=2e-4)
    assert 0.15 < t.weisz_prater("slab") < 0.16


@pytest.mark.parametrize(("geometry", "limit"), [("sphere", 0.15), ("cylinder", 0.10),
                                                 ("slab", 0.05)])
def test_mears_limit_is_the_same_five_percent_in_every_geometry(geometry, limit):
    # with the particle density and R = dp/2 the Mears number equals n Ca R/L (derived from
    # a_m = 1/(rho_p L)), so a 5 % rate error (n Ca = 0.05; Carberry 1976) is 0.05 R/L
    dp, rho, n, kc = 1e-4, 1500.0, 1.0, 3e-5
    a_m = external_area(geometry, dp, rho)
    obs, _ = _state(0.05, n, kc * a_m, np.array([300.0]), dp=dp, rho=rho, geometry=geometry)
    crit = compute_criteria(
        observed_rate=obs.rate, bulk_concentration=np.array([300.0]),
        surface_concentration=obs.surface_concentration, intrinsic_rate=obs.intrinsic_rate,
        effectiveness=obs.effectiveness, thiele_modulus=obs.thiele_modulus, kc=kc,
        particle_diameter=dp, particle_density=rho, effective_diffusivity=None,
        geometry=geometry, order=n)
    assert Thresholds().mears_limit(geometry) == pytest.approx(limit, rel=1e-12)
    assert crit.mears[0] / crit.carberry[0] == pytest.approx(limit / 0.05 * n, rel=1e-10)


def test_carberry_limit_per_run_from_the_local_order():
    # Ca < 0.05/|n| with each run's own order (Carberry 1976), not one campaign-wide value
    dp, rho, kc = 1e-4, 1500.0, 3e-5
    a_m = external_area("sphere", dp, rho)
    obs, _ = _state(0.05, 1.0, kc * a_m, np.array([300.0, 300.0]), dp=dp, rho=rho)
    crit = compute_criteria(
        observed_rate=obs.rate, bulk_concentration=np.array([300.0, 300.0]),
        surface_concentration=obs.surface_concentration, intrinsic_rate=obs.intrinsic_rate,
        effectiveness=obs.effectiveness, thiele_modulus=obs.thiele_modulus, kc=kc,
        particle_diameter=dp, particle_density=rho, effective_diffusivity=None,
        geometry="sphere", order=np.array([0.5, 2.0]))
    np.testing.assert_allclose(crit.carberry_limit, [0.1, 0.025])
    assert crit.limits_at(1)["carberry"] == pytest.approx(0.025)


def test_film_only_series_resistance_first_order():
    # first order behind a film: 1/k_obs = 1/(kc a_m) + 1/k (resistances in series;
    # Satterfield 1970; Thiele 1939; Aris 1957, overall factor with eta = 1)
    k_ref, kfa = 0.3, 2e-4  # k in mol/(kg s) at C_ref = 1000 mol/m^3 -> k1 = 3e-4 m^3/(kg s)
    Cb = np.array([50.0, 500.0, 1000.0])
    obs, _ = _state(k_ref, 1.0, kfa, Cb)
    k1 = k_ref / 1000.0
    np.testing.assert_allclose(obs.rate, Cb / (1 / kfa + 1 / k1), rtol=1e-10)
    sh = resistance_shares(intrinsic_rate=obs.intrinsic_rate,
                           surface_concentration=obs.surface_concentration,
                           effectiveness=obs.effectiveness, conductance=kfa)
    np.testing.assert_allclose(sh.film, (1 / kfa) / (1 / kfa + 1 / k1), rtol=1e-10)
    np.testing.assert_allclose(sh.pore, 0.0, atol=1e-12)


def test_no_film_gives_surface_equal_bulk():
    obs, _ = _state(0.3, 1.5, np.inf, np.array([10.0, 700.0]))
    np.testing.assert_allclose(obs.surface_concentration, [10.0, 700.0])


def test_observed_rate_rises_with_film_conductance():
    # common practice: a better film (higher kc a_m) never lowers the observed rate
    rates = [_state(0.5, 1.5, kfa, np.array([500.0]))[0].rate[0] for kfa in (1e-5, 1e-4, 1e-3)]
    assert rates[0] < rates[1] < rates[2]
