"""Tabulated Langmuir-Hinshelwood effectiveness factor (kinfit/transport/_lh_table.py) and its
use on the surface path and in the model.

References: scipy's solve_bvp on the dimensionless LH pellet equations
u'' + (a/xi) u' = Lambda^2 u/(1 + beta u)^m, u'(0) = 0, u(1) = 1, eta = (a+1) u'(1)/g(1)
(tests/pellet_reference.py); the first-order closed forms (Thiele 1939; Aris 1975, common
practice); the zero-order slab (eta = 1 for Phi <= 1, 1/Phi beyond; Aris 1975, common practice);
the slab first integral 1/2 u'^2 = int g du (derived, common practice) evaluated with
scipy.integrate.quad; kinfit's own numerical pellet solver for the path comparisons.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from pellet_reference import reference_eta
from scipy.integrate import quad
from studies import study_text

from kinfit.errors import ModelError
from kinfit.kinetics import LangmuirHinshelwood
from kinfit.model import Model, ModelSpec
from kinfit.study import load_study
from kinfit.transport import _lh_table
from kinfit.transport.pellet import eta_langmuir_hinshelwood, pellet_eta
from kinfit.transport.surface import PelletRate

SHAPES = {"slab": 0, "cylinder": 1, "sphere": 2}
CASES = [(m, g) for m in (1, 2) for g in SHAPES]
TARGET = 2e-5                  # relative error in eta the table is built for


def lh_reference(phi: float, beta: float, m: int, a: int) -> float:
    """eta by solve_bvp (tol 1e-10) on the dimensionless LH pellet equations."""
    f, _ = _lh_table.modulus_factor(np.array(beta), m)
    lam2 = ((a + 1.0) * phi / float(f)) ** 2             # Lambda = (a+1) phi_1, phi_1 = Phi/f
    scale = (1.0 + beta) ** m                            # g(1) = Lambda^2/(1+beta)^m

    def g(u):
        return lam2 * u / (1.0 + beta * np.abs(u)) ** m

    def dg(u):
        v = beta * np.abs(u)
        return lam2 * (1.0 + (1.0 - m) * v) / (1.0 + v) ** (m + 1)

    return reference_eta(g, dg, a, np.sqrt(scale / lam2), clip=False, max_nodes=200_000)


@pytest.mark.parametrize(("m", "geometry"), CASES)
def test_table_against_solve_bvp(m, geometry):
    # off-node points across the domain (x and t drawn at random, seeded)
    rng = np.random.default_rng(17 + 3 * m + SHAPES[geometry])
    beta_max = _lh_table.BETA_MAX[(m, geometry)]
    x = rng.uniform(-2.5, 3.0, 9)
    t = rng.uniform(0.0, np.log1p(beta_max), 9)
    # the hardest corner: near the top of beta, around the bend of eta(Phi)
    x = np.append(x, [-0.23, -0.45, 0.01])
    t = np.append(t, np.log1p(beta_max) * np.array([0.99, 0.995, 0.98]))
    phi, beta = 10.0**x, np.expm1(t)
    got = eta_langmuir_hinshelwood(phi, beta, m, geometry)
    ref = np.array([lh_reference(p, b, m, SHAPES[geometry]) for p, b in zip(phi, beta,
                                                                           strict=True)])
    assert np.max(np.abs(got / ref - 1.0)) < TARGET


@pytest.mark.parametrize(("m", "geometry"), CASES)
def test_table_against_fine_grid_solver_between_nodes(m, geometry):
    # cell centres in both coordinates are where a cubic table errs most; the fine-grid
    # numerical solver (n_grid = 192, good to ~3e-9) is the reference on many of them
    xs, ts = _lh_table.x_nodes(m), _lh_table.t_nodes(m, geometry)
    xm = 0.5 * (xs[1:] + xs[:-1])[::7]
    tm = 0.5 * (ts[1:] + ts[:-1])[::3]
    X, T = np.meshgrid(xm, tm, indexing="ij")
    F = _lh_table.solve_log_correction(X, T, m, geometry)
    ln1, _ = _lh_table.first_order_log(10.0**X, SHAPES[geometry])
    got = eta_langmuir_hinshelwood(10.0**X, np.expm1(T), m, geometry)
    assert np.max(np.abs(got / np.exp(ln1 + F) - 1.0)) < TARGET


@pytest.mark.parametrize("m", [1, 2])
def test_first_order_limit(m):
    # beta -> 0: first order; sphere eta = 3/phi^2 (phi coth phi - 1), phi = 3 Phi
    # (Aris 1975, common practice); slab tanh(Phi)/Phi (Thiele 1939)
    phi = np.logspace(-3, 4, 29)
    p = 3.0 * phi
    sphere = 3.0 / p**2 * (p / np.tanh(p) - 1.0)
    got = eta_langmuir_hinshelwood(phi, 0.0, m, "sphere")
    assert np.max(np.abs(got / sphere - 1.0)) < 1e-8
    got = eta_langmuir_hinshelwood(phi, 1e-7, m, "slab")
    assert np.max(np.abs(got / (np.tanh(phi) / phi) - 1.0)) < 1e-6


def test_zero_order_limit_slab():
    # m = 1, K Cs >> 1: the rate is zero order over most of the pellet, and eta tends to the
    # zero-order slab, eta = 1 for Phi <= 1 and 1/Phi beyond (Aris 1975, common practice);
    # the deviation shrinks as beta grows
    phi = np.array([0.3, 0.6, 2.0, 5.0])
    zero = np.where(phi <= 1.0, 1.0, 1.0 / phi)
    dev = [np.max(np.abs(eta_langmuir_hinshelwood(phi, b, 1, "slab") / zero - 1.0))
           for b in (10.0, 100.0, 1000.0)]
    assert dev[0] > dev[1] > dev[2]
    assert dev[2] < 0.02


@pytest.mark.parametrize("geometry", list(SHAPES))
def test_asymptotes_outside_the_tabulated_moduli(geometry):
    # below Phi = 1e-2 and above 10^3.5 the correction is continued as Phi^2 and 1/Phi;
    # checked against solve_bvp at Phi = 1e-3 and 1e4
    for m in (1, 2):
        beta = 0.5 * _lh_table.BETA_MAX[(m, geometry)]
        phi = np.array([1e-3, 1e4])
        got = eta_langmuir_hinshelwood(phi, beta, m, geometry)
        ref = np.array([lh_reference(p, beta, m, SHAPES[geometry]) for p in phi])
        assert np.max(np.abs(got / ref - 1.0)) < TARGET


@pytest.mark.parametrize(("m", "geometry"), [(1, "sphere"), (2, "cylinder")])
def test_slopes_are_derivatives_of_the_table(m, geometry):
    rng = np.random.default_rng(5)
    phi = 10 ** rng.uniform(-2.8, 3.8, 40)
    beta = rng.uniform(0.01, 0.98 * _lh_table.BETA_MAX[(m, geometry)], 40)
    _, s_phi, s_beta = eta_langmuir_hinshelwood(phi, beta, m, geometry, return_slope=True)
    h = 1e-6

    def ln(p, b):
        return np.log(eta_langmuir_hinshelwood(p, b, m, geometry))

    fd_phi = (ln(phi * (1 + h), beta) - ln(phi * (1 - h), beta)) / (2 * h)
    fd_beta = (ln(phi, beta * (1 + h)) - ln(phi, beta * (1 - h))) / (2 * h)
    assert np.max(np.abs(s_phi - fd_phi)) < 1e-7
    assert np.max(np.abs(s_beta - fd_beta)) < 1e-7


def test_patches_reproduce_the_scipy_spline():
    tab = _lh_table.lh_table(2, "sphere")
    rng = np.random.default_rng(3)
    x = rng.uniform(-2.0, 3.5, 2000)
    t = rng.uniform(0.0, np.log1p(tab.beta_max), 2000)
    F, Fx, Ft = _lh_table._evaluate(tab, x, t)
    np.testing.assert_allclose(F, tab.spline.ev(x, t), rtol=0, atol=1e-13)
    np.testing.assert_allclose(Fx, tab.spline.ev(x, t, dx=1), rtol=0, atol=1e-10)
    np.testing.assert_allclose(Ft, tab.spline.ev(x, t, dy=1), rtol=0, atol=1e-11)


def test_bad_input():
    with pytest.raises(ModelError, match="outside the tabulated"):
        eta_langmuir_hinshelwood(1.0, 8.0, 2, "sphere")
    with pytest.raises(ModelError, match="m must be 1 or 2"):
        eta_langmuir_hinshelwood(1.0, 1.0, 3, "sphere")
    with pytest.raises(ModelError, match=">= 0"):
        eta_langmuir_hinshelwood(-1.0, 1.0, 1, "sphere")
    eta = eta_langmuir_hinshelwood([0.0, np.inf, np.nan], 1.0, 1, "slab")
    assert eta[0] == 1.0 and eta[1] == 0.0 and np.isnan(eta[2])


# --------------------------------------------------------------------------------------------
# uniqueness of the m = 2 pellet


def slab_scaled_modulus(beta: float, depletion: float, m: int = 2) -> float:
    """Lambda of the slab profile with centre K C_c = beta e^-depletion, from the first integral
    1/2 v'^2 = G(v) - G(v_c), G' = v/(1+v)^m (derived, common practice): Lambda =
    int_{v_c}^{beta} dv / sqrt(2 (G(v) - G(v_c))), with v = v_c + w^2 to remove the
    endpoint singularity; scipy.integrate.quad."""
    vc = beta * np.exp(-depletion)

    def G(v):
        return quad(lambda y: y / (1 + y) ** m, vc, v, epsabs=0, epsrel=1e-13)[0]

    top = np.sqrt(beta - vc)
    return quad(lambda w: 2 * w / np.sqrt(2 * G(vc + w * w)) if w > 0 else
                2.0 / np.sqrt(2 * vc / (1 + vc) ** m), 0.0, top, epsabs=0, epsrel=1e-11)[0]


def test_shooting_matches_slab_quadrature():
    d = np.array([0.01, 0.5, 3.0])
    got = _lh_table.scaled_modulus(4.0, d, 2, "slab")
    ref = np.array([slab_scaled_modulus(4.0, x) for x in d])
    np.testing.assert_allclose(got, ref, rtol=1e-7)


def test_slab_multiplicity_by_quadrature():
    # unique at the table's beta_max (Lambda increases with the centre depletion), several
    # steady states above the onset (Lambda falls somewhere: one modulus, three profiles)
    d = np.linspace(0.5, 6.0, 56)
    top = _lh_table.BETA_MAX[(2, "slab")]
    assert np.all(np.diff([slab_scaled_modulus(top, x) for x in d]) > 0)
    assert np.any(np.diff([slab_scaled_modulus(11.0, x) for x in d]) < 0)


@pytest.mark.parametrize("geometry", list(SHAPES))
def test_m2_domain_stays_below_the_multiplicity_onset(geometry):
    d = np.logspace(np.log10(0.3), np.log10(30.0), 120)
    top = _lh_table.BETA_MAX[(2, geometry)]
    assert np.all(np.diff(_lh_table.scaled_modulus(top, d, 2, geometry)) > 0)
    onset = {"slab": 9.15, "cylinder": 10.6, "sphere": 12.65}[geometry]
    assert np.any(np.diff(_lh_table.scaled_modulus(1.15 * onset, d, 2, geometry)) < 0)
    assert top < 0.6 * onset


# --------------------------------------------------------------------------------------------
# surface path and the model

RHO = 1500.0


def pellet_rates(m: int, geometry: str, K: np.ndarray, *, table: bool = True):
    law = LangmuirHinshelwood(reference_temperature=330.0, m=m)
    p = {"k_ref": np.array([[0.05], [0.4], [2.0]]), "activation_energy": np.array([[5e4]]),
         "adsorption_constant": K, "adsorption_enthalpy": np.array([[-2e4]])}
    T = np.array([320.0, 330.0, 345.0, 330.0])
    De, L = 3e-10, np.array([2e-6, 2e-5, 5e-5, 1e-4])
    pr = PelletRate(law, p, T, None, De, L, RHO, geometry)
    if not table:
        pr.lh = None
    return pr


@pytest.mark.parametrize(("m", "geometry"), [(1, "sphere"), (2, "slab"), (1, "cylinder")])
def test_surface_path_table_against_numerical_solver(m, geometry):
    K = np.array([[1e-3], [5e-3], [2e-2]])                  # m^3/mol; K Cs up to 16
    Cs = np.array([[1.0, 50.0, 300.0, 800.0]]) * np.ones((3, 1))
    tab = pellet_rates(m, geometry, K)
    num = pellet_rates(m, geometry, K, table=False)
    g, dg, eta, phi, r = tab(Cs)
    g0, dg0, eta0, phi0, r0 = num(Cs)
    assert np.max(np.abs(eta / eta0 - 1.0)) < 3e-5
    assert np.max(np.abs(phi / phi0 - 1.0)) < 1e-10
    np.testing.assert_array_equal(r, r0)
    assert np.max(np.abs(dg / dg0 - 1.0)) < 1e-3          # numerical path: forward difference


@pytest.mark.parametrize(("m", "geometry"), [(1, "sphere"), (2, "sphere"), (2, "slab")])
def test_surface_derivative_against_finite_difference(m, geometry):
    K = np.array([[1e-3], [4e-3], [5e-3]])
    Cs = np.array([[0.0, 3.0, 120.0, 700.0]]) * np.ones((3, 1))
    pr = pellet_rates(m, geometry, K)
    assert _lh_table.in_domain(K * Cs, m, geometry).all()
    _, dg, *_ = pr(Cs)
    h = 1e-5 * np.maximum(Cs, 1.0)
    gp = pr(Cs + h, derivative=False)[0]
    gm = pr(np.maximum(Cs - h, 0.0), derivative=False)[0]
    fd = (gp - gm) / (Cs + h - np.maximum(Cs - h, 0.0))
    assert np.max(np.abs(dg / fd - 1.0)) < 1e-6


def test_points_outside_the_domain_fall_back_to_the_numerical_solver():
    # m = 2, sphere: beta_max = 7; K Cs = 0.8 ... 16 mixes table and fallback points
    K = np.array([[1e-3], [1e-2], [2e-2]])
    Cs = np.array([[1.0, 50.0, 500.0, 800.0]]) * np.ones((3, 1))
    tab = pellet_rates(2, "sphere", K)
    num = pellet_rates(2, "sphere", K, table=False)
    out = ~_lh_table.in_domain(K * Cs, 2, "sphere")
    assert 0 < out.sum() < out.size
    g, dg, eta, phi, _ = tab(Cs)
    g0, dg0, eta0, phi0, _ = num(Cs)
    # the fallback points run the same Newton solver (tol 1e-10 of Cs) in another batch, so
    # they may stop an iteration apart: 1e-9 on eta, 1e-6 on the forward-difference slope;
    # phi is a closed form of the inputs (rounding only)
    np.testing.assert_allclose(eta[out], eta0[out], rtol=1e-9)
    np.testing.assert_allclose(dg[out], dg0[out], rtol=1e-6)
    np.testing.assert_allclose(phi[out], phi0[out], rtol=1e-12)
    assert np.max(np.abs(eta[~out] / eta0[~out] - 1.0)) < 3e-5


def test_generalised_modulus_of_the_table_path():
    # Phi = phi_1 f_m(beta) against kinfit's quadrature of the rate integral
    k, K, Cs = 4.0, 0.02, np.array([0.1, 10.0, 300.0])
    phi1 = 1e-4 * np.sqrt(k * K / 1e-9)
    for m in (1, 2):
        f, _ = _lh_table.modulus_factor(K * Cs, m)

        def rate(C, m=m):
            return k * K * C / (1 + K * C) ** m

        def drate(C, m=m):
            return k * K * (1 + (1 - m) * K * C) / (1 + K * C) ** (m + 1)

        _, phi = pellet_eta(rate, drate, Cs, 1e-9, 1e-4, "sphere")
        np.testing.assert_allclose(phi1 * f, phi, rtol=1e-12)


# invented demo runs
RUNS = """\
run,temperature [degC],stirrer_speed [rpm],particle_diameter [um],catalyst_loading [g/L],initial_concentration [mol/L]
S1,40,300,30,2,0.8
S2,55,1200,30,2,0.8
S3,55,300,250,2,0.8
S4,70,1200,250,5,0.8
"""


def lh_model(tmp: Path, m: int, geometry: str, K: float) -> Model:
    text = study_text(
        {"k_ref": "0.5 mol/(kg*s)", "activation_energy": "55 kJ/mol",
         "adsorption_constant": f"{K} L/mol", "adsorption_enthalpy": "-20 kJ/mol",
         "effective_diffusivity": "3e-10 m^2/s", "kc_ref": "4e-5 m/s",
         "agitation_exponent": 0.6, "size_exponent": 0.5},
        rate_law="langmuir_hinshelwood", kinetics={"m": m}, geometry=geometry,
        reference_temperature="55 degC", reference_diameter="80 um")
    (tmp / "study.toml").write_text(text)
    (tmp / "runs.csv").write_text(RUNS)
    lines = ["run,time [min],concentration [mol/L]"]
    for rid in ("S1", "S2", "S3", "S4"):
        lines += [f"{rid},{t},0.8" for t in (0, 5, 15, 30, 60, 120)]
    (tmp / "obs.csv").write_text("\n".join(lines) + "\n")
    s = load_study(tmp / "study.toml")
    return Model(ModelSpec.from_study(s), s)


@pytest.mark.parametrize(("m", "geometry", "K"), [(1, "sphere", 5.0), (2, "sphere", 8.0),
                                                  (2, "slab", 3.0)])
def test_model_predict_table_equals_numerical_path(tmp_path, m, geometry, K, monkeypatch):
    # K = 8 L/mol with C0 = 0.8 mol/L gives K Cb up to 6.4 (m = 2) or 4 (m = 1); the table
    # and, for m = 2 at high Cs with the sphere, close to its edge
    model = lh_model(tmp_path, m, geometry, K)
    rng = np.random.default_rng(11)
    theta = model.x0[None, :] * np.exp(0.3 * rng.standard_normal((3, model.x0.size)))
    fast = model.predict(theta)
    monkeypatch.setattr(LangmuirHinshelwood, "langmuir_hinshelwood_form",
                        lambda self, T, p: None)
    slow = model.predict(theta)
    assert np.all(np.isfinite(fast))
    assert np.max(np.abs(fast / slow - 1.0)) < 1e-5
