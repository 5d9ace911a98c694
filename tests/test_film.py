"""Film mass-transfer models, Sherwood correlations and pellet external geometry. Sources are
named beside each check."""

from __future__ import annotations

import numpy as np
import pytest

from kinfit.errors import ModelError, StudyError
from kinfit.transport.film import (
    CORRELATIONS,
    FILM_MODELS,
    GEOMETRIES,
    AgitationFilm,
    CorrelationFilm,
    PackedBedFilm,
    SlurryFilm,
    SphereFilm,
    characteristic_length,
    external_area,
    kolmogorov_reynolds,
    make_film_model,
    sherwood_frossling,
    sherwood_ranz_marshall,
    sherwood_wakao_funazkri,
    specific_power,
)
from kinfit.transport.properties import make_fluid

# Worked example (values computed here from the formulas named in each test): water at
# 25 degC with nu = 8.927e-7 m^2/s (from memory) and D_m = 1e-9 m^2/s (Sc = 892.7), dp = 50 um, Rushton N_p = 5, D = 0.05 m, V = 1 L, D/T = 0.45.
EXAMPLE_FLUID = make_fluid(None, viscosity=8.927e-4, density=1000.0, diffusivity=1e-9)
TANK = {"power_number": 5.0, "impeller_diameter": 0.05, "liquid_volume": 1e-3}
DP = 50e-6
# N [1/s], eps [W/kg], Re_K, Sh Sano, Sh Armenante-Kirwan, Sh Levins-Glastonbury
WORKED_EXAMPLE = np.array(
    [
        [5.0, 0.19531, 1.1972, 6.4081, 7.4982, 7.2950],
        [10.0, 1.5625, 2.3944, 9.4136, 9.8842, 10.1377],
        [20.0, 12.5, 4.7889, 14.4681, 13.3055, 14.5066],
    ]
)


def slurry(correlation: str) -> SlurryFilm:
    extra = {"impeller_to_tank_ratio": 0.45} if correlation == "levins_glastonbury" else {}
    return SlurryFilm(fluid=EXAMPLE_FLUID, correlation=correlation, **TANK, **extra)


# ---------------------------------------------------------------------------------------------
# Stirred-tank slurry correlations
# ---------------------------------------------------------------------------------------------


def test_worked_example_power_and_kolmogorov_reynolds():
    """Worked example: eps = N_p N^3 D^5 / V (definition of the power number) and the
    Kolmogorov particle Reynolds number Re_K = eps^(1/3) dp^(4/3) / nu (common practice) at
    N = 5, 10, 20 1/s, values computed from those formulas."""
    N = WORKED_EXAMPLE[:, 0]
    eps = specific_power(N, **TANK)
    np.testing.assert_allclose(eps, WORKED_EXAMPLE[:, 1], rtol=5e-5)
    Re_K = kolmogorov_reynolds(eps, DP, 8.927e-7)
    np.testing.assert_allclose(Re_K, WORKED_EXAMPLE[:, 2], rtol=5e-5)


@pytest.mark.parametrize(
    ("correlation", "column"),
    [("sano", 3), ("armenante_kirwan", 4), ("levins_glastonbury", 5)],
)
def test_worked_example_sherwood_numbers(correlation, column):
    """Worked example: Sh at N = 5, 10, 20 1/s from the published correlations of Sano,
    Yamaguchi & Adachi (1974), Armenante & Kirwan (1989) and Levins & Glastonbury (1972),
    through the film model (k_c dp / D_m), against values computed from those correlations
    (5 significant figures)."""
    film = slurry(correlation)
    N = WORKED_EXAMPLE[:, 0]
    kc = film.kc(N, DP, 298.15, {})
    np.testing.assert_allclose(kc * DP / 1e-9, WORKED_EXAMPLE[:, column], rtol=5e-5)


@pytest.mark.parametrize(("correlation", "slope"), [("sano", 0.591), ("armenante_kirwan", 0.415)])
def test_worked_example_local_speed_exponent(correlation, slope):
    """Worked example: d ln k_c / d ln N at N = 10 1/s is 0.591 for Sano, Yamaguchi & Adachi
    (1974) and 0.415 for Armenante & Kirwan (1989), computed from the two correlations."""
    film = slurry(correlation)
    h = 1e-4
    kc = film.kc(10.0 * np.exp([-h, h]), DP, 298.15, {})
    assert np.log(kc[1] / kc[0]) / (2 * h) == pytest.approx(slope, abs=1e-3)


def test_slurry_stagnant_limit_is_two():
    """Sh -> 2 as the power input vanishes: steady diffusion from a sphere into a stagnant
    liquid (derived; the limit of Ranz & Marshall 1952)."""
    for correlation in ("sano", "armenante_kirwan", "levins_glastonbury"):
        kc = slurry(correlation).kc(1e-15, DP, 298.15, {})
        assert float(kc * DP / 1e-9) == pytest.approx(2.0, abs=1e-6)


def test_slurry_kc_rises_with_stirrer_speed_with_real_water():
    """k_c rises with stirrer speed (common practice); with water properties from
    kinfit.transport.properties and Wilke-Chang diffusivity, Sh >= 2 everywhere."""
    water = make_fluid("water", solute_molar_volume=100e-6)
    film = SlurryFilm(fluid=water, **TANK)
    N = np.linspace(2.0, 30.0, 15)
    T = np.array([[290.0], [330.0]])
    kc = film.kc(N, DP, T, {})
    assert kc.shape == (2, 15)
    assert np.all(np.diff(kc, axis=1) > 0)
    assert np.all(kc * DP / water.diffusivity(T) >= 2.0)
    # warmer liquid: lower viscosity, higher diffusivity, higher k_c (common practice)
    assert np.all(kc[1] > kc[0])


# ---------------------------------------------------------------------------------------------
# Single sphere and packed bed
# ---------------------------------------------------------------------------------------------

# check values computed at Sc = 892.68 from Ranz & Marshall 1952 and Wakao & Funazkri 1978: Re, Sh Ranz-Marshall,
# Sh Wakao-Funazkri.
SPHERE_TABLE = np.array(
    [[1.0, 7.7772, 12.5915], [10.0, 20.2691, 44.1655], [100.0, 59.7718, 169.8640]]
)


def test_sphere_and_bed_check_values_pure_functions():
    """Ranz & Marshall (1952) and Wakao & Funazkri (1978) at Sc = 892.68, values computed
    from the two correlations, to 5 significant figures."""
    Re = SPHERE_TABLE[:, 0]
    np.testing.assert_allclose(sherwood_ranz_marshall(Re, 892.68), SPHERE_TABLE[:, 1], rtol=5e-5)
    np.testing.assert_allclose(sherwood_wakao_funazkri(Re, 892.68), SPHERE_TABLE[:, 2], rtol=5e-5)


@pytest.mark.parametrize(("Re", "sh_rm", "sh_wf"), SPHERE_TABLE.tolist())
def test_sphere_and_bed_check_values_through_models(Re, sh_rm, sh_wf):
    """Same check values (Ranz & Marshall 1952; Wakao & Funazkri 1978) through SphereFilm and PackedBedFilm: a liquid with
    nu = 8.9268e-7 m^2/s and D_m = 1e-9 m^2/s (Sc = 892.68), velocity u = Re nu / dp."""
    fluid = make_fluid(None, viscosity=8.9268e-4, density=1000.0, diffusivity=1e-9)
    u = Re * 8.9268e-7 / DP
    kc_sphere = SphereFilm(fluid=fluid, slip_velocity=u).kc(7.0, DP, 300.0, {})
    kc_bed = PackedBedFilm(fluid=fluid, superficial_velocity=u).kc(7.0, DP, 300.0, {})
    assert float(kc_sphere * DP / 1e-9) == pytest.approx(sh_rm, rel=5e-5)
    assert float(kc_bed * DP / 1e-9) == pytest.approx(sh_wf, rel=5e-5)


def test_frossling_form_and_ordering():
    """Frossling (1938): Sh = 2 + 0.552 Re^(1/2) Sc^(1/3), i.e. (Sh - 2) is 0.552/0.6 of the
    Ranz & Marshall (1952) value at every Re and Sc (both forms: Ranz & Marshall 1952; Wakao & Funazkri 1978)."""
    Re = np.array([0.5, 5.0, 50.0])
    Sc = np.array([[100.0], [1000.0]])
    ratio = (sherwood_frossling(Re, Sc) - 2.0) / (sherwood_ranz_marshall(Re, Sc) - 2.0)
    np.testing.assert_allclose(ratio, 0.552 / 0.6, rtol=1e-14)
    fluid = make_fluid(None, viscosity=1e-3, density=1000.0, diffusivity=1e-9)
    film = SphereFilm(fluid=fluid, slip_velocity=0.01, correlation="frossling")
    Re_film = 0.01 * DP / 1e-6
    assert float(film.kc(1.0, DP, 300.0, {}) * DP / 1e-9) == pytest.approx(
        float(sherwood_frossling(Re_film, 1000.0)), rel=1e-14
    )


# ---------------------------------------------------------------------------------------------
# Agitation law
# ---------------------------------------------------------------------------------------------

AGITATION_P = {
    "kc_ref": np.array([[1e-4], [2e-4]]),
    "agitation_exponent": np.array([[0.5], [0.3]]),
    "size_exponent": np.array([[1.0], [0.5]]),
}


def test_agitation_law_reference_point_and_slopes():
    """kc = kc_ref (N/N_ref)^a (dp/dp_ref)^(-b) (kinfit's agitation law, common practice): kc_ref at the reference
    point, log-log slopes a and -b."""
    film = AgitationFilm(reference_speed=10.0, reference_diameter=50e-6)
    N = np.array([10.0, 20.0, 10.0])
    dp = np.array([50e-6, 50e-6, 100e-6])
    kc = film.kc(N, dp, np.full(3, 300.0), AGITATION_P)
    assert kc.shape == (2, 3)
    np.testing.assert_allclose(kc[:, 0], [1e-4, 2e-4], rtol=1e-15)
    np.testing.assert_allclose(np.log2(kc[:, 1] / kc[:, 0]), [0.5, 0.3], rtol=1e-12)
    np.testing.assert_allclose(np.log2(kc[:, 2] / kc[:, 0]), [-1.0, -0.5], rtol=1e-12)


def test_agitation_kc_rises_with_speed():
    """k_c rises with stirrer speed for a positive agitation exponent (common practice)."""
    film = AgitationFilm(reference_speed=10.0, reference_diameter=50e-6)
    kc = film.kc(np.linspace(1.0, 40.0, 20), 50e-6, 300.0, AGITATION_P)
    assert np.all(np.diff(kc, axis=1) > 0)


@pytest.mark.parametrize(
    ("name", "bad"),
    [
        ("kc_ref", 0.0),
        ("kc_ref", -1e-5),
        ("agitation_exponent", -0.2),
        ("agitation_exponent", 4.0),
        ("size_exponent", 5.0),
        ("size_exponent", np.nan),
    ],
)
def test_agitation_check_names_the_parameter(name, bad):
    film = AgitationFilm(reference_speed=10.0, reference_diameter=50e-6)
    film.check(AGITATION_P)
    p = dict(AGITATION_P)
    p[name] = np.array([[p[name][0, 0]], [bad]])
    with pytest.raises(ModelError, match=f"'{name}'"):
        film.check(p)


def test_agitation_missing_parameter_is_a_study_error():
    film = AgitationFilm(reference_speed=10.0, reference_diameter=50e-6)
    p = {k: v for k, v in AGITATION_P.items() if k != "size_exponent"}
    with pytest.raises(StudyError, match=r"'size_exponent'.*\[parameters\.size_exponent\]"):
        film.kc(10.0, 50e-6, 300.0, p)


# ---------------------------------------------------------------------------------------------
# Contract over every registered film model
# ---------------------------------------------------------------------------------------------

WATER = make_fluid("water", solute_molar_volume=100e-6)
EXAMPLES = {
    "agitation": ({"reference_speed": 10.0, "reference_diameter": 50e-6}, AGITATION_P),
    "slurry": ({"fluid": WATER, **TANK}, {}),
    "sphere": ({"fluid": WATER, "slip_velocity": 0.01}, {}),
    "packed_bed": ({"fluid": WATER, "superficial_velocity": 0.005}, {}),
    "correlation": ({"correlation": "armenante_kirwan", "fluid": WATER, **TANK}, {}),
    "none": ({}, {}),
}


def test_every_registered_film_model_has_a_contract_example():
    assert set(EXAMPLES) == set(FILM_MODELS)


@pytest.mark.parametrize("name", sorted(FILM_MODELS))
def test_film_contract(name):
    """Every film model: k_c has the broadcast shape of N, dp, T (n,) and its parameters (m, 1),
    is positive, equals a point-by-point evaluation, and check() accepts its example."""
    options, p = EXAMPLES[name]
    film = make_film_model(name, **options)
    assert isinstance(film, FILM_MODELS[name])
    m = 2
    p = {k: np.broadcast_to(v, (m, 1)) for k, v in p.items()}
    film.check(p)
    assert set(film.parameter_names) == set(p)
    N = np.array([3.0, 8.0, 15.0, 25.0])
    dp = np.array([30e-6, 50e-6, 80e-6, 120e-6])
    T = np.array([290.0, 300.0, 320.0, 340.0])
    kc = film.kc(N, dp, T, p)
    assert kc.shape == ((m, 4) if p else (4,))
    assert np.all(kc > 0)
    kc2 = np.broadcast_to(kc, (m, 4))
    for i in range(m):
        for j in range(4):
            pij = {k: v[i, 0] for k, v in p.items()}
            assert film.kc(N[j], dp[j], T[j], pij) == pytest.approx(kc2[i, j], rel=1e-14)


def test_no_film_is_infinite():
    np.testing.assert_array_equal(make_film_model("none").kc([1.0, 2.0], 1e-4, 300.0, {}), np.inf)


def test_correlation_model_delegates_to_its_family():
    """`correlation` with a slurry correlation equals SlurryFilm with the same options."""
    via = CorrelationFilm(correlation="sano", fluid=WATER, **TANK)
    direct = SlurryFilm(fluid=WATER, correlation="sano", **TANK)
    N = np.array([4.0, 12.0])
    np.testing.assert_array_equal(via.kc(N, DP, 300.0, {}), direct.kc(N, DP, 300.0, {}))
    bed = make_film_model(
        "correlation", correlation="wakao_funazkri", fluid=WATER, superficial_velocity=0.01
    )
    assert isinstance(bed.model, PackedBedFilm)
    assert set(CORRELATIONS) >= {"sano", "ranz_marshall", "frossling", "wakao_funazkri"}


def test_make_film_model_rejects_bad_names_and_options():
    with pytest.raises(StudyError, match=r"'stirred'.*'agitation'.*'none'"):
        make_film_model("stirred")
    with pytest.raises(StudyError, match=r"\['speed'\].*reference_speed"):
        make_film_model("agitation", speed=10.0, reference_diameter=1e-4)
    with pytest.raises(StudyError, match=r"\['reference_diameter'\] must be given"):
        make_film_model("agitation", reference_speed=10.0)
    with pytest.raises(StudyError, match="'reference_speed' must be finite and > 0"):
        make_film_model("agitation", reference_speed=-1.0, reference_diameter=1e-4)
    with pytest.raises(StudyError, match=r"correlation 'colburn'.*'sano'"):
        make_film_model("correlation", correlation="colburn", fluid=WATER)
    with pytest.raises(StudyError, match="option 'correlation' must be given"):
        make_film_model("correlation", fluid=WATER)
    with pytest.raises(StudyError, match="impeller_to_tank_ratio"):
        SlurryFilm(fluid=WATER, correlation="levins_glastonbury", **TANK)
    with pytest.raises(StudyError, match="no molecular diffusivity"):
        SlurryFilm(fluid=make_fluid("water"), **TANK)
    with pytest.raises(StudyError, match="must be a Fluid"):
        SphereFilm(fluid="water", slip_velocity=0.01)


# ---------------------------------------------------------------------------------------------
# External geometry
# ---------------------------------------------------------------------------------------------


def test_external_area_reference_value():
    """Sphere geometry (common practice): a_m = 6/(rho_p dp) = 80.000 m^2/kg for dp = 50 um and
    rho_p = 1500 kg/m^3 [calc]."""
    assert float(external_area("sphere", 50e-6, 1500.0)) == pytest.approx(80.000, abs=5e-4)


@pytest.mark.parametrize(
    ("geometry", "fraction"), [("sphere", 1 / 6), ("cylinder", 1 / 4), ("slab", 1 / 2)]
)
def test_characteristic_length_per_geometry(geometry, fraction):
    """L = V_p/S_p (Aris 1957): sphere R/3 = dp/6, infinite cylinder
    R/2 = dp/4, slab of thickness dp (half-thickness l, sealed edges) L = l = dp/2."""
    dp = np.array([[20e-6, 1e-3, 3e-3]])
    np.testing.assert_allclose(characteristic_length(geometry, dp), fraction * dp, rtol=1e-15)
    np.testing.assert_allclose(
        external_area(geometry, dp, 1200.0), 1.0 / (1200.0 * fraction * dp), rtol=1e-15
    )


def test_external_area_inversely_proportional_to_size():
    """a_m proportional to 1/dp at fixed density and shape (common practice)."""
    dp = np.array([10e-6, 20e-6, 40e-6, 80e-6])
    for geometry in GEOMETRIES:
        a = external_area(geometry, dp, 1500.0)
        np.testing.assert_allclose(a * dp, a[0] * dp[0], rtol=1e-14)


def test_unknown_geometry_lists_valid_ones():
    with pytest.raises(StudyError, match=r"'pellet'.*'sphere', 'cylinder', 'slab'"):
        characteristic_length("pellet", 1e-4)
