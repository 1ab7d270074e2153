"""Safe arithmetic over named parameters, for every numeric field of a model.

Only numbers, parameter names, ``+ - * / **``, parentheses, ``pi`` and the
functions in ``FUNCTIONS`` are allowed; the expression is walked as a Python
syntax tree and never passed to ``eval``.
"""

from __future__ import annotations

import ast
import math
import operator
from collections.abc import Callable, Mapping

FUNCTIONS: dict[str, Callable[..., float]] = {
    "sqrt": math.sqrt, "sin": math.sin, "cos": math.cos, "tan": math.tan,
    "exp": math.exp, "log": math.log, "min": min, "max": max, "abs": abs,
}
CONSTANTS: dict[str, float] = {"pi": math.pi}

_BINARY: dict[type, Callable[[float, float], float]] = {
    ast.Add: operator.add, ast.Sub: operator.sub, ast.Mult: operator.mul,
    ast.Div: operator.truediv, ast.Pow: operator.pow,
}
_UNARY: dict[type, Callable[[float], float]] = {ast.UAdd: operator.pos, ast.USub: operator.neg}


class ExpressionError(ValueError):
    """An expression is malformed, uses something not allowed, or cannot be evaluated."""


def evaluate(text: str, names: Mapping[str, float]) -> float:
    """Evaluate an arithmetic expression over ``names``.

    Parameters
    ----------
    text
        The expression, e.g. ``"2*t_cu + 0.1"``.
    names
        Parameter values by name.

    Returns
    -------
    float
        The value; never NaN or infinite.

    Examples
    --------
    >>> evaluate("2 * w + sqrt(16)", {"w": 1.5})
    7.0
    """
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        raise ExpressionError(f"cannot read expression {text!r}: {exc.msg}") from None
    try:
        value = _walk(tree.body, names)
    except ExpressionError:
        raise
    except (ArithmeticError, ValueError, TypeError) as exc:
        raise ExpressionError(f"cannot evaluate {text!r}: {exc}") from None
    if isinstance(value, complex) or not math.isfinite(value):
        raise ExpressionError(f"expression {text!r} does not give a finite real number")
    return float(value)


def _walk(node: ast.AST, names: Mapping[str, float]) -> float:
    if isinstance(node, ast.Constant):
        if isinstance(node.value, bool) or not isinstance(node.value, int | float):
            raise ExpressionError(f"only numbers are allowed, not {node.value!r}")
        return node.value
    if isinstance(node, ast.Name):
        if node.id in names:
            return names[node.id]
        if node.id in CONSTANTS:
            return CONSTANTS[node.id]
        known = sorted({*names, *CONSTANTS})
        raise ExpressionError(
            f"unknown name {node.id!r} (known: {', '.join(known) if known else 'none'})")
    if isinstance(node, ast.BinOp) and type(node.op) in _BINARY:
        left, right = _walk(node.left, names), _walk(node.right, names)
        if isinstance(node.op, ast.Pow) and abs(right) > 1e4:
            raise ExpressionError("exponent too large")
        return _BINARY[type(node.op)](left, right)
    if isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
        return _UNARY[type(node.op)](_walk(node.operand, names))
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and not node.keywords:
        func = FUNCTIONS.get(node.func.id)
        if func is None:
            raise ExpressionError(
                f"unknown function {node.func.id!r} (allowed: {', '.join(sorted(FUNCTIONS))})")
        return func(*(_walk(arg, names) for arg in node.args))
    raise ExpressionError(f"not allowed in an expression: {ast.unparse(node)!r}")
