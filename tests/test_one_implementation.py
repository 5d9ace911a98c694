"""Logic that used to be written in several places now lives in one: each check below pins the
single implementation to an outside value and shows that its former homes use it.

Sources are named beside each check; the package-data check is a contract of kinfit's own
(no outside source applies)."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants

from kinfit.analysis.calculator import criteria_from_measurement
from kinfit.analysis.diagnosis import falsified
from kinfit.analysis.diagnosis import next_runs
from kinfit.analysis.transport_limits import log_boundary
from kinfit.estimate.compare import akaike_weights, f_test, likelihood_ratio_test
from kinfit.fitting.fit import comparison_rows
from kinfit.fitting.results import FitResult
from kinfit.physics.criteria import compute_criteria
from kinfit.physics.resistances import resistance_shares
from kinfit.physics.geometry import GEOMETRIES, characteristic_length, external_area, shape_index
from kinfit.physics.kinetics.arrhenius import GAS_CONSTANT
from kinfit.physics.pellet import _lh_table, _power_table
from kinfit.physics.pellet.effectiveness import eta_first_order
from kinfit.report import figures


def test_gas_constant_is_the_si_value_everywhere():
    # R = N_A k_B exactly in the 2019 SI (CODATA 2018)
    assert GAS_CONSTANT == pytest.approx(scipy.constants.N_A * scipy.constants.k, rel=1e-15)
    assert falsified.GAS_CONSTANT is GAS_CONSTANT
    assert figures.GAS_CONSTANT is GAS_CONSTANT


def test_geometries_and_characteristic_lengths():
    # L = V_p/S_p from elementary geometry: slab of thickness d: d/2; infinite cylinder of
    # diameter d: d/4; sphere of diameter d: d/6 (common practice, Aris 1957 normalisation)
    assert GEOMETRIES == ("slab", "cylinder", "sphere")
    assert [shape_index(g) for g in GEOMETRIES] == [0, 1, 2]
    for g, fraction in zip(GEOMETRIES, (1 / 2, 1 / 4, 1 / 6), strict=True):
        assert characteristic_length(g, 6e-4) == pytest.approx(6e-4 * fraction, rel=1e-15)
        assert external_area(g, 6e-4, 1500.0) == pytest.approx(1 / (1500 * 6e-4 * fraction))


def test_report_eta_curve_is_the_pellet_solution():
    # slab, first order: eta = tanh(phi)/phi (Thiele 1939)
    phi = np.geomspace(1e-3, 1e3, 25)
    eta, source = figures.eta_curve(phi, 1.0, "slab")
    np.testing.assert_allclose(eta, np.tanh(phi) / phi, rtol=1e-6)
    np.testing.assert_allclose(eta, eta_first_order(phi, "slab"), rtol=1e-6)
    assert "pellet solution" in source


def test_resistance_shares_one_implementation():
    # first order behind a film with eta = 1: shares of 1/(kc a_m) and 1/k in the sum
    # (resistances in series; Satterfield 1970)
    k1, conductance = 3e-4, 2e-4
    sh = resistance_shares(intrinsic_rate=k1 * 100.0, surface_concentration=100.0,
                           effectiveness=1.0, conductance=conductance)
    film, pore, react = sh.film, sh.pore, sh.reaction
    total = 1 / conductance + 1 / k1
    assert float(film) == pytest.approx((1 / conductance) / total, rel=1e-14)
    assert float(react) == pytest.approx((1 / k1) / total, rel=1e-14)
    assert float(pore) == 0.0
    # compute_criteria (per run, from the model) reports the same shares
    crit = compute_criteria(observed_rate=np.array([0.01]), bulk_concentration=np.array([200.0]),
                            surface_concentration=np.array([150.0]),
                            intrinsic_rate=np.array([0.02]), effectiveness=np.array([0.5]),
                            thiele_modulus=np.array([2.0]), kc=np.array([1e-4]),
                            particle_diameter=np.array([1e-4]), particle_density=1500.0,
                            effective_diffusivity=np.array([1e-10]), geometry="sphere",
                            order=1.0)
    a_m = external_area("sphere", 1e-4, 1500.0)
    ex = resistance_shares(intrinsic_rate=0.02, surface_concentration=150.0, effectiveness=0.5,
                           conductance=1e-4 * a_m)
    np.testing.assert_allclose([crit.film_share[0], crit.pore_share[0], crit.reaction_share[0]],
                               [float(ex.film), float(ex.pore), float(ex.reaction)], rtol=1e-14)
    # the one-measurement calculator reports the same shares for its own Cs and eta
    res = criteria_from_measurement(rate=0.01, particle_diameter=1e-4, particle_density=1500.0,
                                    bulk_concentration=200.0, film_coefficient=1e-4,
                                    effective_diffusivity=1e-10, order=1.0, geometry="sphere")
    eta = res["effectiveness_factor"]
    ex = resistance_shares(intrinsic_rate=0.01 / eta,
                           surface_concentration=res["surface_concentration"],
                           effectiveness=eta, conductance=1e-4 * res["external_area"])
    assert [res["shares"][k] for k in ("film", "pore", "reaction")] == pytest.approx(
        [float(ex.film), float(ex.pore), float(ex.reaction)], rel=1e-14)


def test_transport_limit_search_one_implementation():
    # a criterion met above x = 2 (increasing) and below x = 3e-4 (decreasing)
    b, every, never = log_boundary(lambda x: x > 2.0, 0.1, 100.0, 3, increasing=True,
                                   iterations=50)
    np.testing.assert_allclose(b, 2.0, rtol=1e-12)
    assert not every.any() and not never.any()
    b, every, never = log_boundary(lambda x: x < 3e-4, 1e-6, 1e-2, 2, increasing=False,
                                   iterations=50)
    np.testing.assert_allclose(b, 3e-4, rtol=1e-12)
    # met everywhere / nowhere in the range
    b, every, never = log_boundary(lambda x: np.array([True, False]), 1.0, 10.0, 2,
                                   increasing=True, iterations=10)
    assert b[0] == 1.0 and every.tolist() == [True, False] and never.tolist() == [False, True]
    # the diagnosis's next-run search goes through it
    found, _, _ = next_runs._boundary(lambda x: x > 0.5, 0.1, 50.0, 1, increasing=True)
    assert found[0] == pytest.approx(0.5, rel=1e-8)


def test_model_comparison_one_arithmetic():
    # Akaike weights (Burnham & Anderson 2002, eq. 2.14): AICc 100, 102 -> w = 1/(1 + e^-1)
    delta, w = akaike_weights([100.0, 102.0])
    assert w[0] == pytest.approx(1 / (1 + math.exp(-1.0)), rel=1e-14)
    # LR against chi2(1) (Wilks 1938): LR = 3.841458820694124 is the 95 % point
    lr, p = likelihood_ratio_test(-10.0, -10.0 + 3.841458820694124 / 2, 1)
    assert p == pytest.approx(0.05, rel=1e-9)
    # extra sum of squares F (Bates & Watts 1988): F(1, 10) 95 % point 4.964602743730711
    F, p = f_test(sse_reduced=1.0 + 4.964602743730711 / 10, sse_full=1.0, dp=1, dof_full=10)
    assert F == pytest.approx(4.964602743730711, rel=1e-12) and p == pytest.approx(0.05, rel=1e-9)

    def result(sse, loglike, aicc, k):
        return FitResult(study="s", model={}, parameters={}, runs={}, correlation={}, fit={
            "sse": sse, "loglike": loglike, "aic": aicc, "aicc": aicc, "bic": aicc,
            "n_params": k, "n_obs": 12, "converged": True})

    rows = comparison_rows([result(1.0, -5.0, 100.0, 3),
                            result(1.0 + 4.964602743730711 / 9, -6.0, 102.0, 2)],
                           ["full", "reduced"], [{"a", "b", "c"}, {"a", "b"}])
    assert rows[0]["akaike_weight"] == pytest.approx(w[0], rel=1e-14)
    assert rows[1]["likelihood_ratio"]["statistic"] == pytest.approx(2.0)
    assert rows[1]["f_test"]["df"] == [1, 9]
    assert rows[1]["f_test"]["statistic"] == pytest.approx(4.964602743730711, rel=1e-12)


@pytest.mark.parametrize("module, load, args", [
    (_power_table, "power_law_table", ("sphere",)),
    (_lh_table, "lh_table", (1, "slab")),
])
def test_shipped_tables_are_read_not_rebuilt(module, load, args, monkeypatch):
    # the package data is found through importlib.resources and used as it is: building a
    # table in memory is not allowed here
    assert module.TABLE_RESOURCE.is_file()

    def refuse(*a, **k):
        raise AssertionError("the shipped table was rebuilt instead of read")

    build = "build_power_law_table" if module is _power_table else "build_lh_table"
    monkeypatch.setattr(module, build, refuse)
    cached = getattr(module, load)
    cached.cache_clear()
    try:
        table = cached(*args)
    finally:
        cached.cache_clear()
    assert table is not None
