"""Robust numerics and nothing lost: parameter sets where the model cannot be computed give a
large finite residual with a recorded reason (never NaN into the optimiser), and outputs are
written atomically so an interrupted run leaves no half-written file.

The campaigns are the INVENTED synthetic ones of ``test_parallel.write_campaign`` (kinfit's own
physics plus seeded noise). The failure regions are of two kinds: a real one of the coupled
model (a rate constant so small that the batch rate underflows to zero, where the batch
integrator raises :class:`~kinfit.errors.SolverError`, and rate constants so large that it
overflows), and an INVENTED one (:class:`test_parallel.FragilePredictor`, a predictor that
raises SolverError in part of the space, standing in for a pellet solve that fails there).

The penalty design checked here is the estimation core's own (``kinfit.estimate.problem``:
``PENALTY``, ``Problem.predict_safe``; common practice for bounded least squares: a failed
evaluation returns a large finite residual so that a trust-region step is rejected).
"""

from __future__ import annotations

import json
import os
import warnings
from pathlib import Path

import numpy as np
import pytest
from test_parallel import fragile_problem, write_campaign

import kinfit.estimate.solve as lsq_solve
import kinfit.core.files as outputs
from kinfit.errors import SolverError, StudyError
from kinfit.estimate.checkpoint import atomic_write
from kinfit.estimate.least_squares import fit_problem
from kinfit.estimate.problem import PENALTY
from kinfit.estimate.uncertainty import profile_intervals
from kinfit.estimate.bootstrap import bootstrap


@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    from kinfit.model.compiled import Model, ModelSpec
    from kinfit.study.load import load_study

    folder = tmp_path_factory.mktemp("robust")
    path = write_campaign(folder, n_runs=6, seed=23, samples=6)
    study = load_study(path)
    model = Model(ModelSpec.from_study(study), study)
    problem = model.problem()
    est = fit_problem(problem)
    assert est.converged and est.n_penalised == 0  # the fixture's sanity: a clean fit
    return path, study, model, problem, est


@pytest.fixture
def spy(monkeypatch):
    """Record whether every residual vector and Jacobian handed to scipy is finite, and the
    largest residual magnitude seen."""
    seen: dict[str, list[float]] = {"finite": [], "max_abs": []}
    real = lsq_solve.least_squares

    def wrapped(fun, x0, jac, **kw):
        def fun2(z):
            r = fun(z)
            seen["finite"].append(bool(np.all(np.isfinite(r))))
            seen["max_abs"].append(float(np.max(np.abs(r))))
            return r

        def jac2(z):
            j = jac(z)
            seen["finite"].append(bool(np.all(np.isfinite(j))))
            return j

        return real(fun2, x0, jac=jac2, **kw)

    monkeypatch.setattr(lsq_solve, "least_squares", wrapped)
    return seen


# ------------------------------------------------------------------------------------------
# the real model's failure regions
# ------------------------------------------------------------------------------------------
def test_the_model_really_fails_where_the_rate_vanishes(campaign):
    _, _, model, problem, est = campaign
    theta = np.repeat(est.x[None, :], 3, axis=0)
    theta[1, 0] = 1e-318  # k_ref: the observed rate underflows to zero
    with pytest.raises(SolverError, match="rate is zero, negative or not finite"):
        model.predict(theta)
    f, bad = problem.predict_safe(theta)
    np.testing.assert_array_equal(bad, [False, True, False])
    np.testing.assert_array_equal(f[0], model.predict(theta[:1])[0])  # good rows untouched
    assert np.all(np.isnan(f[1]))


def test_fit_through_vanishing_and_exploding_rates_ends_finite(campaign, spy):
    """A multistart box 300 decades wide in k_ref: most design points give a zero or
    non-finite rate. The screen penalises them, the refinements from good points reach the
    same optimum as the clean fit, and scipy never sees a non-finite number."""
    _, _, _, problem, est = campaign
    halfwidth = np.array([300 * np.log(10.0), 1.0, 1.0, 2.0])  # k_ref, Ea, order, De (internal)
    wide = fit_problem(problem, multistart=32, seed=4, n_refine=3, box_halfwidth=halfwidth)
    assert wide.converged and np.all(np.isfinite(wide.x)) and np.isfinite(wide.sse)
    assert wide.n_penalised > 0
    assert any("SolverError: the observed rate is zero" in r for r in wide.penalty_reasons)
    np.testing.assert_allclose(wide.x, est.x, rtol=1e-5)
    assert all(spy["finite"]) and spy["finite"]


def test_a_start_inside_the_failure_region_is_reported_not_crashed(campaign):
    """Starting where nothing can be computed: the fit returns a finite, non-converged result
    that says why (the command line turns this into exit code 1)."""
    _, _, _, problem, _ = campaign
    from dataclasses import replace

    x0 = problem.x0.copy()
    x0[0] = 1e-318
    with pytest.warns(Warning, match="did not converge"):
        est = fit_problem(replace(problem, x0=x0))
    assert not est.converged
    assert "the prediction fails at the final point" in est.message
    assert est.n_penalised > 0 and est.penalty_reasons
    assert np.all(np.isfinite(est.x))


# ------------------------------------------------------------------------------------------
# an invented failure region across the optimiser's path
# ------------------------------------------------------------------------------------------
def test_solver_errors_in_part_of_the_space_are_penalised_with_reasons(campaign, spy):
    _, _, _, problem, est = campaign
    fragile = fragile_problem(problem, 2, 1.6)  # order > 1.6 cannot be computed
    got = fit_problem(fragile, multistart=16, seed=9, n_refine=3)
    assert got.converged
    np.testing.assert_allclose(got.x, est.x, rtol=1e-6)
    assert got.n_penalised > 0
    assert any("predictor raised SolverError: pellet profile did not converge" in r
               for r in got.penalty_reasons)
    assert all(spy["finite"])
    # a penalised call hands scipy the large finite residual, not NaN
    assert max(spy["max_abs"]) >= PENALTY


def test_batch_failure_is_split_row_by_row(campaign):
    """The vectorised predictor raises for the whole batch when one row fails; predict_safe
    then evaluates row by row, so one bad parameter set does not spoil the others."""
    _, _, model, problem, est = campaign
    fragile = fragile_problem(problem, 2, 1.6)
    theta = np.repeat(est.x[None, :], 4, axis=0)
    theta[2, 2] = 2.0
    f, bad = fragile.predict_safe(theta)
    np.testing.assert_array_equal(bad, [False, False, True, False])
    np.testing.assert_array_equal(f[[0, 1, 3]], model.predict(theta[[0, 1, 3]]))


def test_profile_stops_at_a_failure_region_and_says_so(campaign):
    _, _, _, problem, est = campaign
    edge = float(est.x[2]) + 0.02  # just above the fitted order
    fragile = fragile_problem(problem, 2, edge)
    prof = profile_intervals(fragile, est, names=["order"])
    assert not prof.intervals.upper_closed[0] and prof.intervals.lower_closed[0]
    assert prof.intervals.upper[0] <= edge
    assert any("the prediction fails beyond" in n and "the interval is cut there" in n
               for n in prof.intervals.notes)


def test_bootstrap_keeps_going_when_some_replicates_fail(campaign):
    """Replicates whose refit fails are counted and left out, the others give intervals."""
    _, _, _, problem, est = campaign
    fragile = fragile_problem(problem, 2, float(est.x[2]) + 0.01)
    boot = bootstrap(fragile, est, n_boot=8, seed=5, progress=False)
    assert boot.n_failed + int(np.sum(boot.converged)) == 8
    assert np.all(np.isnan(boot.replicates[~boot.converged]))
    assert np.all(np.isfinite(boot.replicates[boot.converged]))
    assert 0 < boot.n_failed < 8  # the region cuts through the replicates' spread
    assert f"{boot.n_failed} of 8 replicates did not converge" in boot.intervals.notes[0]
    assert np.all(np.isfinite(boot.intervals.lower)) and np.all(np.isfinite(boot.intervals.upper))


def test_a_bug_is_not_mistaken_for_a_failed_solve(campaign):
    """Only numerical failures (ArithmeticError, ValueError, RuntimeError and their kinfit
    subclasses) are penalised; a programming error, or Ctrl-C, propagates."""
    _, _, _, problem, _ = campaign
    for exc in (TypeError("bug"), KeyboardInterrupt()):
        def broken(x, exc=exc):
            raise exc
        from dataclasses import replace

        with pytest.raises(type(exc)):
            fit_problem(replace(problem, predict=broken))


# ------------------------------------------------------------------------------------------
# nothing lost: atomic writes, and an interrupted run
# ------------------------------------------------------------------------------------------
def _leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


@pytest.mark.parametrize("where", ["replace", "fsync"])
@pytest.mark.parametrize("error", [OSError("disk full"), KeyboardInterrupt()])
def test_an_interrupted_write_keeps_the_old_file(tmp_path, monkeypatch, where, error):
    target = tmp_path / "results.json"
    target.write_text('{"old": true}\n', encoding="utf-8")

    def fail(*args, **kwargs):
        raise error

    monkeypatch.setattr(outputs.os, where, fail)
    with pytest.raises(type(error)):
        outputs.write_json_atomic(target, {"new": 1.0})
    assert json.loads(target.read_text(encoding="utf-8")) == {"old": True}
    assert _leftovers(tmp_path) == []


def test_checkpoint_writer_is_atomic_too(tmp_path, monkeypatch):
    target = tmp_path / "chain.npz"
    target.write_bytes(b"old")

    def half(fh):
        fh.write(b"half")
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        atomic_write(target, half)
    assert target.read_bytes() == b"old" and _leftovers(tmp_path) == []
    with pytest.raises(StudyError, match="does not exist; create it"):
        atomic_write(tmp_path / "missing" / "x.npz", lambda fh: None)


def test_unserialisable_content_never_touches_the_file(tmp_path):
    target = tmp_path / "results.json"
    target.write_text("{}\n", encoding="utf-8")
    with pytest.raises(TypeError):
        outputs.write_json_atomic(target, {"bad": object()})
    assert target.read_text(encoding="utf-8") == "{}\n" and _leftovers(tmp_path) == []
    outputs.write_json_atomic(target, {"x": float("nan"), "y": np.inf, "z": np.float32(2.5)})
    assert json.loads(target.read_text(encoding="utf-8")) == {"x": None, "y": None, "z": 2.5}


def test_interrupted_bootstrap_keeps_earlier_results_and_exits_130(campaign, tmp_path,
                                                                  monkeypatch, capsys):
    """Ctrl-C after 4 of 20 bootstrap replicates of ``kinfit fit --bootstrap 20``: exit code
    130 with a message saying so, results.json replaced whole by the fit with the 4 finished
    replicates recorded, no temporary file left."""
    import kinfit.estimate.bootstrap as unc
    from kinfit.cli.parser import main

    path = campaign[0]
    out = tmp_path / "out"
    out.mkdir()
    (out / "results.json").write_text('{"earlier": true}\n', encoding="utf-8")
    real = unc._bootstrap_one
    done = []

    def interrupt_after_four(task):
        if len(done) == 4:
            raise KeyboardInterrupt
        done.append(real(task))
        return done[-1]

    monkeypatch.setattr(unc, "_bootstrap_one", interrupt_after_four)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        code = main(["fit", str(path), "--out", str(out), "--bootstrap", "20", "--quiet",
                     "--no-profile"])
    err = capsys.readouterr().err
    assert code == 130 and "bootstrap interrupted after 4 of 20 replicates" in err
    assert len(done) == 4  # it really stopped in the middle of the bootstrap
    saved = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert saved["extras"]["bootstrap"]["n_done"] == 4
    assert saved["extras"]["bootstrap"]["interrupted"] is True
    assert _leftovers(out) == []


def test_results_and_predictions_are_written_whole(campaign, tmp_path):
    """A finished fit writes results.json and predictions.csv whole (each atomically)."""
    from kinfit.fitting.fit import FitOptions, fit
    from kinfit.fitting.results import FitResult

    _, study, _, _, _ = campaign
    result = fit(study, FitOptions(profile=False))
    result.save(tmp_path)
    again = FitResult.load(tmp_path)
    assert again.parameters == json.loads(json.dumps(result.to_dict()))["parameters"]
    assert _leftovers(tmp_path) == [] and os.path.getsize(tmp_path / "predictions.csv") > 0
