"""The coupled model on a small study: facts of the trade as property tests, the first-order
series-resistance result, unit-system invariance, and non-physical parameters rejected."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from studies import Raw, model_of, profiles_csv, runs_csv, study_text, write_study

from kinfit.errors import ModelError, StudyError
from kinfit.model import Model
from kinfit.study import load_study
from kinfit.transport.pellet import eta_first_order

#: the study's text with its order left as ``{order}`` (filled by :func:`make_model`)
STUDY = study_text(
    {"k_ref": "0.2 mol/(kg*s)", "activation_energy": "60 kJ/mol", "order": Raw("{order}"),
     "effective_diffusivity": "3e-10 m^2/s", "kc_ref": "4e-5 m/s", "agitation_exponent": 0.6,
     "size_exponent": 0.5},
    reference_temperature="55 degC", reference_diameter="80 um",
)

RUNS = runs_csv([("S1", 55, 300, 30, 2, 0.8), ("S2", 55, 1200, 30, 2, 0.8),
                 ("S3", 55, 300, 250, 2, 0.8), ("S4", 55, 1200, 250, 2, 0.8),
                 ("S5", 70, 1200, 250, 2, 0.8)])


def _obs(runs: str) -> str:
    ids = [line.split(",")[0] for line in runs.strip().splitlines()[1:]]
    return profiles_csv([(rid, t, 0.8) for rid in ids for t in (0, 10, 20, 40, 60)],
                        unit="mol/L")


def make_model(tmp: Path, *, order: float = 1.5, runs: str = RUNS, study: str = STUDY
               ) -> Model:
    path = write_study(tmp, study.format(order=order), runs, _obs(runs))
    return model_of(load_study(path))


def test_eta_does_not_change_with_stirrer_speed(tmp_path):
    # agitation changes the film, not the pellet (common practice): coupled at the same bulk
    # concentration, the 300 rpm run S1 has the lower surface concentration, and its eta is
    # the 1200 rpm run's pellet evaluated at S1's own Cs; with n = 1.5 the generalised modulus
    # goes as Cs^((n-1)/2) (Aris 1965), so the lower Cs gives the higher eta
    m = make_model(tmp_path)
    st, kc = m.point_states(m.x0, np.full(m.n_obs, 500.0))
    s1, s2 = np.flatnonzero(m.run_index == 0)[0], np.flatnonzero(m.run_index == 1)[0]
    assert kc[s2] > kc[s1]  # common practice: kc rises with stirrer speed
    cs1, cs2 = st.surface_concentration[s1], st.surface_concentration[s2]
    assert cs1 < cs2 < 500.0
    assert st.effectiveness[s1] > st.effectiveness[s2]
    pr, _, _, _ = m._pieces(m.expand(m.x0[None, :]), m.run_index)
    at_cs1 = pr(np.full((1, m.n_obs), cs1), derivative=False)[2][0]
    assert at_cs1[s2] == pytest.approx(st.effectiveness[s1], rel=1e-12)
    assert st.thiele_modulus[s1] / st.thiele_modulus[s2] == pytest.approx(
        (cs1 / cs2) ** 0.25, rel=1e-10)


def test_modulus_proportional_to_diameter_and_area_inverse(tmp_path):
    # common practice: Phi is proportional to dp at a fixed surface state; a_m ~ 1/dp
    m = make_model(tmp_path)
    st, _ = m.point_states(m.x0, np.full(m.n_obs, 500.0))
    # compare at equal surface concentration: use no-film evaluation via the pellet pieces
    i_small = np.flatnonzero(m.run_index == 1)[0]
    i_big = np.flatnonzero(m.run_index == 3)[0]
    ratio_area = m.a_m[1] / m.a_m[3]
    assert ratio_area == pytest.approx(250.0 / 30.0)
    phi_s = st.thiele_modulus[i_small] / np.sqrt(st.surface_concentration[i_small] ** 0.5)
    phi_b = st.thiele_modulus[i_big] / np.sqrt(st.surface_concentration[i_big] ** 0.5)
    # Phi ~ L sqrt(Cs^(n-1)): remove the Cs dependence (n = 1.5) and compare with dp
    assert phi_b / phi_s == pytest.approx(250.0 / 30.0, rel=1e-9)


def test_eta_at_most_one(tmp_path):
    # isothermal, positive order: eta <= 1 (Aris 1975; common practice)
    m = make_model(tmp_path)
    st, _ = m.point_states(m.x0, np.linspace(1.0, 800.0, m.n_obs))
    assert np.all(st.effectiveness <= 1.0 + 1e-12)
    assert np.all(st.effectiveness > 0)


def test_first_order_series_resistance(tmp_path):
    # first order: 1/k_obs = 1/(kc a_m) + 1/(eta k), with eta from the closed form
    # (Satterfield 1970; Thiele 1939; Aris 1957, overall factor)
    m = make_model(tmp_path, order=1.0)
    Cb = np.full(m.n_obs, 300.0)
    st, kc = m.point_states(m.x0, Cb)
    vals = {k: v[0] for k, v in m.expand(m.x0[None, :]).items()}
    ri = m.run_index
    k_m = m.spec.rate_law.rate(1.0, m.T[ri], {n: vals[n][ri] for n in
                                              ("k_ref", "activation_energy", "order")})
    k_v = k_m * m.spec.particle_density  # per pellet volume, s^-1
    phi = m.L[ri] * np.sqrt(k_v / vals["effective_diffusivity"][ri])
    eta = eta_first_order(phi, "sphere")
    k_obs = 1.0 / (1.0 / (kc * m.a_m[ri]) + 1.0 / (eta * k_m))
    np.testing.assert_allclose(st.rate, k_obs * Cb, rtol=1e-8)


def test_intrinsic_rate_follows_arrhenius_at_each_run(tmp_path):
    # r(Cs, T) = k_ref exp(-Ea/R (1/T - 1/T_ref)) (Cs/C_ref)^n at every point, written out
    # here (Arrhenius; reference temperature 55 degC, C_ref 1 mol/L), for the 55 degC runs of
    # both particle sizes and the 70 degC run S5
    m = make_model(tmp_path)
    st, _ = m.point_states(m.x0, np.full(m.n_obs, 500.0))
    T = m.T[m.run_index]
    k = 0.2 * np.exp(-60e3 / 8.314462618 * (1 / T - 1 / 328.15))
    np.testing.assert_allclose(st.intrinsic_rate,
                               k * (st.surface_concentration / 1000.0) ** 1.5, rtol=1e-10)
    s5 = m.run_index == 4
    assert np.all(st.intrinsic_rate[s5] > 2 * st.intrinsic_rate[m.run_index == 3])


def test_identical_profiles_at_two_speeds_mean_negligible_film(tmp_path):
    # common practice: when kc is large the profiles at 300 and 1200 rpm coincide and the
    # film share is negligible
    m = make_model(tmp_path, study=STUDY.replace('value = "4e-5 m/s"', 'value = "1 m/s"'))
    pred = m.predict(m.x0[None, :])[0]
    p1, p2 = pred[m.run_index == 0], pred[m.run_index == 1]
    np.testing.assert_allclose(p1, p2, rtol=1e-4)
    state = m.run_states(m.x0)
    assert np.all(state.criteria.film_share[:2] < 1e-3)


def test_results_do_not_depend_on_input_units(tmp_path):
    # invariance (common practice): the same campaign written in other units predicts the same
    m1 = make_model(tmp_path)
    d2 = tmp_path / "k"
    d2.mkdir()
    runs_k = RUNS.replace("temperature [degC]", "temperature [K]").replace(",55,", ",328.15,")
    runs_k = runs_k.replace(",70,", ",343.15,").replace("stirrer_speed [rpm]",
                                                        "stirrer_speed [1/s]")
    runs_k = runs_k.replace(",300,", ",5,").replace(",1200,", ",20,")
    m2 = make_model(d2, runs=runs_k)
    np.testing.assert_allclose(m1.predict(m1.x0[None, :]), m2.predict(m2.x0[None, :]),
                               rtol=1e-12)


def test_non_physical_values_rejected(tmp_path):
    m = make_model(tmp_path)
    bad = m.x0.copy()
    bad[m.columns.index("effective_diffusivity")] = -1e-9
    with pytest.raises(ModelError, match="effective_diffusivity"):
        m.predict(bad[None, :])
    bad = m.x0.copy()
    bad[m.columns.index("order")] = 4.0
    with pytest.raises(ModelError, match="order"):
        m.predict(bad[None, :])


def test_missing_and_unknown_parameters(tmp_path):
    with pytest.raises(StudyError, match="effective_diffusivity"):
        make_model(tmp_path, study=STUDY.replace('[parameters.effective_diffusivity]\nvalue = '
                                                 '"3e-10 m^2/s"\n', ""))
    with pytest.raises(StudyError, match="unknown parameter 'colour'"):
        make_model(tmp_path, study=STUDY + "[parameters.colour]\nvalue = 1.0\n")


def test_first_order_closed_form_matches_the_general_engine(tmp_path):
    # at order 1 the model uses the closed form C = C0 exp(-w k_obs t) with series resistances
    # (Satterfield 1970); the general engine (order 1 + 1e-12, integral in log C, tabulated
    # eta) must agree with it
    m = make_model(tmp_path, order=1.0)
    t = np.linspace(0.0, 3000.0, m.n_obs)
    closed = m.predict_profiles(m.x0[None, :], t, m.run_index)
    near = m.x0.copy()
    near[m.columns.index("order")] = 1.0 + 1e-12
    general = m.predict_profiles(near[None, :], t, m.run_index)
    np.testing.assert_allclose(general, closed, rtol=1e-7)
