"""The Python API with lmfit, an outside reference library: kinfit's least-squares optimum on
the demo campaign agrees with lmfit.minimize (MINPACK Levenberg-Marquardt, lmfit 1.x) run on
the same weighted residuals from the study's start values; FitResult.to_parameters() gives
lmfit.Parameters with values, bounds, standard errors and correlations, and fit() takes them
back as starting values and bounds. Also: runs shown in the lab's units, estimates as a
property, Diagnosis.to_frame()."""

from __future__ import annotations

import warnings
from pathlib import Path

import lmfit
import numpy as np
import pytest

from kinfit.diagnostics import diagnose
from kinfit.fitting import FitOptions, fit, main_spec
from kinfit.model import Model
from kinfit.study import load_study

DEMO = Path(__file__).resolve().parents[1] / "examples" / "demo" / "study.toml"


@pytest.fixture(scope="module")
def demo_fit():
    study = load_study(DEMO)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return study, fit(study, FitOptions(profile=False, progress=False))


def test_optimum_agrees_with_lmfit_minimize(demo_fit):
    # lmfit (Newville et al., LMFIT 1.x, MINPACK lmdif) minimises the same residuals
    # (y - f(x)) sqrt(w) in the optimiser's coordinates (ln x for positive scales) from the
    # study's start values; both optima must agree to 1e-3 of each standard error, far inside
    # the statistical uncertainty and well above the optimisers' own convergence (1e-12
    # relative in the sum of squares)
    study, res = demo_fit
    model = Model(main_spec(study), study)
    space = model.space()
    sw = np.sqrt(model.weights) if model.weights is not None else 1.0
    u0 = space.to_internal(model.x0)
    lo, hi = space.internal_bounds()
    params = lmfit.Parameters()
    for i in range(len(model.columns)):
        params.add(f"u{i}", value=u0[i], min=lo[i], max=hi[i])

    def residual(pars):
        u = np.array([pars[f"u{i}"].value for i in range(len(model.columns))])
        return (model.y - model.predict(space.to_physical(u)[None])[0]) * sw

    out = lmfit.minimize(residual, params, method="leastsq", xtol=1e-12, ftol=1e-12)
    assert out.success
    x = space.to_physical(np.array([out.params[f"u{i}"].value
                                    for i in range(len(model.columns))]))
    for i, name in enumerate(model.columns):
        se = res.parameters[name]["stderr"]
        assert abs(x[i] - res.estimates[name]) < 1e-3 * se, name
        # lmfit's linearised standard error, carried from ln x to x (dx = x du)
        assert out.params[f"u{i}"].stderr * (x[i] if space.is_log[i] else 1.0) == \
            pytest.approx(se, rel=0.02), name
    assert out.chisqr == pytest.approx(res.fit["sse"], rel=1e-9)


def test_to_parameters_and_back(demo_fit):
    study, res = demo_fit
    p = res.to_parameters()
    assert isinstance(p, lmfit.Parameters)
    k = p["k_ref"]
    assert k.value == res.estimates["k_ref"] and k.stderr == res.parameters["k_ref"]["stderr"]
    assert (k.min, k.max) == tuple(res.parameters["k_ref"]["bounds"])
    names = res.correlation["names"]
    j = names.index("activation_energy")
    assert k.correl["activation_energy"] == pytest.approx(
        res.correlation["matrix"][names.index("k_ref")][j])
    assert k.user_data["unit"] == "mol/(kg*s)"
    # back: start from the fitted values with the order held at 1.5
    p["order"].set(value=1.5, vary=False)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res2 = fit(study, FitOptions(profile=False, progress=False), parameters=p)
    assert res2.parameters["order"]["estimate"] == 1.5 and not res2.parameters["order"]["vary"]
    bad = lmfit.Parameters()
    bad.add("ordr", value=1.0)
    from kinfit.errors import StudyError

    with pytest.raises(StudyError, match=r"'ordr' is not a parameter of the study \(did you "
                                         r"mean 'order'\?\)"):
        fit(study, FitOptions(profile=False, progress=False), parameters=bad)


def test_estimates_property_and_the_former_call(demo_fit):
    _, res = demo_fit
    assert res.estimates["order"] == res.estimates()["order"]
    assert type(res.estimates()) is dict


def test_runs_in_lab_units_and_diagnosis_frame(demo_fit, tmp_path):
    study, res = demo_fit
    assert repr(study.runs[0]) == ("Run('R01', T=40 degC, N=300 rpm, dp=10 um, w=1 g/L, "
                                   "C0=0.8 mol/L, 15 points)")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = diagnose(study, res)
    frame = d.to_frame()
    assert list(frame["run"]) == list(study.run_ids)
    assert {"regime", "thiele_modulus", "effectiveness_factor", "carberry", "share_film",
            "intrinsic"} <= set(frame.columns)
    assert frame.set_index("run").loc["R01", "regime"] == d.runs["R01"]["regime"]
