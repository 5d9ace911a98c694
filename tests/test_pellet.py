"""Internal diffusion: first-order closed forms, the tabulated n-th order effectiveness factor,
generalised moduli and the numerical pellet solver. Sources are named beside each check;
independent references are scipy's solve_bvp / solve_ivp (tests/pellet_reference.py) and
mpmath for high-precision arithmetic.
"""

from __future__ import annotations

import numpy as np
import pytest
from pellet_reference import dead_core_reference, power_law_reference, reference_eta
from scipy.optimize import brentq

from kinfit.errors import ModelError, SolverError, StudyError
from kinfit.transport import _pellet_phase, _pellet_table
from kinfit.transport.pellet import (
    GEOMETRIES,
    eta_first_order,
    eta_power_law,
    generalized_modulus,
    generalized_modulus_power,
    pellet_eta,
    shape_index,
)

SHAPES = {"slab": 0, "cylinder": 1, "sphere": 2}
DE, LEN = 1e-9, 1e-4            # m^2/s, m (L = Vp/Sp)
C_REF = 1000.0                  # mol/m^3


def rel(a, b):
    return np.max(np.abs(np.asarray(a) / np.asarray(b) - 1.0))


def power_rate(n, phi, Cs, *, a_shape=None):
    """Callables r_v = k_v (C/C_ref)^n with k_v chosen so that the generalised modulus at Cs is
    ``phi`` (generalized_modulus_power inverted); ``phi`` of any shape, Cs broadcastable."""
    phi, Cs = np.broadcast_arrays(np.asarray(phi, float), np.asarray(Cs, float))
    kv = (phi / LEN) ** 2 * DE * C_REF**n / (0.5 * (n + 1.0) * Cs ** (n - 1.0))
    k = kv[..., None]

    def rate(C):
        return k * (np.maximum(C, 0.0) / C_REF) ** n

    def drate(C):
        if n == 0:
            return np.zeros_like(C)
        return k * n / C_REF * (np.maximum(C, 1e-300) / C_REF) ** (n - 1.0)

    return rate, drate, Cs


# --------------------------------------------------------------------------------------------
# first order: Thiele (1939); Aris (1957, 1975) closed forms

# closed forms of Thiele 1939 and Aris 1957, values computed from them: eta in the Aris normalisation phi_L = (Vp/Sp) sqrt(k/De)
TABLE1 = {
    0.1: (0.9966799462, 0.9950331057, 0.9940509699),
    0.5: (0.9242343145, 0.8927799318, 0.8762494526),
    1.0: (0.7615941560, 0.6977746580, 0.6716364900),
    2.0: (0.4820137900, 0.4317613055, 0.4166728109),
    5.0: (0.1999818409, 0.1897199652, 0.1866666667),
    10.0: (0.0999999996, 0.0974670508, 0.0966666667),
    50.0: (0.0200000000, 0.0198997475, 0.0198666667),
}
# closed forms of Thiele 1939, values computed from them: radius form phi_R = R sqrt(k/De) (sphere, cylinder)
TABLE2 = {
    0.1: (0.9993339676, 0.9987520798),
    0.5: (0.9837204824, 0.9699984503),
    1.0: (0.9391058565, 0.8927799318),
    2.0: (0.8059720811, 0.6977746580),
    5.0: (0.4800544824, 0.3573532548),
    10.0: (0.2700000012, 0.1897199652),
    50.0: (0.0588000000, 0.0395979587),
}


@pytest.mark.parametrize("phi", sorted(TABLE1))
def test_first_order_aris_table1(phi):
    # Thiele (1939), Aris (1957): closed forms; values computed from the closed forms, given to
    # 10 decimals: agreement within half a unit of the last decimal (6e-11 absolute)
    for geometry, expected in zip(GEOMETRIES, TABLE1[phi], strict=True):
        assert eta_first_order(phi, geometry) == pytest.approx(expected, rel=1e-9, abs=6e-11)


@pytest.mark.parametrize("phi_R", sorted(TABLE2))
def test_first_order_radius_table2(phi_R):
    # computed from the closed form (radius form); sphere phi_L = phi_R/3, cylinder phi_L = phi_R/2
    sphere, cylinder = TABLE2[phi_R]
    assert eta_first_order(phi_R / 3.0, "sphere") == pytest.approx(sphere, rel=1e-9, abs=6e-11)
    assert eta_first_order(phi_R / 2.0, "cylinder") == pytest.approx(cylinder, rel=1e-9,
                                                                     abs=6e-11)


@pytest.mark.parametrize(("geometry", "c"), [("slab", 1 / 3), ("cylinder", 1 / 2),
                                             ("sphere", 3 / 5)])
def test_first_order_small_modulus_coefficient(geometry, c):
    # Thiele 1939; Aris 1957 (derived, [calc]): eta = 1 - c phi_L^2, c = 1/3, 1/2, 3/5
    for phi in (1e-2, 1e-3):
        assert (1.0 - eta_first_order(phi, geometry)) / phi**2 == pytest.approx(c, rel=3 * phi)
    # next terms in the radius form (Thiele 1939; Aris 1957, checked with 50-digit arithmetic)
    x = 0.05
    series = {"slab": 1 - x**2 / 3 + 2 * x**4 / 15,
              "cylinder": 1 - (2 * x) ** 2 / 8 + (2 * x) ** 4 / 48,
              "sphere": 1 - (3 * x) ** 2 / 15 + 2 * (3 * x) ** 4 / 315}
    # the O(x^6) remainders are below 1e-8 here while the x^4 terms are about 1e-6
    assert eta_first_order(x, geometry) == pytest.approx(series[geometry], abs=1e-8)


def test_first_order_sphere_small_modulus_against_mpmath():
    # Numerical trap of Thiele 1939; Aris 1957: (1/phi)[coth 3phi - 1/(3phi)] cancels for
    # small phi; compare with 50-digit arithmetic (mpmath, a general-purpose library)
    import mpmath  # a declared test dependency: missing is a failure
    mpmath.mp.dps = 50
    for phi in (1e-8, 1e-6, 1e-4, 1e-3, 0.01, 0.033, 0.034, 0.1, 1.0):
        x = 3 * mpmath.mpf(phi)
        exact = float((mpmath.coth(x) - 1 / x) / mpmath.mpf(phi))
        assert eta_first_order(phi, "sphere") == pytest.approx(exact, rel=1e-14)


def test_first_order_large_modulus():
    # Aris (1975) asymptotes (Thiele 1939; Aris 1957, derived): sphere 1/phi - 1/(3 phi^2)
    # (exact up to exponentially small terms), cylinder 1/phi - 1/(4 phi^2) + O(phi^-3),
    # slab 1/phi; no overflow at large moduli (exponentially scaled Bessel functions)
    for phi in (1e3, 1e5, 1e8, 1e300):
        assert eta_first_order(phi, "slab") == pytest.approx(1 / phi, rel=1e-15)
        assert eta_first_order(phi, "sphere") == pytest.approx((1 - 1 / (3 * phi)) / phi,
                                                               rel=1e-14)
        assert eta_first_order(phi, "cylinder") == pytest.approx((1 - 1 / (4 * phi)) / phi,
                                                                 rel=1 / phi)
    assert np.all(eta_first_order(np.array([np.inf, 0.0]), "cylinder") == [0.0, 1.0])
    assert np.isnan(eta_first_order(np.nan, "sphere"))


def test_geometry_names_and_errors():
    assert [shape_index(g) for g in GEOMETRIES] == [0, 1, 2]
    with pytest.raises(StudyError, match=r"'ball'.*\['slab', 'cylinder', 'sphere'\]"):
        eta_first_order(1.0, "ball")
    with pytest.raises(StudyError, match="expected one of"):
        eta_power_law(1.0, 1.0, "Sphere")
    with pytest.raises(ModelError, match="Thiele modulus must be >= 0"):
        eta_first_order(-1.0, "slab")


# --------------------------------------------------------------------------------------------
# n-th order (tabulated): Aris (1965), Bischoff (1965), Petersen (1965) normalisation

# Aris 1965; Bischoff 1965, slab table (solve_bvp [calc], 6 decimals)
SLAB_N = {0.1: (0.997781, 0.995585), 0.5: (0.946294, 0.904476), 1.0: (0.806929, 0.726468),
          2.0: (0.498047, 0.462643), 5.0: (0.200000, 0.199108), 10.0: (0.100000, 0.099976)}


@pytest.mark.parametrize("phi", sorted(SLAB_N))
def test_power_law_slab_reference_table(phi):
    half, second = SLAB_N[phi]
    assert eta_power_law(phi, 0.5, "slab") == pytest.approx(half, rel=1e-5, abs=6e-7)
    assert eta_power_law(phi, 2.0, "slab") == pytest.approx(second, rel=1e-5, abs=6e-7)


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_power_law_first_order_is_the_closed_form(geometry):
    # n = 1: the table must reproduce Thiele/Aris closed forms over the whole range (moduli
    # off the table nodes: the spline error in log Phi is about 2e-8)
    phi = np.logspace(-4, 7, 333)
    assert rel(eta_power_law(phi, 1.0, geometry), eta_first_order(phi, geometry)) < 1e-7


@pytest.mark.parametrize("n", [0.0, 0.2, 0.5, 0.8, 0.95])
def test_dead_zone_slab_is_exactly_one_over_phi(n):
    # Aris 1965; Bischoff 1965 (derived from the first integral): for a slab the centre reaches
    # zero at Phi_c = (1+n)/(1-n) and beyond it eta = 1/Phi exactly
    phi_c = (1 + n) / (1 - n)
    beyond = phi_c * np.array([1.0001, 1.01, 1.5, 3.0, 10.0, 1e3, 1e5]) if phi_c < 1e3 else \
        np.array([2e3, 1e5])
    assert rel(eta_power_law(beyond, n, "slab") * beyond, 1.0) < 1e-8
    below = phi_c * np.array([0.3, 0.7, 0.95])
    assert np.all(eta_power_law(below, n, "slab") * below < 1.0 + 1e-12)
    if n <= 0.5:            # 1 - eta Phi ~ (Phi_c - Phi)^(2(1+n)/(1-n)): tiny for n near 1
        assert eta_power_law(below[0], n, "slab") * below[0] < 1.0 - 1e-4
    assert np.allclose(_pellet_phase.critical_modulus(n, 0), phi_c)


def test_zero_order_slab():
    # Aris 1965; Bischoff 1965 (derived, exact): eta = 1 for Phi <= 1, 1/Phi beyond
    phi = np.concatenate([np.logspace(-3, -1e-4, 40), np.logspace(1e-4, 3, 40)])
    expected = np.where(phi <= 1.0, 1.0, 1.0 / phi)
    assert rel(eta_power_law(phi, 0.0, "slab"), expected) < 1e-9


# Aris 1965; Bischoff 1965, zero-order sphere check values [calc]
ZERO_SPHERE = {0.6: 0.99537037, 1.0: 0.76961205, 2.0: 0.44357199, 5.0: 0.19105940,
               10.0: 0.09777146, 50.0: 0.01991106}


def zero_order_sphere(phi):
    """Dead core: 1 - 3 xi^2 + 2 xi^3 = 1/(3 Phi^2), eta = 1 - xi^3 (Aris 1965; Bischoff 1965,
    derived); eta = 1 while Phi <= 1/sqrt(3)."""
    if phi <= 1 / np.sqrt(3):
        return 1.0
    xi = brentq(lambda x: 1 - 3 * x**2 + 2 * x**3 - 1 / (3 * phi**2), 0.0, 1.0, xtol=1e-15)
    return 1 - xi**3


def test_zero_order_sphere_reference_values():
    phi = np.array(sorted(ZERO_SPHERE))
    assert rel(eta_power_law(phi, 0.0, "sphere"), [ZERO_SPHERE[p] for p in phi]) < 3e-7
    grid = np.logspace(-2, 3, 60)
    assert rel(eta_power_law(grid, 0.0, "sphere"), [zero_order_sphere(p) for p in grid]) < 1e-6


@pytest.mark.parametrize("geometry", GEOMETRIES)
@pytest.mark.parametrize("n", [0.5, 1.0, 2.0])
def test_large_modulus_limit(geometry, n):
    # Aris (1965) normalisation: eta -> 1/Phi for every shape and order; the first correction
    # 1 - a(n+1)/((n+3)(a+1) Phi) is derived here (boundary-layer first integral) and reduces
    # to 1/3 (sphere) and 1/4 (cylinder) at first order (Thiele 1939; Aris 1957)
    a = SHAPES[geometry]
    phi = np.array([1e2, 1e3, 1e4, 1e6, 1e8])
    y = eta_power_law(phi, n, geometry) * phi
    c1 = a * (n + 1) / ((n + 3) * (a + 1))
    assert np.all(np.abs(y - (1 - c1 / phi)) < np.maximum(2.0 / phi**2, 1e-14))


# solve_bvp reference points (tol 1e-10): orders on and between the table nodes
BVP_POINTS = [(p, n) for n in (0.37, 1.5, 2.0, 2.71, 3.0) for p in (1e-3, 0.3, 3.0, 30.0)] \
    + [(p, n) for n in (0.0, 0.5, 0.52) for p in (1e-3, 0.1, 0.4)]


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_power_law_against_solve_bvp(geometry):
    a = SHAPES[geometry]
    for phi, n in BVP_POINTS:
        if n < 1 and phi >= _pellet_phase.critical_modulus(n, a) * 0.9:
            continue                        # dead zones: see the shooting reference below
        ref = power_law_reference(phi, n, a)
        assert eta_power_law(phi, n, geometry) == pytest.approx(ref, rel=1e-5), (phi, n)


@pytest.mark.parametrize("n", [1.5, 3.0])
def test_power_law_strong_diffusion_against_solve_bvp(n):
    # Phi = 1e3 in a sphere (boundary layer 1e-3 of the radius): solve_bvp on up to 2e5 nodes
    ref = power_law_reference(1e3, n, 2, max_nodes=200_000)
    assert eta_power_law(1e3, n, "sphere") == pytest.approx(ref, rel=1e-5)


@pytest.mark.parametrize("geometry", ["cylinder", "sphere"])
def test_power_law_dead_core_against_shooting(geometry):
    # independent reference: solve_ivp from the edge of the dead core (derived local solution)
    a = SHAPES[geometry]
    for n in (0.0, 0.25, 0.5, 0.75):
        for xi_c in (0.02, 0.5, 0.9, 0.999):
            phi, eta = dead_core_reference(n, a, xi_c)
            assert eta_power_law(phi, n, geometry) == pytest.approx(eta, rel=1e-6), (n, xi_c)


def test_power_law_paths_broadcasting_and_slope():
    rng = np.random.default_rng(7)
    phi = 10 ** rng.uniform(-3.5, 6.5, (6, 40))
    rows = rng.uniform(0.0, 3.0, (6, 1))
    full = np.broadcast_to(rows, phi.shape).copy()
    mixed = rng.uniform(0.0, 3.0, phi.shape)
    for geometry in GEOMETRIES:
        e_rows = eta_power_law(phi, rows, geometry)
        e_full = eta_power_law(phi, full, geometry)          # detected as constant rows
        e_pts = np.array([[eta_power_law(p, n, geometry) for p, n in zip(pr, nr, strict=True)]
                          for pr, nr in zip(phi, full, strict=True)])
        assert e_rows.shape == phi.shape
        assert np.allclose(e_rows, e_full, rtol=1e-13, atol=0)
        assert np.allclose(e_rows, e_pts, rtol=1e-12, atol=0)
        e_mixed = eta_power_law(phi, mixed, geometry)        # one order per point
        e_mixed_1 = np.array([[eta_power_law(p, n, geometry) for p, n in zip(pr, nr, strict=True)]
                              for pr, nr in zip(phi, mixed, strict=True)])
        assert np.allclose(e_mixed, e_mixed_1, rtol=1e-12, atol=0)
        # slope d ln eta / d ln Phi against central differences of the interpolant
        eta, slope = eta_power_law(phi, mixed, geometry, return_slope=True)
        h = 1e-5
        fd = (np.log(eta_power_law(phi * np.exp(h), mixed, geometry))
              - np.log(eta_power_law(phi * np.exp(-h), mixed, geometry))) / (2 * h)
        assert np.allclose(slope, fd, atol=1e-6)
    special = eta_power_law(np.array([0.0, np.inf, np.nan]), 0.5, "sphere")
    assert special[0] == 1.0 and special[1] == 0.0 and np.isnan(special[2])


def test_power_law_order_validation():
    for bad in (-0.1, 3.01, np.nan):
        with pytest.raises(ModelError, match=r"reaction order must lie in \[0, 3\]"):
            eta_power_law(1.0, bad, "slab")
    with pytest.raises(ModelError, match="generalised modulus must be >= 0"):
        eta_power_law(-1.0, 1.0, "slab")


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_power_law_properties(geometry):
    # common practice: isothermal, positive order -> eta <= 1, decreasing with the modulus;
    # orders between the blend limits (0.45..0.6) included
    phi = np.logspace(-3, 4, 400)
    for n in (0.05, 0.3, 0.46, 0.55, 0.61, 1.0, 1.7, 3.0):
        eta = eta_power_law(phi, n, geometry)
        assert np.all(eta <= 1.0 + 1e-12)
        assert np.all(np.diff(eta) < 0.0)
        # eta Phi rises to its limit 1 (up to interpolation ripple of 1e-7 where the dead zone
        # of a slab sets in)
        assert np.all(np.diff(eta * phi) > -1e-7)


@pytest.mark.slow
def test_table_file_matches_a_fresh_build():
    # the shipped kinfit/data/power_law_eta.npz (package data: its absence is a failure) must be
    # what the code builds. Every field is a logarithm (ln eta, ln eta Phi, ln Phi/Phi_c), so an
    # absolute difference is a relative one in eta. The nodes come from DOP853 runs at rtol
    # 1e-12 over long trajectories, whose last digits differ between CPUs and libm builds
    # (measured up to 2.3e-9 near ln eta = -4 on another x86-64 machine); the interpolated eta
    # is stated good to 5e-6 relative (_pellet_table docstring), so node values that agree to
    # 5e-8, 1 % of that, give the same table for every use.
    with np.load(_pellet_table.TABLE_FILE) as data:
        for geometry, a in SHAPES.items():
            fresh = _pellet_phase.grid_values(a)
            for field, val in fresh.items():
                assert np.allclose(data[f"{geometry}/{field}"], val, rtol=0, atol=5e-8)


# --------------------------------------------------------------------------------------------
# generalised moduli


def test_generalized_modulus_power_formula():
    # Phi = L sqrt((n+1)/2 k_v Cs^(n-1) / (De C_ref^n)) (derived; Aris 1965) against the
    # defining integral evaluated numerically
    rng = np.random.default_rng(3)
    Cs = rng.uniform(1.0, 2000.0, (3, 5))
    for n in (0.0, 0.5, 1.0, 2.3):
        kv = 50.0
        phi = generalized_modulus_power(LEN, kv, Cs, n, DE, C_REF)
        num = generalized_modulus(lambda C, n=n, kv=kv: kv * (C / C_REF) ** n, Cs, DE, LEN)
        assert rel(phi, num) < 1e-12
    # first order: the Aris modulus L sqrt(k/De) with k = k_v/C_ref (Thiele 1939; Aris 1957)
    assert generalized_modulus_power(LEN, 100.0, 7.0, 1.0, DE, C_REF) == pytest.approx(
        LEN * np.sqrt(100.0 / C_REF / DE), rel=1e-15)
    assert generalized_modulus_power(LEN, 1.0, 0.0, 0.5, DE, C_REF) == np.inf
    with pytest.raises(ModelError, match="effective diffusivity De must be finite and > 0"):
        generalized_modulus_power(LEN, 1.0, 1.0, 1.0, -DE, C_REF)


def test_generalized_modulus_langmuir_hinshelwood():
    # Aris 1965; Bischoff 1965 (derived): int_0^Cs kC/(1+KC) dC = (k/K)[Cs - ln(1+K Cs)/K]
    k, K = 3.0, np.array([[1e-4], [1e-2], [1.0]])
    Cs = np.array([[0.5, 10.0, 800.0]])
    integral = (k / K) * (Cs - np.log1p(K * Cs) / K)
    expected = LEN * (k * Cs / (1 + K * Cs)) / np.sqrt(2 * DE * integral)
    got = generalized_modulus(lambda C: k * C / (1 + K[..., None] * C),
                              np.broadcast_to(Cs, (3, 3)), DE, LEN)
    assert rel(got, expected) < 1e-9


def test_modulus_proportional_to_particle_size():
    # common practice: the modulus scales with the characteristic length (particle size)
    def r(C):
        return 2.0 * C / (1 + 0.01 * C)

    base = generalized_modulus(r, 50.0, DE, LEN)
    assert generalized_modulus(r, 50.0, DE, 3 * LEN) == pytest.approx(3 * base, rel=1e-14)
    assert generalized_modulus_power(2 * LEN, 5.0, 50.0, 1.5, DE, C_REF) == pytest.approx(
        2 * generalized_modulus_power(LEN, 5.0, 50.0, 1.5, DE, C_REF), rel=1e-15)


# --------------------------------------------------------------------------------------------
# numerical pellet solution


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_pellet_eta_first_order_closed_form(geometry):
    # Thiele/Aris closed form; (2, 25) points: two parameter sets times 25 moduli
    phi = np.logspace(-3, 3, 25)
    rate, drate, Cs = power_rate(1.0, np.vstack([phi, phi[::-1]]), np.array([[5.0], [300.0]]))
    eta, modulus = pellet_eta(rate, drate, Cs, DE, LEN, geometry)
    assert eta.shape == (2, 25)
    assert rel(modulus, np.vstack([phi, phi[::-1]])) < 1e-12
    assert rel(eta, eta_first_order(modulus, geometry)) < 1e-4


@pytest.mark.parametrize("geometry", GEOMETRIES)
@pytest.mark.parametrize("n", [0.0, 0.5, 1.5, 2.0, 3.0])
def test_pellet_eta_power_law_against_table(geometry, n):
    # zero order (rate k down to C = 0: obstacle problem), dead zones (n = 0.5), n > 1
    phi = np.logspace(-3, 3, 31)
    rate, drate, Cs = power_rate(n, phi, 2.0)
    eta, modulus = pellet_eta(rate, drate, Cs, DE, LEN, geometry)
    assert rel(modulus, phi) < 1e-12
    assert rel(eta, eta_power_law(phi, n, geometry)) < 1e-4


@pytest.mark.parametrize("geometry", ["slab", "sphere"])
def test_pellet_eta_langmuir_hinshelwood_against_solve_bvp(geometry):
    # r = k C/(1 + K C) with K Cs = 0.1 and 10; reference solve_bvp (tol 1e-10) per point
    a = SHAPES[geometry]
    Cs = 100.0
    R = (a + 1) * LEN
    for KCs in (0.1, 10.0):
        K = KCs / Cs
        k = np.array([1e-2, 1.0, 30.0, 300.0]) ** 2 * DE / R**2 * (1 + KCs)
        kk = k[:, None]
        eta, _ = pellet_eta(lambda C, kk=kk, K=K: kk * C / (1 + K * C),
                            lambda C, kk=kk, K=K: kk / (1 + K * C) ** 2,
                            np.full(k.shape, Cs), DE, LEN, geometry)
        for i, ki in enumerate(k):
            # u'' + (a/xi) u' = g2 u/(1 + KCs u), extended as an odd function of u so that
            # the collocation iterates cannot reach the pole at u = -1/KCs
            g2 = R**2 * ki / DE
            ref = reference_eta(lambda u, g2=g2, b=KCs: g2 * u / (1 + b * np.abs(u)),
                                lambda u, g2=g2, b=KCs: g2 / (1 + b * np.abs(u)) ** 2, a,
                                1.0 / np.sqrt(g2 / (1 + KCs)), clip=False)
            assert eta[i] == pytest.approx(ref, rel=1e-4), (KCs, ki)


def test_pellet_eta_reversible_and_backward():
    # r = k (C - C_eq): first order in C - C_eq, so eta is the closed form at L sqrt(k/De)
    # whatever Cs is, on either side of C_eq and at Cs = C_eq (the linearised limit)
    k = 2.5e2 * DE / LEN**2
    C_eq = 40.0
    Cs = np.array([100.0, 41.0, 10.0, 40.0])
    eta, phi = pellet_eta(lambda C: k * (C - C_eq), lambda C: k + 0 * C, Cs, DE, LEN, "sphere",
                          C_eq=C_eq)
    exact = eta_first_order(LEN * np.sqrt(k / DE), "sphere")
    assert rel(eta, exact) < 1e-6
    assert rel(phi, LEN * np.sqrt(k / DE)) < 1e-6


def test_reversible_rate_law_takes_the_closed_form_on_the_surface_path():
    # the first-order reversible law r = k [C - (C0 - C)/K]/C_ref is linear in C - C_eq, so
    # the surface path uses eta_first_order at L sqrt(rho k (1 + 1/K)/(C_ref De)) (Aris 1975,
    # common practice); it must agree with the numerical pellet solver (pellet_eta, checked
    # above against the closed form and solve_bvp) at, above and below equilibrium
    from kinfit.kinetics import make_rate_law
    from kinfit.transport.surface import PelletRate

    law = make_rate_law("reversible", reference_temperature=330.0,
                        reference_concentration=1000.0)
    p = {"k_ref": np.array(0.8), "activation_energy": np.array(5e4),
         "equilibrium_constant": np.array(3.0), "reaction_enthalpy": np.array(-2e4)}
    T = np.array([[320.0, 330.0, 345.0, 345.0, 330.0]])
    C0 = np.full((1, 5), 800.0)
    L = np.array([[2e-6, 2e-5, 5e-5, 1e-4, 3e-5]])
    pr = PelletRate(law, p, T, C0, 1e-10, L, 1400.0, "sphere")
    assert pr.slope is not None
    Ceq = np.asarray(law.equilibrium_concentration(T, p, C0=C0))
    Cs = np.array([[700.0, 400.0, 300.0, 100.0, 20.0]])
    g, dg, eta, phi, r = pr(Cs)
    g_num, dg_num, eta_num, phi_num, _ = pr._general(Cs, r, True)
    assert rel(eta, eta_num) < 2e-5 and rel(phi, phi_num) < 1e-6
    assert rel(g, g_num) < 2e-5
    assert np.any(Cs < Ceq) and np.all(np.sign(g) == np.sign(Cs - Ceq))  # runs backwards
    h = 1e-3
    fd = (pr(Cs + h, derivative=False)[0] - pr(Cs - h, derivative=False)[0]) / (2 * h)
    assert rel(dg, fd) < 1e-8 and rel(dg, dg_num) < 1e-4


def test_pellet_eta_properties():
    # common practice: eta <= 1 for isothermal positive-order kinetics, decreasing with the
    # modulus; the modulus is proportional to the particle size
    Cs = np.full(30, 20.0)
    sizes = LEN * np.logspace(-1, 3, 30)
    eta, phi = pellet_eta(lambda C: 5.0 * C / (1 + 0.2 * C), lambda C: 5.0 / (1 + 0.2 * C) ** 2,
                          Cs, DE, sizes, "cylinder")
    assert np.all(eta <= 1.0) and np.all(np.diff(eta) < 0)
    assert rel(phi / sizes, phi[0] / sizes[0]) < 1e-12


def test_pellet_eta_errors():
    Cs = np.array([1.0, 2.0])
    with pytest.raises(SolverError, match="rate_v returned a non-finite value"), \
            np.errstate(invalid="ignore"):
        pellet_eta(lambda C: np.sqrt(C - 0.5), lambda C: 0.5 / np.sqrt(C - 0.5), Cs, DE, LEN,
                   "slab")
    with pytest.raises(ModelError, match="must be positive above C_eq"):
        pellet_eta(lambda C: -C, lambda C: -1 + 0 * C, Cs, DE, LEN, "slab")
    with pytest.raises(SolverError, match="did not converge at 2 of 2 points"):
        pellet_eta(lambda C: 1e3 * C**2, lambda C: -1e3 * C, Cs, DE, LEN, "sphere")
    with pytest.raises(StudyError, match="'n_grid' option of pellet_eta"):
        pellet_eta(lambda C: C, lambda C: 1 + 0 * C, Cs, DE, LEN, "slab", n_grid=30)
    with pytest.raises(ModelError, match="characteristic length L"):
        pellet_eta(lambda C: C, lambda C: 1 + 0 * C, Cs, DE, 0.0, "slab")
    with pytest.raises(StudyError, match="not a recognised pellet shape"):
        pellet_eta(lambda C: C, lambda C: 1 + 0 * C, Cs, DE, LEN, "pellet")
