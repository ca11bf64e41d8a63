"""Safe arithmetic for derived values (``{derive: "max(model.hidden.lmax, 2)"}``).

Expressions are parsed with :mod:`ast` and evaluated by walking a short list of allowed
nodes; nothing is ever passed to ``eval``.  Names are dotted key paths of the config.
"""
from __future__ import annotations

import ast
import math
import operator

__all__ = ["Expression", "DeriveError"]

_BINARY = {ast.Add: operator.add, ast.Sub: operator.sub, ast.Mult: operator.mul,
           ast.Div: operator.truediv, ast.FloorDiv: operator.floordiv, ast.Pow: operator.pow,
           ast.Mod: operator.mod}
_UNARY = {ast.USub: operator.neg, ast.UAdd: operator.pos}
_CALLS = {"min": min, "max": max, "round": round, "int": int, "abs": abs}
_MAX_POWER = 64  # keeps 10**10**10-style inputs from hanging the checker


class DeriveError(ValueError):
    """A derived expression that cannot be parsed or evaluated."""


def _dotted(node) -> str | None:
    if isinstance(node, ast.Name):
        return node.id
    if isinstance(node, ast.Attribute):
        head = _dotted(node.value)
        return None if head is None else f"{head}.{node.attr}"
    return None


class Expression:
    """A parsed derived expression.

    Example:
        >>> Expression("max(model.hidden.lmax, 2) + 1").evaluate({"model.hidden.lmax": 3})
        4
    """

    def __init__(self, text: str):
        if not isinstance(text, str) or not text.strip():
            raise DeriveError("derive needs a non-empty expression")
        self.text = text
        try:
            self._tree = ast.parse(text.strip(), mode="eval").body
        except SyntaxError as exc:
            raise DeriveError(f"syntax error at character {exc.offset or 0}: {exc.msg}") from None
        self.names: list[str] = []
        self._scan(self._tree)

    def _scan(self, node):
        name = _dotted(node)
        if name is not None:
            if name in _CALLS:
                raise DeriveError(f"{name!r} is a function; call it as {name}(...)")
            if name not in self.names:
                self.names.append(name)
        elif isinstance(node, ast.Constant):
            if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
                raise DeriveError(f"only numbers may be written, got {node.value!r}")
        elif isinstance(node, ast.BinOp) and type(node.op) in _BINARY:
            self._scan(node.left)
            self._scan(node.right)
        elif isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
            self._scan(node.operand)
        elif isinstance(node, ast.Call) and isinstance(node.func, ast.Name) \
                and node.func.id in _CALLS and not node.keywords and node.args:
            for arg in node.args:
                self._scan(arg)
        else:
            raise DeriveError(f"{ast.unparse(node)!r} is not allowed; use numbers, dotted key "
                              "paths, + - * / // ** %, and min max round int abs")

    def evaluate(self, env: dict):
        """Evaluate with ``env`` mapping each dotted name to a number."""
        return self._eval(self._tree, env)

    def _eval(self, node, env):
        name = _dotted(node)
        if name is not None:
            value = env[name]
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise DeriveError(f"{name} is {value!r}, not a number")
            return value
        if isinstance(node, ast.Constant):
            return node.value
        if isinstance(node, ast.UnaryOp):
            return _UNARY[type(node.op)](self._eval(node.operand, env))
        if isinstance(node, ast.Call):
            args = [self._eval(a, env) for a in node.args]
            return _CALLS[node.func.id](*args)
        left, right = self._eval(node.left, env), self._eval(node.right, env)
        if isinstance(node.op, ast.Pow) and (abs(right) > _MAX_POWER or abs(left) > 1e6):
            raise DeriveError(f"power {left!r} ** {right!r} is too large")
        try:
            result = _BINARY[type(node.op)](left, right)
        except ZeroDivisionError:
            raise DeriveError(f"division by zero in {ast.unparse(node)!r}") from None
        if isinstance(result, complex) or (isinstance(result, float) and not math.isfinite(result)):
            raise DeriveError(f"{ast.unparse(node)!r} gives {result!r}, not a finite number")
        return result
