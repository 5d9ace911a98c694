"""Temperature scaling of the effective diffusivity and the film coefficient: the factors
against independently computed liquid properties, the correlation film's own property
dependence, the study vocabulary and its default, the check's warning, and a campaign in water
whose intrinsic activation energy is recovered only when transport is scaled."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from studies import noisy_batch_campaign, numbered, study_text

from kinfit.errors import StudyError
from kinfit.fitting import FitOptions, fit_model
from kinfit.model import Model, ModelSpec
from kinfit.simulate import run_table, transport_scaling_warning
from kinfit.study import load_study
from kinfit.transport.film import SlurryFilm
from kinfit.transport.properties import make_fluid
from kinfit.transport.temperature import TransportScaling, film_activation_energy

R_GAS = 8.314462618
chemicals = pytest.importorskip("chemicals")


def _mu_rho_iapws(T: float) -> tuple[float, float]:
    # water: IAPWS-95 density and the IAPWS 2008 viscosity (Huber et al. 2009) from the
    # chemicals library, independent of kinfit's water correlations
    rho = chemicals.iapws95_rho(T, 101325.0)
    return chemicals.mu_IAPWS(T, rho), rho


def test_water_factors_against_iapws():
    # De(T)/De_ref = (T/T_ref) mu(T_ref)/mu(T) (Stokes-Einstein; Wilke & Chang 1955);
    # kc(T)/kc_ref = (D/D_ref)^(2/3) (nu/nu_ref)^(-5/12) (Sano, Yamaguchi & Adachi 1974 form)
    T_ref, T = 328.15, np.array([313.15, 343.15])
    sc = TransportScaling(pellet="viscosity", film="viscosity", reference_temperature=T_ref,
                          fluid=make_fluid("water"))
    mu0, rho0 = _mu_rho_iapws(T_ref)
    for t in T:
        mu, rho = _mu_rho_iapws(t)
        d_ratio = (t / T_ref) * mu0 / mu
        nu_ratio = (mu / rho) / (mu0 / rho0)
        # kinfit's water viscosity is a correlation, agreeing with IAPWS to about 0.3 %
        assert sc.pellet_factor(t) == pytest.approx(d_ratio, rel=5e-3)
        assert sc.film_factor(t) == pytest.approx(d_ratio ** (2 / 3) * nu_ratio ** (-5 / 12),
                                                  rel=5e-3)
    off = TransportScaling(reference_temperature=T_ref)
    np.testing.assert_array_equal(off.pellet_factor(T), 1.0)
    np.testing.assert_array_equal(off.film_factor(T), 1.0)


def test_diffusion_activation_energy_in_water_is_about_17_kj():
    # the apparent activation energy of D ~ T/mu in water over 40-70 degC is about 17 kJ/mol
    # (computed from the IAPWS 2008 viscosity, Huber et al. 2009); the Sano-form film about
    # the same, and every film law of the table between 13 and 19 kJ/mol
    T = np.array([313.15, 328.15, 343.15])
    mu = np.array([_mu_rho_iapws(t)[0] for t in T])
    E_D = -R_GAS * np.polyfit(1 / T, np.log(T / mu), 1)[0]
    assert 16.5e3 < E_D < 17.5e3
    film = film_activation_energy(make_fluid("water"), T)
    assert film["diffusion"] == pytest.approx(E_D, rel=1e-2)
    lo, hi = film["interval"]
    assert 13e3 < lo < film["estimate"] <= hi < 19e3


def test_correlation_film_follows_its_own_property_dependence():
    # Sano, Yamaguchi & Adachi (1974): Sh - 2 = 0.4 (eps dp^4/nu^3)^(1/4) Sc^(1/3), so at fixed
    # power input (Sh - 2) scales exactly as nu^(-5/12) D^(-1/3); with Wilke & Chang (1955)
    # D ~ T/mu. Checked between 40 and 70 degC with the liquid's own properties
    fluid = make_fluid("water", solute_molar_volume=100e-6)
    film = SlurryFilm(fluid=fluid, power_number=5.0, impeller_diameter=0.05,
                      liquid_volume=1e-3)
    N, dp, T1, T2 = 10.0, 100e-6, 313.15, 343.15
    sh = [float(film.kc(N, dp, T, {})) * dp / float(fluid.diffusivity(T)) - 2 for T in (T1, T2)]
    d_ratio = (T2 / T1) * float(fluid.viscosity(T1) / fluid.viscosity(T2))
    nu_ratio = float(fluid.kinematic_viscosity(T2) / fluid.kinematic_viscosity(T1))
    assert float(fluid.diffusivity(T2) / fluid.diffusivity(T1)) == pytest.approx(d_ratio,
                                                                                 rel=1e-12)
    assert sh[1] / sh[0] == pytest.approx(nu_ratio ** (-5 / 12) * d_ratio ** (-1 / 3),
                                          rel=1e-10)


#: invented true values of the campaigns below
TRUTH = {"k_ref": "2 mol/(kg*s)", "activation_energy": "60 kJ/mol",
         "order": {"value": 1.0, "vary": False},
         "effective_diffusivity": {"value": "6e-11 m^2/s", "min": "1e-13 m^2/s",
                                   "max": "1e-8 m^2/s"},
         "kc_ref": {"value": "1.5e-5 m/s", "min": "1e-7 m/s", "max": "1e-2 m/s"},
         "agitation_exponent": {"value": 0.5, "min": 0.0, "max": 1.5},
         "size_exponent": {"value": 0.5, "vary": False}}
WATER = '\n[fluid]\nsolvent = "water"\n'


def _study(folder, *, scaling=None, truth=TRUTH):
    return study_text(truth, reference_temperature="55 degC", pellet="direct",
                      observations="observations.csv", sections=WATER,
                      temperature_scaling=scaling)


def test_study_vocabulary_and_default(tmp_path):
    # the liquid named: viscosity scaling by default; "none" on request; no liquid: "none"
    runs = numbered([(40, 250, 250, 2, 0.5), (70, 250, 250, 2, 0.5)])
    study, _ = noisy_batch_campaign(tmp_path / "a", _study(tmp_path), runs,
                                    np.array([0, 10, 20, 30.0]),
                                    sigma=1.0, seed=1)
    spec = ModelSpec.from_study(study)
    assert (spec.scaling.pellet, spec.scaling.film) == ("viscosity", "viscosity")
    m = Model(spec, study)
    state = m.run_states(m.x0)
    sc = spec.scaling
    # agitation law (a = b = 0.5, 600 rpm and 100 um reference) times the film factor
    law = 1.5e-5 * (250 / 600) ** 0.5 * (250 / 100) ** -0.5
    np.testing.assert_allclose(state.kc, law * sc.film_factor(m.T), rtol=1e-12)
    assert state.kc[1] > 1.5 * state.kc[0]  # 70 degC against 40 degC in water
    off_text = _study(tmp_path, scaling="none")
    (tmp_path / "a" / "off.toml").write_text(off_text)
    off = ModelSpec.from_study(load_study(tmp_path / "a" / "off.toml"))
    assert (off.scaling.pellet, off.scaling.film) == ("none", "none")
    bare = study_text(TRUTH, reference_temperature="55 degC", pellet="direct",
                      observations="observations.csv")
    (tmp_path / "a" / "bare.toml").write_text(bare)
    bare_study = load_study(tmp_path / "a" / "bare.toml")
    assert ModelSpec.from_study(bare_study).scaling.pellet == "none"
    # without a liquid, runs affected by transport over 30 K draw a warning from the check
    text = transport_scaling_warning(bare_study)
    assert text is not None and "30 K" in text and "[fluid]" in text
    assert transport_scaling_warning(study) is None
    bad = bare.replace('diffusivity = "direct"\n', 'diffusivity = "direct"\n'
                       'temperature_scaling = "viscosity"\n')
    (tmp_path / "a" / "bad.toml").write_text(bad)
    with pytest.raises(StudyError, match=r"\[pellet\].*needs the liquid.*\[fluid\]"):
        load_study(tmp_path / "a" / "bad.toml")
    (tmp_path / "a" / "typo.toml").write_text(_study(tmp_path, scaling="viscous"))
    with pytest.raises(StudyError, match=r"temperature_scaling = 'viscous' is not recognised"):
        load_study(tmp_path / "a" / "typo.toml")


def _fit(study):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = fit_model(ModelSpec.from_study(study), study,
                        FitOptions(profile=False, multistart=0, seed=3))
    return res


def test_campaign_in_water_needs_the_scaling(tmp_path):
    # Done-when check of the transport scaling: a campaign generated with viscosity-scaled De
    # and kc in water (40-70 degC; pore- and film-affected runs) is fitted with the scaling on,
    # whose 95 % intervals hold the true Ea, De_ref and kc_ref; with it off, Ea comes out too
    # high, towards E + E_D under strong pore control (Weisz & Prater 1954 with a
    # temperature-dependent De; E_D about 17 kJ/mol in water)
    rows = [(T, N, dp, 0.5, 0.5) for T in (40, 55, 70) for N in (150, 1500) for dp in (15, 300)]
    study, model = noisy_batch_campaign(tmp_path, _study(tmp_path), numbered(rows),
                                        np.linspace(0.0, 90.0, 9), sigma=2.0, seed=11)
    regimes = {r["regime"] for r in run_table(model, model.x0).values()}
    assert {"pore", "film"} <= regimes, regimes
    # both fits start away from the truth
    start = {**TRUTH, "k_ref": "0.7 mol/(kg*s)", "activation_energy": "45 kJ/mol",
             "effective_diffusivity": {**TRUTH["effective_diffusivity"], "value": "2e-10 m^2/s"},
             "kc_ref": {**TRUTH["kc_ref"], "value": "5e-5 m/s"}}
    (tmp_path / "on.toml").write_text(_study(tmp_path, truth=start))
    (tmp_path / "off.toml").write_text(_study(tmp_path, scaling="none", truth=start))
    res_on = _fit(load_study(tmp_path / "on.toml"))
    res_off = _fit(load_study(tmp_path / "off.toml"))
    assert res_on.fit["converged"] and res_off.fit["converged"]
    p_on, p_off = res_on.parameters, res_off.parameters
    truth = {"activation_energy": 60e3, "effective_diffusivity": 6e-11, "kc_ref": 1.5e-5}
    for name, value in truth.items():
        lo, hi = p_on[name]["ci95"]
        assert lo < value < hi, (name, lo, value, hi)
    lo, hi = p_off["activation_energy"]["ci95"]
    assert lo > 60e3 + 3e3, (lo, hi)  # biased high, well beyond its own interval
    assert res_off.fit["sse"] > res_on.fit["sse"]
