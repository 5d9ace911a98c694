"""`kinfit predict`: predictions at new conditions with bands, against closed forms and a small
Monte Carlo of the bands' coverage; range warnings and the refusal to extrapolate a film
coefficient fitted only to film-limited data."""

from __future__ import annotations

import argparse
import json
import math
import warnings
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from studies import numbered, profiles_csv, runs_csv, simulate, study_text, write_study

from kinfit.errors import RegimeWarning, StudyError
from kinfit.fitting import FitOptions, fit
from kinfit.model import Model
from kinfit.predict import (
    ExtrapolationRefused,
    add_predict_arguments,
    conditions_study,
    covariance_draws,
    load_fitted,
    parse_conditions,
    parse_times,
    predict_conditions,
    run_predict_command,
)


def synthetic(folder: Path, rows, *, kind: str = "profile", k: float = 0.05, n: float = 1.0,
              kc: float = 5e-5, vary_order: bool = False, vary_kc: bool = True,
              vary_k: bool = True, sigma: float = 3.0, seed: int = 3):
    """A campaign made with kinfit's own physics at the stated true values plus seeded noise;
    returns (study with noisy data, model at the truth, true parameter row)."""
    text = study_text(
        {"k_ref": f"{k} mol/(kg*s)", "activation_energy": "65 kJ/mol", "order": n,
         "effective_diffusivity": "3e-10 m^2/s", "kc_ref": f"{kc} m/s",
         "agitation_exponent": 0.5, "size_exponent": 0.5},
        vary={"k_ref": vary_k, "activation_energy": vary_k, "order": vary_order,
              "effective_diffusivity": False, "kc_ref": vary_kc, "agitation_exponent": False,
              "size_exponent": False},
        reference_temperature="60 degC", reference_diameter="100 um", pellet="direct",
    )
    if kind == "profile":
        obs = profiles_csv([(f"R{i + 1}", f"{t:g}", r[4] * 1000) for i, r in enumerate(rows)
                            for t in np.linspace(0, 90, 7)])
    else:
        obs = "run,rate [mol/(kg*s)]\n" + "".join(f"R{i + 1},0\n" for i in range(len(rows))
                                                  for _ in range(3))
    from kinfit.fitting import main_spec

    study, model, y = simulate(write_study(folder, text, runs_csv(numbered(rows)), obs), main_spec)
    x_true = model.x0.copy()
    noisy = with_data(study, y + np.random.default_rng(seed).normal(0, sigma, y.size))
    return noisy, model, x_true


def with_data(study, y):
    runs, k = [], 0
    for r in study.runs:
        vals = np.asarray(y[k:k + r.n_obs], dtype=float)
        k += r.n_obs
        vals.setflags(write=False)
        runs.append(replace(r, rates=vals) if study.kind == "rate"
                    else replace(r, concentrations=np.maximum(vals, 0.0)))
    return replace(study, runs=tuple(runs))


def quiet_fit(study):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fit(study, FitOptions(profile=False))


ROWS = [(T, N, dp, 2, 0.5) for T in (50, 70) for N in (300, 900) for dp in (50, 200)]


def test_first_order_matches_series_resistance_closed_form(tmp_path):
    # first order: 1/k_obs = 1/(kc a_m) + 1/(eta k1), eta of a sphere in the Aris
    # normalisation eta = (1/phi)[1/tanh(3 phi) - 1/(3 phi)], phi = L sqrt(k1 rho_p/De),
    # L = dp/6, a_m = 6/(rho_p dp) (Aris 1957; Satterfield 1970);
    # batch: C = C0 exp(-w k_obs t)
    rows = [(T, N, dp, 2, 0.5) for T in (50, 70) for N in (300, 900) for dp in (200, 500)]
    study, _, _ = synthetic(tmp_path, rows, k=2.0, kc=2e-5)
    res = quiet_fit(study)
    conds = parse_conditions("T=60 degC, N=600 rpm, dp=300 um, w=3 g/L, C0=0.7 mol/L; "
                             "T=55 degC, N=450 rpm, dp=250 um", study)
    times = np.linspace(0, 5400, 7)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RegimeWarning)
        # w and C0 lie outside the campaign (one value each): the closed form checks the
        # physics there, so the extrapolation is asked for
        pred = predict_conditions(study, res, conds, times=times, seed=1, n_draws=50,
                                  extrapolate=True)
    est = res.estimates()
    R, rho, De = 8.314462618, 1500.0, 3e-10
    for c in conds:
        k1 = est["k_ref"] * math.exp(-est["activation_energy"] / R
                                     * (1 / c.temperature - 1 / 333.15)) / 1000.0
        L = c.particle_diameter / 6
        phi = L * math.sqrt(k1 * rho / De)
        eta = (1 / phi) * (1 / math.tanh(3 * phi) - 1 / (3 * phi))
        kc = est["kc_ref"] * (c.stirrer_speed / 10.0) ** 0.5 * (c.particle_diameter
                                                                  / 100e-6) ** -0.5
        k_obs = 1.0 / (1.0 / (kc * 6 / (rho * c.particle_diameter)) + 1.0 / (eta * k1))
        expected = c.initial_concentration * np.exp(-c.catalyst_loading * k_obs * times)
        got = pred.frame.loc[pred.frame["condition"] == c.id, "concentration [mol/m^3]"]
        np.testing.assert_allclose(got.to_numpy(), expected, rtol=2e-5)
        s = pred.summary[c.id]
        assert s["effectiveness_factor"]["estimate"] == pytest.approx(eta, rel=2e-5)
        assert s["initial_rate"]["estimate"] == pytest.approx(k_obs * c.initial_concentration,
                                                              rel=2e-5)
        # both resistances matter here, so the check exercises film and pellet together
        assert 0.1 < eta < 0.9
        assert 0.2 < s["criteria"]["shares"]["film"] < 0.8
    assert "P2" in pred.summary and pred.summary["P2"]["defaulted"] == [
        "catalyst_loading", "initial_concentration"]


def test_bands_cover_the_truth_at_held_out_conditions(tmp_path):
    # a 90 % band of the mean response should hold the true mean about 90 % of the time
    # (linearised inference, Bates & Watts 1988, ch. 2); lenient bounds for 30 replicates
    rows = [(T, 600, dp, 2, c0) for T in (50, 70) for dp in (50, 200) for c0 in (0.3, 1.0)]
    study, truth_model, x_true = synthetic(tmp_path, rows, n=1.3, vary_order=True,
                                           vary_kc=False, sigma=4.0)
    held = parse_conditions("T=55 degC, dp=100 um, C0=0.6 mol/L; T=65 degC, dp=150 um, "
                            "C0=0.45 mol/L", study)
    times = np.array([1800.0, 5400.0])
    target = Model(truth_model.spec, conditions_study(study, held, times=times)).predict(
        x_true[None])[0]
    rng = np.random.default_rng(11)
    hits = []
    y_true = truth_model.predict(x_true[None])[0]
    for rep in range(30):
        data = with_data(study, y_true + rng.normal(0, 4.0, y_true.size))
        res = quiet_fit(data)
        pred = predict_conditions(data, res, held, times=times, seed=rep, n_draws=200)
        f = pred.frame
        lo = f["concentration_q05 [mol/m^3]"].to_numpy()
        hi = f["concentration_q95 [mol/m^3]"].to_numpy()
        hits += list((lo <= target) & (target <= hi))
    coverage = float(np.mean(hits))
    print(f"coverage of the 90 % bands: {coverage:.3f} over {len(hits)} checks")
    assert 0.75 <= coverage <= 0.99


def test_covariance_draws_in_internal_coordinates(tmp_path):
    # u = ln x for log parameters: draws are positive and their internal covariance is the
    # fit's covariance mapped by D^-1 C D^-1 (delta method)
    study, _, _ = synthetic(tmp_path, ROWS)
    fitted = load_fitted(study, quiet_fit(study))
    x = covariance_draws(fitted, 20000, np.random.default_rng(5))
    space = fitted.model.space()
    assert np.all(x[:, space.is_log] > 0)
    u = space.to_internal(x)
    np.testing.assert_allclose(np.cov(u.T), fitted.internal_covariance(), rtol=0.05,
                               atol=1e-3 * np.sqrt(np.outer(*[np.diag(
                                   fitted.internal_covariance())] * 2)).max())


def test_posterior_draws_give_the_bands(tmp_path):
    study, _, _ = synthetic(tmp_path, ROWS)
    res = quiet_fit(study)
    fitted = load_fitted(study, res)
    draws = covariance_draws(fitted, 60, np.random.default_rng(9))
    frame = pd.DataFrame(draws, columns=list(fitted.columns))
    frame.insert(0, "walker", 0)
    frame["log_prob"] = 0.0
    frame.to_csv(tmp_path / "posterior_draws.csv", index=False)
    conds = parse_conditions("T=60 degC, N=600 rpm, dp=100 um", study)
    pred = predict_conditions(study, res, conds, fit_dir=tmp_path, n_draws=100, seed=0)
    assert pred.band["source"] == "posterior" and pred.band["draws"] == draws.shape[0]
    model = fitted.model_at(conds, times=np.linspace(0, 5400, 21))
    f = model.predict(fitted.theta_for(model, draws))
    np.testing.assert_allclose(pred.frame["concentration_q95 [mol/m^3]"],
                               np.quantile(f, 0.95, axis=0), rtol=1e-12)


def test_outside_range_is_refused_unless_extrapolate(tmp_path):
    # behaviour only (no outside source applies): a factor outside the campaign is refused
    # with the reason; with extrapolate=True it warns once per reason and every output says so
    study, _, _ = synthetic(tmp_path, ROWS)
    res = quiet_fit(study)
    conds = parse_conditions("T=90 degC, N=600 rpm, dp=100 um", study)
    with pytest.raises(ExtrapolationRefused, match=r"T 90 degC lies outside the campaign's "
                                                   r"50 degC to 70 degC: the rate constant's "
                                                   r"Arrhenius law"):
        predict_conditions(study, res, conds, n_draws=50, seed=0)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        pred = predict_conditions(study, res, conds, n_draws=50, seed=0, extrapolate=True)
    texts = [str(w.message) for w in caught if issubclass(w.category, RegimeWarning)]
    assert len(texts) == 1 and texts[0].startswith("EXTRAPOLATED on request")
    assert not [w for w in caught if not issubclass(w.category, RegimeWarning)]
    assert pred.summary["P1"]["outside_range"][0]["factor"] == "temperature"
    assert pred.extrapolated and pred.to_dict()["extrapolated"] is True
    assert pred.frame["extrapolated"].all()
    assert "[EXTRAPOLATED]" in pred.report() and "warning" not in pred.report()
    # inside every range: nothing refused, nothing marked
    inside = predict_conditions(study, res, parse_conditions("T=60 degC", study), n_draws=50,
                                seed=0)
    assert not inside.extrapolated and not inside.frame["extrapolated"].any()


FILM_ROWS = [(T, 400, 150, 2, c0) for T in (50, 60, 70) for c0 in (0.5, 1.0)]


def test_refuses_film_only_extrapolation_to_other_speeds(tmp_path, capsys):
    # every run film-limited (kc a_m << eta k1; kinetics known and held): kc_ref is known only
    # where the film controls, so carrying it to another speed or size is refused unless
    # allowed
    study, _, _ = synthetic(tmp_path, FILM_ROWS, k=20.0, kc=1e-5, vary_k=False)
    res = quiet_fit(study)
    assert all(r["regime"] == "film" for r in res.runs.values())
    fast = parse_conditions("T=60 degC, N=1200 rpm", study)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RegimeWarning)
        with pytest.raises(ExtrapolationRefused, match="every run of the campaign was "
                                                       "film-limited"):
            predict_conditions(study, res, fast, n_draws=50)
        pred = predict_conditions(study, res, fast, n_draws=50, extrapolate=True)
        assert any("EXTRAPOLATED on request" in w for w in pred.warnings)
        # inside the campaign's speed and size the prediction is not refused
        predict_conditions(study, res, parse_conditions("T=55 degC", study), n_draws=50)
    res.save(tmp_path / "fit")
    parser = argparse.ArgumentParser()
    add_predict_arguments(parser)
    args = parser.parse_args([str(tmp_path / "study.toml"), "--fit", str(tmp_path / "fit"),
                              "--at", "T=60 degC, N=1200 rpm", "--out", str(tmp_path / "p")])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RegimeWarning)
        assert run_predict_command(args) == 1
    assert "refused" in capsys.readouterr().err
    args = parser.parse_args([str(tmp_path / "study.toml"), "--fit", str(tmp_path / "fit"),
                              "--at", "T=60 degC, N=1200 rpm", "--extrapolate",
                              "--times", "0, 30, 60 min", "--out", str(tmp_path / "p")])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RegimeWarning)
        assert run_predict_command(args) == 0
    out = json.loads((tmp_path / "p" / "predictions.json").read_text())
    assert out["conditions"]["P1"]["extrapolated_on_request"] is True
    table = pd.read_csv(tmp_path / "p" / "predictions.csv")
    assert table["time [s]"].tolist() == [0.0, 1800.0, 3600.0]


def test_conditions_from_a_table(tmp_path):
    study, _, _ = synthetic(tmp_path, ROWS)
    (tmp_path / "at.csv").write_text("run,temperature [degC],stirrer_speed [rpm]\n"
                                     "A,55,500\nB,65,700\n")
    from kinfit.predict import conditions_from_argument

    conds = conditions_from_argument(str(tmp_path / "at.csv"), study)
    assert [c.id for c in conds] == ["A", "B"]
    assert conds[1].temperature == pytest.approx(338.15)
    assert conds[1].stirrer_speed == pytest.approx(700 / 60)
    (tmp_path / "bad.csv").write_text("run,temperature [degC]\nA,warm\n")
    with pytest.raises(StudyError, match=r"bad.csv, row 2, column 'temperature \[degC\]'"):
        conditions_from_argument(str(tmp_path / "bad.csv"), study)


@pytest.mark.parametrize("text, match", [
    ("Temp=70 degC", r"key 'Temp' is not recognised"),
    ("T=70", r"has no unit"),
    ("T=70 degC, T=80 degC", r"temperature is given twice"),
    ("N 800 rpm", r"not of the form key=value"),
])
def test_bad_inline_conditions(tmp_path, text, match):
    study, _, _ = synthetic(tmp_path, ROWS[:4])
    with pytest.raises(StudyError, match=match):
        parse_conditions(text, study)


def test_parse_times():
    np.testing.assert_allclose(parse_times("0, 10, 20 min"), [0, 600, 1200])
    with pytest.raises(StudyError, match="increasing"):
        parse_times("10, 5 min")


def test_zwietering_just_suspended_speed_by_hand():
    # Zwietering (1958), Chem. Eng. Sci. 8, eq. 1: N_js = S nu^0.1 dp^0.2 (g drho/rho_L)^0.45
    # X^0.13 D^-0.85 (rev/s); worked here by hand with logarithms for water-like liquid
    # (nu 1e-6 m^2/s, rho_L 1000 kg/m^3), dp 100 um, drho 1500 kg/m^3, X = 1, D 5 cm, S 6
    from kinfit.suspension import zwietering_speed

    log10_n = (math.log10(6) + 0.1 * -6 + 0.2 * -4 + 0.45 * math.log10(9.80665 * 1.5)
               + 0.13 * 0 - 0.85 * math.log10(0.05))
    got = zwietering_speed(kinematic_viscosity=1e-6, particle_diameter=1e-4,
                           density_difference=1500.0, liquid_density=1000.0,
                           solids_percent=1.0, impeller_diameter=0.05, s=6.0)
    assert got == pytest.approx(10 ** log10_n, rel=1e-12)
    # the exponents of the correlation: doubling D lowers N_js by 2^-0.85, doubling dp
    # raises it by 2^0.2
    base = dict(kinematic_viscosity=1e-6, particle_diameter=1e-4, density_difference=1500.0,
                liquid_density=1000.0, solids_percent=1.0, impeller_diameter=0.05, s=6.0)
    assert zwietering_speed(**{**base, "impeller_diameter": 0.1}) / got == pytest.approx(
        2 ** -0.85, rel=1e-12)
    assert zwietering_speed(**{**base, "particle_diameter": 2e-4}) / got == pytest.approx(
        2 ** 0.2, rel=1e-12)


def test_suspension_check_warns_below_the_just_suspended_speed(tmp_path):
    from kinfit.study import load_study
    from kinfit.suspension import suspension_check

    study, _, _ = synthetic(tmp_path, ROWS)
    res = quiet_fit(study)
    conds = parse_conditions("T=60 degC, N=300 rpm, dp=200 um", study)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        pred = predict_conditions(study, res, conds, n_draws=50, seed=0)
    assert not caught
    assert pred.summary["P1"]["suspension"]["assessed"] is False
    assert "not assessed" in pred.summary["P1"]["suspension"]["message"]
    path = tmp_path / "study.toml"
    path.write_text(path.read_text() + '\n[vessel]\nimpeller_diameter = "5 cm"\n'
                    'suspension_constant = 8.0\n\n[fluid]\nsolvent = "water"\n')
    study2 = load_study(path)
    check = suspension_check(study2, temperature=333.15, stirrer_speed=5.0,
                             particle_diameter=200e-6, catalyst_loading=2.0)
    assert check.assessed and check.suspended is False
    assert check.n_js > 5.0
    with pytest.warns(RegimeWarning, match="below the just-suspended speed"):
        pred2 = predict_conditions(study2, res, conds, n_draws=50, seed=0)
    assert pred2.summary["P1"]["suspension"]["suspended"] is False
    path.write_text(path.read_text().replace("suspension_constant = 8.0",
                                             "suspension_constant = -1"))
    with pytest.raises(StudyError, match="suspension_constant must be a positive number"):
        load_study(path)


def test_unidentified_film_only_fit_is_refused_without_raw_warnings(tmp_path, capsys):
    # a covariance that is not positive definite (what a fit of film-limited runs with the
    # kinetics left free gives) is refused with exit 1 and the trade's reason, not with raw
    # numpy warnings and the bad-input code
    from kinfit.cli import main

    study, _, _ = synthetic(tmp_path, FILM_ROWS, k=20.0, kc=1e-5, vary_k=False)
    res = quiet_fit(study)
    p = len(res.correlation["names"])
    bad = np.eye(p)
    bad[0, 0] = -1.0
    res = replace(res, extras={**res.extras, "covariance": bad.tolist()})
    res.save(tmp_path / "fit")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        code = main(["predict", str(tmp_path / "study.toml"), "--fit", str(tmp_path / "fit"),
                     "--at", "T=55 degC", "--out", str(tmp_path / "p")])
    err = capsys.readouterr().err
    assert code == 1
    assert "not positive definite: every run of the campaign was film-limited" in err
    assert "RuntimeWarning" not in err and "positive-semidefinite" not in err
