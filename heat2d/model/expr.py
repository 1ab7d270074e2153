"""Safe arithmetic over named parameters, for every numeric field of a model.

Only numbers, parameter names, ``+ - * / **``, parentheses, ``pi`` and the
functions in ``FUNCTIONS`` are allowed; the expression is walked as a Python
syntax tree and never passed to ``eval``. Size and value limits are checked before and
while walking (``MAX_LENGTH``, ``MAX_NODES``, ``MAX_DEPTH``, ``MAX_MAGNITUDE``): every
value is a float, so no power can build a huge integer, and an expression either
evaluates in microseconds or is refused.
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

MAX_LENGTH = 2000
"""Longest expression text, in characters (guard)."""
MAX_NODES = 500
"""Most syntax-tree nodes (numbers, names, operators, calls) in one expression (guard)."""
MAX_DEPTH = 50
"""Deepest nesting of the syntax tree (guard)."""
MAX_MAGNITUDE = 1e300
"""Largest magnitude of a number, literal or intermediate value (guard: stays well inside
the float range, so products of two in-range values are still finite)."""

_BINARY: dict[type, Callable[[float, float], float]] = {
    ast.Add: operator.add, ast.Sub: operator.sub, ast.Mult: operator.mul,
    ast.Div: lambda a, b: _divide(a, b), ast.Pow: operator.pow,
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
        The value; never NaN or infinite, and at most ``MAX_MAGNITUDE`` in size.

    Raises
    ------
    ExpressionError
        Malformed, not allowed, too long or too deep, or a value out of range.

    Examples
    --------
    >>> evaluate("2 * w + sqrt(16)", {"w": 1.5})
    7.0
    """
    if len(text) > MAX_LENGTH:
        raise ExpressionError(f"expression of {len(text)} characters is longer than the "
                              f"{MAX_LENGTH} allowed")
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        raise ExpressionError(f"cannot read expression {_short(text)}: {exc.msg}") from None
    except (RecursionError, MemoryError, ValueError):
        raise ExpressionError(f"cannot read expression {_short(text)}: nested too deeply"
                              ) from None
    _check_size(tree.body)
    try:
        value = _walk(tree.body, names)
    except ExpressionError:
        raise
    except (ArithmeticError, ValueError, TypeError) as exc:
        raise ExpressionError(f"cannot evaluate {_short(text)}: {exc}") from None
    return value


def _short(text: str) -> str:
    """The expression as quoted in messages, cut to one readable line."""
    return repr(text if len(text) <= 80 else text[:60] + " ... " + text[-15:])


def _check_size(root: ast.AST) -> None:
    """Count nodes and measure depth without recursion (the limits guard the walk)."""
    count, stack = 0, [(root, 1)]
    while stack:
        node, depth = stack.pop()
        count += 1
        if count > MAX_NODES:
            raise ExpressionError(f"expression has more than {MAX_NODES} terms and operators")
        if depth > MAX_DEPTH:
            raise ExpressionError(f"expression is nested more than {MAX_DEPTH} deep")
        stack += [(child, depth + 1) for child in ast.iter_child_nodes(node)
                  if not isinstance(child, ast.operator | ast.unaryop | ast.expr_context)]


def _finite(value: float, what: str) -> float:
    """``value`` as a float, refused when it is complex, non-finite or beyond MAX_MAGNITUDE."""
    if isinstance(value, complex):
        raise ExpressionError(f"{what} is not a real number")
    value = float(value)
    if not math.isfinite(value) or abs(value) > MAX_MAGNITUDE:
        raise ExpressionError(f"{what} is out of range (magnitude above {MAX_MAGNITUDE:g})")
    return value


def _divide(a: float, b: float) -> float:
    if b == 0:
        raise ZeroDivisionError("division by zero")
    return a / b


def _power(base: float, exponent: float) -> float:
    """base ** exponent, refused before computing when |result| would pass MAX_MAGNITUDE:
    log10|base^e| = e·log10|base|."""
    if base == 0.0:
        if exponent < 0:
            raise ExpressionError("0 to a negative power")
        return 0.0 if exponent > 0 else 1.0
    if exponent * math.log10(abs(base)) > math.log10(MAX_MAGNITUDE):
        raise ExpressionError(f"power {base:g} ** {exponent:g} is out of range (magnitude "
                              f"above {MAX_MAGNITUDE:g})")
    if base < 0 and exponent != int(exponent):
        raise ExpressionError(f"power {base:g} ** {exponent:g} is not a real number")
    return _finite(base ** exponent, "a power")


def _walk(node: ast.AST, names: Mapping[str, float]) -> float:
    if isinstance(node, ast.Constant):
        if isinstance(node.value, bool) or not isinstance(node.value, int | float):
            raise ExpressionError(f"only numbers are allowed, not {node.value!r}")
        if isinstance(node.value, int) and node.value.bit_length() > 1000:
            raise ExpressionError(f"number of {len(str(node.value))} digits is out of range "
                                  f"(magnitude above {MAX_MAGNITUDE:g})")
        return _finite(node.value, "a number")
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
        if isinstance(node.op, ast.Pow):
            return _power(left, right)
        return _finite(_BINARY[type(node.op)](left, right), "an intermediate value")
    if isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
        return _UNARY[type(node.op)](_walk(node.operand, names))
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and not node.keywords:
        func = FUNCTIONS.get(node.func.id)
        if func is None:
            raise ExpressionError(
                f"unknown function {node.func.id!r} (allowed: {', '.join(sorted(FUNCTIONS))})")
        return _finite(func(*(_walk(arg, names) for arg in node.args)),
                       f"{node.func.id}(...)")
    raise ExpressionError(f"not allowed in an expression: {_short(ast.unparse(node))}")
