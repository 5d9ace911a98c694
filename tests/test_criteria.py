"""Criteria, regime labels and the coupled observed rate against published results."""

from __future__ import annotations

import numpy as np
import pytest

from kinfit.criteria import Thresholds, compute_criteria, regime_label
from kinfit.kinetics import PowerLaw
from kinfit.transport.film import characteristic_length, external_area
from kinfit.transport.surface import PelletRate, observed_rate, resistance_shares

LAW = PowerLaw(reference_temperature=330.0)


def _state(k, n, kfa, Cb, *, De=None, dp=1e-4, rho=1500.0, geometry="sphere"):
    L = characteristic_length(geometry, dp)
    p = {"k_ref": k, "activation_energy": 0.0, "order": n}
    pr = PelletRate(LAW, p, np.float64(330.0), None, De, L, rho, geometry)
    Cb = np.asarray(Cb, dtype=float)
    return observed_rate(Cb, pr, kfa), pr


def test_regime_rule_of_the_contract():
    # kinfit's results contract: the share above one half names the regime, else "mixed"
    labels = regime_label(np.array([0.6, 0.1, 0.2, 0.4]), np.array([0.2, 0.7, 0.1, 0.3]),
                          np.array([0.2, 0.2, 0.7, 0.3]))
    assert labels.tolist() == ["film", "pore", "kinetic", "mixed"]


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


def test_weisz_prater_threshold_in_the_l_normalisation():
    # Psi_L = Psi_R (L/R)^2 with R = dp/2 (Weisz & Prater 1954: Psi_L = Psi_R/9 for a sphere)
    t = Thresholds()
    assert t.weisz_prater("sphere") == pytest.approx(0.3 / 9)
    assert t.weisz_prater("slab") == pytest.approx(0.3)


def test_film_only_series_resistance_first_order():
    # first order behind a film: 1/k_obs = 1/(kc a_m) + 1/k (resistances in series;
    # Satterfield 1970; Thiele 1939; Aris 1957, overall factor with eta = 1)
    k_ref, kfa = 0.3, 2e-4  # k in mol/(kg s) at C_ref = 1000 mol/m^3 -> k1 = 3e-4 m^3/(kg s)
    Cb = np.array([50.0, 500.0, 1000.0])
    obs, _ = _state(k_ref, 1.0, kfa, Cb)
    k1 = k_ref / 1000.0
    np.testing.assert_allclose(obs.rate, Cb / (1 / kfa + 1 / k1), rtol=1e-10)
    film, pore, react = resistance_shares(obs, kfa)
    np.testing.assert_allclose(film, (1 / kfa) / (1 / kfa + 1 / k1), rtol=1e-10)
    np.testing.assert_allclose(pore, 0.0, atol=1e-12)


def test_no_film_gives_surface_equal_bulk():
    obs, _ = _state(0.3, 1.5, np.inf, np.array([10.0, 700.0]))
    np.testing.assert_allclose(obs.surface_concentration, [10.0, 700.0])


def test_observed_rate_rises_with_film_conductance():
    # common practice: a better film (higher kc a_m) never lowers the observed rate
    rates = [_state(0.5, 1.5, kfa, np.array([500.0]))[0].rate[0] for kfa in (1e-5, 1e-4, 1e-3)]
    assert rates[0] < rates[1] < rates[2]
