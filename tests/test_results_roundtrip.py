"""FitResult's declared fields are results.json's sections, and a saved result loads back
equal, field for field. A check of kinfit's own results contract: no outside source applies."""

from __future__ import annotations

import dataclasses
import json
import math

import pandas as pd
import pytest

from kinfit.errors import StudyError
from kinfit.fitting.results import FitResult


def _result() -> FitResult:
    return FitResult(
        study="s", model={"label": "power+none+none", "rate_law": "power"},
        parameters={"k_ref": {"estimate": 2.0, "unit": "mol/(kg*s)", "stderr": 0.1,
                              "ci95": [1.8, 2.2], "vary": True},
                    "order": {"estimate": 1.0, "unit": "1", "vary": False}},
        runs={"R1": {"regime": "kinetic", "effectiveness_factor": 1.0, "thiele_modulus": 0.0,
                     "weisz_prater": 0.0, "carberry": 0.0, "mears": 0.0}},
        fit={"converged": True, "n_obs": 3, "n_params": 1, "sse": 0.5, "aic": 1.0,
             "aicc": 2.0, "bic": 1.5, "message": "ok"},
        correlation={"names": ["k_ref"], "matrix": [[1.0]]},
        identifiability=({"kind": "bound", "parameters": ["k_ref"], "message": "m"},),
        comparison=({"model": "power", "sse": 0.5},),
        manifest={"seed": 1},
        predictions=pd.DataFrame({"run": ["R1"] * 3, "time [s]": [0.0, 1.0, 2.0],
                                  "fitted": [1.0, 0.5, 0.25]}),
        covariance=((0.01, math.nan), (math.nan, 0.04)),
        profiles={"k_ref": {"values": [1.9, 2.0, 2.1], "tau": [-1.0, 0.0, 1.0]}},
        profile_t_crit=2.1,
        bootstrap={"kind": "residual", "n": 10, "n_done": 10, "n_failed": 0,
                   "interrupted": False, "notes": []},
    )


def test_declared_fields_are_the_sections_of_results_json(tmp_path):
    r = _result()
    r.save(tmp_path)
    saved = json.loads((tmp_path / "results.json").read_text(encoding="utf-8"))
    names = {f.name for f in dataclasses.fields(FitResult)} - {"predictions"}
    extras = {"covariance", "profiles", "profile_t_crit", "bootstrap"}
    assert set(saved) - {"kinfit_results", "extras"} == names - extras
    assert set(saved["extras"]) == extras
    for name in names - extras - {"manifest"}:
        value = getattr(r, name)
        assert saved[name] == (list(value) if isinstance(value, tuple) else value), name
    # JSON has no NaN: the covariance's non-finite entries are written as null
    assert saved["extras"]["covariance"] == [[0.01, None], [None, 0.04]]


def test_a_saved_result_loads_back_equal(tmp_path):
    r = _result()
    r.save(tmp_path)
    back = FitResult.load(tmp_path)
    for f in dataclasses.fields(FitResult):
        a, b = getattr(r, f.name), getattr(back, f.name)
        if f.name == "predictions":
            pd.testing.assert_frame_equal(a, b)
        elif f.name == "covariance":
            assert [[x if math.isfinite(x) else None for x in row] for row in a] == \
                   [[x if math.isfinite(x) else None for x in row] for row in b]
        elif f.name == "manifest":
            assert {k: v for k, v in b.items() if k != "outputs"} == a
        else:
            assert a == b, f.name
    assert back.to_dict()["extras"] == r.to_dict()["extras"]


def test_an_undeclared_extra_is_refused(tmp_path):
    r = _result()
    r.save(tmp_path)
    path = tmp_path / "results.json"
    data = json.loads(path.read_text(encoding="utf-8"))
    data["extras"]["surprise"] = 1
    path.write_text(json.dumps(data), encoding="utf-8")
    with pytest.raises(StudyError, match=r"unknown entries \['surprise'\] in 'extras'"):
        FitResult.load(tmp_path)
