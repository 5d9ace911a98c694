"""Reactor models against scipy's integrators and closed forms."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from kinfit.errors import SolverError
from kinfit.physics.kinetics.power import PowerLaw
from kinfit.physics.reactors import (
    BatchGrid,
    batch_profiles,
    batch_profiles_surface,
    differential_rates,
)
from kinfit.physics.surface import PelletRate, observed_rate, solve_surface


def _film_power_rate(k, n, kfa, T=330.0):
    """Observed rate of an n-th order law behind a film (no pellet), vectorised."""
    law = PowerLaw(reference_temperature=330.0)

    def rate(C):
        p = {"k_ref": k, "activation_energy": 0.0, "order": n}
        pr = PelletRate(law, p, np.float64(T), None, None, np.float64(1e-5), 1500.0, "sphere")
        C = C * np.ones(np.broadcast_shapes(np.shape(C), np.shape(k)))
        return observed_rate(C, pr, kfa).rate

    return rate


def _reference(rate_scalar, C0, w, t_eval):
    """Tight-tolerance solve_ivp reference (scipy; rtol 1e-12) of dC/dt = -w r_obs(C)."""
    sol = solve_ivp(lambda t, c: [-w * rate_scalar(max(c[0], 0.0))], (0.0, t_eval[-1]), [C0],
                    t_eval=t_eval, rtol=1e-12, atol=1e-12 * C0, method="LSODA")
    return sol.y[0]


@pytest.mark.parametrize("n", [0.5, 1.0, 1.5, 2.0])
def test_batch_matches_solve_ivp_with_film(n):
    # the same observed rate (power law behind a film) integrated by scipy's solve_ivp at
    # rtol 1e-12 (LSODA: Hindmarsh 1983 ODEPACK with the stiffness switching of Petzold 1983):
    # kinfit's profile must agree to 1e-6 relative
    k = np.array([[0.05], [0.12]])  # two parameter sets, mol/(kg s)
    kfa = 2e-4  # film conductance kc a_m, m^3/(kg s)
    C0 = np.array([400.0, 900.0])
    w = np.array([2.0, 5.0])
    times = np.concatenate([np.linspace(0, 3000, 12), np.linspace(0, 2000, 9)])
    runs = np.concatenate([np.zeros(12, int), np.ones(9, int)])
    rate = _film_power_rate(k[:, :, None], n, kfa)
    conc, _ = batch_profiles(rate, C0, 0.0, w, times, runs)
    for mi in range(2):
        for ri in range(2):
            def scalar(c, mi=mi):
                return float(_film_power_rate(k[mi, 0], n, kfa)(np.array([[[c]]]))[0, 0, 0])
            ref = _reference(scalar, C0[ri], w[ri], times[runs == ri])
            np.testing.assert_allclose(conc[mi, runs == ri], ref, rtol=1e-6)


@pytest.mark.parametrize("n", [1.0, 1.5, 2.0])
def test_surface_grid_batch_matches_solve_ivp_with_film_and_pores(n):
    # the profile integrated on a grid in surface concentration (film balance solved only at
    # t = 0) against scipy's solve_ivp at rtol 1e-12 on dC/dt = -w r_obs(C), r_obs from the
    # same film + pellet rate with Cs solved at every call: agreement to 1e-6 relative
    law = PowerLaw(reference_temperature=330.0)
    p = {"k_ref": np.array([[[0.05]], [[0.12]]]), "activation_energy": np.zeros((2, 1, 1)),
         "order": np.full((2, 1, 1), n)}
    De = np.full((2, 1, 1), 2e-10)
    L = np.array([[[1e-5], [3e-5]]])
    kfa = np.array([[[2e-4], [6e-4]]])
    C0 = np.array([400.0, 900.0])
    w = np.array([2.0, 5.0])
    times = np.concatenate([np.linspace(0, 3000, 12), np.linspace(0, 2000, 9)])
    runs = np.concatenate([np.zeros(12, int), np.ones(9, int)])
    pr = PelletRate(law, p, np.float64(330.0), None, De, L, 1500.0, "sphere")
    assert pr.surface_grid

    def g(c):
        val, dval, *_ = pr(c)
        return val, dval

    Cs0 = solve_surface(np.broadcast_to(C0[None, :, None], (2, 2, 1)), kfa, g)[..., 0]
    conc = batch_profiles_surface(g, kfa, Cs0, np.zeros((2, 2)), w, times, runs)
    for mi in range(2):
        for ri in range(2):
            def scalar(c, mi=mi, ri=ri):
                one = PelletRate(law, {k: v[mi, 0, 0] for k, v in p.items()}, np.float64(330.0),
                                 None, De[mi, 0, 0], L[0, ri, 0], 1500.0, "sphere")
                return float(observed_rate(np.array([c]), one, kfa[0, ri, 0]).rate[0])
            ref = _reference(scalar, C0[ri], w[ri], times[runs == ri])
            np.testing.assert_allclose(conc[mi, runs == ri], ref, rtol=1e-6)


def test_first_order_batch_is_exponential():
    # first order: C = C0 exp(-w k t) exactly (Levenspiel 1999, ch. 3)
    k = 0.01 / 1000.0 * 1000.0
    rate = lambda C: k * C / 1000.0  # noqa: E731
    times = np.linspace(0, 5e5, 20)
    conc, r_obs = batch_profiles(rate, np.array([800.0]), 0.0, np.array([3.0]), times,
                                 np.zeros(20, int), grid=BatchGrid(n_panels=8))
    # at first order the integrand in u is constant, so the quadrature is exact; what is left
    # is the Newton inversion (stops at 1e-14 in the panel coordinate) and the panel
    # polynomial from an inverted Vandermonde matrix (LAPACK rounding): 1e-9 leaves room for
    # other LAPACK builds, far inside the grid's stated 1e-6
    np.testing.assert_allclose(conc[0], 800.0 * np.exp(-3.0 * k / 1000.0 * times), rtol=1e-9)
    np.testing.assert_allclose(r_obs[0], k * conc[0] / 1000.0, rtol=1e-12)  # same formula


def test_differential_rates_pick_each_run():
    rate = lambda C: 2.0 * C  # noqa: E731
    out = differential_rates(rate, np.array([1.0, 3.0]), np.array([0, 0, 1]))
    np.testing.assert_allclose(out, [[2.0, 2.0, 6.0]])


def test_zero_rate_raises_clear_error():
    with pytest.raises(SolverError, match="rate is zero"):
        batch_profiles(lambda C: 0.0 * C, np.array([1.0]), 0.0, np.array([1.0]),
                       np.array([0.0, 1.0]), np.zeros(2, int))
