"""The safe rate-expression compiler: allow-list, evaluation, symbolic derivative."""

from __future__ import annotations

import builtins
import re

import numpy as np
import pytest
from scipy.constants import R

from kinfit.errors import StudyError
from kinfit.expressions import MAX_DEPTH, MAX_LENGTH, compile_expression
from kinfit.kinetics import PowerLaw


@pytest.fixture
def rng():
    return np.random.default_rng(seed=20240611)


# ---------------------------------------------------------------------------------------------
# Forbidden constructs: each raises StudyError naming the offending token
# ---------------------------------------------------------------------------------------------

FORBIDDEN = [
    ("C.__class__", "C.__class__"),  # attribute access
    ("k.real*C", "k.real"),
    ("__import__('os')", "__import__"),  # dunder call
    ("__import__('os').system('true')", "__import__('os').system"),
    ("C[0]", "C[0]"),  # subscript
    ("lambda x: x", "lambda x: x"),  # lambda
    ("(lambda x: x)(C)", "lambda x: x"),
    ("[c for c in C]", "[c for c in C]"),  # comprehension
    ("exp(x for x in C)", "(x for x in C)"),
    ("open('f')", "open"),  # unknown function
    ("sin(C)", "sin"),
    ("foo*C", "foo"),  # unknown name (allowed_names given)
    ("C**1000", "1000"),  # huge literal exponent
    ("C**-101", "-101"),
    ("C**(50*3)", "50*3"),
    ("exp(x=C)", "x=C"),  # keyword argument
    ("exp(C, T)", "exp(C, T)"),
    ("exp(*C)", "*C"),
    ("'abc'", "'abc'"),  # string
    ("True*C", "True"),
    ("C if T else 0", "C if T else 0"),
    ("C < T", "C < T"),
    ("C and T", "C and T"),
    ("C % 2", "C % 2"),
    ("C // 2", "C // 2"),
    ("~C", "~C"),
    ("(C, T)", "(C, T)"),
    ("_k*C", "_k"),  # underscore / dunder name
    ("__builtins__", "__builtins__"),
    ("exp", "exp"),  # bare function name
    ("1e999*C", "1e999"),  # non-finite literal
    ("exp(1000)*C", "exp(1000)"),  # constant overflow
]


@pytest.mark.parametrize(("text", "token"), FORBIDDEN)
def test_forbidden_construct_names_the_token(text, token):
    with pytest.raises(StudyError, match=re.escape(f"'{token}'")):
        compile_expression(text, allowed_names={"k"})


def test_forbidden_code_is_never_executed(tmp_path):
    """A payload that would create a file must be rejected without running."""
    target = tmp_path / "pwned"
    payload = f"__import__('pathlib').Path({str(target)!r}).touch()"
    with pytest.raises(StudyError):
        compile_expression(payload)
    assert not target.exists()


def test_compiler_does_not_use_eval_or_exec(monkeypatch):
    """Compilation and evaluation go through the checked tree only, never eval/exec."""

    def refuse(*args, **kwargs):
        raise AssertionError("eval/exec must not be called")

    monkeypatch.setattr(builtins, "eval", refuse)
    monkeypatch.setattr(builtins, "exec", refuse)
    f = compile_expression("k*C**2/(1 + K*C)")
    assert float(f(C=2.0, T=300.0, k=3.0, K=0.5)) == pytest.approx(6.0)


def test_deep_nesting_rejected_and_limit_accepted():
    ok = "C"
    for _ in range(MAX_DEPTH - 1):
        ok = f"sqrt({ok})"
    compile_expression(ok)  # exactly MAX_DEPTH levels
    deep = f"sqrt({ok})"
    with pytest.raises(StudyError, match=f"nests {MAX_DEPTH + 1} levels"):
        compile_expression(deep)
    long_sum = "+".join(["C"] * 200)
    with pytest.raises(StudyError, match="levels"):
        compile_expression(long_sum)
    with pytest.raises(StudyError, match="levels|nest"):
        compile_expression("(" * 300 + "C" + ")" * 300)


def test_overlong_empty_and_syntax_errors():
    with pytest.raises(StudyError, match=str(MAX_LENGTH)):
        compile_expression("C" + " " * MAX_LENGTH)
    with pytest.raises(StudyError, match="empty"):
        compile_expression("   ")
    with pytest.raises(StudyError, match="not valid arithmetic"):
        compile_expression("k*C +")
    with pytest.raises(StudyError, match="must be a string"):
        compile_expression(3.0)  # type: ignore[arg-type]


def test_unknown_name_message_lists_allowed_names():
    with pytest.raises(StudyError, match=r"'kk'.*\['C', 'T', 'R', 'T_ref', 'k'\]"):
        compile_expression("kk*C", allowed_names={"k"}, constants={"T_ref": 300.0})


def test_bad_constant_names_rejected():
    with pytest.raises(StudyError, match="'C'"):
        compile_expression("k*C", constants={"C": 1.0})
    with pytest.raises(StudyError, match="'__x'"):
        compile_expression("k*C", constants={"__x": 1.0})


# ---------------------------------------------------------------------------------------------
# Evaluation
# ---------------------------------------------------------------------------------------------


def test_power_law_expression_reproduces_power_law_exactly(rng):
    """The `power` rate law written as an expression gives the same numbers (kinfit's power law
    with Arrhenius at T_ref)."""
    law = PowerLaw(reference_temperature=330.0, reference_concentration=1000.0)
    f = compile_expression(
        "k_ref*exp(-activation_energy/R*(1/T - 1/T_ref))*(C/C_ref)**order",
        allowed_names=set(law.parameter_names),
        constants={"T_ref": 330.0, "C_ref": 1000.0},
    )
    m, n = 5, 40
    C = rng.uniform(1.0, 3000.0, size=(m, n))
    T = rng.uniform(300.0, 370.0, size=n)
    p = {
        "k_ref": rng.uniform(0.1, 10.0, size=(m, 1)),
        "activation_energy": rng.uniform(2e4, 1.2e5, size=(m, 1)),
        "order": rng.uniform(0.0, 3.0, size=(m, 1)),
    }
    got = f(C=C, T=T, **p)
    want = law.rate(C, T, p)
    assert got.shape == (m, n)
    np.testing.assert_array_equal(got, want)


def test_evaluation_matches_numpy_and_uses_scipy_gas_constant(rng):
    """R is the CODATA gas constant from scipy.constants."""
    f = compile_expression("k*exp(-E/(R*T))*C**n/(1 + K*C)**2 - 3*C/T")
    assert f.parameter_names == ("k", "E", "n", "K")
    C = rng.uniform(0.5, 50.0, size=(3, 7))
    T = rng.uniform(280.0, 400.0, size=7)
    k, E, n, K = (rng.uniform(0.5, 2.0, size=(3, 1)) for _ in range(4))
    E = E * 1e4
    want = k * np.exp(-E / (R * T)) * C**n / (1 + K * C) ** 2 - 3 * C / T
    np.testing.assert_allclose(f(C=C, T=T, k=k, E=E, n=n, K=K), want, rtol=1e-14)
    assert float(compile_expression("R")(C=0.0, T=0.0)) == R


def test_constant_expression_broadcasts_and_missing_parameter():
    f = compile_expression("2.5")
    out = f(C=np.zeros((2, 3)), T=np.zeros(3))
    assert out.shape == (2, 3)
    np.testing.assert_array_equal(out, 2.5)
    g = compile_expression("k*C")
    with pytest.raises(StudyError, match=r"\['k'\]"):
        g(C=1.0, T=300.0)
    assert float(g(C=2.0, T=300.0, k=3.0, unused=9.0)) == 6.0


def test_parameter_order_and_reserved_names():
    f = compile_expression("b*C + a*T + b*R + sqrt(a)")
    assert f.parameter_names == ("b", "a")
    assert f.uses_temperature
    assert not compile_expression("k*C").uses_temperature


# ---------------------------------------------------------------------------------------------
# Symbolic derivative
# ---------------------------------------------------------------------------------------------

DERIVATIVE_CASES = [
    "k*C**n",
    "k*C/(1 + K*C)**2",
    "k*K*C/(1 + K*C)",
    "exp(-a/C)*C",
    "log(1 + C)*sqrt(C)",
    "C**(C/100)",
    "-C**3/(T - C)",
    "(C - (2000 - C)/K)*k",
    "sqrt(C*k)/exp(C/1000)",
    "3 + 0*C",
]


@pytest.mark.parametrize("text", DERIVATIVE_CASES)
def test_symbolic_derivative_matches_central_difference(text, rng):
    """dr/dC from the symbolic derivative against a central finite difference (step 1e-6 C)."""
    f = compile_expression(text)
    params = {name: rng.uniform(0.5, 2.0, size=(4, 1)) for name in f.parameter_names}
    C = rng.uniform(5.0, 200.0, size=(4, 9))
    T = rng.uniform(300.0, 360.0, size=9)
    h = 1e-6 * C
    fd = (f(C=C + h, T=T, **params) - f(C=C - h, T=T, **params)) / (2 * h)
    exact = f.diff("C")(C=C, T=T, **params)
    assert exact.shape == (4, 9)
    np.testing.assert_allclose(exact, fd, rtol=1e-6, atol=1e-9 * np.max(np.abs(fd)) + 1e-300)


def test_derivative_with_respect_to_temperature_and_parameter(rng):
    f = compile_expression("k*exp(-E/(R*T))*C")
    k, E, C, T = 2.0, 5e4, 300.0, 320.0
    dT = f.diff("T")(C=C, T=T, k=k, E=E)
    dk = f.diff("k")(C=C, T=T, k=k, E=E)
    base = float(f(C=C, T=T, k=k, E=E))
    assert float(dT) == pytest.approx(base * E / (R * T**2), rel=1e-13)
    assert float(dk) == pytest.approx(base / k, rel=1e-13)


def test_rendered_derivative_compiles_to_the_same_values(rng):
    f = compile_expression("k*C**n/(1 + K*C)**2")
    d = f.diff("C")
    again = compile_expression(d.text)
    p = {"k": 1.3, "n": 1.7, "K": 0.02}
    C = rng.uniform(1.0, 100.0, size=6)
    np.testing.assert_allclose(again(C=C, T=300.0, **p), d(C=C, T=300.0, **p), rtol=1e-14)
    assert f.diff("C") is d  # cached


def test_constant_exponent_derivative_defined_at_zero():
    """d(C**2)/dC = 2C is 0 at C = 0 (the power rule avoids log(C))."""
    d = compile_expression("C**2").diff("C")
    assert float(d(C=0.0, T=300.0)) == 0.0
