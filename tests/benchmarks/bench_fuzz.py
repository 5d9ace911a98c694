"""Benchmark: fuzz the study boundary with at least 1000 damaged studies and count outcomes.

The cases come from the Hypothesis strategies of ``tests/test_fuzz.py`` (TOML edits, table
edits, whole-file damage), generated without shrinking. Each case runs ``load_study``, then
``kinfit check`` (``kinfit.cli.parser.main``), and for a valid study builds its model, under a
wall-clock alarm. Outcomes: ``ok`` (still a valid study), ``study_error`` (clean rejection: exit
code 2, one line ``kinfit: error: ...``), ``traceback`` (anything else) and ``hang`` (the alarm
fired).

Run from the repository root:  python3 tests/benchmarks/bench_fuzz.py [N]   (default 1200)
Prints the outcome counts per strategy, up to 3 examples of every distinct failure, and a last
line ``cases=<n> tracebacks=<t> hangs=<h>`` (target: tracebacks=0 hangs=0).
"""

from __future__ import annotations

import sys
import time
from collections import Counter, defaultdict
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

import test_fuzz  # noqa: E402
from hypothesis import HealthCheck, Phase, given, settings  # noqa: E402


def _drive(name: str, strategy, n: int, counts, failures, slow: list) -> None:
    """Run ``n`` generated cases of one strategy and record their outcomes."""

    @settings(max_examples=n, deadline=None, database=None, phases=[Phase.generate],
              suppress_health_check=list(HealthCheck))
    @given(strategy)
    def drive(case: test_fuzz.Case) -> None:
        t0 = time.perf_counter()
        outcome = test_fuzz.run_case(case)
        dt = time.perf_counter() - t0
        if dt > slow[0]:
            slow[:] = [dt, case.label]
        counts[name][outcome.kind] += 1
        if outcome.kind in ("traceback", "hang"):
            last = outcome.detail.strip().splitlines()[-1] if outcome.detail.strip() else ""
            key = f"{outcome.kind}: {last[:160]}"
            if len(failures[key]) < 3:
                failures[key].append(f"[{case.label}] {outcome.detail.strip()[-900:]}")

    drive()


def main(n_total: int) -> None:
    strategies = {
        "toml": test_fuzz.toml_mutation(),
        "tables": test_fuzz.table_mutation(),
        "files": test_fuzz.file_mutation(),
    }
    share = {"toml": 0.4, "tables": 0.4, "files": 0.2}
    counts: dict[str, Counter[str]] = {k: Counter() for k in strategies}
    failures: dict[str, list[str]] = defaultdict(list)
    slow: list = [0.0, ""]
    t_start = time.perf_counter()
    for name, strategy in strategies.items():
        _drive(name, strategy, max(1, round(n_total * share[name])), counts, failures, slow)
    elapsed = time.perf_counter() - t_start
    total: Counter[str] = Counter()
    print(f"{'strategy':<10}{'cases':>8}{'ok':>8}{'study_error':>13}{'traceback':>11}{'hang':>6}")
    for name, c in counts.items():
        total.update(c)
        print(f"{name:<10}{sum(c.values()):>8}{c['ok']:>8}{c['study_error']:>13}"
              f"{c['traceback']:>11}{c['hang']:>6}")
    n_cases = sum(total.values())
    print(f"{'all':<10}{n_cases:>8}{total['ok']:>8}{total['study_error']:>13}"
          f"{total['traceback']:>11}{total['hang']:>6}")
    print(f"\n{elapsed:.1f} s in all, {1e3 * elapsed / max(n_cases, 1):.1f} ms a case; slowest "
          f"case {slow[0]:.2f} s ({slow[1]}); alarm at {test_fuzz.CASE_LIMIT:g} s")
    for key, examples in failures.items():
        print(f"\n=== {key}")
        for e in examples:
            print(e)
            print("---")
    print(f"cases={n_cases} tracebacks={total['traceback']} hangs={total['hang']}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1200)
