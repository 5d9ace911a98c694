"""Values that a wrong formula would change, each against a hand calculation (source named) or a
reference computed here with scipy, never with kinfit's own functions.

These close gaps found by mutation testing (tests/benchmarks/bench_mutation.py): derived
outputs no other test asserted, non-default options, thresholds and small-value edges.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from scipy.optimize import brentq

from kinfit.calculator import criteria_from_measurement, format_criteria
from kinfit.criteria import compute_criteria
from kinfit.errors import SolverError, StudyError
from kinfit.kinetics import ExpressionRate, ReversibleFirstOrder
from kinfit.reactors import cstr_outlet
from kinfit.transport.film import SlurryFilm, sherwood_sano
from kinfit.transport.pellet import pellet_eta
from kinfit.transport.properties import make_fluid


def _eta_sphere_first_order(phi_R: float) -> float:
    """Thiele (1939), sphere, first order, radius modulus: eta = 3 (phi coth phi - 1)/phi^2."""
    return 3.0 * (phi_R / math.tanh(phi_R) - 1.0) / phi_R**2


# ---------------------------------------------------------------------------------------------
# compute_criteria: the numbers themselves, with a particle density that is not 1
# ---------------------------------------------------------------------------------------------


def test_criteria_values_with_particle_density():
    # Weisz & Prater (1954): Psi_L = r_obs rho_p L^2/(De Cs), L = dp/6 for a sphere;
    # Carberry (1976): Ca = r_obs/(kc a_m Cb) with a_m = 6/(rho_p dp); Mears (1971):
    # r_obs rho_p (dp/2) n/(kc Cb). Hand numbers for r = 0.01 mol/(kg s), rho_p = 1200 kg/m^3,
    # dp = 1e-4 m, De = 1e-9 m^2/s, kc = 2e-4 m/s, Cb = 60, Cs = 50 mol/m^3, n = 1:
    # L = 1.6667e-5 m, a_m = 50 m^2/kg; Psi_L = 12 * 2.7778e-10/5e-8 = 0.066667;
    # Ca = 0.01/(2e-4 * 50 * 60) = 0.016667; Mears = 0.01 * 1200 * 5e-5/(2e-4 * 60) = 0.05
    r, rho, dp, De, kc, Cb, Cs = 0.01, 1200.0, 1e-4, 1e-9, 2e-4, 60.0, 50.0
    crit = compute_criteria(
        observed_rate=np.array([r]), bulk_concentration=np.array([Cb]),
        surface_concentration=np.array([Cs]), intrinsic_rate=np.array([0.0125]),
        effectiveness=np.array([0.8]), thiele_modulus=np.array([0.7]), kc=np.array([kc]),
        particle_diameter=np.array([dp]), particle_density=rho,
        effective_diffusivity=np.array([De]), geometry="sphere", order=1.0)
    L, a_m = dp / 6.0, 6.0 / (rho * dp)
    assert crit.weisz_prater[0] == pytest.approx(r * rho * L**2 / (De * Cs), rel=1e-12)
    assert crit.weisz_prater[0] == pytest.approx(0.0666667, rel=1e-6)
    assert crit.carberry[0] == pytest.approx(r / (kc * a_m * Cb), rel=1e-12)
    assert crit.carberry[0] == pytest.approx(0.01666667, rel=1e-6)
    assert crit.mears[0] == pytest.approx(0.05, rel=1e-12)
    # resistances in series per kg (results contract): film 1/(kc a_m) = 100 kg s/m^3;
    # k1 = r(Cs)/Cs = 0.0125/50 = 2.5e-4 m^3/(kg s): reaction 4000, pore (1/0.8 - 1) 4000 = 1000
    total = 100.0 + 4000.0 + 1000.0
    assert crit.film_share[0] == pytest.approx(100.0 / total, rel=1e-12)
    assert crit.reaction_share[0] == pytest.approx(4000.0 / total, rel=1e-12)
    assert crit.pore_share[0] == pytest.approx(1000.0 / total, rel=1e-12)


def test_criteria_weisz_prater_equals_eta_phi_squared_first_order():
    # Weisz & Prater (1954): for first order Psi = eta Phi^2 in one normalisation. Sphere with
    # k_v = 40 1/s, De = 1e-9, R = 2.5e-5 m: phi_R = R sqrt(k_v/De) = 5, eta by Thiele (1939);
    # Phi_L = phi_R/3. The observed rate per kg is eta k_v Cs/rho_p, so a density mistake in
    # Psi shows as a factor rho_p^2 here.
    kv, De, R, rho, Cs = 40.0, 1e-9, 2.5e-5, 1800.0, 20.0
    phi_R = R * math.sqrt(kv / De)
    eta = _eta_sphere_first_order(phi_R)
    r_obs = eta * kv * Cs / rho
    crit = compute_criteria(
        observed_rate=np.array([r_obs]), bulk_concentration=np.array([Cs]),
        surface_concentration=np.array([Cs]), intrinsic_rate=np.array([kv * Cs / rho]),
        effectiveness=np.array([eta]), thiele_modulus=np.array([phi_R / 3]),
        kc=np.array([np.inf]), particle_diameter=np.array([2 * R]), particle_density=rho,
        effective_diffusivity=np.array([De]), geometry="sphere", order=1.0)
    assert crit.weisz_prater[0] == pytest.approx(eta * (phi_R / 3.0) ** 2, rel=1e-12)
    assert crit.carberry[0] == 0.0 and crit.film_share[0] == 0.0   # no film
    # pore share (1/eta - 1)/(1/eta) = 1 - eta with no film
    assert crit.pore_share[0] == pytest.approx(1.0 - eta, rel=1e-12)


# ---------------------------------------------------------------------------------------------
# Calculator: shares and the Carberry number at and just above 1
# ---------------------------------------------------------------------------------------------


def test_calculator_shares_against_an_independent_inversion():
    # first order sphere. eta from the Weisz-Prater number by inverting Psi_L = eta(Phi) Phi^2
    # (Weisz & Prater 1954) with scipy's brentq and Thiele's (1939) closed form, phi_R = 3 Phi;
    # then resistances in series per kg: film 1/(kc a_m), reaction 1/k1 and pore
    # (1/eta - 1)/k1 with k1 = (r/eta)/Cs, a_m = 6/(rho_p dp) (common practice)
    r, dp, rho, Cb, De, kc = 0.05, 2e-4, 1400.0, 200.0, 2e-9, 5e-5
    res = criteria_from_measurement(rate=r, particle_diameter=dp, particle_density=rho,
                                    bulk_concentration=Cb, effective_diffusivity=De,
                                    film_coefficient=kc, order=1.0, geometry="sphere")
    a_m = 6.0 / (rho * dp)
    Cs = Cb - r / (kc * a_m)
    L = dp / 6.0
    psi = r * rho * L**2 / (De * Cs)
    Phi = brentq(lambda x: _eta_sphere_first_order(3 * x) * x * x - psi, 1e-6, 1e3, xtol=1e-14)
    eta = _eta_sphere_first_order(3 * Phi)
    k1 = (r / eta) / Cs
    film, react, pore = 1.0 / (kc * a_m), 1.0 / k1, (1.0 / eta - 1.0) / k1
    total = film + react + pore
    assert res["surface_concentration"] == pytest.approx(Cs, rel=1e-12)
    assert res["effectiveness_factor"] == pytest.approx(eta, rel=1e-6)
    assert res["thiele_modulus"] == pytest.approx(Phi, rel=1e-6)
    # eta carries the pellet solution's accuracy (1e-6) into the shares
    assert res["shares"]["film"] == pytest.approx(film / total, rel=1e-5)
    assert res["shares"]["reaction"] == pytest.approx(react / total, rel=1e-5)
    assert res["shares"]["pore"] == pytest.approx(pore / total, rel=1e-5)
    assert sum(res["shares"].values()) == pytest.approx(1.0, rel=1e-12)
    assert 0.05 < pore / total < 0.95 and 0.05 < film / total   # every term counts here
    text = format_criteria(res)
    assert (f"resistance shares: film {100 * film / total:.1f} %, pore {100 * pore / total:.1f} "
            f"%, reaction {100 * react / total:.1f} %") in text


def test_calculator_without_a_pellet_model():
    # no diffusivity: Carberry (1976) by hand, a_m = 6/(1000 * 1e-4) = 60 m^2/kg,
    # kc a_m = 6e-3 m^3/(kg s), Ca = 0.3/(6e-3 * 100) = 0.5, Cs = Cb (1 - Ca) = 50; the pore
    # resistance is unknown, so the shares are not assessed
    res = criteria_from_measurement(rate=0.3, particle_diameter=1e-4, particle_density=1000.0,
                                    bulk_concentration=100.0, film_coefficient=1e-4)
    assert res["carberry"] == pytest.approx(0.5, rel=1e-12)
    assert res["surface_concentration"] == pytest.approx(50.0, rel=1e-12)
    assert res["mears"] == pytest.approx(3 * 1.0 * 0.5, rel=1e-12)     # 3 n Ca (Mears 1971)
    assert res["shares"]["pore"] is None


@pytest.mark.parametrize("ca", [1.0 + 1e-9, 1.02, 1.05, 1.099])
def test_calculator_rejects_a_rate_above_the_film_maximum(ca):
    # Ca = r/(kc a_m Cb) >= 1 means the observed rate exceeds kc a_m Cb, the most a film can
    # carry (Cs = 0; Carberry 1976): the measurement is inconsistent and must be refused
    kc, dp, rho, Cb = 1e-4, 1e-4, 1000.0, 100.0
    r = ca * kc * (6.0 / (rho * dp)) * Cb
    with pytest.raises(StudyError, match=r"exceeds what the film can carry.*Carberry number"):
        criteria_from_measurement(rate=r, particle_diameter=dp, particle_density=rho,
                                  bulk_concentration=Cb, film_coefficient=kc,
                                  effective_diffusivity=1e-9)


def test_calculator_rejects_carberry_exactly_one():
    # Ca = 1 exactly leaves Cs = 0: still refused with the film message, not a division error.
    # The rate is built from the external area the calculator reports for a small rate (the
    # input, not the expected value), so that r/(kc a_m Cb) is 1.0 to the last bit.
    kc, dp, rho, Cb = 1e-4, 1e-4, 1000.0, 100.0
    base = dict(particle_diameter=dp, particle_density=rho, bulk_concentration=Cb,
                film_coefficient=kc)
    a_m = criteria_from_measurement(rate=1e-6, **base)["external_area"]
    r = kc * a_m * Cb
    assert r / (kc * a_m * Cb) == 1.0
    with pytest.raises(StudyError, match="exceeds what the film can carry"):
        criteria_from_measurement(rate=r, **base)


def test_calculator_accepts_carberry_just_below_one():
    # Ca = 0.99: legal, film-limited; Cs = 0.01 Cb (Carberry 1976: Cs/Cb = 1 - Ca)
    kc, dp, rho, Cb = 1e-4, 1e-4, 1000.0, 100.0
    r = 0.99 * kc * 60.0 * Cb
    res = criteria_from_measurement(rate=r, particle_diameter=dp, particle_density=rho,
                                    bulk_concentration=Cb, film_coefficient=kc)
    assert res["surface_concentration"] == pytest.approx(1.0, rel=1e-9)
    assert res["passes"]["carberry"] is False


# ---------------------------------------------------------------------------------------------
# Slurry film with a Carman shape factor other than 1
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("phi_c", [0.6, 0.8])
def test_sano_shape_factor(phi_c):
    # Sano, Yamaguchi & Adachi (1974): Sh phi_c = 2 + 0.4 (eps dp^4/nu^3)^(1/4) Sc^(1/3).
    # Hand numbers at eps = 1.5625 W/kg, dp = 50 um, nu = 8.927e-7 m^2/s, Sc = 892.7:
    # (eps dp^4/nu^3)^(1/4) = 1.5483, Sc^(1/3) = 9.6285, Sh phi_c = 9.4136
    eps, dp, nu, Sc = 1.5625, 50e-6, 8.927e-7, 892.7
    hand = (2.0 + 0.4 * (eps * dp**4 / nu**3) ** 0.25 * Sc ** (1.0 / 3.0)) / phi_c
    assert float(hand * phi_c) == pytest.approx(9.4136, rel=5e-5)
    assert float(sherwood_sano(eps, dp, nu, Sc, shape_factor=phi_c)) == pytest.approx(
        hand, rel=1e-12)
    # through the film model: N = 10 1/s, N_p = 5, D = 0.05 m, V = 1 L gives eps = 1.5625
    fluid = make_fluid(None, viscosity=8.927e-4, density=1000.0, diffusivity=1e-9)
    film = SlurryFilm(fluid=fluid, power_number=5.0, impeller_diameter=0.05,
                      liquid_volume=1e-3, shape_factor=phi_c)
    kc = float(film.kc(np.array(10.0), dp, 298.15, {}))
    assert kc * dp / 1e-9 == pytest.approx(9.4136 / phi_c, rel=5e-5)


# ---------------------------------------------------------------------------------------------
# Expression rate law: derivative for 0 <= C < 1
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("C", [0.0, 0.25, 0.5, 0.999, 1.0, 3.0])
def test_expression_rate_derivative_below_one(C):
    # r = k C/(1 + b C): dr/dC = k/(1 + b C)^2 (quotient rule, hand calculation)
    k, b = 3.0, 0.5
    law = ExpressionRate(expression="k*C/(1 + b*C)")
    got = float(law.drate_dC(C, 300.0, {"k": k, "b": b}))
    assert got == pytest.approx(k / (1.0 + b * C) ** 2, rel=1e-13)


def test_expression_rate_derivative_below_zero_is_zero():
    # the law is evaluated at max(C, 0): constant below zero, so its derivative is 0 there
    law = ExpressionRate(expression="k*C**2")
    got = law.drate_dC(np.array([-2.0, -1e-9, 0.5]), 300.0, {"k": 2.0})
    np.testing.assert_allclose(got, [0.0, 0.0, 2.0], rtol=1e-13, atol=0)


# ---------------------------------------------------------------------------------------------
# CSTR with an inlet near equilibrium
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("gap", [0.4, 0.999, 1e-3])
def test_cstr_outlet_near_equilibrium(gap):
    # reversible first order r = k (C - C_eq) in a mixed-flow reactor at steady state:
    # (C_in - C)/tau = w k (C - C_eq)  =>  C = (C_in + tau w k C_eq)/(1 + tau w k)
    # (mixed-flow mass balance, Levenspiel 1999, ch. 5). With tau w k = 3 the driving force
    # falls to a quarter, however close C_in is to C_eq.
    k, w, tau, C_eq = 0.01, 3.0, 100.0, 250.0
    C_in = np.array([C_eq + gap])
    got = cstr_outlet(lambda c: k * (c - C_eq), C_in, tau, w, C_eq=C_eq)
    expected = (C_in + tau * w * k * C_eq) / (1.0 + tau * w * k)
    # a root in C to 1e-11 |C_in| (far above rounding, 1e-16 |C|); a mutant that leaves the
    # feed unconverted is off by 0.75 gap >= 7.5e-4 mol/m^3
    np.testing.assert_allclose(got, expected, rtol=0, atol=1e-11 * C_in[0])
    np.testing.assert_allclose(got - C_eq, gap / 4.0, rtol=0, atol=1e-11 * C_in[0])


# ---------------------------------------------------------------------------------------------
# Pellet solver: which point the non-convergence message names
# ---------------------------------------------------------------------------------------------


def _second_order(k):
    k = np.asarray(k, dtype=float)

    def rate(C):
        return k[..., None] * C * C

    def drate(C):
        return 2.0 * k[..., None] * C

    return rate, drate


def test_pellet_not_converged_names_the_first_failing_point():
    # point 0 has a tiny modulus (its start profile is already the solution), points 1 and 2 a
    # large one; one Newton iteration cannot settle those, so the message must name point 1
    # and its Cs (the inputs set by this test)
    k = np.array([1e-12, 50.0, 50.0])
    Cs = np.array([1.0, 2.5, 4.0])
    rate, drate = _second_order(k)
    with pytest.raises(SolverError) as info:
        pellet_eta(rate, drate, Cs, 1e-9, 1e-3, "slab", max_iter=1)
    msg = str(info.value)
    assert re.search(r"at 2 of 3 points", msg), msg
    assert re.search(r"first at point 1: Cs = 2\.5 mol/m\^3", msg), msg


def test_pellet_single_failing_point_raises_solver_error():
    rate, drate = _second_order(np.array(50.0))
    with pytest.raises(SolverError, match=r"at 1 of 1 points.*first at point 0: Cs = 3 "):
        pellet_eta(rate, drate, np.array(3.0), 1e-9, 1e-3, "sphere", max_iter=1)


# ---------------------------------------------------------------------------------------------
# Reversible first order: the linear slope used to start the surface iteration
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("T", [300.0, 340.0])
def test_reversible_first_order_slope(T):
    # r = k [C - (C0 - C)/K]/C_ref is linear in C, so dr/dC = k (1 + 1/K)/C_ref (hand
    # calculation); k by Arrhenius and K by van 't Hoff about T_ref = 300 K, R = N_A k_B =
    # 8.31446261815324 J/(mol K) (exact, SI 2019 / CODATA 2018)
    law = ReversibleFirstOrder(reference_temperature=300.0, reference_concentration=1000.0)
    p = {"k_ref": 2.0, "activation_energy": 50e3, "equilibrium_constant": 3.0,
         "reaction_enthalpy": -20e3}
    R = 8.31446261815324
    k = 2.0 * math.exp(-50e3 / R * (1.0 / T - 1.0 / 300.0))
    K = 3.0 * math.exp(20e3 / R * (1.0 / T - 1.0 / 300.0))
    slope = k * (1.0 + 1.0 / K) / 1000.0
    assert float(law.linear_slope(T, p, C0=800.0)) == pytest.approx(slope, rel=1e-12)
    assert float(law.drate_dC(123.0, T, p, C0=800.0)) == pytest.approx(slope, rel=1e-12)
    # and the rate vanishes at C0/(1 + K), to rounding of its terms (about k C0/C_ref)
    assert float(law.rate(800.0 / (1.0 + K), T, p, C0=800.0)) == pytest.approx(
        0.0, abs=1e-12 * k * 800.0 / 1000.0)


# ---------------------------------------------------------------------------------------------
# Sphere, first order, small modulus: the series branch of ln eta and its slope
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("p", [0.004, 0.01, 0.02, 0.033])
def test_first_order_sphere_series_branch_against_mpmath(p):
    # eta = 3 (x coth x - 1)/x^2 with x = 3 Phi (Thiele 1939); ln eta and d ln eta/d ln Phi at
    # 50 digits by mpmath (closed form and mpmath.diff). Below Phi = 1/30 kinfit uses the
    # series to x^8; the first omitted term leaves about 5e-12 relative in the slope at
    # Phi = 1/30 and less below, so 3e-11 is the check (a wrong series coefficient shows as
    # >= 3e-10)
    import mpmath as mp

    from kinfit.transport._lh_table import first_order_log

    mp.mp.dps = 50

    def ln_eta(log_p):
        x = 3 * mp.e**log_p
        return mp.log(3 * (x * mp.coth(x) - 1) / x**2)

    val, slope = first_order_log(np.array([p]), 2)
    lp = mp.log(mp.mpf(p))
    assert float(val[0]) == pytest.approx(float(ln_eta(lp)), rel=3e-11, abs=0)
    assert float(slope[0]) == pytest.approx(float(mp.diff(ln_eta, lp)), rel=3e-11,
                                         abs=0)


@pytest.mark.parametrize("geometry", ["slab", "sphere"])
def test_lh_shooting_reduces_to_first_order_at_low_coverage(geometry):
    # with K C -> 0 the Langmuir-Hinshelwood pellet is first order: the profile is
    # C = C_c cosh(s) (slab) or C_c sinh(s)/s (sphere) in s = Lambda xi (Thiele 1939), so the
    # scaled modulus for a centre depletion d = ln(C_s/C_c) solves cosh(Lambda) = e^d or
    # sinh(Lambda)/Lambda = e^d (scipy brentq). beta = K C_s = 1e-13 leaves 1e-13 of inhibition;
    # DOP853 at rtol 1e-12 gives 1e-12 relative, so the check is 1e-11
    from kinfit.transport._lh_table import scaled_modulus

    d = np.array([0.1, 0.5, 2.0, 5.0])
    if geometry == "slab":
        ref = np.arccosh(np.exp(d))
    else:
        ref = np.array([brentq(lambda x, di=di: math.log(math.sinh(x) / x) - di, 1e-3, 50.0,
                               xtol=1e-15, rtol=1e-15) for di in d])
    got = scaled_modulus(1e-13, d, 1, geometry)
    np.testing.assert_allclose(got, ref, rtol=1e-11)


# ---------------------------------------------------------------------------------------------
# Power-law eta table: the shipped file is what the builder gives
# ---------------------------------------------------------------------------------------------


def test_power_law_table_builder_reproduces_the_shipped_file():
    # the shipped table (checked against solve_bvp and shooting references in test_pellet.py)
    # is read at run time, so only a fresh build exercises the builder. Builds on different
    # machines agree to 2.3e-9 in these ln-eta fields (measured), far inside the table's 1e-6
    # interpolation accuracy: the check is 1e-7
    from kinfit.transport import _pellet_phase, _pellet_table

    if not _pellet_table.TABLE_FILE.exists():
        pytest.skip("no pre-built table file")
    with np.load(_pellet_table.TABLE_FILE) as data:
        for geometry, a in (("slab", 0), ("cylinder", 1), ("sphere", 2)):
            for name, fresh in _pellet_phase.grid_values(a).items():
                np.testing.assert_allclose(fresh, data[f"{geometry}/{name}"], rtol=0,
                                           atol=1e-7, err_msg=f"{geometry}/{name}")


@pytest.mark.parametrize("phi", [0.01, 0.02, 0.033])
def test_first_order_sphere_eta_series_against_mpmath(phi):
    # eta = 3 (x coth x - 1)/x^2, x = 3 Phi (Thiele 1939), at 50 digits; the x^8 series used
    # below x = 0.1 is exact to about 1e-16 there (next term of order x^10/1e6), so 1e-14
    import mpmath as mp

    from kinfit.transport.pellet import _eta_first_order

    mp.mp.dps = 50
    x = 3 * mp.mpf(phi)
    ref = float(3 * (x * mp.coth(x) - 1) / x**2)
    got = float(_eta_first_order(np.array([phi]), 2)[0])
    assert got == pytest.approx(ref, rel=1e-14, abs=0)


@pytest.mark.parametrize(("a", "c1"), [(1, 0.25), (2, 1.0 / 3.0), (0, 0.0)])
def test_large_modulus_coefficient_first_order(a, c1):
    # eta Phi = 1 - c1/Phi + ... at first order: sphere coth(3 Phi) - 1/(3 Phi) gives 1/3
    # (Thiele 1939); cylinder I1(2 Phi)/I0(2 Phi) ~ 1 - 1/(4 Phi) (Abramowitz & Stegun 1964,
    # 9.7.1); slab tanh gives 0. Checked against mpmath at Phi = 1e6 as well
    import mpmath as mp

    from kinfit.transport._pellet_phase import large_modulus_coefficient

    mp.mp.dps = 40
    P = mp.mpf(10) ** 6
    eta_phi = {0: mp.tanh(P), 1: mp.besseli(1, 2 * P) / mp.besseli(0, 2 * P),
               2: mp.coth(3 * P) - 1 / (3 * P)}[a]
    assert float(large_modulus_coefficient(np.array(1.0), a)) == pytest.approx(c1, rel=1e-14)
    assert float((1 - eta_phi) * P) == pytest.approx(c1, rel=1e-5, abs=1e-12)


def test_pellet_rejects_a_zero_surface_rate():
    # a rate of exactly 0 at Cs > C_eq has no pellet problem to solve (eta = r_obs/r(Cs) is
    # 0/0): refused at the surface check, with the message that names the point
    from kinfit.errors import ModelError

    with pytest.raises(ModelError, match=r"rate at the surface must be positive.*at point 1"):
        pellet_eta(lambda C: np.where(C > 1.5, 0.0, C), lambda C: np.ones_like(C),
                   np.array([1.0, 2.0]), 1e-9, 1e-4, "slab")


def test_pellet_well_resolved_case_gives_no_grid_warning():
    # first-order slab at Phi = 1: the default grid resolves it (tanh(Phi)/Phi, Thiele 1939, to
    # 1e-6 here), so no grid-error warning may be raised
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        eta, phi = pellet_eta(lambda C: 0.1 * C, lambda C: 0.1 + 0 * C, np.array([1.0]), 1e-9,
                              1e-4, "slab")
    assert float(eta[0]) == pytest.approx(math.tanh(phi[0]) / phi[0], rel=1e-6)


def test_effective_diffusivity_accepts_porosity_one():
    # De = eps D_m / tau (parallel-pore model, Wheeler 1951; common practice) is defined on
    # (0, 1]: eps = 1 (no solid) is the upper limit, De = D_m / tau
    from kinfit.transport.properties import effective_diffusivity

    assert float(effective_diffusivity(1.0, 2e-9, 4.0)) == pytest.approx(5e-10, rel=1e-15)
    assert float(effective_diffusivity(0.4, 2e-9, 4.0)) == pytest.approx(2e-10, rel=1e-15)
