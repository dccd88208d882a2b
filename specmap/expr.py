"""Safe arithmetic expressions in x, y, z, evaluated and differentiated with numpy.

Study files describe the map ``f = (f1, f2)`` on a surface in R^3 as text such as
``"sin(x)*y**2 + exp(z/3)"``. The text is parsed with :func:`ast.parse` (mode ``"eval"``) and
checked against a whitelist; nothing is ever passed to ``eval`` or ``exec``. The accepted
grammar is

- int and float literals (scientific notation included),
- the variables ``x``, ``y``, ``z`` and names declared in a ``constants`` mapping,
- binary ``+ - * / **``, unary ``+ -`` and parentheses,
- calls with exactly one positional argument of ``sin cos tan exp log sqrt abs tanh``.

The whitelisted syntax is converted into a small immutable tree (:class:`Const`, :class:`Var`,
:class:`Unary`, :class:`Binary`, :class:`Call`) that is evaluated vectorised with numpy and
differentiated symbolically, giving exact partial derivatives d/dx, d/dy, d/dz.
"""

from __future__ import annotations

import ast
import keyword
import math
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

from specmap.errors import ExpressionError

__all__ = ["Expr", "compile_expr", "CompiledMap", "compile_map"]

MAX_LENGTH = 2000
"""Longest accepted expression text, in characters."""

MAX_DEPTH = 100
"""Deepest accepted nesting of operations (levels of the syntax tree)."""

VARIABLES: tuple[str, ...] = ("x", "y", "z")
FUNCTIONS: tuple[str, ...] = ("sin", "cos", "tan", "exp", "log", "sqrt", "abs", "tanh")


def _log_or_zero(u: np.ndarray) -> np.ndarray:
    """``log(u)``, but 0 where ``u == 0`` (so that ``0**v * log(0)`` gives the limit 0)."""
    return np.where(u == 0, 0.0, np.log(u))


_NUMPY_FUNCS: dict[str, Callable[[np.ndarray], np.ndarray]] = {
    "sin": np.sin,
    "cos": np.cos,
    "tan": np.tan,
    "exp": np.exp,
    "log": np.log,
    "sqrt": np.sqrt,
    "abs": np.abs,
    "tanh": np.tanh,
    "sign": np.sign,  # internal only: the derivative of abs
    "logz": _log_or_zero,  # internal only: log u in d(u**v) = u**v log(u) v' when u is constant
}
_BINARY_OPS: dict[type[ast.operator], str] = {
    ast.Add: "+",
    ast.Sub: "-",
    ast.Mult: "*",
    ast.Div: "/",
    ast.Pow: "**",
}
_NUMPY_BINARY: dict[str, Callable[[np.ndarray, np.ndarray], np.ndarray]] = {
    "+": np.add,
    "-": np.subtract,
    "*": np.multiply,
    "/": np.divide,
    "**": np.power,
}
_OPERATOR_HINTS: dict[type[ast.AST], str] = {
    ast.BitXor: "use ** for powers (^ is not allowed)",
    ast.FloorDiv: "use / for division (// is not allowed)",
    ast.Mod: "% is not allowed; write the expression with + - * / ** and the listed functions",
    ast.MatMult: "@ is not allowed; write the expression with + - * / ** and the listed functions",
}
_GENERAL_FIX = (
    "use numbers, x, y, z, declared constants, + - * / **, parentheses and the functions "
    + " ".join(FUNCTIONS)
)
_NAME_FIX = "use x, y, z, a declared constant, or one of " + " ".join(FUNCTIONS)


# --------------------------------------------------------------------------- tree nodes


@dataclass(frozen=True)
class Const:
    """A float constant."""

    value: float


@dataclass(frozen=True)
class Var:
    """One of the variables ``x``, ``y``, ``z``."""

    name: str


@dataclass(frozen=True)
class Unary:
    """Negation ``-operand`` (unary ``+`` is dropped while parsing)."""

    op: str
    operand: Node


@dataclass(frozen=True)
class Binary:
    """``left op right`` with ``op`` one of ``+ - * / **``."""

    op: str
    left: Node
    right: Node


@dataclass(frozen=True)
class Call:
    """``func(arg)`` with ``func`` a whitelisted function (or the internal ``sign`` / ``logz``)."""

    func: str
    arg: Node


Node = Const | Var | Unary | Binary | Call


# --------------------------------------------------------------------------- evaluation


def _evaluate(node: Node, env: Mapping[str, np.ndarray], memo: dict[int, np.ndarray]) -> np.ndarray:
    """Evaluate a tree without recursion; ``memo`` maps ``id(node)`` to its value.

    Derivative trees share subtrees with each other and with the expression, so one memo
    used across several trees evaluates every shared subtree once.
    """
    stack: list[Node] = [node]
    while stack:
        top = stack[-1]
        if id(top) in memo:
            stack.pop()
            continue
        if isinstance(top, Const):
            memo[id(top)] = np.asarray(top.value, dtype=np.float64)
        elif isinstance(top, Var):
            memo[id(top)] = env[top.name]
        else:
            children = _children(top)
            pending = [c for c in children if id(c) not in memo]
            if pending:
                stack.extend(pending)
                continue
            if isinstance(top, Unary):
                memo[id(top)] = np.negative(memo[id(top.operand)])
            elif isinstance(top, Binary):
                memo[id(top)] = _NUMPY_BINARY[top.op](memo[id(top.left)], memo[id(top.right)])
            else:
                memo[id(top)] = _NUMPY_FUNCS[top.func](memo[id(top.arg)])
        stack.pop()
    return memo[id(node)]


def _children(node: Node) -> tuple[Node, ...]:
    if isinstance(node, Unary):
        return (node.operand,)
    if isinstance(node, Binary):
        return (node.left, node.right)
    if isinstance(node, Call):
        return (node.arg,)
    return ()


def _fold(node: Node) -> float:
    """Value of a variable-free tree as a float (nan/inf allowed)."""
    with np.errstate(all="ignore"):
        return float(_evaluate(node, {}, {}))


# --------------------------------------------------------------------------- simplifying constructors


def _is_const(node: Node, value: float | None = None) -> bool:
    return isinstance(node, Const) and (value is None or node.value == value)


def _neg(a: Node) -> Node:
    if isinstance(a, Const):
        return Const(-a.value)
    if isinstance(a, Unary):
        return a.operand
    return Unary("-", a)


def _binary(op: str, a: Node, b: Node) -> Node:
    """Build ``a op b`` with constant folding and the identities 0*e, 1*e, e+0, e**1, ..."""
    if isinstance(a, Const) and isinstance(b, Const):
        return Const(_fold(Binary(op, a, b)))
    if op == "+":
        if _is_const(a, 0.0):
            return b
        if _is_const(b, 0.0):
            return a
    elif op == "-":
        if _is_const(b, 0.0):
            return a
        if _is_const(a, 0.0):
            return _neg(b)
    elif op == "*":
        if _is_const(a, 0.0) or _is_const(b, 0.0):
            return Const(0.0)
        if _is_const(a, 1.0):
            return b
        if _is_const(b, 1.0):
            return a
        if _is_const(a, -1.0):
            return _neg(b)
        if _is_const(b, -1.0):
            return _neg(a)
    elif op == "/":
        if _is_const(a, 0.0):
            return Const(0.0)
        if _is_const(b, 1.0):
            return a
    elif op == "**":
        if _is_const(b, 0.0):
            return Const(1.0)
        if _is_const(b, 1.0):
            return a
    return Binary(op, a, b)


def _call(func: str, a: Node) -> Node:
    if isinstance(a, Const):
        return Const(_fold(Call(func, a)))
    return Call(func, a)


# --------------------------------------------------------------------------- differentiation


def _derivative(node: Node, var: str) -> Node:
    """Exact partial derivative of ``node`` with respect to ``var``, lightly simplified."""
    if isinstance(node, Const):
        return Const(0.0)
    if isinstance(node, Var):
        return Const(1.0 if node.name == var else 0.0)
    if isinstance(node, Unary):
        return _neg(_derivative(node.operand, var))
    if isinstance(node, Binary):
        u, v = node.left, node.right
        du, dv = _derivative(u, var), _derivative(v, var)
        if node.op in ("+", "-"):
            return _binary(node.op, du, dv)
        if node.op == "*":
            return _binary("+", _binary("*", du, v), _binary("*", u, dv))
        if node.op == "/":
            if isinstance(v, Const):
                return _binary("/", du, v)
            numerator = _binary("-", _binary("*", du, v), _binary("*", u, dv))
            return _binary("/", numerator, _binary("**", v, Const(2.0)))
        # power: c*u**(c-1)*u' when the exponent does not depend on var, else u**v*(v' log u + v u'/u)
        if _is_const(dv, 0.0):
            return _binary("*", _binary("*", v, _binary("**", u, _binary("-", v, Const(1.0)))), du)
        if _is_const(du, 0.0):
            # where u == 0 and v > 0, u**v is identically 0, so its derivative is 0 (not 0 * -inf)
            return _binary("*", _binary("*", node, _call("logz", u)), dv)
        inner = _binary("+", _binary("*", dv, _call("log", u)), _binary("/", _binary("*", v, du), u))
        return _binary("*", node, inner)
    u = node.arg
    du = _derivative(u, var)
    if _is_const(du, 0.0):
        return Const(0.0)
    f = node.func
    if f == "sin":
        return _binary("*", _call("cos", u), du)
    if f == "cos":
        return _binary("*", _neg(_call("sin", u)), du)
    if f == "tan":
        return _binary("/", du, _binary("**", _call("cos", u), Const(2.0)))
    if f == "exp":
        return _binary("*", node, du)
    if f == "log":
        return _binary("/", du, u)
    if f == "sqrt":
        return _binary("/", du, _binary("*", Const(2.0), node))
    if f == "abs":
        return _binary("*", _call("sign", u), du)
    if f == "tanh":
        return _binary("*", du, _binary("-", Const(1.0), _binary("**", node, Const(2.0))))
    if f == "logz":
        return _binary("/", du, u)
    return Const(0.0)  # sign: zero almost everywhere


# --------------------------------------------------------------------------- parsing


def _shown(text: str) -> str:
    return text if len(text) <= 80 else text[:77] + "..."


class _Converter:
    """Turn a whitelisted :mod:`ast` tree into :data:`Node` objects, rejecting everything else."""

    def __init__(
        self, text: str, constants: Mapping[str, float], file: str | None, field: str | None
    ) -> None:
        self.text = text
        self.constants = constants
        self.file = file
        self.field = field

    def error(self, problem: str, fix: str = _GENERAL_FIX) -> ExpressionError:
        return ExpressionError(
            f"{problem} in expression '{_shown(self.text)}'", file=self.file, field=self.field, fix=fix
        )

    def convert(self, node: ast.AST) -> Node:
        if isinstance(node, ast.Constant):
            value = node.value
            if isinstance(value, bool) or not isinstance(value, int | float):
                raise self.error(f"literal {value!r:.40} is not a real number")
            try:
                number = float(value)
            except OverflowError:
                raise self.error("number literal is too large", "write numbers below about 1e308") from None
            if not math.isfinite(number):
                raise self.error("number literal is too large", "write numbers below about 1e308")
            return Const(number)
        if isinstance(node, ast.Name):
            if node.id in VARIABLES:
                return Var(node.id)
            if node.id in self.constants:
                return Const(float(self.constants[node.id]))
            if node.id in FUNCTIONS:
                raise self.error(f"function '{node.id}' is used without an argument", f"write {node.id}(...)")
            raise self.error(f"unknown name '{node.id:.40}'", _NAME_FIX)
        if isinstance(node, ast.UnaryOp):
            if isinstance(node.op, ast.USub):
                return _folded(Unary("-", self.convert(node.operand)))
            if isinstance(node.op, ast.UAdd):
                return self.convert(node.operand)
            raise self.error(f"unary operator {type(node.op).__name__} is not allowed", "use unary + or -")
        if isinstance(node, ast.BinOp):
            op = _BINARY_OPS.get(type(node.op))
            if op is None:
                hint = _OPERATOR_HINTS.get(type(node.op), "use only + - * / **")
                raise self.error(f"operator {type(node.op).__name__} is not allowed", hint)
            return _folded(Binary(op, self.convert(node.left), self.convert(node.right)))
        if isinstance(node, ast.Call):
            return self.convert_call(node)
        kind = type(node).__name__
        if isinstance(node, ast.Compare | ast.BoolOp):
            raise self.error(f"comparisons and boolean operators ({kind}) are not allowed")
        raise self.error(f"{kind} syntax is not allowed")

    def convert_call(self, node: ast.Call) -> Node:
        if not isinstance(node.func, ast.Name):
            raise self.error("only direct calls of the listed functions are allowed", _NAME_FIX)
        name = node.func.id
        if name not in FUNCTIONS:
            raise self.error(f"call of unknown function '{name:.40}'", "call only " + " ".join(FUNCTIONS))
        if node.keywords or len(node.args) != 1 or isinstance(node.args[0], ast.Starred):
            raise self.error(
                f"'{name}' must be called with exactly one positional argument", f"write {name}(<expression>)"
            )
        return _folded(Call(name, self.convert(node.args[0])))


def _folded(node: Node) -> Node:
    """Replace a node whose operands are all constants by its value.

    Only constant folding is applied to user expressions (it evaluates exactly as numpy
    would); identities such as ``0*e = 0`` are kept for derivatives, where they cannot hide a
    nan of the value itself.
    """
    if all(isinstance(c, Const) for c in _children(node)):
        return Const(_fold(node))
    return node


_SYNTAX_LEAVES = (ast.expr_context, ast.operator, ast.unaryop, ast.boolop, ast.cmpop)


def _syntax_depth(root: ast.AST) -> int:
    """Depth of an :mod:`ast` tree, computed without recursion."""
    deepest = 0
    stack: list[tuple[ast.AST, int]] = [(root, 1)]
    while stack:
        node, depth = stack.pop()
        deepest = max(deepest, depth)
        stack.extend(
            (child, depth + 1)
            for child in ast.iter_child_nodes(node)
            if not isinstance(child, _SYNTAX_LEAVES)  # operator and Load markers are not levels
        )
    return deepest


def _check_constants(
    constants: Mapping[str, float] | None, file: str | None, field: str | None
) -> dict[str, float]:
    if constants is None:
        return {}
    if not isinstance(constants, Mapping):
        raise ExpressionError(
            f"constants must be a table of names to numbers, got {type(constants).__name__}",
            file=file,
            field=field,
            fix="give constants as name = number pairs",
        )
    checked: dict[str, float] = {}
    for name, value in constants.items():
        if not isinstance(name, str) or not name.isidentifier() or keyword.iskeyword(name) or name[0] == "_":
            raise ExpressionError(
                f"constant name {name!r:.40} is not a plain identifier",
                file=file,
                field=field,
                fix="name constants with letters, digits and _, starting with a letter",
            )
        if name in VARIABLES or name in FUNCTIONS or name in ("sign", "logz"):
            raise ExpressionError(
                f"constant '{name}' shadows a variable or function",
                file=file,
                field=field,
                fix="rename the constant; x, y, z and " + " ".join(FUNCTIONS) + " are reserved",
            )
        if isinstance(value, bool | np.bool_) or not isinstance(
            value, int | float | np.integer | np.floating
        ):
            raise ExpressionError(
                f"constant '{name}' is not a number (got {value!r:.40})",
                file=file,
                field=field,
                fix=f"give '{name}' a finite real value",
            )
        number = float(value)
        if not math.isfinite(number):
            raise ExpressionError(
                f"constant '{name}' is not finite ({number})",
                file=file,
                field=field,
                fix=f"give '{name}' a finite real value",
            )
        checked[name] = number
    return checked


def _parse(text: str, constants: Mapping[str, float], file: str | None, field: str | None) -> Node:
    if not isinstance(text, str):
        raise ExpressionError(
            f"expression must be text, got {type(text).__name__}",
            file=file,
            field=field,
            fix='write the expression as a quoted string, e.g. "x + y"',
        )
    if len(text) > MAX_LENGTH:
        raise ExpressionError(
            f"expression is {len(text)} characters long (limit {MAX_LENGTH})",
            file=file,
            field=field,
            fix="shorten the expression, e.g. by declaring constants",
        )
    if "#" in text:
        raise ExpressionError(
            f"'#' is not allowed in expression '{_shown(text)}' (it would drop the rest of the text)",
            file=file,
            field=field,
            fix="remove the '#' and anything meant as a comment; " + _GENERAL_FIX,
        )
    source = text.strip()
    if not source:
        raise ExpressionError(
            "expression is empty", file=file, field=field, fix="write an expression in x, y, z"
        )
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            tree = ast.parse(source, mode="eval")
    except (SyntaxError, ValueError) as exc:
        msg = exc.msg if isinstance(exc, SyntaxError) else str(exc)
        raise ExpressionError(
            f"invalid syntax ({msg:.80}) in expression '{_shown(text)}'",
            file=file,
            field=field,
            fix=_GENERAL_FIX,
        ) from None
    except (RecursionError, MemoryError, OverflowError):
        raise ExpressionError(
            f"expression '{_shown(text)}' is nested too deeply",
            file=file,
            field=field,
            fix=f"use at most {MAX_DEPTH} levels of nesting",
        ) from None
    if _syntax_depth(tree.body) > MAX_DEPTH:
        raise ExpressionError(
            f"expression '{_shown(text)}' is nested too deeply (more than {MAX_DEPTH} levels)",
            file=file,
            field=field,
            fix="simplify the expression or split constant parts into declared constants",
        )
    return _Converter(text, constants, file, field).convert(tree.body)


# --------------------------------------------------------------------------- public API


def _inputs(x: object, y: object, z: object) -> tuple[dict[str, np.ndarray], tuple[int, ...]]:
    xs, ys, zs = (np.asarray(v, dtype=np.float64) for v in (x, y, z))
    shape = np.broadcast_shapes(xs.shape, ys.shape, zs.shape)
    return {"x": xs, "y": ys, "z": zs}, shape


@dataclass(frozen=True)
class Expr:
    """A compiled expression in x, y, z with exact symbolic partial derivatives.

    Build it with :func:`compile_expr`, not directly.

    Attributes
    ----------
    text : str
        The source text as the user wrote it.
    """

    text: str
    _tree: Node = field(repr=False)
    _grad: tuple[Node, Node, Node] = field(repr=False, compare=False)

    def __call__(self, x: object, y: object, z: object) -> np.ndarray:
        """Evaluate at points given by broadcastable arrays.

        Parameters
        ----------
        x, y, z : array_like
            Coordinates; any shapes that broadcast together.

        Returns
        -------
        numpy.ndarray
            float64 values of the broadcast shape; nan or inf where out of domain.
        """
        env, shape = _inputs(x, y, z)
        with np.errstate(all="ignore"):
            value = _evaluate(self._tree, env, {})
        return np.array(np.broadcast_to(value, shape), dtype=np.float64)

    def grad(self, x: object, y: object, z: object) -> np.ndarray:
        """Evaluate the exact gradient (d/dx, d/dy, d/dz).

        Parameters
        ----------
        x, y, z : array_like
            Coordinates; any shapes that broadcast together.

        Returns
        -------
        numpy.ndarray
            float64 array of shape ``(3, *broadcast_shape)``.
        """
        env, shape = _inputs(x, y, z)
        out = np.empty((3, *shape), dtype=np.float64)
        memo: dict[int, np.ndarray] = {}
        with np.errstate(all="ignore"):
            for k, tree in enumerate(self._grad):
                out[k] = np.broadcast_to(_evaluate(tree, env, memo), shape)
        return out

    def is_linear(self) -> bool:
        """Whether the expression is affine in x, y, z.

        True when every simplified partial derivative is a finite constant tree (so all
        second derivatives vanish symbolically) and the value at the origin is finite.
        Affine expressions that only simplify to constants through cancellation (``x*x - x*x``)
        are reported as not linear.
        """
        if not all(isinstance(g, Const) and math.isfinite(g.value) for g in self._grad):
            return False
        return bool(np.isfinite(self(0.0, 0.0, 0.0)))

    def linear_coefficients(self) -> tuple[np.ndarray, float]:
        """Gradient vector and constant term of an affine expression.

        Returns
        -------
        coefficients : numpy.ndarray
            Shape (3,): the constant partial derivatives.
        offset : float
            The value at the origin.

        Raises
        ------
        ValueError
            If :meth:`is_linear` is false.
        """
        if not self.is_linear():
            raise ValueError(f"expression '{_shown(self.text)}' is not affine in x, y, z")
        coefficients = np.array([g.value for g in self._grad if isinstance(g, Const)], dtype=np.float64)
        return coefficients, float(self(0.0, 0.0, 0.0))


def compile_expr(
    text: str,
    constants: dict[str, float] | None = None,
    *,
    file: str | None = None,
    field: str | None = None,
) -> Expr:
    """Compile user text into an :class:`Expr`.

    Parameters
    ----------
    text : str
        The expression, at most 2000 characters, e.g. ``"sin(x)*y**2 + exp(z/3)"``.
    constants : dict of str to float, optional
        Extra names usable in the text. Values must be finite; names must not be x, y, z or a
        function name.
    file, field : str, optional
        Where the text came from; copied into any :class:`~specmap.errors.ExpressionError`.

    Returns
    -------
    Expr

    Raises
    ------
    ExpressionError
        For anything outside the whitelist, bad constants, text over 2000 characters or
        nesting deeper than 100 levels.

    Examples
    --------
    >>> e = compile_expr("a*x - y/3 + 1", {"a": 2.0})
    >>> float(e(1.0, 3.0, 0.0))
    2.0
    >>> e.linear_coefficients()[0].tolist()
    [2.0, -0.3333333333333333, 0.0]
    """
    checked = _check_constants(constants, file, field)
    tree = _parse(text, checked, file, field)
    grad = (_derivative(tree, "x"), _derivative(tree, "y"), _derivative(tree, "z"))
    return Expr(text, tree, grad)


@dataclass(frozen=True)
class CompiledMap:
    """The map ``f = (f1, f2)`` from R^3 to R^2 given by two expressions."""

    exprs: tuple[Expr, Expr]

    def values(self, P: np.ndarray) -> np.ndarray:
        """Map points ``P`` of shape (n, 3) to values of shape (n, 2)."""
        pts = _points(P)
        return np.stack([e(pts[:, 0], pts[:, 1], pts[:, 2]) for e in self.exprs], axis=1)

    def jacobian(self, P: np.ndarray) -> np.ndarray:
        """Jacobian matrices, shape (n, 2, 3): ``J[i, j, k] = d f_j / d p_k`` at ``P[i]``."""
        pts = _points(P)
        grads = [e.grad(pts[:, 0], pts[:, 1], pts[:, 2]) for e in self.exprs]  # each (3, n)
        return np.stack(grads, axis=0).transpose(2, 0, 1).copy()

    def is_linear(self) -> bool:
        """Whether both components are affine in x, y, z."""
        return all(e.is_linear() for e in self.exprs)

    def matrix(self) -> np.ndarray:
        """The (2, 3) matrix ``L`` of an affine map ``f(p) = L p + offset()``.

        Raises
        ------
        ValueError
            If the map is not affine.
        """
        return np.stack([e.linear_coefficients()[0] for e in self.exprs])

    def offset(self) -> np.ndarray:
        """The (2,) constant term of an affine map (ValueError otherwise)."""
        return np.array([e.linear_coefficients()[1] for e in self.exprs], dtype=np.float64)


# --------------------------------------------------------------------------- domain on a surface


def _guards(node: Node) -> list[tuple[str, Node]]:
    """Sub-expressions that must keep one strict sign on a connected surface for ``node`` to be finite.

    ``a / b`` and ``a ** c`` with ``c < 0`` need ``b`` (``a``) != 0; ``tan(u)`` needs ``cos(u)`` != 0;
    ``log(u)`` needs ``u > 0``; ``sqrt(u)`` needs ``u >= 0`` (a sign change of ``u`` along an edge
    means ``u < 0`` somewhere on it).
    """
    out: list[tuple[str, Node]] = []
    stack: list[Node] = [node]
    seen: set[int] = set()
    while stack:
        top = stack.pop()
        if id(top) in seen:
            continue
        seen.add(id(top))
        if isinstance(top, Binary):
            if top.op == "/":
                out.append(("a division by an expression that vanishes", top.right))
            elif top.op == "**" and isinstance(top.right, Const) and top.right.value < 0:
                out.append(("a negative power of an expression that vanishes", top.left))
        elif isinstance(top, Call):
            if top.func == "tan":
                out.append(("tan at an odd multiple of pi/2", Call("cos", top.arg)))
            elif top.func == "log":
                out.append(("log of an expression that reaches 0", top.arg))
            elif top.func == "sqrt":
                out.append(("sqrt of an expression that turns negative", top.arg))
        stack.extend(_children(top))
    return out


def domain_break(expr: Expr, P: np.ndarray, edges: np.ndarray) -> tuple[str, np.ndarray] | None:
    """Where ``expr`` is certainly not finite on a surface sampled by a mesh, or None.

    Vertex values alone miss a pole between vertices (``1/x`` on a sphere whose vertices avoid
    x = 0). Every guard of :func:`_guards` is continuous where defined, so when it takes values of
    opposite signs (or 0) at the two ends of a mesh edge it vanishes on the surface near that edge
    (intermediate value theorem): the map has a pole or leaves its domain there.
    A guard that only touches 0 without changing sign between two vertices (``log(x + 1)`` on
    the unit sphere, zero at one point) is not seen: the check is certain when it fires, not
    complete; :mod:`specmap.shapes.steep` then finds its unbounded gradient.

    Parameters
    ----------
    expr : Expr
    P : ndarray (n, 3)
        Mesh vertices on the surface.
    edges : ndarray (E, 2) of int
        Mesh edges (vertex index pairs).

    Returns
    -------
    (what, point) or None
        A description of the singularity and the midpoint (3,) of the first edge where it lies.

    Examples
    --------
    >>> P = np.array([[-1.0, 0, 0], [1.0, 0, 0]])
    >>> domain_break(compile_expr("1/x"), P, np.array([[0, 1]]))[0]
    'a division by an expression that vanishes'
    >>> domain_break(compile_expr("1/(x*x + 1)"), P, np.array([[0, 1]])) is None
    True
    """
    pts = _points(P)
    env, _ = _inputs(pts[:, 0], pts[:, 1], pts[:, 2])
    e = np.asarray(edges, dtype=np.int64).reshape(-1, 2)
    for what, guard in _guards(expr._tree):
        with np.errstate(all="ignore"):
            g = np.broadcast_to(_evaluate(guard, env, {}), (len(pts),))
        bad = (
            ~np.isfinite(g[e[:, 0]])
            | ~np.isfinite(g[e[:, 1]])
            | (np.sign(g[e[:, 0]]) * np.sign(g[e[:, 1]]) <= 0)
        )
        if what.startswith("sqrt"):  # sqrt(0) is finite: only a strict sign change leaves the domain
            bad = (np.sign(g[e[:, 0]]) * np.sign(g[e[:, 1]]) < 0) | ~np.isfinite(g[e[:, 0]] + g[e[:, 1]])
        hit = np.nonzero(bad)[0]
        if hit.size:
            k = int(hit[0])
            return what, 0.5 * (pts[e[k, 0]] + pts[e[k, 1]])
    return None


def _points(P: np.ndarray) -> np.ndarray:
    pts = np.asarray(P, dtype=np.float64)
    if pts.ndim != 2 or pts.shape[1] != 3:
        raise ValueError(f"points must have shape (n, 3), got {pts.shape}")
    return pts


def compile_map(
    texts: Sequence[str],
    constants: dict[str, float] | None = None,
    *,
    file: str | None = None,
    field: str | None = None,
) -> CompiledMap:
    """Compile the two component expressions of a map ``f = (f1, f2)``.

    Parameters
    ----------
    texts : list of str
        Exactly two expressions in x, y, z.
    constants : dict of str to float, optional
        Names shared by both expressions (see :func:`compile_expr`).
    file, field : str, optional
        Where the texts came from; errors name ``field[0]`` or ``field[1]``.

    Returns
    -------
    CompiledMap

    Raises
    ------
    ExpressionError
        If ``texts`` is not a list of exactly two expressions or either fails to compile.

    Examples
    --------
    >>> f = compile_map(["x", "2*y + z"])
    >>> f.matrix().tolist()
    [[1.0, 0.0, 0.0], [0.0, 2.0, 1.0]]
    """
    if isinstance(texts, str) or not isinstance(texts, Sequence) or len(texts) != 2:
        got = (
            f"{len(texts)} items"
            if isinstance(texts, Sequence) and not isinstance(texts, str)
            else type(texts).__name__
        )
        raise ExpressionError(
            f"a map needs exactly two expressions, got {got}",
            file=file,
            field=field,
            fix='give a list of two expressions, e.g. ["x", "y"]',
        )
    exprs = tuple(
        compile_expr(t, constants, file=file, field=f"{field}[{i}]" if field else None)
        for i, t in enumerate(texts)
    )
    return CompiledMap((exprs[0], exprs[1]))
