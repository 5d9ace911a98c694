"""The joint fit through the chemistry layer: recovery of the demo's truth, the results
contract, model comparison, identifiability in the trade's words, and exit codes."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest

from kinfit.cli import main
from kinfit.fitting import FitOptions, fit
from kinfit.results import FitResult
from kinfit.study import load_study

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "examples" / "demo"

# the generator's true parameters (examples/demo/truth.toml; invented demo data)
TRUTH = {"k_ref": 2.0, "activation_energy": 62e3, "order": 1.5,
         "effective_diffusivity": 1e-10, "kc_ref": 2e-5, "agitation_exponent": 0.6,
         "size_exponent": 0.5}


@pytest.fixture(scope="module")
def demo_fit() -> FitResult:
    result = fit(load_study(DEMO / "study.toml"), FitOptions(profile=False))
    assert result.converged  # the fixture checks its own sanity
    return result


def test_demo_recovers_truth_within_intervals(demo_fit):
    # recovery (common practice): each true parameter of the generator lies in its 95 % interval
    for name, true in TRUTH.items():
        lo, hi = demo_fit.parameters[name]["ci95"]
        assert lo <= true <= hi, (name, lo, true, hi)


def test_results_contract(demo_fit, tmp_path):
    # kinfit's results contract (README), field for field
    demo_fit.save(tmp_path)
    data = json.loads((tmp_path / "results.json").read_text())
    for p in data["parameters"].values():
        assert {"estimate", "unit", "stderr", "ci95", "ci_method", "vary"} <= set(p)
    for r in data["runs"].values():
        assert {"thiele_modulus", "effectiveness_factor", "weisz_prater", "mears", "carberry",
                "regime"} <= set(r)
        assert r["regime"] in ("kinetic", "film", "pore", "mixed")
    assert {"converged", "n_obs", "n_params", "sse", "aic", "bic", "message"} <= set(data["fit"])
    assert {"inputs", "versions", "seed", "command"} <= set(data["manifest"])
    again = FitResult.load(tmp_path)
    assert again.estimates() == pytest.approx(demo_fit.estimates())
    assert again.predictions is not None and len(again.predictions) == 360


def test_demo_regimes_match_the_generator(demo_fit):
    # the generator made large particles at low speed film-limited and at high speed
    # pore-limited at 40-55 degC (examples/demo/README.md)
    runs = demo_fit.runs
    assert runs["R11"]["regime"] == "film" and runs["R19"]["regime"] == "film"
    assert runs["R07"]["regime"] == "pore" and runs["R15"]["regime"] == "pore"
    assert runs["R05"]["regime"] == "kinetic" and runs["R05"]["intrinsic"]


def test_single_speed_campaign_flags_agitation_exponent(tmp_path):
    # identifiability in the trade's words: with one stirrer speed the agitation exponent is
    # not identified (common practice)
    for f in ("study.toml", "observations.csv"):
        shutil.copy(DEMO / f, tmp_path / f)
    runs = (DEMO / "runs.csv").read_text().replace(",1200.0,", ",300.0,")
    (tmp_path / "runs.csv").write_text(runs)
    result = fit(load_study(tmp_path / "study.toml"), FitOptions(profile=False, max_nfev=60))
    messages = " ".join(w["message"] for w in result.identifiability)
    assert "only one stirrer speed" in messages and "agitation exponent" in messages


def test_model_comparison_prefers_the_true_model(tmp_path):
    # Akaike weights (Burnham & Anderson 2002): the generating model (with pores) beats the
    # same model without internal diffusion on data made with pores
    study = load_study(DEMO / "study.toml")
    result = fit(study, FitOptions(profile=False, max_nfev=200),
                 candidates=["power/agitation/none"])
    rows = {r["model"]: r for r in result.comparison}
    assert len(rows) == 2
    best = max(rows.values(), key=lambda r: r["akaike_weight"])
    assert best["model"] != "power/agitation/none"
    other = rows["power/agitation/none"]
    assert other["likelihood_ratio"]["p_value"] < 1e-6


def test_fit_cli_writes_results_and_exits_0(tmp_path, capsys):
    code = main(["fit", str(DEMO / "study.toml"), "--out", str(tmp_path), "--no-profile",
                 "--quiet"])
    assert code == 0
    out = capsys.readouterr().out
    assert "k_ref" in out and "95 % interval" in out
    assert (tmp_path / "results.json").is_file() and (tmp_path / "predictions.csv").is_file()


def test_unconverged_fit_exits_1_and_keeps_results(tmp_path, capsys):
    code = main(["fit", str(DEMO / "study.toml"), "--out", str(tmp_path), "--no-profile",
                 "--max-nfev", "2", "--quiet"])
    assert code == 1
    data = json.loads((tmp_path / "results.json").read_text())
    assert data["fit"]["converged"] is False
    assert "did not converge" in capsys.readouterr().err


def _study_with(tmp_path: Path, extra: str = "", replace: tuple[str, str] | None = None) -> Path:
    for f in ("runs.csv", "observations.csv"):
        shutil.copy(DEMO / f, tmp_path / f)
    text = (DEMO / "study.toml").read_text()
    if replace:
        text = text.replace(*replace)
    (tmp_path / "study.toml").write_text(text + extra)
    return tmp_path / "study.toml"


@pytest.mark.parametrize(
    ("extra", "replace", "pattern"),
    [
        ("[parameters.colour]\nvalue = 1\n", None, "unknown parameter 'colour'"),
        ("", ("value = 1.0\nmin = 0.2\nmax = 2.5", "value = 3.0\nmin = 0.2\nmax = 2.5"),
         r"\[parameters\.order\]: value 3 .*outside its bounds"),
        ("", ('value = 0.7\nmin = -0.5', 'value = 0.7\nvary = false\nprior = "normal(0.5, 0.1)"'
              '\nmin = -0.5'), "a fixed parameter .* cannot have a prior"),
    ],
)
def test_fit_bad_input_exits_2(tmp_path, capsys, extra, replace, pattern):
    import re

    path = _study_with(tmp_path, extra, replace)
    assert main(["fit", str(path), "--out", str(tmp_path / "out"), "--no-profile"]) == 2
    err = capsys.readouterr().err
    assert re.search(pattern, err), err
    assert "Traceback" not in err


def test_no_varying_parameter_exits_2(tmp_path, capsys):
    text = (DEMO / "study.toml").read_text()
    text = text.replace("\nmin =", "\nvary = false\nmin =")
    for f in ("runs.csv", "observations.csv"):
        shutil.copy(DEMO / f, tmp_path / f)
    (tmp_path / "study.toml").write_text(text)
    assert main(["fit", str(tmp_path / "study.toml"), "--out", str(tmp_path / "o")]) == 2
    assert "no varying parameter" in capsys.readouterr().err


def test_fewer_observations_than_parameters_exits_2(tmp_path, capsys):
    shutil.copy(DEMO / "study.toml", tmp_path / "study.toml")
    runs = (DEMO / "runs.csv").read_text().splitlines()
    (tmp_path / "runs.csv").write_text("\n".join(runs[:2]) + "\n")
    obs = (DEMO / "observations.csv").read_text().splitlines()
    (tmp_path / "observations.csv").write_text("\n".join(obs[:6]) + "\n")
    code = main(["fit", str(tmp_path / "study.toml"), "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err
    assert code == 2 and "5 observations but 7 varying parameters" in err, err


def test_fit_does_not_mutate_the_table():
    study = load_study(DEMO / "study.toml")
    before = dict(study.parameters.values())
    fit(study, FitOptions(profile=False, max_nfev=5))
    assert dict(study.parameters.values()) == before
    assert np.isfinite(list(before.values())).all()
