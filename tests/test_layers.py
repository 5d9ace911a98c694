"""The package's floors, read from its source with ``ast``: each folder imports only from the
floors below it (or from its own folder), there are no import cycles, no kinfit import hides
inside a function, no module grows past 600 lines, and few modules sit directly in kinfit/.

These are checks of kinfit's own layout contract (DEVELOPERS.md), not of the physics: no
outside source applies."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

import kinfit

PACKAGE = Path(kinfit.__file__).resolve().parent

#: floors from the bottom up; a module may import from its own floor and from those below
FLOORS = (
    ("kinfit.errors", "kinfit.core"),
    ("kinfit.physics",),
    ("kinfit.estimate",),
    ("kinfit.study",),
    ("kinfit.model",),
    ("kinfit.fitting",),
    ("kinfit.analysis",),
    ("kinfit.report",),
    ("kinfit",),            # the public API (kinfit/__init__.py)
    ("kinfit.cli",),
)
MAX_LINES = 600


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


MODULES = {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def floor_of(module: str) -> int:
    best, level = -1, None
    for i, prefixes in enumerate(FLOORS):
        for prefix in prefixes:
            if (module == prefix or module.startswith(prefix + ".")) and len(prefix) > best:
                best, level = len(prefix), i
    assert level is not None, f"{module} is on no floor; add it to FLOORS"
    return level


def _resolve(target: str) -> str:
    """The kinfit module a dotted import name lands in (a name imported from a module)."""
    while target not in MODULES and "." in target:
        target = target.rsplit(".", 1)[0]
    return target


def imports_of(module: str) -> list[tuple[str, int, bool]]:
    """(imported kinfit module, line, inside a function) for every import in ``module``."""
    tree = ast.parse(MODULES[module].read_text(encoding="utf-8"))
    out: list[tuple[str, int, bool]] = []

    def visit(node: ast.AST, in_function: bool) -> None:
        for child in ast.iter_child_nodes(node):
            inner = in_function or isinstance(child, ast.FunctionDef | ast.AsyncFunctionDef)
            if isinstance(child, ast.Import):
                out.extend((_resolve(a.name), child.lineno, in_function)
                           for a in child.names if a.name.split(".")[0] == "kinfit")
            elif isinstance(child, ast.ImportFrom) and child.level == 0 and child.module \
                    and child.module.split(".")[0] == "kinfit":
                for a in child.names:
                    full = f"{child.module}.{a.name}"
                    out.append((full if full in MODULES else _resolve(child.module),
                                child.lineno, in_function))
            visit(child, inner)

    visit(tree, False)
    return out


GRAPH = {m: sorted({t for t, _, _ in imports_of(m) if t != m}) for m in MODULES}


@pytest.mark.parametrize("module", sorted(MODULES))
def test_imports_only_from_floors_below(module):
    here = floor_of(module)
    upward = [(t, line) for t, line, _ in imports_of(module) if floor_of(t) > here]
    assert not upward, f"{module} (floor {here}) imports from a higher floor: {upward}"


def find_cycles(graph: dict[str, list[str]]) -> list[list[str]]:
    """Cycles met by a depth-first search of ``graph`` (module -> imported modules)."""
    state: dict[str, int] = {}
    cycles: list[list[str]] = []

    def walk(m: str, stack: list[str]) -> None:
        state[m] = 1
        stack.append(m)
        for t in graph.get(m, []):
            if state.get(t) == 1:
                cycles.append(stack[stack.index(t):] + [t])
            elif t not in state:
                walk(t, stack)
        stack.pop()
        state[m] = 2

    for m in sorted(graph):
        if m not in state:
            walk(m, [])
    return cycles


def test_the_cycle_search_finds_cycles():
    assert find_cycles({"a": ["b"], "b": ["c"], "c": ["a"], "d": ["a"]}) == [["a", "b", "c", "a"]]
    assert find_cycles({"a": ["b", "c"], "b": ["c"], "c": []}) == []


def test_no_import_cycles():
    # package __init__ modules included: a package that imports its own module is an edge too
    cycles = find_cycles(GRAPH)
    assert not cycles, f"import cycles: {cycles}"


def test_no_kinfit_import_inside_a_function():
    hidden = [(m, t, line) for m in MODULES for t, line, inner in imports_of(m) if inner]
    assert not hidden, f"kinfit imports inside functions: {hidden}"


def test_no_module_over_the_size_limit():
    long = {m: n for m, p in MODULES.items()
            if (n := len(p.read_text(encoding="utf-8").splitlines())) > MAX_LINES}
    assert not long, f"modules over {MAX_LINES} lines: {long}"


def test_few_modules_directly_in_the_package():
    top = sorted(p.name for p in PACKAGE.glob("*.py"))
    assert len(top) <= 6, top


def test_no_module_shares_a_name_with_the_api():
    # 'from kinfit import diagnose' must give the function, never a module of that name
    clash = [name for name in kinfit.__all__ if f"kinfit.{name}" in MODULES]
    assert not clash, clash


def test_api_names_are_the_functions_and_run(tmp_path):
    from kinfit import diagnose, load_study, simulate

    assert callable(diagnose) and callable(simulate)
    assert diagnose.__module__ == "kinfit.analysis.diagnosis.diagnosis"
    assert simulate.__module__ == "kinfit.model.simulation"
    study = load_study(Path(__file__).resolve().parents[1] / "examples" / "demo" / "study.toml")
    sim = simulate(study)
    assert set(sim.runs) == set(study.run_ids)
    # without a fit, diagnose runs the data-only tests and fits the study's model itself
    result = diagnose(study)
    assert set(result.to_dict()["runs"]) == set(study.run_ids)
