"""``kinfit sample`` on a whole study: the posterior results contract, the per-run derived
quantities, --require-converged, --resume and bad input.

The study is the invented demo campaign (examples/demo, data generated from stated true
parameters); chains here are short on purpose, so most are not converged. The sampler itself
is checked against analytic posteriors and by simulation-based calibration in
tests/test_sampling.py; these tests check what the command writes and how it behaves. The
results contract is kinfit's own (posterior.json: {name: {median, q05, q95, hdi90, rhat,
ess}} and the sampler settings walkers, steps, burn-in, seed). These are checks of
kinfit's own contract and command-line behaviour; no outside source applies beyond those named in
tests/test_sampling.py.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from kinfit.cli.parser import main
from kinfit.fitting.fit import FitOptions, fit
from kinfit.study.load import load_study

pytestmark = pytest.mark.filterwarnings("ignore::kinfit.errors.ConvergenceWarning")

DEMO = Path(__file__).resolve().parents[1] / "examples" / "demo" / "study.toml"


@pytest.fixture(scope="module")
def fitted(tmp_path_factory):
    """The demo fitted by least squares (no profile intervals), saved into a folder."""
    folder = tmp_path_factory.mktemp("fit")
    fit(load_study(DEMO), FitOptions(profile=False, progress=False)).save(folder)
    return folder


def _sample(fit_dir: Path, out: Path, *extra: str) -> int:
    return main(["sample", str(DEMO), "--fit", str(fit_dir), "--out", str(out), "--quiet",
                 *extra])


@pytest.fixture(scope="module")
def short_run(fitted, tmp_path_factory):
    out = tmp_path_factory.mktemp("post")
    code = _sample(fitted, out, "--steps", "150", "--seed", "3", "--walkers", "32")
    return code, out


def test_posterior_json_holds_the_results_contract(short_run, fitted):
    code, out = short_run
    assert code == 0  # unconverged but not asked to converge: exit 0 (README exit codes)
    post = json.loads((out / "posterior.json").read_text())
    fitted_names = set(json.loads((fitted / "results.json").read_text())["parameters"])
    varying = {n for n, p in json.loads((fitted / "results.json").read_text())["parameters"]
               .items() if p["vary"]}
    assert varying <= set(post["parameters"]) <= fitted_names | {"sigma"}
    for name, entry in post["parameters"].items():
        for key in ("median", "q05", "q95", "rhat", "ess"):
            assert math.isfinite(entry[key]), (name, key)
        lo, hi = entry["hdi90"]
        assert entry["q05"] <= entry["median"] <= entry["q95"], name
        assert lo <= entry["median"] <= hi, name
    sampler = post["sampler"]
    assert sampler["walkers"] == 32 and sampler["steps"] == 150 and sampler["seed"] == 3
    assert 0 <= sampler["burn_in"] <= 75 and sampler["moves"] == "de-laplace"
    assert post["convergence"]["converged"] is False  # 150 steps cannot meet the rule
    assert post["convergence"]["reasons"]
    assert post["manifest"]["inputs"]


def test_per_run_derived_quantities_and_regime_probabilities(short_run):
    _, out = short_run
    post = json.loads((out / "posterior.json").read_text())
    runs = post["runs"]
    assert len(runs) == 24
    for rid, entry in runs.items():
        probs = entry["regime_probability"]
        assert set(probs) == {"kinetic", "film", "pore", "mixed"}
        assert sum(probs.values()) == pytest.approx(1.0), rid
        for key in ("effectiveness_factor", "weisz_prater", "carberry"):
            q = entry[key]
            assert q["q05"] <= q["median"] <= q["q95"], (rid, key)
        assert 0.0 < entry["effectiveness_factor"]["q95"] <= 1.0 + 1e-9
    # the demo's large particles at the high stirrer speed are pore-limited (examples/demo
    # README): the posterior must put most of its weight there
    assert runs["R08"]["regime_probability"]["pore"] > 0.5


def test_draws_and_bands_files(short_run):
    _, out = short_run
    post = json.loads((out / "posterior.json").read_text())
    draws = pd.read_csv(out / "posterior_draws.csv.gz")
    kept = (post["sampler"]["steps"] - post["sampler"]["burn_in"]) * post["sampler"]["walkers"]
    assert len(draws) == kept
    assert set(post["parameters"]) <= set(draws.columns)
    bands = pd.read_csv(out / "posterior_bands.csv")
    assert set(bands["run"]) == set(post["runs"])
    assert np.all(bands["q05"] <= bands["q50"] + 1e-9)
    assert np.all(bands["q50"] <= bands["q95"] + 1e-9)
    # medians of the draws agree with the summary in posterior.json
    assert draws["k_ref"].median() == pytest.approx(post["parameters"]["k_ref"]["median"])


def test_netcdf_file_holds_the_draws(short_run):
    # posterior.nc as users get it: NetCDF-4 with ArviZ's groups (walkers as chains, kept steps
    # as draws), the same numbers as posterior_draws.csv (CSV floats are written round-trip)
    import xarray as xr

    _, out = short_run
    draws = pd.read_csv(out / "posterior_draws.csv.gz").sort_values(["walker", "step"])
    with xr.open_datatree(out / "posterior.nc", engine="h5netcdf") as tree:
        names = list(tree["posterior"].data_vars)
        assert set(json.loads((out / "posterior.json").read_text())["parameters"]) <= set(names)
        for name in names:
            np.testing.assert_array_equal(tree["posterior"][name].values.reshape(-1),
                                          draws[name].to_numpy())
        np.testing.assert_array_equal(tree["sample_stats"]["lp"].values.reshape(-1),
                                      draws["log_prob"].to_numpy())
        assert json.loads(tree["posterior"].attrs["kinfit_settings"])["seed"] == 3


def test_require_converged_exits_1_and_says_why(fitted, tmp_path, capsys):
    code = _sample(fitted, tmp_path, "--steps", "100", "--seed", "1", "--require-converged")
    assert code == 1
    assert "did not converge" in capsys.readouterr().err
    assert (tmp_path / "posterior.json").is_file()  # what was sampled is written all the same


def test_resume_gives_the_chain_asked_for(fitted, tmp_path):
    # the "an interrupted run resumed gives a chain as long as asked": stop at 150
    # steps, resume to 300; the chain equals an uninterrupted 300-step chain draw for draw
    first = tmp_path / "resumed"
    assert _sample(fitted, first, "--steps", "150", "--seed", "9") == 0
    assert _sample(fitted, first, "--steps", "300", "--seed", "9", "--resume") == 0
    resumed = json.loads((first / "posterior.json").read_text())
    assert resumed["sampler"]["steps"] == 300 and resumed["sampler"]["resumed_from"] == 150
    straight = tmp_path / "straight"
    assert _sample(fitted, straight, "--steps", "300", "--seed", "9") == 0
    a = pd.read_csv(first / "posterior_draws.csv.gz")
    b = pd.read_csv(straight / "posterior_draws.csv.gz")
    pd.testing.assert_frame_equal(a, b)


def test_warnings_are_one_plain_line(fitted, tmp_path, capsys):
    # a chain too short to converge warns on stderr as "kinfit: warning: ...", without the
    # Python source file and line that the default warning format shows
    assert _sample(fitted, tmp_path, "--steps", "60", "--seed", "2") == 0
    err = capsys.readouterr().err
    assert "kinfit: warning: " in err and "not converged" in err
    assert ".py:" not in err and "sample_problem(" not in err.replace("sample_problem: ", "")


def test_bad_input_names_the_problem(fitted, tmp_path, capsys):
    assert main(["sample", str(DEMO), "--fit", str(tmp_path / "none"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "no results at" in err and "kinfit fit" in err
    assert _sample(fitted, tmp_path, "--steps", "10", "--moves", "gibbs") == 2
    assert "invalid choice: 'gibbs'" in capsys.readouterr().err
    # resuming without a checkpoint says what to do
    assert _sample(fitted, tmp_path / "empty", "--steps", "10", "--resume") == 2
    assert "checkpoint" in capsys.readouterr().err


def _interrupt_after(monkeypatch, steps):
    """Make emcee's sampler raise KeyboardInterrupt after ``steps`` steps, as Ctrl-C would."""
    import emcee

    original = emcee.EnsembleSampler.sample
    done = [0]  # steps over every call (the sampler is called once per chunk)

    def sample(self, *args, **kwargs):
        for state in original(self, *args, **kwargs):
            if done[0] >= steps:
                raise KeyboardInterrupt
            done[0] += 1
            yield state

    monkeypatch.setattr(emcee.EnsembleSampler, "sample", sample)


def test_ctrl_c_keeps_the_chain_and_resume_finishes_it(fitted, tmp_path, monkeypatch, capsys):
    _interrupt_after(monkeypatch, 120)
    assert _sample(fitted, tmp_path, "--steps", "300", "--seed", "4", "--chunk", "100") == 130
    assert "interrupted" in capsys.readouterr().err
    post = json.loads((tmp_path / "posterior.json").read_text())
    assert post["convergence"]["interrupted"] is True
    kept = post["sampler"]["steps"]
    assert kept in (120, 121)  # the step emcee had finished when the interrupt came is kept
    monkeypatch.undo()
    assert _sample(fitted, tmp_path, "--steps", "300", "--seed", "4", "--chunk", "100",
                   "--resume") == 0
    post = json.loads((tmp_path / "posterior.json").read_text())
    assert post["sampler"]["steps"] == 300 and post["sampler"]["resumed_from"] == kept


def test_run_interrupted_while_sampling_still_writes_the_report(tmp_path, monkeypatch, capsys):
    # `kinfit run`: Ctrl-C during sampling keeps the chain, the report is written from it,
    # the exit code is 130 and the message says how to go on
    _interrupt_after(monkeypatch, 80)
    out = tmp_path / "run"
    assert main(["run", str(DEMO), "--out", str(out), "--steps", "400", "--quiet"]) == 130
    err = capsys.readouterr().err
    assert "--resume" in err and "kinfit report" in err
    assert (out / "report.html").is_file() and (out / "posterior_checkpoint.npz").is_file()
    assert json.loads((out / "posterior.json").read_text())["convergence"]["interrupted"]


def test_default_seed_makes_a_standalone_sample_reproducible(fitted, tmp_path):
    # no --seed: the documented default seed, so two standalone samples agree draw for draw;
    # the default step cap is the README's 10 000
    from kinfit.fitting.posterior import DEFAULT_SEED, MAX_STEPS
    from kinfit.cli.parser import build_parser

    args = build_parser().parse_args(["sample", str(DEMO), "--fit", str(fitted)])
    assert args.steps == MAX_STEPS == 10_000 and args.seed == DEFAULT_SEED
    readme = (DEMO.parents[2] / "README.md").read_text()
    assert "10 000-step cap" in readme
    for name in ("a", "b"):
        assert _sample(fitted, tmp_path / name, "--steps", "60", "--walkers", "16") == 0
    a = pd.read_csv(tmp_path / "a" / "posterior_draws.csv.gz")
    b = pd.read_csv(tmp_path / "b" / "posterior_draws.csv.gz")
    pd.testing.assert_frame_equal(a, b)
    post = json.loads((tmp_path / "a" / "posterior.json").read_text())
    assert post["sampler"]["seed"] == DEFAULT_SEED
