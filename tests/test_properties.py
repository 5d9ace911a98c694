"""Liquid properties: Wilke-Chang diffusivity, solvent viscosity and density, effective
diffusivity. Sources are named beside each check."""

from __future__ import annotations

import chemicals.viscosity as chem_mu
import chemicals.volume as chem_rho
import numpy as np
import pytest
from chemicals.dippr import EQ101, EQ105
from chemicals.iapws import iapws95_rho
from chemicals.viscosity import Viswanath_Natarajan_3, mu_IAPWS

from kinfit.errors import ModelError, StudyError
from kinfit.transport.properties import (
    SOLVENTS,
    effective_diffusivity,
    make_fluid,
    wilke_chang,
)

# `chemicals` reads its data tables with a pandas option that pandas 3 deprecates; not ours.
pytestmark = pytest.mark.filterwarnings("ignore:The 'float_precision' argument:Warning")

# CAS numbers used to look the solvents up in the `chemicals` data tables.
CAS = {
    "methanol": "67-56-1",
    "ethanol": "64-17-5",
    "benzene": "71-43-2",
    "toluene": "108-88-3",
    "acetone": "67-64-1",
    "cyclohexane": "110-82-7",
}


# ---------------------------------------------------------------------------------------------
# Wilke & Chang (1955)
# ---------------------------------------------------------------------------------------------

# Wilke & Chang 1955, check values computed at T = 298.15 K, V_A = 100 cm^3/mol:
# solvent, association factor, viscosity [cP], D [cm^2/s]. Molar masses from standard atomic
# weights (from memory).
WILKE_CHANG_TABLE = [
    ("water", 2.6, 0.890, 18.015, 1.0705e-5),
    ("methanol", 1.9, 0.544, 32.042, 1.9966e-5),
    ("ethanol", 1.5, 1.074, 46.069, 1.0775e-5),
    ("benzene", 1.0, 0.603, 78.114, 2.0403e-5),
]


@pytest.mark.parametrize(("solvent", "phi", "mu_cP", "M_g", "D_cm2"), WILKE_CHANG_TABLE)
def test_wilke_chang_reference_table(solvent, phi, mu_cP, M_g, D_cm2):
    """check values computed (Wilke & Chang 1955 formula), 5 significant figures."""
    D = wilke_chang(298.15, mu_cP * 1e-3, M_g * 1e-3, 100e-6, phi)
    assert D == pytest.approx(D_cm2 * 1e-4, rel=1e-4)


def test_wilke_chang_hand_calculation():
    """Hand calculation from the 1955 formula D = 7.4e-8 (phi M)^0.5 T / (mu V^0.6), cgs units:
    T = 323.15 K, mu = 0.5 cP, M = 18.015 g/mol, V_A = 50 cm^3/mol, phi = 2.6:
    (2.6 * 18.015)^0.5 = 6.843902, 50^0.6 = 10.456396, so
    D = 7.4e-8 * 6.843902 * 323.15 / (0.5 * 10.456396) = 3.130312e-5 cm^2/s."""
    D = wilke_chang(323.15, 0.5e-3, 18.015e-3, 50e-6, 2.6)
    assert D == pytest.approx(3.130312e-9, rel=1e-6)


def test_wilke_chang_vectorised_and_scaling():
    """Wilke & Chang (1955): D proportional to T / mu at fixed solvent and solute."""
    T = np.array([[290.0, 310.0, 330.0]])
    mu = np.array([[1.0e-3], [0.5e-3]])
    D = wilke_chang(T, mu, 18.015e-3, 100e-6, 2.6)
    assert D.shape == (2, 3)
    np.testing.assert_allclose(D / (T / mu), D[0, 0] / (T[0, 0] / mu[0, 0]), rtol=1e-13)


def test_wilke_chang_rejects_bad_constants():
    with pytest.raises(ModelError, match="solute_molar_volume"):
        wilke_chang(298.15, 1e-3, 18e-3, -1.0, 2.6)
    with pytest.raises(ModelError, match="association"):
        wilke_chang(298.15, 1e-3, 18e-3, 1e-4, 0.0)


# ---------------------------------------------------------------------------------------------
# Water
# ---------------------------------------------------------------------------------------------


def test_water_viscosity_against_iapws_280_360K():
    """IAPWS 2008 viscosity formulation with IAPWS-95 density at 1 atm, as implemented in the
    `chemicals` library (LIBRARY-NOTES): the correlation must agree within 1 %."""
    water = make_fluid("water", diffusivity=1e-9)
    T = np.linspace(280.0, 360.0, 41)
    ref = np.array([mu_IAPWS(t, iapws95_rho(t, 101325.0)) for t in T])
    np.testing.assert_allclose(water.viscosity(T), ref, rtol=0.01)


def test_water_viscosity_against_iapws_whole_liquid_range():
    """Same reference (IAPWS 2008 via `chemicals`) over 273.16-373 K at 1 atm: within 1 %."""
    water = make_fluid("water", diffusivity=1e-9)
    T = np.linspace(273.16, 373.0, 60)
    ref = np.array([mu_IAPWS(t, iapws95_rho(t, 101325.0)) for t in T])
    np.testing.assert_allclose(water.viscosity(T), ref, rtol=0.01)
    # LIBRARY-NOTES: IAPWS gives 0.8900 mPa s at 298.15 K
    assert float(water.viscosity(298.15)) == pytest.approx(0.8900e-3, rel=2e-3)


def test_water_density_against_iapws95():
    """IAPWS-95 density at 1 atm (`chemicals.iapws.iapws95_rho`) against Kell (1975): 1e-4."""
    water = make_fluid("water", diffusivity=1e-9)
    T = np.linspace(274.0, 372.0, 50)
    ref = np.array([iapws95_rho(t, 101325.0) for t in T])
    np.testing.assert_allclose(water.density(T), ref, rtol=1e-4)


# ---------------------------------------------------------------------------------------------
# Organic solvents
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(("solvent", "mu_cP"), [(s, m) for s, _, m, _, _ in WILKE_CHANG_TABLE])
def test_viscosity_at_25C_matches_reference_table(solvent, mu_cP):
    """Viscosities at 298.15 K from memory (handbook values of the solvents, as in Wilke & Chang 1955): 1.5 %."""
    fluid = make_fluid(solvent, diffusivity=1e-9)
    assert float(fluid.viscosity(298.15)) == pytest.approx(mu_cP * 1e-3, rel=0.015)


@pytest.mark.parametrize("solvent", sorted(CAS))
def test_organic_viscosity_against_independent_correlations(solvent):
    """The VDI Heat Atlas PPDS correlation against two independent sources over the solvent's
    stated range: Perry's Handbook 8th ed. Table 2-313 (DIPPR eq. 101) and Dutt & Prasad's
    three-term equation (Viswanath & Natarajan), both as tabulated in `chemicals`. Independent
    liquid-viscosity correlations agree to a few per cent (common practice): 6 % here."""
    fluid = make_fluid(solvent, diffusivity=1e-9)
    lo, hi = SOLVENTS[solvent].temperature_range
    T = np.linspace(lo, hi, 25)
    perry = chem_mu.mu_data_Perrys_8E_2_313.loc[CAS[solvent]]
    ref_perry = np.array([EQ101(t, perry.C1, perry.C2, perry.C3, perry.C4, perry.C5) for t in T])
    dutt = chem_mu.mu_data_Dutt_Prasad.loc[CAS[solvent]]
    ref_dutt = np.array([Viswanath_Natarajan_3(t, dutt.A, dutt.B, dutt.C) for t in T]) * 1e-3
    np.testing.assert_allclose(fluid.viscosity(T), ref_perry, rtol=0.06)
    np.testing.assert_allclose(fluid.viscosity(T), ref_dutt, rtol=0.06)


@pytest.mark.parametrize("solvent", sorted(CAS))
def test_organic_density_against_perry(solvent):
    """PPDS density (VDI Heat Atlas) against Perry's 8th ed. DIPPR eq. 105 (as tabulated in
    `chemicals`) over the stated range: 1.2 %."""
    fluid = make_fluid(solvent, diffusivity=1e-9)
    lo, hi = SOLVENTS[solvent].temperature_range
    T = np.linspace(lo, hi, 25)
    c = chem_rho.rho_data_Perry_8E_105_l.loc[CAS[solvent]]
    ref = np.array([EQ105(t, c.C1, c.C2, c.C3, c.C4) for t in T]) * SOLVENTS[solvent].molar_mass
    np.testing.assert_allclose(fluid.density(T), ref, rtol=0.012)


def test_viscosity_falls_with_temperature_for_every_solvent():
    """Liquid viscosity decreases with temperature (common practice)."""
    for name in SOLVENTS:
        fluid = make_fluid(name, diffusivity=1e-9)
        lo, hi = fluid.temperature_range
        mu = fluid.viscosity(np.linspace(lo, hi, 30))
        assert np.all(np.diff(mu) < 0), name


# ---------------------------------------------------------------------------------------------
# Fluid construction and the diffusivity routes
# ---------------------------------------------------------------------------------------------


def test_fluid_wilke_chang_route_matches_function():
    """make_fluid with a solute molar volume uses Wilke & Chang with the solvent's data."""
    water = make_fluid("water", solute_molar_volume=100e-6)
    T = np.array([290.0, 310.0, 330.0])
    expected = wilke_chang(T, water.viscosity(T), 18.015e-3, 100e-6, 2.6)
    np.testing.assert_allclose(water.diffusivity(T), expected, rtol=1e-14)
    Sc = water.schmidt_number(T)
    np.testing.assert_allclose(Sc, water.kinematic_viscosity(T) / expected, rtol=1e-14)


def test_fluid_constant_and_stokes_einstein_diffusivity():
    """A given diffusivity is constant, or scales as T/mu(T) from its measuring temperature
    (Stokes-Einstein scaling, common practice)."""
    const = make_fluid("water", diffusivity=1.2e-9)
    np.testing.assert_array_equal(const.diffusivity(np.array([280.0, 340.0])), 1.2e-9)
    scaled = make_fluid("water", diffusivity=1.2e-9, diffusivity_temperature=298.15)
    T = np.array([298.15, 340.0])
    D = scaled.diffusivity(T)
    assert D[0] == pytest.approx(1.2e-9, rel=1e-14)
    ratio = (340.0 / 298.15) * float(scaled.viscosity(298.15) / scaled.viscosity(340.0))
    assert D[1] / D[0] == pytest.approx(ratio, rel=1e-12)


def test_custom_fluid_with_constants():
    fluid = make_fluid(None, viscosity=8.927e-4, density=1000.0, diffusivity=1e-9)
    T = np.array([[300.0, 350.0]])
    np.testing.assert_allclose(fluid.kinematic_viscosity(T), 8.927e-7, rtol=1e-14)
    assert fluid.schmidt_number(T).shape == (1, 2)
    fluid.check_temperature(T)  # constants hold at any temperature


def test_make_fluid_rejects_bad_input():
    with pytest.raises(StudyError, match=r"solvent 'glycerol'.*'water'"):
        make_fluid("glycerol", diffusivity=1e-9)
    with pytest.raises(StudyError, match="viscosity"):
        make_fluid(None, density=1000.0, diffusivity=1e-9)
    with pytest.raises(StudyError, match="'density' must be a finite number > 0"):
        make_fluid("water", density=-1.0)
    with pytest.raises(StudyError, match="molar_mass"):
        make_fluid(None, viscosity=1e-3, density=1e3, solute_molar_volume=1e-4)
    with pytest.raises(StudyError, match="diffusivity_temperature"):
        make_fluid("water", solute_molar_volume=1e-4, diffusivity_temperature=300.0)
    no_D = make_fluid("water")
    assert not no_D.has_diffusivity
    with pytest.raises(StudyError, match="no molecular diffusivity"):
        no_D.diffusivity(300.0)


def test_check_temperature_names_the_range():
    methanol = make_fluid("methanol", diffusivity=1e-9)
    methanol.check_temperature(np.array([300.0, 320.0]))
    with pytest.raises(StudyError, match=r"run 'R3'.*360\.00 K.*'methanol'"):
        methanol.check_temperature(np.array([300.0, 360.0]), where="run 'R3'")


# ---------------------------------------------------------------------------------------------
# Effective diffusivity
# ---------------------------------------------------------------------------------------------


def test_effective_diffusivity_formula_and_broadcast():
    """D_e = eps_p D_m / tau (Satterfield 1970, from memory)."""
    tau = np.array([[2.0], [4.0]])
    Dm = np.array([1e-9, 2e-9, 3e-9])
    De = effective_diffusivity(0.4, Dm, tau)
    assert De.shape == (2, 3)
    np.testing.assert_allclose(De, 0.4 * Dm / tau, rtol=1e-15)


@pytest.mark.parametrize(
    ("args", "word"),
    [
        ((0.0, 1e-9, 3.0), "porosity"),
        ((1.2, 1e-9, 3.0), "porosity"),
        ((0.5, -1e-9, 3.0), "diffusivity"),
        ((0.5, 1e-9, 0.5), "tortuosity"),
    ],
)
def test_effective_diffusivity_rejects_non_physical(args, word):
    with pytest.raises(ModelError, match=word):
        effective_diffusivity(*args)
