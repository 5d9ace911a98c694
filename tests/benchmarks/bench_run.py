"""Benchmark: the README's main command (``kinfit run examples/demo/study.toml``) in-process on
the demo campaign: fit with profile-likelihood intervals, sample until converged, diagnose,
report, into a temporary folder.

CPU time is the process time of this process and of every child process it waited for (a
process pool's workers included: the pool's forkserver is ended before the clock is read, so
their time is counted), so a shared machine's load does not inflate it the way wall time is
inflated. The stages are timed by wrapping the API functions the command calls; a pool's
workers are counted in the total only, not in the stage where they ran.

Run from the repository root:  python3 tests/benchmarks/bench_run.py [--repeat N] [--workers N]
Last line: run_cpu_seconds=<cpu> sample_steps=<n> outputs_mb=<mb>
(targets of issue 16: cpu <= 20 s on a 2-core machine, n <= 1000, mb <= 8; the smallest CPU time
over the repeats is reported, the stages of that repeat are printed above it)
"""

from __future__ import annotations

import argparse
import contextlib
import io
import json
import os
import resource
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

import kinfit.fitting.posterior  # noqa: E402
import kinfit.analysis.diagnosis.diagnosis  # noqa: E402
import kinfit.fitting  # noqa: E402
import kinfit.report  # noqa: E402
from kinfit.cli.parser import main as kinfit_main

DEMO = ROOT / "examples" / "demo" / "study.toml"


def stop_helpers() -> None:
    """End the multiprocessing forkserver (and resource tracker) a process pool left running:
    a pool's workers are the forkserver's children, so their CPU time reaches this process's
    RUSAGE_CHILDREN only once the forkserver itself has ended and been waited for."""
    from multiprocessing import forkserver, resource_tracker

    server = getattr(forkserver, "_forkserver", None)
    if server is not None and hasattr(server, "_stop"):
        server._stop()
    tracker = getattr(resource_tracker, "_resource_tracker", None)
    if tracker is not None and hasattr(tracker, "_stop"):
        tracker._stop()


def cpu_seconds() -> float:
    """User + system CPU time of this process and its waited-for children (and theirs)."""
    own = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


class Stages:
    """Wraps the API functions ``kinfit run`` calls and adds up the CPU time of each."""

    WRAPPED = ((kinfit.fitting, "fit", "fit"), (kinfit.fitting.posterior, "sample_study", "sample"),
               (kinfit.analysis.diagnosis.diagnosis, "diagnose", "diagnose"), (kinfit.report, "build_report",
                                                                 "report"))

    def __init__(self) -> None:
        self.cpu: dict[str, float] = {}
        self.saved = []

    def __enter__(self) -> Stages:
        for module, name, label in self.WRAPPED:
            original = getattr(module, name)
            self.saved.append((module, name, original))
            setattr(module, name, self._timed(original, label))
        return self

    def __exit__(self, *exc: object) -> None:
        for module, name, original in self.saved:
            setattr(module, name, original)

    def _timed(self, function, label):
        def run(*args, **kwargs):
            c0 = cpu_seconds()
            try:
                return function(*args, **kwargs)
            finally:
                self.cpu[label] = self.cpu.get(label, 0.0) + cpu_seconds() - c0

        return run


def folder_mb(folder: Path) -> float:
    return sum(p.stat().st_size for p in folder.rglob("*") if p.is_file()) / 1e6


def one_run(extra: list[str]) -> tuple[float, float, int, float, dict[str, float],
                                       list[tuple[str, float]]]:
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "demo"
        log = io.StringIO()
        c0, w0 = cpu_seconds(), time.perf_counter()
        with Stages() as stages, contextlib.redirect_stdout(log):
            code = kinfit_main(["run", str(DEMO), "--out", str(out), "--quiet", *extra])
        stop_helpers()
        cpu, wall = cpu_seconds() - c0, time.perf_counter() - w0
        if code != 0:
            print(log.getvalue())
            raise SystemExit(f"kinfit run exited with {code}")
        steps = int(json.loads((out / "posterior.json").read_text())["sampler"]["steps"])
        files = sorted(((str(p.relative_to(out)), p.stat().st_size / 1e6)
                        for p in out.rglob("*") if p.is_file()), key=lambda f: -f[1])
        return cpu, wall, steps, folder_mb(out), stages.cpu, files


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=1, help="runs; the fastest is reported")
    parser.add_argument("--workers", default=None,
                        help="passed to kinfit run (default: kinfit run's own choice)")
    args = parser.parse_args()
    extra = [] if args.workers is None else ["--workers", str(args.workers)]
    best = None
    for i in range(args.repeat):
        cpu, wall, steps, mb, stages, files = one_run(extra)
        print(f"repeat {i + 1}: cpu {cpu:.1f} s, wall {wall:.1f} s, {steps} steps, {mb:.1f} MB "
              "(" + ", ".join(f"{k} {v:.1f} s" for k, v in stages.items()) + ")", flush=True)
        if best is None or cpu < best[0]:
            best = (cpu, wall, steps, mb, stages, files)
    cpu, wall, steps, mb, stages, files = best
    print("largest outputs: " + ", ".join(f"{n} {s:.2f} MB" for n, s in files[:6]))
    print(f"cores: {os.cpu_count()}")
    print(f"run_cpu_seconds={cpu:.1f} sample_steps={steps} outputs_mb={mb:.1f}")


if __name__ == "__main__":
    main()
