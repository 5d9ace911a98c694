"""Benchmark: mutation score of the physics modules and of the estimation core.

A seeded sample of single-token mutants (AST based) is drawn from the target modules; each
mutant is written into a fresh copy of the source tree in a temporary folder (the working tree
is never touched) and the test files mapped to its module are run on that copy in a subprocess
(``PYTHONPATH`` set to the copy, ``pytest -x``). A mutant is killed when a test fails, errors or
the run exceeds the per-mutant timeout; it survives when every mapped test passes. Tests that
already fail on the unmutated tree (the baseline) are deselected for that group.

Mutation operators (one token each):

- arithmetic: ``+ <-> -``, ``* <-> /``, ``** -> *``, ``// -> /``, ``& <-> |`` (numpy masks),
  also in augmented assignments;
- comparison flips: ``< <-> <=``, ``> <-> >=``, ``< <-> >``, ``== <-> !=``, ``is <-> is not``,
  ``in <-> not in``;
- constants: a float c -> c * 1.1 (0.0 -> 1.0), an int c -> c + 1, ``0 <-> 1``,
  ``True <-> False``;
- ``and <-> or``;
- unary removal: ``-x -> x``, ``not x -> x``, ``~x -> x``.

Text-only code is not mutated: string constants, anything inside an f-string, the arguments of
``raise`` and of ``warnings.warn``, docstrings and annotations. The mutated module is written
back with ``ast.unparse`` (same semantics, comments dropped).

The score is killed / (mutants - equivalent), with a 95 % Wilson interval. Equivalent mutants
(behaviour cannot change, judged by reading them) are listed in ``EQUIVALENT`` with the reason;
a mutant id is ``module:line:col-endcol:operator``, stable while the module's source does not change.

Run from the repository root:

    python3 tests/benchmarks/bench_mutation.py [--group physics|estimate] [--sample N]
        [--seed S] [--jobs J] [--files a.py b.py] [--only ID ...] [--list]

Last line: ``mutants=N killed=K equivalent=E score=S``.
"""

from __future__ import annotations

import argparse
import ast
import importlib.util
import math
import os
import random
import shutil
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

# ------------------------------------------------------------------------------------------
# Targets: edit here when modules move. A module is named by its import name; the test files
# beside it run for every mutant of that module (paths relative to the repository root, or pytest node ids).
# ------------------------------------------------------------------------------------------
GUARDS = ("tests/test_formula_guards.py",)

PHYSICS: dict[str, tuple[str, ...]] = {
    "kinfit.physics.pellet.effectiveness": ("tests/test_pellet.py",),
    "kinfit.physics.pellet._phase": ("tests/test_pellet.py",),
    "kinfit.physics.pellet._power_table": ("tests/test_pellet.py",),
    "kinfit.physics.pellet._solver": ("tests/test_pellet.py",),
    "kinfit.physics.pellet._lh_table": ("tests/test_lh_pellet.py",),
    "kinfit.physics.surface": ("tests/test_criteria.py", "tests/test_model.py",
                                 "tests/test_reactors.py", "tests/test_lh_pellet.py"),
    "kinfit.physics.film": ("tests/test_film.py",),
    "kinfit.physics.properties": ("tests/test_properties.py", "tests/test_film.py"),
    "kinfit.physics.criteria": ("tests/test_criteria.py", "tests/test_calculator.py"),
    "kinfit.physics.kinetics.base": ("tests/test_kinetics.py", "tests/test_expressions.py"),
    "kinfit.physics.reactors": ("tests/test_reactors.py",),
    "kinfit.analysis.calculator": ("tests/test_calculator.py",),
    "kinfit.physics.resistances": ("tests/test_criteria.py", "tests/test_calculator.py"),
    # split out of the modules above by the restructuring into floors
    "kinfit.physics.pellet.modulus": ("tests/test_pellet.py", "tests/test_lh_pellet.py"),
    "kinfit.physics.pellet.numerical": ("tests/test_pellet.py", "tests/test_lh_pellet.py"),
    "kinfit.physics.kinetics.power": ("tests/test_kinetics.py",),
    "kinfit.physics.kinetics.langmuir_hinshelwood": ("tests/test_kinetics.py",),
    "kinfit.physics.kinetics.reversible": ("tests/test_kinetics.py",),
    "kinfit.physics.kinetics.expression": ("tests/test_kinetics.py", "tests/test_expressions.py"),
    "kinfit.physics.kinetics.arrhenius": ("tests/test_kinetics.py", "tests/test_model.py"),
    "kinfit.physics.geometry": ("tests/test_pellet.py", "tests/test_criteria.py"),
    "kinfit.physics.sherwood": ("tests/test_film.py",),
    "kinfit.physics.temperature": ("tests/test_temperature_scaling.py",),
}

ESTIMATE: dict[str, tuple[str, ...]] = {
    "kinfit.estimate.least_squares": ("tests/test_estimate_core.py", "tests/test_nist_strd.py"),
    "kinfit.estimate.uncertainty": ("tests/test_estimate_core.py",),
    # the sampler tests without the slowest (simulation-based calibration, 8-d DE, quadrature
    # comparisons, NetCDF): the whole file takes about 6 minutes on a shared 2-core machine
    "kinfit.estimate.sampling": tuple(f"tests/test_sampling.py::{t}" for t in (
        "test_linear_gaussian_known_sigma_matches_analytic_posterior",
        "test_stretch_move_also_matches_the_analytic_posterior",
        "test_linear_gaussian_unknown_sigma_gives_student_t",
        "test_normal_prior_gives_conjugate_posterior",
        "test_log_transform_keeps_the_prior_flat_in_physical_units",
        "test_same_seed_same_chain_for_any_chunk",
        "test_interrupted_run_resumes_to_the_identical_chain",
        "test_error_keeps_the_checkpoint_and_says_so",
        "test_shorter_run_extended_by_resume",
        "test_short_chain_is_flagged_unconverged",
        "test_non_finite_predictions_give_minus_infinity",
        "test_option_and_prior_errors",
        "test_start_on_a_bound_is_moved_inside",
        "test_result_forms",
        "test_predictive_bands_match_the_linear_closed_form",
        "test_checkpoint_file_content")),
}

GROUPS = {"physics": PHYSICS, "estimate": ESTIMATE}
DEFAULT_SAMPLE = {"physics": 120, "estimate": 40}

# Survivors judged equivalent by reading them: mutant id -> why the behaviour cannot change.
EQUIVALENT: dict[str, str] = {
    # physics
    "kinfit.analysis.calculator:58:43-53:> -> <":
        "start of the Weisz-Prater inversion's bracket only: the while loops widen the bracket "
        "until it holds the root of a monotone function, and brentq (xtol 1e-14 in ln Phi) "
        "returns the same Phi",
    "kinfit.physics.reactors:156:75-78:1.0 -> 1.1":
        "upper clip of the Newton start value for the panel fraction tau; every Newton step "
        "clips tau to [0, 1] again and iterates to 1e-14, so the time inversion is unchanged",
    "kinfit.physics.reactors:242:67-70:0.5 -> 0.55":
        "fallback point of the CSTR root finder when the secant leaves the bracket: 0.55 is "
        "still inside the bracket, so the iteration converges to the same root",
    "kinfit.physics.reactors:248:22-27:drop ~":
        "switches the Illinois halving off for unconverged points: plain regula falsi, slower "
        "but converging to the same root (checked by hand: outlets agree to 1e-13 relative "
        "for orders 0.5 to 3 and k from 1e-3 to 100)",
    "kinfit.physics.reactors:254:26-52:<= -> <":
        "stop test b - a <= rtol |C_in| against <: differs only when the two floats are equal, "
        "and then costs one more iteration to the same root",
    "kinfit.physics.pellet._lh_table:313:86-88:drop -":
        "np.stack(..., axis=-1) -> axis=1 on 1-D arrays of shape (N,): both give (N, 4)",
    "kinfit.physics.pellet._solver:107:30-33:2.0 -> 2.2":
        "start profile of the pellet Newton iteration only; Newton converges to tol 1e-10 of "
        "Cs - C_eq from it, so eta is unchanged",
    "kinfit.physics.pellet._solver:190:17-18:0 -> 1":
        "iterations = 0 -> 1 before the loop: the loop variable overwrites it (max_iter >= 1 "
        "is checked on entry)",
    "kinfit.physics.pellet.effectiveness:186:7-65:and -> or":
        "chooses when the table lookup contracts only the distinct orders of a request (an "
        "optimisation): the distinct values and the per-point index are correct for any size, "
        "so both paths interpolate the same table values",
}

# ------------------------------------------------------------------------------------------

_BIN = {ast.Add: ast.Sub, ast.Sub: ast.Add, ast.Mult: ast.Div, ast.Div: ast.Mult,
        ast.Pow: ast.Mult, ast.FloorDiv: ast.Div, ast.BitAnd: ast.BitOr, ast.BitOr: ast.BitAnd}
_CMP = {ast.Lt: (ast.LtE, ast.Gt), ast.LtE: (ast.Lt, ast.GtE), ast.Gt: (ast.GtE, ast.Lt),
        ast.GtE: (ast.Gt, ast.LtE), ast.Eq: (ast.NotEq,), ast.NotEq: (ast.Eq,),
        ast.Is: (ast.IsNot,), ast.IsNot: (ast.Is,), ast.In: (ast.NotIn,),
        ast.NotIn: (ast.In,)}
_SYM = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**",
        ast.FloorDiv: "//", ast.BitAnd: "&", ast.BitOr: "|", ast.Lt: "<", ast.LtE: "<=",
        ast.Gt: ">", ast.GtE: ">=", ast.Eq: "==", ast.NotEq: "!=", ast.Is: "is",
        ast.IsNot: "is not", ast.In: "in", ast.NotIn: "not in", ast.And: "and", ast.Or: "or",
        ast.USub: "-", ast.Not: "not", ast.Invert: "~"}


@dataclass(frozen=True)
class Mutant:
    module: str          # import name (or the file path when given as a file)
    path: str            # file relative to the repository root
    index: int           # position of the node in ast.walk order
    lineno: int
    col: int
    end_col: int
    op: str              # e.g. "* -> /"
    tests: tuple[str, ...]
    dup: int = 0         # > 0 when an earlier mutant has the same position and operator

    @property
    def id(self) -> str:
        tail = f"#{self.dup}" if self.dup else ""
        return f"{self.module}:{self.lineno}:{self.col}-{self.end_col}:{self.op}{tail}"


def _text_only_nodes(tree: ast.AST) -> set[int]:
    """ids of nodes that only build text (never mutated)."""
    skip: set[int] = set()

    def mark(node: ast.AST) -> None:
        for sub in ast.walk(node):
            skip.add(id(sub))

    for node in ast.walk(tree):
        if isinstance(node, ast.JoinedStr):
            mark(node)
        elif isinstance(node, ast.Raise):
            if node.exc is not None:
                mark(node.exc)
        elif isinstance(node, ast.Call):
            f = node.func
            if isinstance(f, ast.Attribute) and f.attr == "warn":
                mark(node)
        elif isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            if node.returns is not None:
                mark(node.returns)
            for a in node.args.args + node.args.kwonlyargs + node.args.posonlyargs:
                if a.annotation is not None:
                    mark(a.annotation)
        elif isinstance(node, ast.AnnAssign):
            mark(node.annotation)
    return skip


def _variants(node: ast.AST) -> list[str]:
    """Single-token replacements possible at a node, as 'old -> new' labels."""
    out: list[str] = []
    if isinstance(node, (ast.BinOp, ast.AugAssign)) and type(node.op) in _BIN:
        out.append(f"{_SYM[type(node.op)]} -> {_SYM[_BIN[type(node.op)]]}")
    elif isinstance(node, ast.Compare) and len(node.ops) == 1 and type(node.ops[0]) in _CMP:
        for new in _CMP[type(node.ops[0])]:
            out.append(f"{_SYM[type(node.ops[0])]} -> {_SYM[new]}")
    elif isinstance(node, ast.BoolOp):
        out.append("and -> or" if isinstance(node.op, ast.And) else "or -> and")
    elif isinstance(node, ast.UnaryOp) and type(node.op) in (ast.USub, ast.Not, ast.Invert):
        out.append(f"drop {_SYM[type(node.op)]}")
    elif isinstance(node, ast.Constant) and not isinstance(node.value, (str, bytes)):
        v = node.value
        if isinstance(v, bool):
            out.append(f"{v} -> {not v}")
        elif isinstance(v, int):
            out.append(f"{v} -> {1 if v == 0 else 0 if v == 1 else v + 1}")
        elif isinstance(v, float):
            out.append(f"{v!r} -> {1.0 if v == 0.0 else v * 1.1!r}")
    return out


def _apply(node: ast.AST, op: str) -> None:
    if isinstance(node, (ast.BinOp, ast.AugAssign)):
        node.op = _BIN[type(node.op)]()
    elif isinstance(node, ast.Compare):
        new = op.split(" -> ")[1]
        node.ops = [next(k for k, s in _SYM.items() if s == new and k in _CMP)()]
    elif isinstance(node, ast.BoolOp):
        node.op = ast.Or() if isinstance(node.op, ast.And) else ast.And()
    elif isinstance(node, ast.Constant):
        v = node.value
        if isinstance(v, bool):
            node.value = not v
        elif isinstance(v, int):
            node.value = 1 if v == 0 else 0 if v == 1 else v + 1
        else:
            node.value = 1.0 if v == 0.0 else v * 1.1
    else:
        raise AssertionError(op)


class _DropUnary(ast.NodeTransformer):
    def __init__(self, target: ast.AST):
        self.target = target

    def visit_UnaryOp(self, node: ast.UnaryOp) -> ast.AST:
        if node is self.target:
            return self.generic_visit(node).operand
        return self.generic_visit(node)


def _docstring_nodes(tree: ast.AST) -> set[int]:
    out: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.ClassDef, ast.FunctionDef, ast.AsyncFunctionDef)):
            body = node.body
            if body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant):
                out.add(id(body[0].value))
    return out


def enumerate_mutants(module: str, path: str, tests: tuple[str, ...]) -> list[Mutant]:
    """Every single-token mutant of one file."""
    tree = ast.parse((ROOT / path).read_text(encoding="utf-8"))
    skip = _text_only_nodes(tree) | _docstring_nodes(tree)
    out = []
    seen: dict[tuple[int, int, int, str], int] = {}
    for index, node in enumerate(ast.walk(tree)):
        if id(node) in skip or not hasattr(node, "lineno"):
            continue
        if isinstance(node, ast.Expr) or (isinstance(node, ast.Constant) and node.value is None):
            continue
        for op in _variants(node):
            key = (node.lineno, node.col_offset, node.end_col_offset, op)
            seen[key] = seen.get(key, -1) + 1
            out.append(Mutant(module, path, index, node.lineno, node.col_offset,
                              node.end_col_offset, op, tests, seen[key]))
    return out


def mutated_source(m: Mutant) -> str:
    tree = ast.parse((ROOT / m.path).read_text(encoding="utf-8"))
    node = next(n for i, n in enumerate(ast.walk(tree)) if i == m.index)
    if m.op.startswith("drop "):
        tree = _DropUnary(node).visit(tree)
    else:
        _apply(node, m.op)
    ast.fix_missing_locations(tree)
    return ast.unparse(tree) + "\n"


def resolve_targets(group: str, files: list[str] | None) -> dict[str, tuple[str, tuple[str, ...]]]:
    """module name -> (file relative to ROOT, mapped test files); exits 2 on a missing path."""
    table = GROUPS[group]
    out: dict[str, tuple[str, tuple[str, ...]]] = {}
    problems: list[str] = []
    sys.path.insert(0, str(ROOT))
    if files:
        by_path = {}
        for name, tests in table.items():
            spec = importlib.util.find_spec(name)
            if spec is not None and spec.origin:
                by_path[Path(spec.origin).resolve()] = (name, tests)
        for f in files:
            p = (ROOT / f).resolve()
            if not p.is_file():
                problems.append(f"file '{f}' does not exist under {ROOT.name}/")
                continue
            found = by_path.get(p)
            if found is None:
                problems.append(f"file '{f}' has no test mapping in the {group} table at the "
                                "top of bench_mutation.py; add its import name there")
                continue
            out[found[0]] = (str(p.relative_to(ROOT)), found[1])
    else:
        for name, tests in table.items():
            try:
                spec = importlib.util.find_spec(name)
            except ModuleNotFoundError:
                spec = None
            if spec is None or not spec.origin:
                problems.append(f"module '{name}' cannot be imported from {ROOT.name}/ (moved?); "
                                "edit the module table at the top of bench_mutation.py")
                continue
            out[name] = (str(Path(spec.origin).resolve().relative_to(ROOT)), tests)
    for _, (_, tests) in out.items():
        for t in tests + GUARDS:
            if not (ROOT / t.split("::")[0]).is_file():
                problems.append(f"test file '{t}' does not exist; edit the module table at the "
                                "top of bench_mutation.py")
    if problems:
        for p in dict.fromkeys(problems):
            print(f"bench_mutation: {p}", file=sys.stderr)
        sys.exit(2)
    return out


def _copy_tree(dest: Path) -> None:
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc", ".pytest_cache")
    shutil.copytree(ROOT / "kinfit", dest / "kinfit", ignore=ignore)
    shutil.copytree(ROOT / "tests", dest / "tests", ignore=ignore)
    shutil.copy2(ROOT / "pyproject.toml", dest / "pyproject.toml")


def _pytest(tree: Path, tests: tuple[str, ...], deselect: tuple[str, ...], timeout: float,
            stop_first: bool = True) -> tuple[str, float, str]:
    """('pass' | 'fail' | 'timeout', seconds, output tail)."""
    env = dict(os.environ, PYTHONPATH=str(tree), PYTHONDONTWRITEBYTECODE="1",
               OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")
    cmd = [sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", "-p",
           "no:benchmark", "-rf", "--no-header"]
    if stop_first:
        cmd.append("-x")
    for d in deselect:
        cmd += ["--deselect", d]
    cmd += list(tests)
    t0 = time.perf_counter()
    try:
        proc = subprocess.run(cmd, cwd=tree, env=env, capture_output=True, text=True,
                              timeout=timeout)
    except subprocess.TimeoutExpired:
        return "timeout", time.perf_counter() - t0, ""
    dt = time.perf_counter() - t0
    return ("pass" if proc.returncode == 0 else "fail"), dt, proc.stdout[-3000:]


def baseline(tests: tuple[str, ...]) -> tuple[tuple[str, ...], float]:
    """Tests failing on the unmutated tree (deselected later) and the run time."""
    with tempfile.TemporaryDirectory(prefix="kinfit-mut-") as tmp:
        tree = Path(tmp)
        _copy_tree(tree)
        status, dt, out = _pytest(tree, tests, (), timeout=3600, stop_first=False)
    failing = tuple(line.split()[1] for line in out.splitlines()
                    if line.startswith(("FAILED ", "ERROR ")))
    if status != "pass" and not failing:
        print(out, file=sys.stderr)
        raise SystemExit("bench_mutation: the unmutated tree does not pass its tests")
    return failing, dt


def run_mutant(m: Mutant, deselect: tuple[str, ...], timeout: float,
               guards_only: bool = False) -> tuple[str, float]:
    src = mutated_source(m)
    with tempfile.TemporaryDirectory(prefix="kinfit-mut-") as tmp:
        tree = Path(tmp)
        _copy_tree(tree)
        (tree / m.path).write_text(src, encoding="utf-8")
        tests = GUARDS if guards_only else m.tests + GUARDS
        status, dt, _ = _pytest(tree, tests, deselect, timeout)
    return ("survived" if status == "pass" else "killed"), dt


def wilson(k: int, n: int, z: float = 1.959964) -> tuple[float, float]:
    """95 % Wilson score interval of a proportion k/n (Wilson 1927)."""
    if n == 0:
        return 0.0, 1.0
    p = k / n
    den = 1.0 + z * z / n
    centre = (p + z * z / (2 * n)) / den
    half = z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / den
    return max(0.0, centre - half), min(1.0, centre + half)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--group", choices=sorted(GROUPS), default="physics")
    ap.add_argument("--sample", type=int, default=None,
                    help="mutants drawn (default 120 physics, 40 estimate; 0 = all)")
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--files", nargs="+", default=None,
                    help="mutate these files only (relative to the repository root)")
    ap.add_argument("--only", nargs="+", default=None, help="run these mutant ids only")
    ap.add_argument("--list", action="store_true", help="list the sample and exit")
    ap.add_argument("--recheck", action="store_true",
                    help="run only the guard test files (for survivors of a full run: the "
                         "mapped tests already passed on them)")
    args = ap.parse_args(argv)

    targets = resolve_targets(args.group, args.files)
    pool: list[Mutant] = []
    for name, (path, tests) in targets.items():
        pool += enumerate_mutants(name, path, tests)
    n_sample = DEFAULT_SAMPLE[args.group] if args.sample is None else args.sample
    if args.only:
        wanted = set(args.only)
        sample = [m for m in pool if m.id in wanted]
        missing = wanted - {m.id for m in sample}
        if missing:
            print(f"bench_mutation: unknown mutant ids {sorted(missing)}", file=sys.stderr)
            return 2
    elif n_sample == 0 or n_sample >= len(pool):
        sample = pool
    else:
        sample = random.Random(args.seed).sample(pool, n_sample)
    sample.sort(key=lambda m: (m.path, m.lineno, m.col, m.op))
    print(f"group {args.group}: {len(pool)} mutants in {len(targets)} modules; "
          f"sample {len(sample)} (seed {args.seed})")
    if args.list:
        for m in sample:
            print(f"  {m.id}")
        return 0

    t_start = time.perf_counter()
    test_sets = sorted({m.tests for m in sample})
    base: dict[tuple[str, ...], tuple[tuple[str, ...], float]] = {}
    if args.recheck:
        test_sets = [()]
        sample = [Mutant(m.module, m.path, m.index, m.lineno, m.col, m.end_col, m.op, (), m.dup)
                  for m in sample]
    for tests in test_sets:
        base[tests] = baseline(tests + GUARDS)
        failing, dt = base[tests]
        print(f"baseline {' '.join(tests)}: {dt:.1f} s"
              + (f"; deselected (fail unmutated): {' '.join(failing)}" if failing else ""))

    def job(m: Mutant) -> tuple[Mutant, str, float]:
        failing, dt = base[m.tests]
        status, t = run_mutant(m, failing, timeout=max(60.0, 4.0 * dt),
                               guards_only=args.recheck)
        return m, status, t

    results: list[tuple[Mutant, str, float]] = []
    with ThreadPoolExecutor(max_workers=max(1, args.jobs)) as ex:
        for m, status, t in ex.map(job, sample):
            results.append((m, status, t))
            tag = status
            if status == "survived" and m.id in EQUIVALENT:
                tag = "equivalent"
            print(f"{tag:10s} {t:6.1f} s  {m.id}", flush=True)

    n = len(results)
    killed = sum(1 for _, s, _ in results if s == "killed")
    equivalent = sum(1 for m, s, _ in results if s == "survived" and m.id in EQUIVALENT)
    survivors = [m for m, s, _ in results if s == "survived" and m.id not in EQUIVALENT]
    if survivors:
        print("survivors (not judged equivalent):")
        for m in survivors:
            print(f"  {m.id}")
    denom = n - equivalent
    score = killed / denom if denom else float("nan")
    lo, hi = wilson(killed, denom)
    print(f"run time {time.perf_counter() - t_start:.0f} s with {args.jobs} jobs; "
          f"95 % Wilson interval of the score [{lo:.3f}, {hi:.3f}]")
    print(f"mutants={n} killed={killed} equivalent={equivalent} score={score:.3f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
