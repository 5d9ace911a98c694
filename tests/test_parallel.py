"""Independent refits through an executor: serial, a local process pool and a Dask cluster give
the same numbers with the same seed, and everything sent to a worker pickles.

The campaigns here are INVENTED synthetic data, made with kinfit's own physics (order-1.5 power
law, agitation film law, pellet diffusion in spheres) from stated true parameters plus seeded
normal noise; :func:`write_campaign` is reused by ``test_robust_numerics.py`` and by
``tests/benchmarks/bench_scale.py``.

Bit-for-bit equality across executors is the contract of the estimation core (its docstrings
say "the result does not depend on it"): the same deterministic floating-point code runs on the
same inputs in every process, so the checks below use ``assert_array_equal``, not a tolerance.
"""

from __future__ import annotations

import argparse
import pickle
import time
from concurrent.futures import Executor, ProcessPoolExecutor
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from studies import simulate, study_text

from kinfit.errors import StudyError
from kinfit.estimate.least_squares import fit_problem
from kinfit.estimate.uncertainty import bootstrap, profile_intervals
from kinfit.parallel import (
    SerialExecutor,
    add_parallel_arguments,
    available_workers,
    executor_from_args,
    fit_models,
    make_executor,
)

# INVENTED true parameters (the demo scenario's values) and the fit's start values
TRUTH = {
    "k_ref": "0.08 mol/(kg*s)",
    "activation_energy": "62 kJ/mol",
    "order": 1.5,
    "effective_diffusivity": "4e-10 m^2/s",
    "kc_ref": "2.5e-5 m/s",
    "agitation_exponent": 0.6,
    "size_exponent": 0.5,
}
START = {
    "k_ref": "0.11 mol/(kg*s)",
    "activation_energy": "55 kJ/mol",
    "order": 1.3,
    "effective_diffusivity": "6e-10 m^2/s",
    "kc_ref": "3.5e-5 m/s",
    "agitation_exponent": 0.5,
    "size_exponent": 0.5,
}
TEMPERATURES_C = (40.0, 55.0, 70.0)
SPEEDS_RPM = (300.0, 1200.0)
DIAMETERS_UM = (30.0, 250.0)
LOADINGS_G_L = (1.0, 2.5)
C0_MOL_L = (0.8, 0.5, 1.1)


def _study(name: str, values: dict[str, object], vary: set[str], pellet: str) -> str:
    """The campaign's study text: ``values`` as parameter values, ``vary`` free, the rest fixed
    (no effective diffusivity without a pellet model)."""
    kept = {k: v for k, v in values.items()
            if not (k == "effective_diffusivity" and pellet == "none")}
    return study_text(
        kept, vary={k: k in vary for k in kept}, name=name,
        comment="INVENTED synthetic campaign written by tests/test_parallel.py::write_campaign",
        reference_temperature="55 degC", kinetics={"reference_concentration": "1 mol/L"},
        reference_diameter="100 um", pellet=pellet, observations="observations.csv",
    )


def _run_rows(n_runs: int) -> pd.DataFrame:
    rows = []
    for i in range(n_runs):
        rows.append({
            "run": f"R{i + 1:03d}",
            "temperature [degC]": TEMPERATURES_C[i % 3],
            "stirrer_speed [rpm]": SPEEDS_RPM[(i // 3) % 2],
            "particle_diameter [um]": DIAMETERS_UM[i % 2],
            "catalyst_loading [g/L]": LOADINGS_G_L[(i // 2) % 2],
            "initial_concentration [mol/L]": C0_MOL_L[(i // 6) % 3],
        })
    return pd.DataFrame(rows)


def write_campaign(
    folder: Path,
    *,
    n_runs: int,
    seed: int,
    samples: int = 8,
    pellet: str = "direct",
    vary: tuple[str, ...] = ("k_ref", "activation_energy", "order", "effective_diffusivity"),
    sigma: float = 4.0,
) -> Path:
    """Write an INVENTED batch campaign (study.toml, runs.csv, observations.csv) into ``folder``.

    Runs cycle through 3 temperatures, 2 stirrer speeds, 2 particle sizes, 2 loadings and 3
    starting concentrations. Each run is sampled ``samples`` times, evenly up to about 85 %
    conversion, with concentrations predicted by kinfit at :data:`TRUTH` plus normal noise of
    ``sigma`` mol/m^3 from ``numpy.random.default_rng(seed)``. The study file starts the
    ``vary`` parameters at :data:`START` and fixes the others at the truth.

    Returns
    -------
    Path
        The study file.
    """
    from kinfit.model import Model

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    runs = _run_rows(n_runs)
    runs.to_csv(folder / "runs.csv", index=False)
    truth_file = folder / "truth.toml"
    truth_file.write_text(_study("truth", TRUTH, set(TRUTH), pellet), encoding="utf-8")

    def write_obs(times: dict[str, np.ndarray], conc: dict[str, np.ndarray] | None) -> None:
        rows = []
        for rid, c0 in zip(runs["run"], runs["initial_concentration [mol/L]"], strict=True):
            c = conc[rid] if conc else np.full(times[rid].size, c0 * 1000.0)
            rows += [{"run": rid, "time [min]": round(float(t), 4),
                      "concentration [mol/m^3]": round(float(v), 4)}
                     for t, v in zip(times[rid], c, strict=True)]
        pd.DataFrame(rows).to_csv(folder / "observations.csv", index=False)

    def predict() -> tuple[Model, np.ndarray]:
        _, model, pred = simulate(truth_file)
        return model, pred

    write_obs({rid: np.linspace(0.0, 3000.0, 300) for rid in runs["run"]}, None)
    model, pred = predict()
    times = {}
    for i, rid in enumerate(runs["run"]):
        sel = model.run_index == i
        frac = pred[sel] / model.C0[i]
        hit = np.flatnonzero(frac <= 0.15)
        t_end = model.times[sel][hit[0]] / 60.0 if hit.size else 3000.0
        times[rid] = np.linspace(0.0, max(5.0, float(t_end)), samples)
    write_obs(times, None)
    model, clean = predict()
    rng = np.random.default_rng(seed)
    noisy = np.maximum(clean + rng.normal(loc=0.0, scale=sigma, size=clean.size), 0.0)
    write_obs(times, {rid: noisy[model.run_index == i] for i, rid in enumerate(runs["run"])})
    truth_file.unlink()
    values = {k: (START[k] if k in vary else TRUTH[k]) for k in TRUTH}
    study_file = folder / "study.toml"
    study_file.write_text(_study(f"synthetic-{n_runs}", values, set(vary), pellet),
                          encoding="utf-8")
    return study_file


class FragilePredictor:
    """A model's predictor that raises :class:`~kinfit.errors.SolverError` in part of the
    parameter space (an INVENTED failure region standing in for a pellet or surface solve that
    does not converge there). Module level, so that worker processes can unpickle it.

    Parameters
    ----------
    predict : callable
        The real predictor, (m, p) -> (m, n).
    column : int
        Parameter column that decides the region.
    above : float
        Rows whose value in ``column`` exceeds this raise (for the whole batch, as a vectorised
        solver does when any point fails).
    """

    def __init__(self, predict, column: int, above: float) -> None:
        self.predict, self.column, self.above = predict, column, above

    def __call__(self, x: np.ndarray) -> np.ndarray:
        from kinfit.errors import SolverError

        x = np.atleast_2d(x)
        if np.any(x[:, self.column] > self.above):
            raise SolverError(f"pellet profile did not converge (invented region: column "
                              f"{self.column} above {self.above:g})")
        return self.predict(x)


def fragile_problem(problem, column: int, above: float):
    """``problem`` with its predictor wrapped in :class:`FragilePredictor`."""
    from dataclasses import replace

    return replace(problem, predict=FragilePredictor(problem.predict, column, above))


# ------------------------------------------------------------------------------------------
# fixtures: one small campaign, one process pool for the module
# ------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    from kinfit.model import Model, ModelSpec
    from kinfit.study import load_study

    path = write_campaign(tmp_path_factory.mktemp("campaign"), n_runs=6, seed=11, samples=6)
    study = load_study(path)
    model = Model(ModelSpec.from_study(study), study)
    problem = model.problem()
    est = fit_problem(problem)
    # the fixture's own sanity: the fit converges near the invented truth
    assert est.converged
    assert est.value("order") == pytest.approx(1.5, abs=0.3)
    assert est.value("activation_energy") == pytest.approx(62e3, rel=0.15)
    return study, model, problem, est


@pytest.fixture(scope="module")
def pool():
    with make_executor(workers=2) as ex:
        assert isinstance(ex, ProcessPoolExecutor)
        yield ex


# ------------------------------------------------------------------------------------------
# make_executor and the command-line options
# ------------------------------------------------------------------------------------------
def test_serial_choices_give_no_pool():
    for workers in (None, 1):
        with make_executor(workers=workers) as ex:
            assert ex is None


def test_serial_executor_runs_now_and_delivers_exceptions():
    ex = SerialExecutor()
    assert list(ex.map(pow, [2, 3], [3, 2])) == [8, 9]
    fut = ex.submit(int, "x")
    assert isinstance(fut.exception(), ValueError)
    ex.shutdown()
    with pytest.raises(RuntimeError, match="after shutdown"):
        ex.submit(abs, 1)


@pytest.mark.parametrize("workers", [0, -2, 1.5, True, "2"])
def test_bad_worker_counts_are_named(workers):
    with pytest.raises(StudyError, match=r"'workers' option must be an int >= 1.*Got"):
        with make_executor(workers=workers):
            pass


@pytest.mark.parametrize("scheduler", ["", "   ", "tcp://a b:1", 8786])
def test_bad_scheduler_addresses_are_named(scheduler):
    with pytest.raises(StudyError, match="'scheduler' option must be the address"):
        with make_executor(scheduler=scheduler):
            pass


def test_workers_and_scheduler_together_are_refused():
    with pytest.raises(StudyError, match="either workers .* or a Dask scheduler"):
        with make_executor(workers=2, scheduler="tcp://127.0.0.1:8786"):
            pass


def test_unreachable_scheduler_is_a_clean_study_error():
    # port 9 (discard) on loopback: nothing listens there in a test environment
    t0 = time.perf_counter()
    with pytest.raises(StudyError, match="cannot reach the Dask scheduler at 'tcp://127.0.0.1:9'"):
        with make_executor(scheduler="tcp://127.0.0.1:9", timeout=1.0):
            pass
    assert time.perf_counter() - t0 < 30.0  # a hang guard, not a speed target


def test_parallel_arguments_parse_and_exclude_each_other():
    from kinfit.cli import _Parser

    parser = add_parallel_arguments(_Parser(prog="kinfit fit"))
    assert parser.parse_args(["--workers", "3"]).workers == 3
    args = parser.parse_args(["--scheduler", "tcp://10.0.0.5:8786"])
    assert args.scheduler == "tcp://10.0.0.5:8786" and args.workers is None
    with pytest.raises(StudyError, match="not allowed with argument"):
        parser.parse_args(["--workers", "2", "--scheduler", "tcp://10.0.0.5:8786"])
    with pytest.raises(StudyError, match="must be >= 1, got 0"):
        parser.parse_args(["--workers", "0"])
    with pytest.raises(StudyError, match="'two' is not a whole number"):
        parser.parse_args(["--workers", "two"])
    with executor_from_args(argparse.Namespace(workers=None, scheduler=None)) as ex:
        assert ex is None
    assert available_workers() >= 1


def test_interrupted_pool_stops_without_waiting_for_pending_work():
    """Leaving the block by KeyboardInterrupt cancels queued tasks instead of running them all
    (ProcessPoolExecutor's own ``with`` would wait for every one). Bound: 40 queued tasks of
    0.5 s on 2 workers take 10 s to run; the exit must come well before that."""
    with pytest.raises(KeyboardInterrupt):
        with make_executor(workers=2) as ex:
            futures = [ex.submit(time.sleep, 0.5) for _ in range(40)]
            futures[0].result()
            t0 = time.perf_counter()
            raise KeyboardInterrupt
    assert time.perf_counter() - t0 < 3.0
    # (a future cancelled by shutdown does not wake concurrent.futures.wait: poll instead)
    deadline = time.perf_counter() + 5.0
    while not all(f.done() for f in futures) and time.perf_counter() < deadline:
        time.sleep(0.05)
    assert all(f.done() for f in futures)
    assert sum(f.cancelled() for f in futures) > 20


# ------------------------------------------------------------------------------------------
# what travels to a worker pickles, and predicts the same after the trip
# ------------------------------------------------------------------------------------------
def test_model_problem_and_bound_predict_pickle(campaign):
    study, model, problem, est = campaign
    theta = np.vstack([est.x, model.x0])
    reference = model.predict(theta)
    for obj in (study, model.spec, model, model.predict, problem):
        clone = pickle.loads(pickle.dumps(obj))
        assert type(clone) is type(obj)
    again = pickle.loads(pickle.dumps(problem))
    np.testing.assert_array_equal(again.predict(theta), reference)
    np.testing.assert_array_equal(again.y, problem.y)
    assert again.space.names == problem.space.names
    np.testing.assert_array_equal(again.space.lower, problem.space.lower)


# ------------------------------------------------------------------------------------------
# the same numbers whatever the executor
# ------------------------------------------------------------------------------------------
def _same_estimate(a, b) -> None:
    da, db = a.to_dict(), b.to_dict()
    assert da.keys() == db.keys()
    for key in da:
        assert da[key] == db[key] or (
            # NaN != NaN: compare arrays holding NaN with numpy
            np.array_equal(np.asarray(da[key], dtype=object).astype(float),
                           np.asarray(db[key], dtype=object).astype(float), equal_nan=True)
        ), key


@pytest.mark.parametrize("which", ["serial", "pool"])
def test_multistart_is_identical_through_any_executor(campaign, pool, which):
    _, _, problem, _ = campaign
    executor: Executor = SerialExecutor() if which == "serial" else pool
    ref = fit_problem(problem, multistart=4, seed=5, n_refine=2)
    par = fit_problem(problem, multistart=4, seed=5, n_refine=2, executor=executor)
    assert ref.n_starts == 3
    _same_estimate(ref, par)


def test_penalties_are_counted_the_same_in_worker_processes(campaign, pool):
    """Failed predictions in the workers come back with their counts and reasons."""
    _, _, problem, _ = campaign
    fragile = fragile_problem(problem, 2, 1.7)  # order > 1.7 fails
    ref = fit_problem(fragile, multistart=8, seed=2, n_refine=2)
    par = fit_problem(fragile, multistart=8, seed=2, n_refine=2, executor=pool)
    assert ref.n_penalised > 0 and any("SolverError" in r for r in ref.penalty_reasons)
    _same_estimate(ref, par)


def test_bootstrap_is_identical_in_a_process_pool(campaign, pool):
    _, _, problem, est = campaign
    for kind in ("residual", "group"):
        ref = bootstrap(problem, est, n_boot=6, kind=kind, seed=3, progress=False)
        par = bootstrap(problem, est, n_boot=6, kind=kind, seed=3, progress=False, executor=pool)
        np.testing.assert_array_equal(par.replicates, ref.replicates)
        np.testing.assert_array_equal(par.converged, ref.converged)
        np.testing.assert_array_equal(par.intervals.lower, ref.intervals.lower)


def test_profile_is_identical_in_a_process_pool(campaign, pool):
    _, _, problem, est = campaign
    names = ["order", "activation_energy"]
    ref = profile_intervals(problem, est, names=names)
    par = profile_intervals(problem, est, names=names, executor=pool)
    np.testing.assert_array_equal(par.intervals.lower, ref.intervals.lower)
    np.testing.assert_array_equal(par.intervals.upper, ref.intervals.upper)
    for a, b in zip(ref.traces, par.traces, strict=True):
        np.testing.assert_array_equal(a.tau, b.tau)
    assert np.all(ref.intervals.lower < est.x[[2, 1]]) and np.all(
        est.x[[2, 1]] < ref.intervals.upper)


def test_candidate_models_fit_identically_in_a_process_pool(campaign, pool):
    from kinfit.fitting import FitOptions, parse_candidate

    study, model, _, _ = campaign
    specs = [model.spec, parse_candidate("power/agitation/none", study)]
    options = FitOptions(profile=False, executor=SerialExecutor())
    serial = fit_models(specs, study, options)
    par = fit_models(specs, study, options, executor=pool)
    assert [r.model["label"] for r in par] == [s.label for s in specs]
    for a, b in zip(serial, par, strict=True):
        assert a.parameters == b.parameters
        assert a.fit == b.fit
        assert a.runs == b.runs


# ------------------------------------------------------------------------------------------
# a real Dask cluster on loopback
# ------------------------------------------------------------------------------------------
def test_bootstrap_through_a_dask_local_cluster(campaign):
    import distributed  # dask[distributed] is a declared test dependency: missing fails
    _, _, problem, est = campaign
    ref = bootstrap(problem, est, n_boot=4, kind="group", seed=9, progress=False)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1",
                                  dashboard_address=None, processes=True) as cluster:
        with make_executor(scheduler=cluster.scheduler_address) as ex:
            assert type(ex).__name__ == "ClientExecutor"
            par = bootstrap(problem, est, n_boot=4, kind="group", seed=9, progress=False,
                            executor=ex)
    np.testing.assert_array_equal(par.replicates, ref.replicates)
    np.testing.assert_array_equal(par.converged, ref.converged)
