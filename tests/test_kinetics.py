"""Rate laws: Arrhenius reparameterisation, family-specific limits, and a contract test over
every registered law. Sources are named beside each check."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.constants import R

from kinfit.errors import ModelError, StudyError
from kinfit.kinetics import (
    RATE_LAWS,
    ExpressionRate,
    Interval,
    LangmuirHinshelwood,
    PowerLaw,
    ReversibleFirstOrder,
    arrhenius,
    decorrelating_reference_temperature,
    make_rate_law,
    pre_exponential_factor,
    van_t_hoff,
)


@pytest.fixture
def rng():
    return np.random.default_rng(seed=7319)


# ---------------------------------------------------------------------------------------------
# Arrhenius and van 't Hoff
# ---------------------------------------------------------------------------------------------


def test_arrhenius_at_reference_temperature_returns_k_ref():
    """k(T_ref) = k_ref by construction of the reparameterised form (Schwaab & Pinto 2007)."""
    k_ref = np.array([[0.3], [2.0], [17.0]])
    Ea = np.array([[0.0], [6e4], [1.5e5]])
    np.testing.assert_array_equal(
        arrhenius(k_ref, Ea, np.full(4, 345.0), 345.0), k_ref * np.ones(4)
    )


def test_reparameterisation_identity_with_pre_exponential_factor(rng):
    """Schwaab & Pinto (2007): k_ref exp(-E/R (1/T - 1/T_ref)) = A exp(-E/(R T)) with
    A = k_ref exp(E/(R T_ref)), at every temperature."""
    k_ref = rng.uniform(0.01, 100.0, size=(6, 1))
    Ea = rng.uniform(1e4, 2e5, size=(6, 1))
    T = rng.uniform(250.0, 600.0, size=20)
    A = pre_exponential_factor(k_ref, Ea, 400.0)
    np.testing.assert_allclose(
        arrhenius(k_ref, Ea, T, 400.0), A * np.exp(-Ea / (R * T)), rtol=1e-12
    )


def test_arrhenius_plot_slope_is_minus_E_over_R():
    """ln k against 1/T is a straight line of slope -E_a/R (Arrhenius 1889, from memory)."""
    T = np.linspace(300.0, 400.0, 11)
    k = arrhenius(1.0, 8.0e4, T, 350.0)
    slope = np.polyfit(1.0 / T, np.log(k), 1)[0]
    assert slope == pytest.approx(-8.0e4 / R, rel=1e-10)


def _corr_lnk_E(T, T_ref):
    """corr(ln k_ref, E) from the linearised covariance (J'J)^-1 of equally weighted ln k data;
    the Jacobian columns come from central differences of kinfit's arrhenius()."""

    def lnk(lnkref, E):
        return np.log(arrhenius(np.exp(lnkref), E, T, T_ref))

    h_ln, h_E = 1e-6, 1.0
    J = np.column_stack(
        [
            (lnk(h_ln, 5e4) - lnk(-h_ln, 5e4)) / (2 * h_ln),
            (lnk(0.0, 5e4 + h_E) - lnk(0.0, 5e4 - h_E)) / (2 * h_E),
        ]
    )
    cov = np.linalg.inv(J.T @ J)
    return cov[0, 1] / np.sqrt(cov[0, 0] * cov[1, 1])


def test_schwaab_pinto_correlation_check_values():
    """Schwaab & Pinto 2007; values computed, T = 300, 310, ..., 350 K: corr(ln k_ref, E) = 0.99861380
    with T_ref = inf (plain k0), 0.05242303 with T_ref = 325 K, and 0 at the harmonic mean
    324.1007 K (Schwaab & Pinto 2007)."""
    T = np.arange(300.0, 351.0, 10.0)
    assert abs(_corr_lnk_E(T, np.inf)) == pytest.approx(0.99861380, abs=1e-7)
    assert abs(_corr_lnk_E(T, 325.0)) == pytest.approx(0.05242303, abs=1e-7)
    T_best = decorrelating_reference_temperature(T)
    assert T_best == pytest.approx(324.1007, abs=1e-4)
    assert abs(_corr_lnk_E(T, T_best)) < 1e-7


def test_decorrelating_reference_temperature_weights_and_errors():
    """Weighted form 1/T_ref = sum(w/T)/sum(w) (Schwaab & Pinto 2007, derived)."""
    T = np.array([300.0, 350.0])
    assert decorrelating_reference_temperature(T, weights=[1.0, 0.0]) == pytest.approx(300.0)
    assert decorrelating_reference_temperature(T, weights=[3.0, 1.0]) == pytest.approx(
        4.0 / (3.0 / 300.0 + 1.0 / 350.0)
    )
    with pytest.raises(StudyError, match="temperatures"):
        decorrelating_reference_temperature([300.0, -1.0])


def test_van_t_hoff_direction():
    """Exothermic adsorption (Delta H < 0): K falls with temperature (van 't Hoff, common
    practice); K = K_ref at T_ref."""
    T = np.array([300.0, 320.0, 340.0])
    K = van_t_hoff(0.05, -4e4, T, 320.0)
    assert K[1] == pytest.approx(0.05, rel=1e-15)
    assert np.all(np.diff(K) < 0)


# ---------------------------------------------------------------------------------------------
# Contract over every registered rate law
# ---------------------------------------------------------------------------------------------

M = 3


def _col(*values):
    return np.array(values, dtype=float).reshape(-1, 1)


EXAMPLES = {
    "power": (
        {"reference_temperature": 330.0},
        {
            "k_ref": _col(0.5, 1.0, 4.0),
            "activation_energy": _col(4e4, 6e4, 9e4),
            "order": _col(0.5, 1.0, 2.3),
        },
    ),
    "langmuir_hinshelwood": (
        {"reference_temperature": 330.0, "m": 2},
        {
            "k_ref": _col(0.5, 1.0, 4.0),
            "activation_energy": _col(4e4, 6e4, 9e4),
            "adsorption_constant": _col(1e-3, 5e-3, 2e-2),
            "adsorption_enthalpy": _col(-3e4, 0.0, -6e4),
        },
    ),
    "reversible": (
        {"reference_temperature": 330.0},
        {
            "k_ref": _col(0.5, 1.0, 4.0),
            "activation_energy": _col(4e4, 6e4, 9e4),
            "equilibrium_constant": _col(2.0, 10.0, 50.0),
            "reaction_enthalpy": _col(-2e4, 0.0, 3e4),
        },
    ),
    "expression": (
        {
            "expression": "k*exp(-E/R*(1/T - 1/T_ref))*C/(1 + b*C)**2",
            "reference_temperature": 330.0,
        },
        {"k": _col(0.001, 0.01, 0.1), "E": _col(3e4, 5e4, 8e4), "b": _col(1e-3, 1e-2, 0.1)},
    ),
}


def test_every_registered_law_has_a_contract_example():
    assert set(EXAMPLES) == set(RATE_LAWS)


def _inputs(rng, n=8):
    C = rng.uniform(20.0, 2500.0, size=(M, n))
    T = rng.uniform(300.0, 370.0, size=n)
    C0 = np.full(n, 3000.0)
    return C, T, C0


@pytest.mark.parametrize("name", sorted(RATE_LAWS))
def test_contract_shapes_broadcast(name, rng):
    """C (m, n), T (n,) or (m, n), parameters (m, 1), C0 (n,): results of shape (m, n), equal to
    a point-by-point evaluation."""
    options, p = EXAMPLES[name]
    law = make_rate_law(name, **options)
    assert isinstance(law, RATE_LAWS[name])
    C, T, C0 = _inputs(rng)
    r = law.rate(C, T, p, C0=C0)
    d = law.drate_dC(C, T, p, C0=C0)
    ceq = law.equilibrium_concentration(T, p, C0=C0)
    assert r.shape == d.shape == ceq.shape == (M, C.shape[1])
    T2 = np.broadcast_to(T, C.shape)
    np.testing.assert_array_equal(law.rate(C, T2, p, C0=C0), r)
    for i in range(M):
        for j in range(C.shape[1]):
            pij = {k: v[i, 0] for k, v in p.items()}
            assert float(law.rate(C[i, j], T[j], pij, C0=C0[j])) == pytest.approx(
                r[i, j], rel=1e-13
            )
            assert float(law.drate_dC(C[i, j], T[j], pij, C0=C0[j])) == pytest.approx(
                d[i, j], rel=1e-13
            )


@pytest.mark.parametrize("name", sorted(RATE_LAWS))
def test_contract_derivative_matches_central_difference(name, rng):
    """drate_dC against a central finite difference with step 1e-6 C."""
    options, p = EXAMPLES[name]
    law = make_rate_law(name, **options)
    C, T, C0 = _inputs(rng, n=12)
    h = 1e-6 * C
    fd = (law.rate(C + h, T, p, C0=C0) - law.rate(C - h, T, p, C0=C0)) / (2 * h)
    np.testing.assert_allclose(law.drate_dC(C, T, p, C0=C0), fd, rtol=2e-6)


@pytest.mark.parametrize("name", sorted(RATE_LAWS))
def test_contract_rate_vanishes_at_equilibrium_and_is_forward_above(name, rng):
    """r(C_eq) = 0 and r > 0 above C_eq: a forward reaction (the bracket of the surface balance)."""
    options, p = EXAMPLES[name]
    law = make_rate_law(name, **options)
    _, T, C0 = _inputs(rng)
    ceq = law.equilibrium_concentration(T, p, C0=C0)
    np.testing.assert_allclose(law.rate(ceq, T, p, C0=C0), 0.0, atol=1e-12)
    assert np.all(law.rate(ceq + 1.0, T, p, C0=C0) > 0)
    assert law.reversible == bool(np.any(ceq > 0))


@pytest.mark.parametrize("name", sorted(RATE_LAWS))
def test_contract_check_accepts_example_and_rejects_bad_values(name):
    """check() accepts the example, and names the parameter for a value outside its declared
    limits, for nan and inf, and for a missing parameter."""
    options, p = EXAMPLES[name]
    law = make_rate_law(name, **options)
    law.check(p)
    assert set(law.parameter_names) == set(p)
    assert set(law.parameter_units) == set(p)
    for pname in law.parameter_names:
        bad_values = [np.nan, np.inf]
        limit = law.parameter_limits.get(pname)
        if limit is not None and limit.outside_example() is not None:
            bad_values.append(limit.outside_example())
        for bad in bad_values:
            q = dict(p)
            q[pname] = _col(p[pname][0, 0], bad, p[pname][2, 0])
            with pytest.raises(ModelError, match=f"'{pname}'"):
                law.check(q)
        q = {k: v for k, v in p.items() if k != pname}
        with pytest.raises(StudyError, match=f"'{pname}'"):
            law.check(q)


@pytest.mark.parametrize("name", sorted(RATE_LAWS))
def test_contract_power_law_order(name):
    options, p = EXAMPLES[name]
    law = make_rate_law(name, **options)
    order = law.power_law_order(p)
    if name == "power":
        np.testing.assert_array_equal(order, p["order"])
    else:
        assert order is None


# ---------------------------------------------------------------------------------------------
# Family-specific behaviour
# ---------------------------------------------------------------------------------------------

POWER_P = {"k_ref": 2.0, "activation_energy": 5e4}


def test_power_law_k_is_rate_at_reference_concentration():
    """kinfit's convention: k in mol/(kg s) at C_ref, so its unit does not change with the order."""
    law = PowerLaw(reference_temperature=320.0, reference_concentration=500.0)
    orders = np.array([[0.0], [0.5], [1.0], [2.0], [3.0]])
    r = law.rate(500.0, 320.0, {**POWER_P, "order": orders})
    np.testing.assert_allclose(r, 2.0, rtol=1e-15)


def test_power_law_zero_order_is_a_heaviside_step():
    """Zero order: rate k for C > 0, 0 for C <= 0 (brief; the dead-zone convention of
    Aris 1965; Bischoff 1965)."""
    law = PowerLaw(reference_temperature=320.0)
    C = np.array([-5.0, 0.0, 1e-12, 1.0, 1e4])
    r = law.rate(C, 320.0, {**POWER_P, "order": 0.0})
    np.testing.assert_array_equal(r, [0.0, 0.0, 2.0, 2.0, 2.0])
    np.testing.assert_array_equal(law.drate_dC(C, 320.0, {**POWER_P, "order": 0.0}), 0.0)


def test_power_law_negative_concentration_gives_zero_rate_for_every_order():
    law = PowerLaw(reference_temperature=320.0)
    orders = np.array([[0.0], [0.4], [1.0], [2.5]])
    C = np.array([-1e3, -1.0, -1e-9])
    p = {**POWER_P, "order": orders}
    np.testing.assert_array_equal(law.rate(C, 300.0, p), 0.0)
    np.testing.assert_array_equal(law.drate_dC(C, 300.0, p), 0.0)


def test_power_law_right_derivative_at_zero():
    """At C = 0 the right derivative: k/C_ref for first order, 0 above first order, inf below."""
    law = PowerLaw(reference_temperature=320.0)
    d = law.drate_dC(0.0, 320.0, {**POWER_P, "order": np.array([[0.5], [1.0], [2.0]])})
    np.testing.assert_array_equal(d.ravel(), [np.inf, 2.0 / 1000.0, 0.0])


def test_langmuir_hinshelwood_limits():
    """L-H limits (derived): r -> k K C at low C; m = 1 saturates at k; m = 2 peaks at C = 1/K
    with r = k/4."""
    p = {
        "k_ref": 3.0,
        "activation_energy": 0.0,
        "adsorption_constant": 0.01,
        "adsorption_enthalpy": 0.0,
    }
    single = LangmuirHinshelwood(reference_temperature=300.0, m=1)
    dual = LangmuirHinshelwood(reference_temperature=300.0, m=2)
    assert float(single.rate(1e-6, 300.0, p)) == pytest.approx(3.0 * 0.01 * 1e-6, rel=1e-7)
    assert float(single.rate(1e9, 300.0, p)) == pytest.approx(3.0, rel=1e-6)
    C = np.linspace(1.0, 500.0, 4991)
    r = dual.rate(C, 300.0, p)
    assert C[np.argmax(r)] == pytest.approx(100.0, abs=0.1)
    assert float(dual.rate(100.0, 300.0, p)) == pytest.approx(0.75, rel=1e-14)
    assert float(dual.drate_dC(100.0, 300.0, p)) == pytest.approx(0.0, abs=1e-15)
    np.testing.assert_array_equal(single.rate(np.array([-1.0, 0.0]), 300.0, p), 0.0)


def test_reversible_tends_to_first_order_power_law():
    """With K_eq -> inf the reversible law equals the first-order power law at the same C_ref."""
    rev = ReversibleFirstOrder(reference_temperature=330.0)
    power = PowerLaw(reference_temperature=330.0)
    C = np.array([10.0, 500.0, 2500.0])
    T = np.array([310.0, 330.0, 350.0])
    base = {"k_ref": 1.5, "activation_energy": 7e4}
    r_rev = rev.rate(
        C, T, {**base, "equilibrium_constant": 1e18, "reaction_enthalpy": 0.0}, C0=3000.0
    )
    r_pow = power.rate(C, T, {**base, "order": 1.0})
    np.testing.assert_allclose(r_rev, r_pow, rtol=1e-12)


def test_reversible_equilibrium_and_missing_C0():
    """C_eq = C0/(1 + K_eq) from C_eq - (C0 - C_eq)/K_eq = 0 (derived)."""
    rev = ReversibleFirstOrder(reference_temperature=330.0)
    p = {
        "k_ref": 1.0,
        "activation_energy": 0.0,
        "equilibrium_constant": 4.0,
        "reaction_enthalpy": 0.0,
    }
    assert float(rev.equilibrium_concentration(330.0, p, C0=1000.0)) == pytest.approx(200.0)
    assert float(rev.rate(100.0, 330.0, p, C0=1000.0)) < 0  # reverse reaction below C_eq
    with pytest.raises(ModelError, match="C0"):
        rev.rate(100.0, 330.0, p)


def test_expression_law_reproduces_power_law():
    law = ExpressionRate(
        expression="k_ref*exp(-activation_energy/R*(1/T - 1/T_ref))*(C/C_ref)**order",
        reference_temperature=330.0,
        reference_concentration=1000.0,
        parameters=("k_ref", "activation_energy", "order"),
    )
    power = PowerLaw(reference_temperature=330.0)
    p = {"k_ref": _col(0.5, 2.0), "activation_energy": _col(4e4, 8e4), "order": _col(0.7, 1.8)}
    C = np.array([1.0, 300.0, 4000.0])
    T = np.array([300.0, 330.0, 360.0])
    np.testing.assert_array_equal(law.rate(C, T, p), power.rate(C, T, p))
    np.testing.assert_allclose(law.drate_dC(C, T, p), power.drate_dC(C, T, p), rtol=1e-13)
    # below zero: the rate at zero, slope zero
    np.testing.assert_array_equal(law.rate(-5.0, 330.0, p), 0.0)
    np.testing.assert_array_equal(law.drate_dC(-5.0, 330.0, p), 0.0)


def test_expression_law_rejects_unlisted_parameters():
    with pytest.raises(StudyError, match="'k2'"):
        ExpressionRate(expression="k*C + k2", parameters=["k"])


# ---------------------------------------------------------------------------------------------
# Registry and options
# ---------------------------------------------------------------------------------------------


def test_make_rate_law_unknown_name_lists_valid_names():
    with pytest.raises(StudyError, match="'michaelis'") as info:
        make_rate_law("michaelis", reference_temperature=300.0)
    for valid in RATE_LAWS:
        assert f"'{valid}'" in str(info.value)


def test_make_rate_law_option_errors():
    with pytest.raises(StudyError, match=r"\['temperature'\].*reference_temperature"):
        make_rate_law("power", temperature=300.0)
    with pytest.raises(StudyError, match=r"\['reference_temperature'\] must be given"):
        make_rate_law("power")
    with pytest.raises(StudyError, match="'reference_temperature' must be finite and > 0"):
        make_rate_law("power", reference_temperature=-3.0)
    with pytest.raises(StudyError, match="'reference_concentration'"):
        make_rate_law("reversible", reference_temperature=300.0, reference_concentration="x")
    with pytest.raises(StudyError, match="'m'.*1 or 2"):
        make_rate_law("langmuir_hinshelwood", reference_temperature=300.0, m=3)
    with pytest.raises(StudyError, match=r"\['expression'\] must be given"):
        make_rate_law("expression")


def test_interval_text_and_membership():
    assert str(Interval(0.0, 3.0)) == "[0, 3]"
    assert str(Interval(0.0, lower_closed=False)) == "> 0"
    assert str(Interval(upper=1.0)) == "<= 1"
    ok = Interval(0.0, 3.0).contains(np.array([-0.1, 0.0, 3.0, 3.1, np.nan]))
    np.testing.assert_array_equal(ok, [False, True, True, False, False])
    assert Interval().outside_example() is None
    assert not Interval(0.0, lower_closed=False).contains(
        Interval(0.0, lower_closed=False).outside_example()
    )


def test_check_message_names_range_and_value():
    law = PowerLaw(reference_temperature=300.0)
    with pytest.raises(ModelError, match=r"'order' must be in \[0, 3\], got 3\.5"):
        law.check({"k_ref": 1.0, "activation_energy": 1e4, "order": 3.5})
    with pytest.raises(ModelError, match=r"'k_ref' must be > 0 mol/\(kg\*s\), got -1"):
        law.check({"k_ref": -1.0, "activation_energy": 1e4, "order": 1.0})
