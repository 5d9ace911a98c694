"""Model-free profile tests under proportional noise.

Reference: under the null hypothesis (the same profile at every level) the p value of a valid
extra-sum-of-squares F test is uniform on [0, 1], so about alpha of the tests reject (common
practice; Bates & Watts 1988, sec. 3.5, from memory). With noise proportional to the
concentration, an unweighted test is not valid; weights 1/c^2 from the pooled curve
(two-stage weighted least squares; Carroll & Ruppert 1988, ch. 2, from memory) restore it.
Invented data: first-order decay from 500 mol/m^3 at k = 0.05 1/min, 10 samples a run, 4 %
relative noise, two runs differing only in stirrer speed (no film effect by construction).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from scipy import stats
from studies import profiles_csv, runs_csv, study_text, write_study

from kinfit.analysis.diagnosis.model_free import compare_profiles, model_free_tests
from kinfit.study.load import load_study
from kinfit.study.runs import comparison_sets

PARAMETERS = {"k_ref": "0.05 mol/(kg*s)", "activation_energy": "60 kJ/mol", "order": 1.0,
              "kc_ref": "1e-4 m/s", "agitation_exponent": 0.5, "size_exponent": 0.5}
RUNS = [("A1", 50, 300, 50, 2, 0.5), ("A2", 50, 900, 50, 2, 0.5)]


def _study(folder, error_model):
    t_min = np.linspace(0.0, 60.0, 10)
    obs = [(r[0], f"{t:.6g}", f"{500.0 * np.exp(-0.05 * t):.6g}") for r in RUNS for t in t_min]
    text = study_text(PARAMETERS, reference_temperature="50 degC",
                      sections=f'[error]\nmodel = "{error_model}"\n')
    return load_study(write_study(folder, text, runs_csv(RUNS), profiles_csv(obs)))


def _p_values(study, n, seed):
    cs = comparison_sets(study, "stirrer_speed")[0]
    rng = np.random.default_rng(seed)
    clean = [r.concentrations.copy() for r in study.runs]
    out = []
    for _ in range(n):
        runs = tuple(dataclasses.replace(r, concentrations=c * (1 + 0.04 * rng.standard_normal(
            c.size))) for r, c in zip(study.runs, clean, strict=True))
        out.append(compare_profiles(dataclasses.replace(study, runs=runs), cs).p_value)
    return np.array(out)


def test_proportional_noise_gives_uniform_p_values_under_the_null(tmp_path):
    p = _p_values(_study(tmp_path / "prop", "proportional"), 300, seed=1)
    assert 0.01 <= np.mean(p < 0.05) <= 0.10
    assert stats.kstest(p, "uniform").pvalue > 0.01
    # negative control: the same data treated as constant noise reject far too often, which
    # shows the check can tell a valid test from an invalid one
    q = _p_values(_study(tmp_path / "const", "constant"), 300, seed=1)
    assert np.mean(q < 0.05) > 0.15


def test_weighting_is_stated_and_combined_noise_is_noted(tmp_path):
    res = model_free_tests(_study(tmp_path / "prop", "proportional"))
    assert "weighted 1/c^2" in res.tests[0].test
    assert not res.notes or not any("combined" in n for n in res.notes)
    res = model_free_tests(_study(tmp_path / "comb", "combined"))
    assert "weighted" not in res.tests[0].test
    assert any("'combined'" in n for n in res.notes)


@pytest.mark.parametrize("error_model", ["constant", "proportional"])
def test_a_real_difference_is_still_found(tmp_path, error_model):
    # the high-speed run reacts 40 % faster (a film-limited low-speed run): both weightings
    # must find it with 4 % noise
    study = _study(tmp_path / error_model, error_model)
    rng = np.random.default_rng(3)
    t = study.runs[1].times / 60.0
    fast = 500.0 * np.exp(-0.07 * t) * (1 + 0.04 * rng.standard_normal(t.size))
    slow = study.runs[0].concentrations * (1 + 0.04 * rng.standard_normal(t.size))
    runs = (dataclasses.replace(study.runs[0], concentrations=slow),
            dataclasses.replace(study.runs[1], concentrations=fast))
    res = compare_profiles(dataclasses.replace(study, runs=runs),
                           comparison_sets(study, "stirrer_speed")[0])
    assert res.different and res.p_value < 0.01
    assert res.direction == "faster at higher"
