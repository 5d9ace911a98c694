"""A safe compiler for user rate expressions: an allow-list over Python's ``ast``, compiled into
a tree of numpy closures, with symbolic differentiation.

The user's text is parsed with :func:`ast.parse` only; it is never passed to ``eval``, ``exec``
or ``compile``. Every node of the parse tree is checked against an allow-list:

- numbers (int or float literals), the operators ``+ - * / **``, unary minus and plus,
  parentheses;
- calls of ``exp``, ``log`` and ``sqrt`` with one positional argument;
- the names ``C`` (concentration, mol/m^3), ``T`` (temperature, K), ``R`` (gas constant,
  J/(mol K)), named constants given by the caller, and named parameters.

Anything else (attribute access, subscripts, other calls, keyword arguments, strings, lambdas,
comprehensions, comparisons, names starting with an underscore, unknown names) raises
:class:`~kinfit.errors.StudyError` naming the offending token. So do text longer than
:data:`MAX_LENGTH` characters, nesting deeper than :data:`MAX_DEPTH` levels and literal exponents
larger than :data:`MAX_EXPONENT` in magnitude.
"""

from __future__ import annotations

import ast
import math
import warnings
from collections.abc import Callable, Collection, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from kinfit.errors import StudyError
from kinfit.physics.kinetics.arrhenius import GAS_CONSTANT

__all__ = [
    "compile_expression",
    "CompiledExpression",
    "FUNCTIONS",
    "RESERVED_NAMES",
    "MAX_LENGTH",
    "MAX_DEPTH",
    "MAX_EXPONENT",
]

#: Functions an expression may call.
FUNCTIONS: Mapping[str, Callable[[Any], Any]] = {"exp": np.exp, "log": np.log, "sqrt": np.sqrt}
#: Names with a fixed meaning: concentration, temperature, gas constant.
RESERVED_NAMES = ("C", "T", "R")
MAX_LENGTH = 2000
MAX_DEPTH = 50
MAX_EXPONENT = 100.0

_BINARY_SYMBOLS = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}
_FORBIDDEN_OPERATORS = {
    ast.Mod: "%",
    ast.FloorDiv: "//",
    ast.MatMult: "@",
    ast.BitAnd: "&",
    ast.BitOr: "|",
    ast.BitXor: "^",
    ast.LShift: "<<",
    ast.RShift: ">>",
    ast.Not: "not",
    ast.Invert: "~",
}
_NUMPY_BINARY = {"+": np.add, "-": np.subtract, "*": np.multiply, "/": np.divide, "**": np.power}


# ----------------------------------------------------------------------------------------------
# Intermediate tree: small immutable nodes, built from the checked ast
# ----------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Num:
    value: float


@dataclass(frozen=True)
class _Var:
    name: str


@dataclass(frozen=True)
class _Bin:
    op: str
    left: _Node
    right: _Node


@dataclass(frozen=True)
class _Neg:
    arg: _Node


@dataclass(frozen=True)
class _Fn:
    name: str
    arg: _Node


_Node = _Num | _Var | _Bin | _Neg | _Fn


def _fold(value: float) -> _Node | None:
    """A folded constant node, or None when the value is not finite (keep the tree instead)."""
    return _Num(float(value)) if math.isfinite(value) else None


def _num_binary(op: str, a: float, b: float) -> float:
    with np.errstate(all="ignore"):
        return float(_NUMPY_BINARY[op](np.float64(a), np.float64(b)))


def _make_bin(op: str, a: _Node, b: _Node) -> _Node:
    """Build a binary node with light algebraic simplification (used by the differentiator)."""
    if isinstance(a, _Num) and isinstance(b, _Num):
        folded = _fold(_num_binary(op, a.value, b.value))
        if folded is not None:
            return folded
    zero_a = isinstance(a, _Num) and a.value == 0.0
    zero_b = isinstance(b, _Num) and b.value == 0.0
    one_a = isinstance(a, _Num) and a.value == 1.0
    one_b = isinstance(b, _Num) and b.value == 1.0
    if op == "+":
        if zero_a:
            return b
        if zero_b:
            return a
    elif op == "-":
        if zero_b:
            return a
        if zero_a:
            return _make_neg(b)
    elif op == "*":
        if zero_a or zero_b:
            return _Num(0.0)
        if one_a:
            return b
        if one_b:
            return a
    elif op == "/":
        if zero_a:
            return _Num(0.0)
        if one_b:
            return a
    elif op == "**":
        if zero_b:
            return _Num(1.0)
        if one_b:
            return a
    return _Bin(op, a, b)


def _make_neg(a: _Node) -> _Node:
    if isinstance(a, _Num):
        return _Num(-a.value)
    if isinstance(a, _Neg):
        return a.arg
    return _Neg(a)


def _depends_on(node: _Node, name: str) -> bool:
    if isinstance(node, _Num):
        return False
    if isinstance(node, _Var):
        return node.name == name
    if isinstance(node, _Bin):
        return _depends_on(node.left, name) or _depends_on(node.right, name)
    return _depends_on(node.arg, name)


def _diff(node: _Node, name: str) -> _Node:
    """Symbolic derivative of ``node`` with respect to the variable ``name``."""
    if not _depends_on(node, name):
        return _Num(0.0)
    if isinstance(node, _Var):
        return _Num(1.0)
    if isinstance(node, _Neg):
        return _make_neg(_diff(node.arg, name))
    if isinstance(node, _Fn):
        u, du = node.arg, _diff(node.arg, name)
        if node.name == "exp":
            outer: _Node = node
        elif node.name == "log":
            outer = _make_bin("/", _Num(1.0), u)
        else:  # sqrt
            outer = _make_bin("/", _Num(0.5), node)
        return _make_bin("*", outer, du)
    assert isinstance(node, _Bin)  # internal invariant, not user input
    u, v = node.left, node.right
    du, dv = _diff(u, name), _diff(v, name)
    if node.op in "+-":
        return _make_bin(node.op, du, dv)
    if node.op == "*":
        return _make_bin("+", _make_bin("*", du, v), _make_bin("*", u, dv))
    if node.op == "/":
        if not _depends_on(v, name):
            return _make_bin("/", du, v)
        num = _make_bin("-", _make_bin("*", du, v), _make_bin("*", u, dv))
        return _make_bin("/", num, _make_bin("**", v, _Num(2.0)))
    # power u ** v
    if not _depends_on(v, name):
        # d(u^v) = v u^(v-1) du; no log(u), so negative or zero bases stay defined
        return _make_bin(
            "*", _make_bin("*", v, _make_bin("**", u, _make_bin("-", v, _Num(1.0)))), du
        )
    # general case: d(u^v) = u^v (dv log u + v du / u)
    inner = _make_bin(
        "+", _make_bin("*", dv, _Fn("log", u)), _make_bin("/", _make_bin("*", v, du), u)
    )
    return _make_bin("*", node, inner)


def _render(node: _Node) -> str:
    """Text of a node, fully parenthesised, that this module can compile again."""
    if isinstance(node, _Num):
        return repr(node.value) if node.value >= 0 else f"({node.value!r})"
    if isinstance(node, _Var):
        return node.name
    if isinstance(node, _Neg):
        return f"(-{_render(node.arg)})"
    if isinstance(node, _Fn):
        return f"{node.name}({_render(node.arg)})"
    return f"({_render(node.left)} {node.op} {_render(node.right)})"


def _closure(node: _Node) -> Callable[[Mapping[str, Any]], Any]:
    """Turn a node into a function of the environment (name -> array), built once."""
    if isinstance(node, _Num):
        value = node.value
        return lambda env: value
    if isinstance(node, _Var):
        name = node.name
        return lambda env: env[name]
    if isinstance(node, _Neg):
        arg = _closure(node.arg)
        return lambda env: np.negative(arg(env))
    if isinstance(node, _Fn):
        fn = FUNCTIONS[node.name]
        arg = _closure(node.arg)
        return lambda env: fn(arg(env))
    op = _NUMPY_BINARY[node.op]
    left, right = _closure(node.left), _closure(node.right)
    return lambda env: op(left(env), right(env))


# ----------------------------------------------------------------------------------------------
# Checking the user's parse tree
# ----------------------------------------------------------------------------------------------


class _Checker:
    """Walks a Python parse tree, rejects anything outside the allow-list, and builds nodes."""

    def __init__(
        self, text: str, allowed: frozenset[str] | None, constants: Mapping[str, float]
    ) -> None:
        self.text = text
        self.allowed = allowed
        self.constants = constants
        self.parameters: list[str] = []

    def fail(self, what: str, node: ast.AST, hint: str) -> StudyError:
        token = ast.get_source_segment(self.text, node) or ast.unparse(node)
        col = getattr(node, "col_offset", None)
        at = f" at column {col + 1}" if col is not None else ""
        return StudyError(
            f"rate expression: {what} '{token}'{at} is not allowed; {hint}. "
            f"Expression: {self.text!r}"
        )

    def build(self, node: ast.AST) -> _Node:
        if isinstance(node, ast.Constant):
            return self.constant(node)
        if isinstance(node, ast.Name):
            return self.name(node)
        if isinstance(node, ast.UnaryOp):
            if isinstance(node.op, ast.USub):
                return _make_neg(self.build(node.operand))
            if isinstance(node.op, ast.UAdd):
                return self.build(node.operand)
            symbol = _FORBIDDEN_OPERATORS.get(type(node.op), type(node.op).__name__)
            raise self.fail(f"operator '{symbol}' in", node, _ARITHMETIC_HINT)
        if isinstance(node, ast.BinOp):
            return self.binary(node)
        if isinstance(node, ast.Call):
            return self.call(node)
        raise self.fail(_describe(node), node, _ARITHMETIC_HINT)

    def constant(self, node: ast.Constant) -> _Node:
        value = node.value
        if isinstance(value, bool) or not isinstance(value, int | float):
            kind = "string literal" if isinstance(value, str | bytes) else "literal"
            raise self.fail(kind, node, "only plain numbers may appear as literals")
        try:
            number = float(value)
        except OverflowError:
            number = math.inf
        if not math.isfinite(number):
            raise self.fail("number", node, "literals must be finite double-precision numbers")
        return _Num(number)

    def name(self, node: ast.Name) -> _Node:
        ident = node.id
        if ident.startswith("_"):
            raise self.fail("name", node, "names starting with an underscore are forbidden")
        if ident in FUNCTIONS:
            raise self.fail(
                "bare function name", node, f"call it with one argument, e.g. {ident}(C)"
            )
        if ident == "R":
            return _Num(GAS_CONSTANT)
        if ident in ("C", "T"):
            return _Var(ident)
        if ident in self.constants:
            return _Num(float(self.constants[ident]))
        if self.allowed is not None and ident not in self.allowed:
            raise self.fail("unknown name", node, f"allowed names are {self.known_names()}")
        if ident not in self.parameters:
            self.parameters.append(ident)
        return _Var(ident)

    def known_names(self) -> list[str]:
        return [*RESERVED_NAMES, *sorted(self.constants), *sorted(self.allowed or ())]

    def binary(self, node: ast.BinOp) -> _Node:
        symbol = _BINARY_SYMBOLS.get(type(node.op))
        if symbol is None:
            op = _FORBIDDEN_OPERATORS.get(type(node.op), type(node.op).__name__)
            raise self.fail(f"operator '{op}' in", node, _ARITHMETIC_HINT)
        left = self.build(node.left)
        right = self.build(node.right)
        if symbol == "**" and isinstance(right, _Num) and abs(right.value) > MAX_EXPONENT:
            raise self.fail(
                "exponent",
                node.right,
                f"constant exponents must not exceed {MAX_EXPONENT:g} in magnitude",
            )
        if isinstance(left, _Num) and isinstance(right, _Num):
            folded = _fold(_num_binary(symbol, left.value, right.value))
            if folded is None:
                raise self.fail(
                    "constant sub-expression", node, "it does not evaluate to a finite number"
                )
            return folded
        return _Bin(symbol, left, right)

    def call(self, node: ast.Call) -> _Node:
        func = node.func
        if not isinstance(func, ast.Name):
            raise self.fail("call of", func, f"only {sorted(FUNCTIONS)} may be called")
        if func.id not in FUNCTIONS:
            raise self.fail("function", func, f"only {sorted(FUNCTIONS)} may be called")
        if node.keywords:
            raise self.fail("keyword argument", node.keywords[0], "pass one positional argument")
        if len(node.args) != 1:
            raise self.fail("call", node, f"{func.id}() takes exactly one argument")
        (arg,) = node.args
        if isinstance(arg, ast.Starred):
            raise self.fail("starred argument", arg, "pass one positional argument")
        inner = self.build(arg)
        if isinstance(inner, _Num):
            with np.errstate(all="ignore"):
                folded = _fold(float(FUNCTIONS[func.id](np.float64(inner.value))))
            if folded is None:
                raise self.fail(
                    "constant sub-expression", node, "it does not evaluate to a finite number"
                )
            return folded
        return _Fn(func.id, inner)


_ARITHMETIC_HINT = (
    "use numbers, + - * / **, parentheses, exp/log/sqrt, the names C, T, R and parameter names"
)


def _describe(node: ast.AST) -> str:
    kinds = {
        ast.Attribute: "attribute access",
        ast.Subscript: "subscript",
        ast.Lambda: "lambda",
        ast.ListComp: "comprehension",
        ast.SetComp: "comprehension",
        ast.DictComp: "comprehension",
        ast.GeneratorExp: "comprehension",
        ast.Compare: "comparison",
        ast.BoolOp: "boolean operator",
        ast.IfExp: "conditional expression",
        ast.NamedExpr: "assignment expression",
        ast.JoinedStr: "string literal",
        ast.Starred: "starred expression",
        ast.Await: "await",
        ast.Yield: "yield",
        ast.YieldFrom: "yield",
    }
    for cls, word in kinds.items():
        if isinstance(node, cls):
            return word
    if isinstance(node, ast.List | ast.Tuple | ast.Set | ast.Dict):
        return "container literal"
    return f"construct {type(node).__name__}"


def _depth(tree: ast.AST) -> int:
    """Nesting depth of a parse tree (one level per sub-expression), counted without recursion."""
    deepest = 0
    stack = [(tree, 1)]
    while stack:
        node, d = stack.pop()
        deepest = max(deepest, d)
        stack.extend(
            (child, d + 1)
            for child in ast.iter_child_nodes(node)
            if not isinstance(child, _MARKER_NODES)
        )
    return deepest


# operator and context markers are children in the parse tree but not levels of nesting
_MARKER_NODES = (ast.expr_context, ast.operator, ast.unaryop, ast.cmpop, ast.boolop)


# ----------------------------------------------------------------------------------------------
# Public interface
# ----------------------------------------------------------------------------------------------


class CompiledExpression:
    """A checked, compiled rate expression: a vectorised function of C, T and parameters.

    Built by :func:`compile_expression`; do not construct directly.

    Attributes
    ----------
    text : str
        The source text (for a derivative: the rendered derivative).
    parameter_names : tuple of str
        Parameter names in order of first appearance.
    """

    def __init__(self, text: str, node: _Node, parameter_names: tuple[str, ...]) -> None:
        self.text = text
        self.parameter_names = parameter_names
        self._node = node
        self._fn = _closure(node)
        self._derivatives: dict[str, CompiledExpression] = {}

    def __repr__(self) -> str:
        return f"CompiledExpression({self.text!r}, parameters={self.parameter_names})"

    @property
    def uses_temperature(self) -> bool:
        """Whether the expression depends on T."""
        return _depends_on(self._node, "T")

    def __call__(self, *, C: ArrayLike, T: ArrayLike, **params: ArrayLike) -> NDArray[np.float64]:
        """Evaluate the expression.

        Parameters
        ----------
        C : array_like
            Concentration [mol/m^3].
        T : array_like
            Temperature [K].
        **params : array_like
            A value for every name in :attr:`parameter_names` (extra names are ignored). All
            arrays broadcast together, e.g. C (m, n), T (n,), parameters (m, 1).

        Returns
        -------
        ndarray
            The broadcast shape of all inputs. Floating-point warnings (log of zero, overflow)
            are silenced; the result then holds inf or nan, which a solver can test for.

        Raises
        ------
        StudyError
            If a parameter value is missing.
        """
        missing = [n for n in self.parameter_names if n not in params]
        if missing:
            raise StudyError(
                f"rate expression {self.text!r}: no value for parameter(s) {missing}; "
                f"it needs {list(self.parameter_names)}"
            )
        env = {"C": np.asarray(C, dtype=float), "T": np.asarray(T, dtype=float)}
        for n in self.parameter_names:
            env[n] = np.asarray(params[n], dtype=float)
        shape = np.broadcast_shapes(*(np.shape(v) for v in env.values()))
        with np.errstate(all="ignore"):
            out = self._fn(env)
        return np.broadcast_to(np.asarray(out, dtype=float), shape).copy()

    def diff(self, name: str = "C") -> CompiledExpression:
        """Symbolic derivative with respect to ``C``, ``T`` or a parameter (cached).

        The derivative tree is built by the chain, product, quotient and power rules on the
        checked tree, simplified for zeros and ones, and compiled like the expression itself.
        A constant exponent ``u**n`` differentiates to ``n*u**(n-1)*du`` (no log of u), so
        negative or zero bases stay as defined as in the expression.

        Parameters
        ----------
        name : str
            Variable to differentiate with respect to.

        Returns
        -------
        CompiledExpression
            Same parameter names as this expression, so it is called the same way.
        """
        if name not in self._derivatives:
            node = _diff(self._node, name)
            self._derivatives[name] = CompiledExpression(_render(node), node, self.parameter_names)
        return self._derivatives[name]


def compile_expression(
    text: str,
    *,
    allowed_names: Collection[str] | None = None,
    constants: Mapping[str, float] | None = None,
) -> CompiledExpression:
    """Check and compile a rate expression.

    Parameters
    ----------
    text : str
        The expression, e.g. ``"k_ref*exp(-activation_energy/R*(1/T - 1/T_ref))*C**order"``.
    allowed_names : collection of str, optional
        Parameter names the expression may use. With None, every other valid name becomes a
        parameter (in order of first appearance).
    constants : mapping of str to float, optional
        Named constants baked into the expression at compile time (e.g. ``T_ref``).

    Returns
    -------
    CompiledExpression

    Raises
    ------
    StudyError
        Empty or overlong text, a syntax error, nesting deeper than :data:`MAX_DEPTH`, or any
        construct outside the allow-list; the message names the offending token.

    Examples
    --------
    >>> f = compile_expression("k*C**2", allowed_names={"k"})
    >>> f.parameter_names
    ('k',)
    >>> float(f(C=3.0, T=300.0, k=2.0)), float(f.diff("C")(C=3.0, T=300.0, k=2.0))
    (18.0, 12.0)
    """
    if not isinstance(text, str):
        raise StudyError(f"rate expression must be a string, got {type(text).__name__}")
    if len(text) > MAX_LENGTH:
        raise StudyError(
            f"rate expression is {len(text)} characters long; the limit is {MAX_LENGTH}; "
            "simplify it or use a built-in rate law"
        )
    if not text.strip():
        raise StudyError(
            "rate expression is empty; write the rate in terms of C, T and parameters"
        )
    constants = dict(constants or {})
    for key, value in constants.items():
        if not key.isidentifier() or key.startswith("_") or key in (*RESERVED_NAMES, *FUNCTIONS):
            raise StudyError(f"rate expression constant name '{key}' is not usable as a name")
        if not math.isfinite(float(value)):
            raise StudyError(f"rate expression constant '{key}' must be finite, got {value!r}")
    allowed = None if allowed_names is None else frozenset(allowed_names)
    try:
        with warnings.catch_warnings():  # a SyntaxWarning must not reach stderr
            warnings.simplefilter("ignore")
            tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        raise StudyError(
            f"rate expression {text!r} is not valid arithmetic: {exc.msg} at column {exc.offset}"
        ) from None
    except (RecursionError, MemoryError):
        raise StudyError(
            f"rate expression nests deeper than {MAX_DEPTH} levels; simplify it"
        ) from None
    depth = _depth(tree.body)
    if depth > MAX_DEPTH:
        raise StudyError(
            f"rate expression nests {depth} levels deep; the limit is {MAX_DEPTH}; simplify it"
        )
    checker = _Checker(text.strip(), allowed, constants)
    node = checker.build(tree.body)
    return CompiledExpression(text.strip(), node, tuple(checker.parameters))
