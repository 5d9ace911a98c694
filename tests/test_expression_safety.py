"""Denial and fuzz tests of the rate-expression compiler (:mod:`kinfit.physics.kinetics.expressions`).

Three properties, each over Hypothesis-generated input:

1. Any text at all (random characters, random tokens, random Python syntax trees holding
   forbidden constructs) either compiles or raises :class:`~kinfit.errors.StudyError`; nothing
   else escapes, and a text holding any forbidden construct never compiles.
2. Evaluating a compiled expression runs nothing outside the allow-list: no Python-level
   ``import``, ``open``, ``eval``, ``exec`` or ``compile`` happens (checked with a
   :func:`sys.addaudithook` recorder, which sees C-level events too, and with those builtins
   replaced by traps while the expression runs), and its compiled tree holds only numbers,
   variables, ``+ - * / **``, negation and ``exp``/``log``/``sqrt``.
3. Allowed expressions mean what they say: each generated expression is evaluated by an
   independent reference written here (numpy ufuncs on the same explicit tree) and must agree.

Python's own grammar (the ``ast`` module documentation, Python 3.11 language reference ch. 6)
is the reference for what the generated texts mean; identifiers are NFKC-normalised by the
parser (PEP 3131), which is why full-width look-alikes of ``__import__`` are tried too.
"""

from __future__ import annotations

import builtins
import contextlib
import sys
from collections.abc import Callable, Iterator
from typing import Any

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.constants import R as GAS_CONSTANT
from studies import alarm

from kinfit.errors import StudyError
from kinfit.physics.kinetics.expressions import (
    FUNCTIONS,
    MAX_DEPTH,
    MAX_EXPONENT,
    MAX_LENGTH,
    _Bin,
    _Fn,
    _Neg,
    _Num,
    _Var,
    compile_expression,
)

PARAMS = ("k", "K", "n")
#: the same generated cases on every run (derandomize), so that a CI failure reproduces
SAFE = settings(max_examples=150, deadline=5000, database=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


# ------------------------------------------------------------------------------------------
# guards: an audit-hook recorder and a wall-clock alarm
# ------------------------------------------------------------------------------------------
_EVENTS: list[str] | None = None
_WATCHED = ("exec", "compile", "import", "open", "os.", "subprocess.", "socket.", "ctypes.",
            "builtins.input", "sys._getframe", "object.__getattr__", "pickle.", "marshal.")


def _audit(event: str, args: Any) -> None:
    if _EVENTS is not None and event.startswith(_WATCHED):
        _EVENTS.append(event)


sys.addaudithook(_audit)  # audit hooks cannot be removed; this one only records while armed


@contextlib.contextmanager
def audited() -> Iterator[list[str]]:
    """Record the watched audit events raised inside the block."""
    global _EVENTS
    _EVENTS = []
    try:
        yield _EVENTS
    finally:
        _EVENTS = None


@contextlib.contextmanager
def builtins_trapped() -> Iterator[None]:
    """Replace ``__import__``, ``open``, ``eval``, ``exec`` and ``compile`` by traps."""
    names = ("__import__", "open", "eval", "exec", "compile")
    saved = {n: getattr(builtins, n) for n in names}

    def trap(*args: Any, **kwargs: Any) -> None:
        raise AssertionError("a builtin outside the allow-list was called")

    try:
        for n in names:
            setattr(builtins, n, trap)
        yield
    finally:
        for n, f in saved.items():
            setattr(builtins, n, f)


def compile_or_study_error(text: str, **kw: Any):
    """compile_expression under the alarm; StudyError -> None; anything else propagates."""
    with alarm(10.0):
        try:
            return compile_expression(text, **kw)
        except StudyError as exc:
            assert str(exc).startswith("rate expression"), str(exc)
            return None


# ------------------------------------------------------------------------------------------
# generators: allowed trees (with a reference evaluator) and forbidden constructs
# ------------------------------------------------------------------------------------------
Ref = Callable[[dict[str, np.ndarray]], np.ndarray]


def _leaf() -> st.SearchStrategy[tuple[str, Ref]]:
    number = st.one_of(
        st.integers(min_value=0, max_value=1000),
        st.floats(min_value=0.0, max_value=1e6, allow_nan=False, allow_infinity=False),
        st.sampled_from([0.5, 1.5, 1e-9, 2.0, 1e3]),
    ).map(lambda v: (repr(v), lambda env, v=float(v): np.float64(v)))
    name = st.sampled_from(("C", "T", "R", *PARAMS)).map(
        lambda n: (n, (lambda env: np.float64(GAS_CONSTANT)) if n == "R"
                   else (lambda env, n=n: env[n])))
    return st.one_of(number, name)


def _extend(inner: st.SearchStrategy[tuple[str, Ref]]) -> st.SearchStrategy[tuple[str, Ref]]:
    ops = {"+": np.add, "-": np.subtract, "*": np.multiply, "/": np.divide}

    def binary(a, op, b):
        fa, fb = a[1], b[1]
        return (f"({a[0]} {op} {b[0]})", lambda env: ops[op](fa(env), fb(env)))

    def power(a, e):
        fa = a[1]
        return (f"({a[0]} ** {e!r})", lambda env: np.power(fa(env), np.float64(e)))

    def func(name, a):
        fa = a[1]
        return (f"{name}({a[0]})", lambda env: FUNCTIONS[name](fa(env)))

    def neg(a):
        fa = a[1]
        return (f"(-{a[0]})", lambda env: np.negative(fa(env)))

    return st.one_of(
        st.builds(binary, inner, st.sampled_from(sorted(ops)), inner),
        st.builds(power, inner, st.sampled_from([0.5, 1.0, 1.5, 2.0, 3.0, -1.0, 0.0])),
        st.builds(func, st.sampled_from(sorted(FUNCTIONS)), inner),
        st.builds(neg, inner),
    )


def allowed_expression() -> st.SearchStrategy[tuple[str, Ref]]:
    """Fully parenthesised expressions of the allowed grammar with their reference value."""
    return st.recursive(_leaf(), _extend, max_leaves=12)


#: built once: a strategy object is validated on first use, so re-creating it per draw is slow
ALLOWED = allowed_expression()


FORBIDDEN_NAMES = ["__import__", "__builtins__", "__class__", "_x", "＿＿import＿＿",
                   "__loader__", "__spec__"]
FORBIDDEN_CALLS = ["open", "eval", "exec", "compile", "getattr", "globals", "vars", "sin",
                   "print", "input", "breakpoint", "help", "type", "object", "max"]


#: forbidden pieces; {a} and {b} are allowed sub-expressions, {name} a forbidden name and
#: {call} a function outside the allow-list
FORBIDDEN_TEMPLATES = [
    "{a}.__class__", "{a}.real", "({a}).__class__.__mro__[1].__subclasses__()", "{name}",
    "{call}({a})", "{name}('os')", "exp({a}, {b})", "exp(x={a})", "exp(*{a})", "exp(**{a})",
    "exp()", "{a}[0]", "{a}[1:2]", "lambda: {a}", "(lambda x: x)({a})", "[{a} for q in {b}]",
    "{{{a}: {b}}}", "{{{a}}}", "({a}, {b})", "[{a}]", "{a} if {b} else 0", "{a} < {b}",
    "{a} == {b}", "{a} and {b}", "not {a}", "{a} % {b}", "{a} // {b}", "{a} @ {b}",
    "{a} & {b}", "{a} | {b}", "{a} ^ {b}", "{a} << 2", "~{a}", "(q := {a})", "'text'",
    "b'bytes'", "f'{{{a}}}'", "None", "True", "...", "1j", "{a} ** 1000", "{a} ** -101",
    "{a} ** (60 + 60)", "10 ** 10 ** 10 * {a}", "2 ** 2 ** 2 ** 2 ** 2 * {a}",
    "exp(exp(exp(10))) * {a}", "1e999", "9" * 400, "(yield {a})", "await {a}", "C.__dict__",
    "exp.__globals__['__builtins__']", "__import__('os').system('true')",
]
FRAMES = ["{x}", "({x})", "k * ({x})", "exp({x})", "({x}) + C", "C ** 2 / (1 + ({x}))",
          "-({x})"]


@st.composite
def forbidden_expression(draw: st.DrawFn) -> str:
    """An allowed expression with one forbidden construct spliced into an allowed frame."""
    a, b = draw(ALLOWED)[0], draw(ALLOWED)[0]
    bad = draw(st.sampled_from(FORBIDDEN_TEMPLATES)).format(
        a=a, b=b, name=draw(st.sampled_from(FORBIDDEN_NAMES)),
        call=draw(st.sampled_from(FORBIDDEN_CALLS)))
    return draw(st.sampled_from(FRAMES)).format(x=bad)


TOKENS = ["C", "T", "R", "k", "K", "n", "exp", "log", "sqrt", "(", ")", "+", "-", "*", "/",
          "**", "1", "2.5", "1e3", ".", "_", "__", "import", "os", "[", "]", "'", ",", "=",
          ":", "lambda", "if", "else", "<", "%", "//", "@", "~", "not", "and", "{", "}", " ",
          "\n", "\t", "\\", "#", ";", "\x00", "é", "ｅｘｐ", "＿", "∗", "−"]


# ------------------------------------------------------------------------------------------
# 1. nothing but StudyError, and every forbidden construct is refused
# ------------------------------------------------------------------------------------------
@SAFE
@given(st.text(max_size=80))
def test_random_text_compiles_or_raises_study_error(text):
    compile_or_study_error(text)


@SAFE
@given(st.lists(st.sampled_from(TOKENS), max_size=30).map("".join))
def test_random_token_soup_compiles_or_raises_study_error(text):
    compile_or_study_error(text)
    compile_or_study_error(text, allowed_names=PARAMS, constants={"T_ref": 323.15})


@SAFE
@given(forbidden_expression())
def test_every_forbidden_construct_is_refused(text):
    assert compile_or_study_error(text, allowed_names=PARAMS) is None, text
    assert compile_or_study_error(text) is None, text


@pytest.mark.parametrize("text", [
    "＿＿import＿＿('os')",                      # full-width low lines normalise to "__"
    "ｅｘｐ(C).__class__",
    "__import__('os').system('echo pwned')",
    "exp.__globals__",
    "(C).__class__.__base__.__subclasses__()",
    "getattr(C, 'real')",
    "C**" + "(" * 40 + "1000" + ")" * 40,
    "C" + "**C" * 600,                           # a power tower deeper than the limit
    "-" * (MAX_LENGTH - 1) + "C",                # 1999 nested negations
    "sqrt(" * 60 + "C" + ")" * 60,
    "C*" * (MAX_LENGTH // 2) + "C",              # longer than the limit
    "9" * 400 + "*C",                            # an integer literal beyond double precision
    "9999**100*C",                               # a folded constant that overflows (1e400)
    f"C**{MAX_EXPONENT * 1.0001}",
    "C\x00",
])
def test_denials_by_name(text):
    assert compile_or_study_error(text) is None


def test_limits_themselves_are_allowed():
    """The edges of the limits compile (so the limits are where the docs say)."""
    assert compile_or_study_error(f"C**{MAX_EXPONENT:g}") is not None
    assert compile_or_study_error(f"C**-{MAX_EXPONENT:g}") is not None
    assert compile_or_study_error("9**99*C") is not None  # 2.95e94: finite
    nest = "C"
    for _ in range(MAX_DEPTH - 1):
        nest = f"sqrt({nest})"
    assert compile_or_study_error(nest) is not None


# ------------------------------------------------------------------------------------------
# 2. evaluation runs nothing outside the allow-list
# ------------------------------------------------------------------------------------------
def _nodes(node) -> Iterator[Any]:
    stack = [node]
    while stack:
        n = stack.pop()
        yield n
        if isinstance(n, _Bin):
            stack += [n.left, n.right]
        elif isinstance(n, _Neg | _Fn):
            stack.append(n.arg)


def _env(rng: np.random.Generator, shape: tuple[int, ...] = (3, 4)) -> dict[str, np.ndarray]:
    return {
        "C": rng.uniform(0.0, 2000.0, size=shape),
        "T": rng.uniform(280.0, 450.0, size=shape[-1:]),
        "k": rng.uniform(0.1, 10.0, size=(shape[0], 1)),
        "K": rng.uniform(1e-4, 1e-2, size=(shape[0], 1)),
        "n": rng.uniform(0.5, 2.0, size=(shape[0], 1)),
    }


@SAFE
@given(ALLOWED, st.integers(min_value=0, max_value=2**32 - 1))
def test_evaluation_touches_no_builtin_and_tree_is_allow_listed(expr, seed):
    text, _ = expr
    compiled = compile_or_study_error(text, allowed_names=PARAMS)
    if compiled is None:  # a constant part overflowed, or the nesting passed the limit
        return
    for node in _nodes(compiled._node):
        assert type(node) in (_Num, _Var, _Bin, _Neg, _Fn)
        if isinstance(node, _Bin):
            assert node.op in ("+", "-", "*", "/", "**")
        if isinstance(node, _Fn):
            assert node.name in FUNCTIONS
        if isinstance(node, _Var):
            assert node.name in ("C", "T", *PARAMS)
    env = _env(np.random.default_rng(seed))
    derivative = compiled.diff("C")
    with audited() as events, builtins_trapped(), alarm(10.0):
        value = compiled(**env)
        slope = derivative(**env)
    assert events == [], events
    assert value.shape == slope.shape == (3, 4)


def test_compilation_parses_but_never_executes():
    """Compiling raises exactly one 'compile' audit event (ast.parse) and no 'exec'."""
    with audited() as events:
        compiled = compile_expression("k*exp(-K/(R*T))*C**n", allowed_names=PARAMS)
    assert events.count("exec") == 0 and events.count("compile") == 1, events
    with audited() as events, builtins_trapped():
        compiled(C=1.0, T=300.0, k=1.0, K=1.0, n=1.0)
    assert events == []


# ------------------------------------------------------------------------------------------
# 3. allowed expressions evaluate as written
# ------------------------------------------------------------------------------------------
@SAFE
@given(ALLOWED, st.integers(min_value=0, max_value=2**32 - 1))
def test_allowed_expressions_match_an_independent_reference(expr, seed):
    text, reference = expr
    compiled = compile_or_study_error(text, allowed_names=PARAMS)
    if compiled is None:
        return
    env = _env(np.random.default_rng(seed))
    with np.errstate(all="ignore"):
        want = np.broadcast_to(reference(env), (3, 4))
    got = compiled(**env)
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=0.0, equal_nan=True)


@SAFE
@given(ALLOWED)
def test_derivative_of_any_allowed_expression_stays_small(expr):
    """Symbolic differentiation cannot blow up: the derivative of anything within the length
    and depth limits renders to a bounded text, within the alarm."""
    compiled = compile_or_study_error(expr[0])
    if compiled is None:
        return
    with alarm(10.0):
        for name in ("C", "T"):
            assert len(compiled.diff(name).text) < 200_000


def test_worst_case_derivative_within_the_limits_is_bounded():
    """A balanced product tree filling the length limit: the product rule doubles references
    level by level, yet the rendered derivative stays within a few times the text."""
    text = "C"
    while len(f"(({text})*({text}))") <= MAX_LENGTH:
        text = f"(({text})*({text}))"
    compiled = compile_or_study_error(text)
    assert compiled is not None
    with alarm(10.0):
        d = compiled.diff("C")
    assert len(d.text) < 50 * len(text)
    # C**(2^depth): d/dC at C = 1 is the exponent
    exponent = text.count("C")
    assert float(d(C=1.0, T=300.0)) == pytest.approx(exponent, rel=1e-12)


def test_a_malicious_study_expression_is_refused_before_anything_runs(tmp_path):
    """Through the study file: [kinetics] rate_law = "expression" with a payload."""
    from kinfit.model.compiled import ModelSpec
    from kinfit.study.load import load_study

    target = tmp_path / "pwned"
    (tmp_path / "runs.csv").write_text(
        "run,temperature [K],stirrer_speed [rpm],particle_diameter [um],catalyst_loading [g/L],"
        "initial_concentration [mol/L]\nA1,320,600,50,2,0.5\n", encoding="utf-8")
    (tmp_path / "obs.csv").write_text(
        "run,time [min],concentration [mol/L]\nA1,0,0.5\nA1,10,0.4\n", encoding="utf-8")
    payload = f"__import__('pathlib').Path({str(target)!r}).touch() or C"
    (tmp_path / "study.toml").write_text(
        '[data]\nruns = "runs.csv"\nobservations = "obs.csv"\n'
        '[catalyst]\ngeometry = "sphere"\nparticle_density = "1500 kg/m^3"\n'
        f'[kinetics]\nrate_law = "expression"\nexpression = {payload!r}\n'
        'reference_temperature = "320 K"\n'
        '[film]\nmodel = "none"\n[pellet]\ndiffusivity = "none"\n'
        '[parameters.k]\nvalue = 1.0\n', encoding="utf-8")
    study = load_study(tmp_path / "study.toml")
    import kinfit.physics.kinetics.base  # noqa: F401 - imported first: module imports raise 'exec' events
    import kinfit.physics.film  # noqa: F401
    with audited() as events, pytest.raises(StudyError, match="rate expression"):
        ModelSpec.from_study(study)
    assert not target.exists()
    assert "exec" not in events and not any(e.startswith("os.") for e in events)
