"""Linear inequality constraints on the factor region, written in natural units.

``"A + 2*B <= 1.5"``, ``"Oven - 10*Dwell >= 60"``; names that are not identifiers go in
backticks. ``<`` and ``>`` are read as ``<=`` and ``>=`` (a region boundary has no width).
One parser serves the optimal-design search and the desirability optimiser.
"""

from __future__ import annotations

import ast
import re

import numpy as np

from .._errors import LevelwiseError, describe

_QUOTED = re.compile(r"`([^`]*)`")
_RELATION = re.compile(r"<=|>=|<|>")


def _linear_form(expr: str, names: list[str], text: str) -> tuple[np.ndarray, float]:
    """Coefficients and constant of a linear expression over *names* (backticks allowed)."""
    aliases = {}

    def swap(match):
        aliases[f"_q{len(aliases)}"] = match.group(1)
        return f" _q{len(aliases) - 1} "

    try:
        tree = ast.parse(_QUOTED.sub(swap, expr).strip(), mode="eval").body
    except SyntaxError:
        raise LevelwiseError(f"The constraint {text!r} could not be read as a linear expression.") from None
    k = len(names)

    def visit(node):
        if isinstance(node, ast.Constant) and isinstance(node.value, (int, float)) and not isinstance(node.value, bool):
            return np.zeros(k), float(node.value)
        if isinstance(node, ast.Name):
            name = aliases.get(node.id, node.id)
            if name not in names:
                raise LevelwiseError(
                    f"The constraint {text!r} names {name!r}, which is not a factor. Known factors: {names}."
                )
            coef = np.zeros(k)
            coef[names.index(name)] = 1.0
            return coef, 0.0
        if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
            a, c = visit(node.operand)
            return (-a, -c) if isinstance(node.op, ast.USub) else (a, c)
        if isinstance(node, ast.BinOp) and isinstance(node.op, (ast.Add, ast.Sub)):
            (a1, c1), (a2, c2) = visit(node.left), visit(node.right)
            sign = 1.0 if isinstance(node.op, ast.Add) else -1.0
            return a1 + sign * a2, c1 + sign * c2
        if isinstance(node, ast.BinOp) and isinstance(node.op, (ast.Mult, ast.Div)):
            (a1, c1), (a2, c2) = visit(node.left), visit(node.right)
            if isinstance(node.op, ast.Div):
                if a2.any() or c2 == 0:
                    raise LevelwiseError(f"The constraint {text!r} divides by a factor or by zero; it must be linear.")
                return a1 / c2, c1 / c2
            if a1.any() and a2.any():
                raise LevelwiseError(f"The constraint {text!r} multiplies factors together; it must be linear.")
            return (a1 * c2 + a2 * c1), c1 * c2
        raise LevelwiseError(
            f"The constraint {text!r} must be linear in the factors, e.g. 'A + 2*B <= 1.5'. "
            f"Got the part {ast.unparse(node)!r}."
        )

    return visit(tree)


def parse_constraint(text: str, names) -> tuple[np.ndarray, float]:
    """Parse ``"A + B <= 1.5"`` (or ``>=``) into (a, b) meaning a . x <= b in natural units.

    Examples
    --------
    >>> a, b = parse_constraint("A + 2*B >= 1", ["A", "B"])
    >>> a.tolist(), b
    ([-1.0, -2.0], -1.0)
    """
    names = list(names)
    if not isinstance(text, str) or len(_RELATION.findall(text)) != 1:
        raise LevelwiseError(
            "A constraint must be a string with exactly one '<=' or '>=', e.g. 'A + B <= 1.5'. "
            f"Got {describe(text)} instead."
        )
    op = _RELATION.search(text).group(0)
    left, right = text.split(op)
    a1, c1 = _linear_form(left, names, text)
    a2, c2 = _linear_form(right, names, text)
    a, b = a1 - a2, c2 - c1  # a . x <= b
    if not a.any():
        raise LevelwiseError(f"The constraint {text!r} names no factor.")
    return (a, b) if op in ("<=", "<") else (-a, -b)


__all__ = ["parse_constraint"]
