"""The coupled film + pellet rate of a power law of order n != 1 against an independent
solution of the pellet's boundary-value problem with the film as its boundary condition."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_bvp

from kinfit.kinetics import PowerLaw
from kinfit.transport.film import characteristic_length, external_area
from kinfit.transport.surface import PelletRate, observed_rate

LAW = PowerLaw(reference_temperature=330.0)


def _bvp_rate(k, n, De, kc, R, rho, Cb, C_ref=1000.0):
    """Observed rate per kg for a sphere: u'' + (2/x) u' = A u^n, u'(0) = 0,
    u'(1) = Bi (1 - u(1)) with u = C/Cb, x = r/R, A = rho R^2 k Cb^(n-1)/(De C_ref^n) and
    Bi = kc R/De (the steady diffusion-reaction balance of a sphere with a film, Aris 1975);
    then r_obs = kc a_m Cb (1 - u(1)), a_m = 3/(rho R). Solved with scipy's solve_bvp (its
    singular term S for the 2/x)."""
    A = rho * R**2 * k * Cb ** (n - 1) / (De * C_ref**n)
    Bi = kc * R / De
    S = np.array([[0.0, 0.0], [0.0, -2.0]])

    def f(x, y):
        return np.vstack([y[1], A * np.maximum(y[0], 0.0) ** n])

    def bc(ya, yb):
        return np.array([ya[1], yb[1] - Bi * (1.0 - yb[0])])

    x = np.linspace(0.0, 1.0, 401)
    y0 = np.vstack([np.full_like(x, 0.7), np.zeros_like(x)])
    sol = solve_bvp(lambda x, y: f(x, y), bc, x, y0, S=S, tol=1e-9, max_nodes=200000)
    assert sol.success, sol.message
    us = float(sol.sol(1.0)[0])
    return kc * 3.0 / (rho * R) * Cb * (1.0 - us), us


@pytest.mark.parametrize(("n", "k"), [(0.5, 0.05), (2.0, 0.5)])
@pytest.mark.parametrize("Cb", [200.0, 800.0])
def test_power_law_with_film_and_pellet_matches_the_bvp(n, k, Cb):
    # moderate modulus (eta about 0.3-0.9) and a film carrying part of the resistance: the
    # (n + 1)/2 of the generalised modulus (Aris 1965; Bischoff 1965) sets eta for n != 1
    De, kc, dp, rho = 1e-10, 2e-5, 100e-6, 1500.0
    R = dp / 2
    reference, us = _bvp_rate(k, n, De, kc, R, rho, Cb)
    assert 0.1 < us < 0.97  # the film matters
    L = characteristic_length("sphere", dp)
    pr = PelletRate(LAW, {"k_ref": k, "activation_energy": 0.0, "order": n}, np.float64(330.0),
                    None, De, L, rho, "sphere")
    obs = observed_rate(np.array([Cb]), pr, kc * external_area("sphere", dp, rho))
    assert 0.1 < float(obs.effectiveness[0]) < 0.95  # the pores matter
    # tolerance: the pellet table's interpolation accuracy (about 1e-5 relative in eta)
    assert float(obs.rate[0]) == pytest.approx(reference, rel=1e-4)
    assert float(obs.surface_concentration[0]) == pytest.approx(us * Cb, rel=1e-4)
