"""A small, safe evaluator for field formulas in x, y, z (temperature fields and the like).

The text is parsed with :mod:`ast` and only a whitelist of node kinds is accepted: numbers, the
names ``x``, ``y``, ``z``, ``pi``, ``e``, arithmetic (``+ - * / % **``; ``^`` also means power, as
engineers write it), comparisons (giving 1.0 or 0.0) and calls of the functions in
:data:`FUNCTIONS`. Nothing is ever passed to Python's ``eval``: the accepted tree is turned into a
closure over numpy functions, evaluated on whole arrays of coordinates at once.
"""
from __future__ import annotations

import ast
import operator
from typing import Callable

import numpy as np

#: Functions a formula may call, by name.
FUNCTIONS: dict[str, Callable] = {
    "sin": np.sin, "cos": np.cos, "tan": np.tan, "asin": np.arcsin, "acos": np.arccos,
    "atan": np.arctan, "atan2": np.arctan2, "sinh": np.sinh, "cosh": np.cosh, "tanh": np.tanh,
    "exp": np.exp, "log": np.log, "log10": np.log10, "sqrt": np.sqrt, "abs": np.abs,
    "hypot": np.hypot, "floor": np.floor, "ceil": np.ceil, "min": np.minimum, "max": np.maximum,
    "where": np.where,
}
#: Number of arguments of each function.
ARITY = {name: 1 for name in FUNCTIONS} | {"atan2": 2, "hypot": 2, "min": 2, "max": 2, "where": 3}
CONSTANTS = {"pi": np.pi, "e": np.e}
VARIABLES = ("x", "y", "z")
MAX_LENGTH = 2000
MAX_NODES = 500

_BINOPS = {ast.Add: operator.add, ast.Sub: operator.sub, ast.Mult: operator.mul,
           ast.Div: operator.truediv, ast.Mod: np.mod, ast.Pow: np.power}
_UNARY = {ast.UAdd: operator.pos, ast.USub: operator.neg}
_COMPARE = {ast.Lt: np.less, ast.LtE: np.less_equal, ast.Gt: np.greater, ast.GtE: np.greater_equal}


class FormulaError(ValueError):
    """A formula that cannot be accepted; the message says why."""


def _compile(node: ast.AST) -> Callable[[dict], np.ndarray]:
    if isinstance(node, ast.Expression):
        return _compile(node.body)
    if isinstance(node, ast.Constant):
        if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
            raise FormulaError(f"only numbers are allowed as constants, not {node.value!r}")
        try:
            v = float(node.value)
        except OverflowError:
            raise FormulaError(f"the number {str(node.value)[:20]}... ({len(str(node.value))} digits) is too "
                               "large for a floating-point value") from None
        return lambda env: v
    if isinstance(node, ast.Name):
        if node.id in VARIABLES:
            name = node.id
            return lambda env: env[name]
        if node.id in CONSTANTS:
            v = CONSTANTS[node.id]
            return lambda env: v
        raise FormulaError(f"unknown name {node.id!r}; use x, y, z, pi, e and the functions "
                           f"{', '.join(FUNCTIONS)}")
    if isinstance(node, ast.BinOp):
        op = _BINOPS.get(type(node.op))
        if op is None:
            raise FormulaError(f"operator {type(node.op).__name__} is not allowed")
        a, b = _compile(node.left), _compile(node.right)
        return lambda env: op(a(env), b(env))
    if isinstance(node, ast.UnaryOp):
        op = _UNARY.get(type(node.op))
        if op is None:
            raise FormulaError(f"operator {type(node.op).__name__} is not allowed")
        a = _compile(node.operand)
        return lambda env: op(a(env))
    if isinstance(node, ast.Compare):
        if len(node.ops) != 1:
            raise FormulaError("chained comparisons are not allowed; combine two with where()")
        op = _COMPARE.get(type(node.ops[0]))
        if op is None:
            raise FormulaError(f"comparison {type(node.ops[0]).__name__} is not allowed (use <, <=, >, >=)")
        a, b = _compile(node.left), _compile(node.comparators[0])
        return lambda env: op(a(env), b(env)).astype(float)
    if isinstance(node, ast.Call):
        if not isinstance(node.func, ast.Name) or node.func.id not in FUNCTIONS:
            shown = node.func.id if isinstance(node.func, ast.Name) else type(node.func).__name__
            raise FormulaError(f"function {shown!r} is not allowed; allowed: {', '.join(FUNCTIONS)}")
        if node.keywords:
            raise FormulaError("keyword arguments are not allowed")
        name = node.func.id
        if len(node.args) != ARITY[name]:
            raise FormulaError(f"{name}() takes {ARITY[name]} argument(s), not {len(node.args)}")
        fn = FUNCTIONS[name]
        args = [_compile(a) for a in node.args]
        return lambda env: fn(*(a(env) for a in args))
    raise FormulaError(f"{type(node).__name__} is not allowed in a formula")


def parse_formula(text: str) -> Callable[[np.ndarray], np.ndarray]:
    """Check ``text`` and return ``f(points (p, 3)) -> values (p,)``.

    Raises
    ------
    FormulaError
        For syntax errors and anything outside the whitelist.
    """
    if not isinstance(text, str) or not text.strip():
        raise FormulaError("must be a non-empty formula such as \"20 + 0.1*x\"")
    if len(text) > MAX_LENGTH:
        raise FormulaError(f"is longer than {MAX_LENGTH} characters")
    try:
        # "^" means power; replaced in the text (not mapped from XOR in the tree) so that it keeps
        # the precedence of a power: x^2 + y^2 is (x**2) + (y**2).
        tree = ast.parse(text.strip().replace("^", "**"), mode="eval")
    except SyntaxError as err:
        raise FormulaError(f"is not a valid formula ({err.msg})") from None
    except (ValueError, RecursionError, MemoryError) as err:  # huge integer literals, deep nesting
        raise FormulaError(f"is not a valid formula ({type(err).__name__}: {str(err)[:80]})") from None
    if sum(1 for _ in ast.walk(tree)) > MAX_NODES:
        raise FormulaError(f"has more than {MAX_NODES} parts")
    fn = _compile(tree)

    def evaluate(points: np.ndarray) -> np.ndarray:
        p = np.asarray(points, dtype=float).reshape(-1, 3)
        env = {"x": p[:, 0], "y": p[:, 1], "z": p[:, 2]}
        with np.errstate(all="ignore"):
            out = np.broadcast_to(np.asarray(fn(env), dtype=float), (p.shape[0],)).copy()
        return out

    return evaluate
