"""`kinfit fit --compare`: candidates fit on the demo with default starting values for the
parameters its study lacks, and every model is named RATE_LAW/FILM/PELLET. Behaviour checks
(no outside source applies); the defaults are common practice (kinfit/candidates.py)."""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import pytest

from kinfit.cli import main
from kinfit.errors import ConvergenceWarning, StudyError
from kinfit.fitting import FitOptions, fit, parse_candidate
from kinfit.study import load_study

DEMO = Path(__file__).resolve().parents[1] / "examples" / "demo" / "study.toml"


def test_candidates_fit_on_the_demo_with_defaults(tmp_path, capsys):
    assert main(["fit", str(DEMO), "--out", str(tmp_path), "--no-profile", "--quiet",
                 "--compare", "langmuir_hinshelwood", "reversible", "power/none"]) == 0
    out = capsys.readouterr().out
    rows = json.loads((tmp_path / "results.json").read_text())["comparison"]
    names = [r["model"] for r in rows]
    assert names == ["power/agitation/direct", "langmuir_hinshelwood/agitation/direct",
                     "reversible/agitation/direct", "power/none/direct"]
    assert all(r["sse"] > 0 for r in rows)
    assert "fit of study" in out and "(power/agitation/direct)" in out


def test_candidate_defaults_and_options():
    study = load_study(DEMO)
    lh = parse_candidate("langmuir_hinshelwood", study)
    c0 = sorted(r.initial_concentration for r in study.runs)[len(study.runs) // 2]
    K = lh.parameters["adsorption_constant"]
    assert K.value * c0 == pytest.approx(1.0, rel=0.5) and K.transform == "log"
    rev = parse_candidate("reversible/agitation/direct", study)
    assert rev.parameters["equilibrium_constant"].vary
    assert not rev.parameters["reaction_enthalpy"].vary
    with pytest.raises(StudyError, match="candidate 'expression'"):
        parse_candidate("expression", study)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        res = fit(study, FitOptions(profile=False, progress=False),
                  candidates=["langmuir_hinshelwood"])
    assert res.converged
