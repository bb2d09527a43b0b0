"""Arithmetic formulas in case files: boundary values as expressions in x, y and named constants.

A formula is a string such as ``"4 * U_max * y * (H - y) / H**2"``. It is parsed with Python's
``ast`` module and evaluated by walking the tree over a whitelist: numbers, the names ``x``, ``y``
(the face-centre coordinates), ``pi`` and the case's ``[formula_constants]``, the operators
``+ - * / **`` and unary ``+ -``, parentheses, and the functions :data:`FUNCTIONS`. Nothing is
passed to ``eval`` or ``exec``; attribute access, indexing, comparisons, strings and every other
construct are refused with a message naming the file, the key, the offending token and what is
allowed. Evaluation is in float64 (no Python big integers), so ``10**10**10`` gives inf and is
reported as a non-finite value, not a hang.

>>> f = parse_formula("2 * a * y + sqrt(x)", {"a": 1.5}, "case.toml: boundary.inlet.velocity")
>>> f(np.array([4.0]), np.array([1.0])).tolist()
[5.0]
>>> parse_formula("x.real", {}, "here")  # doctest: +ELLIPSIS
Traceback (most recent call last):
...
fvrans.errors.CaseError: here: 'x.real' is not an allowed formula: attribute access ('.real') is not allowed; ...
"""

from __future__ import annotations

import ast
import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from fvrans.errors import CaseError

#: functions a formula may call, with their number of arguments (None: two or more)
FUNCTIONS: dict[str, tuple[Any, int | None]] = {
    "sqrt": (np.sqrt, 1),
    "exp": (np.exp, 1),
    "log": (np.log, 1),
    "sin": (np.sin, 1),
    "cos": (np.cos, 1),
    "tanh": (np.tanh, 1),
    "abs": (np.abs, 1),
    "min": (np.minimum, None),
    "max": (np.maximum, None),
}
#: names every formula knows
COORDINATES = ("x", "y")
BUILTIN_CONSTANTS = {"pi": math.pi}
#: reserved: a named constant may not take these names
RESERVED = frozenset(COORDINATES) | frozenset(BUILTIN_CONSTANTS) | frozenset(FUNCTIONS)
#: longest formula text accepted
MAX_LENGTH = 2000
#: deepest nesting of operations accepted
MAX_DEPTH = 200

_BINARY = {ast.Add: np.add, ast.Sub: np.subtract, ast.Mult: np.multiply, ast.Div: np.divide, ast.Pow: np.power}
_UNARY = {ast.UAdd: np.positive, ast.USub: np.negative}
_OP_TEXT = {
    ast.Mod: "%", ast.FloorDiv: "//", ast.BitXor: "^ (powers are written **)", ast.BitAnd: "&",
    ast.BitOr: "|", ast.LShift: "<<", ast.RShift: ">>", ast.MatMult: "@", ast.Not: "not", ast.Invert: "~",
}


def allowed_text(constants: Mapping[str, float] | None = None) -> str:
    """What a formula may contain (for error messages)."""
    names = "x, y, pi" + (", " + ", ".join(sorted(constants)) if constants else "") + (
        "" if constants else ", named constants")
    return (f"a formula may use numbers, {names}, + - * / ** (powers: **, not ^), parentheses and the "
            f"functions {', '.join(sorted(FUNCTIONS))}")


class Formula:
    """A parsed formula in x, y; calling it evaluates it at arrays of points (float64 arrays of
    the broadcast shape). ``text`` is the formula as written, ``constants`` the values of the named
    constants it was bound to. Two formulas are equal when text and constants are equal."""

    def __init__(self, text: str, tree: ast.Expression, constants: Mapping[str, float], where: str):
        self.text = text
        self._tree = tree
        self.constants = {k: float(v) for k, v in constants.items()}
        self.where = where

    def __repr__(self) -> str:
        return f"Formula({self.text!r})"

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, Formula):
            return NotImplemented
        used = self.names_used()
        return (self.text == other.text and used == other.names_used()
                and all(self.constants.get(n) == other.constants.get(n) for n in used))

    def __hash__(self) -> int:
        return hash(self.text)

    def names_used(self) -> set[str]:
        """The named constants the formula refers to."""
        return {n.id for n in ast.walk(self._tree) if isinstance(n, ast.Name) and n.id in self.constants}

    def __call__(self, x: Any, y: Any) -> np.ndarray:
        x = np.asarray(x, dtype=np.float64)
        y = np.asarray(y, dtype=np.float64)
        shape = np.broadcast_shapes(x.shape, y.shape)
        with np.errstate(all="ignore"):
            out = _evaluate(self._tree.body, {"x": x, "y": y, **BUILTIN_CONSTANTS, **self.constants})
        return np.broadcast_to(np.asarray(out, dtype=np.float64), shape).copy()

    def values_at(self, x: Any, y: Any, what: str = "value") -> np.ndarray:
        """The formula at points (x, y), CaseError naming the first point where it is not finite."""
        v = self(x, y)
        bad = ~np.isfinite(v)
        if np.any(bad):
            xb, yb = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
            i = int(np.flatnonzero(bad.ravel())[0])
            raise CaseError(f"{self.where}: the formula {self.text!r} gives a non-finite {what} at "
                            f"({xb.ravel()[i]:.6g}, {yb.ravel()[i]:.6g}); check it (a division by zero, the "
                            "log or sqrt of a negative number, an overflow) or the patch it is used on")
        return v


def parse_formula(text: str, constants: Mapping[str, float], where: str) -> Formula:
    """Check and parse ``text``; ``constants`` are the named constants it may use, ``where`` starts
    the error messages (file and key). Raises CaseError naming the offending token."""
    if not isinstance(text, str) or not text.strip():
        raise CaseError(f"{where}: an empty formula; {allowed_text(constants)}")
    if len(text) > MAX_LENGTH:
        raise CaseError(f"{where}: the formula has {len(text)} characters; at most {MAX_LENGTH} are accepted")
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        col = f" at column {exc.offset}" if exc.offset else ""
        hint = " (powers are written **, not ^)" if "^" in text else ""
        raise CaseError(f"{where}: {text!r} is not a valid formula{col}{hint}; {allowed_text(constants)}") from None
    _check(tree.body, text, constants, where, 0)
    return Formula(text, tree, constants, where)


def _fail(text: str, where: str, why: str, constants: Mapping[str, float]) -> CaseError:
    return CaseError(f"{where}: {text!r} is not an allowed formula: {why}; {allowed_text(constants)}")


def _check(node: ast.AST, text: str, constants: Mapping[str, float], where: str, depth: int) -> None:
    if depth > MAX_DEPTH:
        raise CaseError(f"{where}: the formula {text[:60]!r}... nests deeper than {MAX_DEPTH} levels")
    seg = ast.get_source_segment(text.strip(), node) or type(node).__name__
    if isinstance(node, ast.Constant):
        if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
            raise _fail(text, where, f"{seg!r} is not a number", constants)
        return
    if isinstance(node, ast.Name):
        if node.id in COORDINATES or node.id in BUILTIN_CONSTANTS or node.id in constants:
            return
        if node.id in FUNCTIONS:
            raise _fail(text, where, f"the function {node.id!r} needs arguments in parentheses", constants)
        raise _fail(text, where, f"unknown name {node.id!r} (define it in [formula_constants])", constants)
    if isinstance(node, ast.BinOp):
        if type(node.op) not in _BINARY:
            raise _fail(text, where, f"the operator {_OP_TEXT.get(type(node.op), type(node.op).__name__)} is "
                        "not allowed", constants)
        _check(node.left, text, constants, where, depth + 1)
        _check(node.right, text, constants, where, depth + 1)
        return
    if isinstance(node, ast.UnaryOp):
        if type(node.op) not in _UNARY:
            raise _fail(text, where, f"the operator {_OP_TEXT.get(type(node.op), type(node.op).__name__)} is "
                        "not allowed", constants)
        _check(node.operand, text, constants, where, depth + 1)
        return
    if isinstance(node, ast.Call):
        if not isinstance(node.func, ast.Name) or node.func.id not in FUNCTIONS:
            name = node.func.id if isinstance(node.func, ast.Name) else ast.get_source_segment(text.strip(), node.func)
            raise _fail(text, where, f"{name!r} is not an allowed function", constants)
        if node.keywords:
            raise _fail(text, where, f"{node.func.id}() takes no keyword arguments", constants)
        n = FUNCTIONS[node.func.id][1]
        if (n is not None and len(node.args) != n) or (n is None and len(node.args) < 2):
            need = f"{n} argument" + ("s" if n != 1 else "") if n is not None else "two or more arguments"
            raise _fail(text, where, f"{node.func.id}() takes {need}, got {len(node.args)}", constants)
        for a in node.args:
            if isinstance(a, ast.Starred):
                raise _fail(text, where, "starred arguments are not allowed", constants)
            _check(a, text, constants, where, depth + 1)
        return
    what = {
        ast.Attribute: "attribute access ('.{}')".format(getattr(node, "attr", "")),
        ast.Subscript: f"indexing ({seg!r})",
        ast.Compare: f"comparisons ({seg!r})",
        ast.BoolOp: f"and / or ({seg!r})",
        ast.IfExp: f"if-else ({seg!r})",
        ast.Lambda: "lambda",
    }.get(type(node), f"{seg!r} ({type(node).__name__})")
    raise _fail(text, where, f"{what} is not allowed", constants)


def _evaluate(node: ast.AST, env: Mapping[str, Any]) -> Any:
    if isinstance(node, ast.Constant):
        return np.float64(node.value)
    if isinstance(node, ast.Name):
        return env[node.id]
    if isinstance(node, ast.BinOp):
        return _BINARY[type(node.op)](_evaluate(node.left, env), _evaluate(node.right, env))
    if isinstance(node, ast.UnaryOp):
        return _UNARY[type(node.op)](_evaluate(node.operand, env))
    if isinstance(node, ast.Call):
        func, n = FUNCTIONS[node.func.id]
        args = [_evaluate(a, env) for a in node.args]
        if n is None:
            out = args[0]
            for a in args[1:]:
                out = func(out, a)
            return out
        return func(*args)
    raise TypeError(f"unchecked formula node {type(node).__name__}")  # _check refuses these


def check_constants(data: Any, where: str) -> dict[str, float]:
    """The ``[formula_constants]`` table: names (identifiers, not x, y, pi or a function name) to
    finite numbers."""
    import numbers

    if not isinstance(data, Mapping):
        raise CaseError(f"{where}: must be a table of named numbers, e.g. [formula_constants] with U_max = 0.3")
    out: dict[str, float] = {}
    for name, v in data.items():
        key = f"{where}.{name}"
        if not isinstance(name, str) or not name.isidentifier() or name.startswith("_"):
            raise CaseError(f"{key}: a constant's name must be a plain identifier (letters, digits and '_', "
                            "not starting with a digit or '_'), e.g. U_max")
        if name in RESERVED:
            raise CaseError(f"{key}: {name!r} is reserved in formulas (x, y, pi and the function names "
                            f"{', '.join(sorted(FUNCTIONS))}); choose another name")
        if isinstance(v, bool) or not isinstance(v, numbers.Real) or not math.isfinite(float(v)):
            raise CaseError(f"{key}: must be a finite number, got {v!r}")
        out[name] = float(v)
    return out


class VectorFormula:
    """A velocity given component by component, each a number or a :class:`Formula`; calling it
    at points (x, y) gives (u, v) arrays. ``data()`` gives back the case-file form."""

    def __init__(self, components: tuple[float | Formula, float | Formula]):
        self.components = components

    def __repr__(self) -> str:
        return f"VectorFormula({self.data()!r})"

    def __eq__(self, other: object) -> bool:
        return isinstance(other, VectorFormula) and self.components == other.components

    def __hash__(self) -> int:
        return hash(tuple(self.data()))

    def data(self) -> list[float | str]:
        return [c.text if isinstance(c, Formula) else float(c) for c in self.components]

    def __call__(self, x: Any, y: Any) -> tuple[np.ndarray, np.ndarray]:
        x, y = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
        out = []
        for i, c in enumerate(self.components):
            if isinstance(c, Formula):
                out.append(c.values_at(x, y, f"velocity component {i + 1}"))
            else:
                out.append(np.full(x.shape, float(c)))
        return out[0], out[1]


def values_at(value: float | Formula, x: Any, y: Any, what: str = "value") -> np.ndarray:
    """A boundary value that is a number or a formula, at points (x, y): the general mechanism for
    any per-face boundary setting (pressure, turbulence inflow values)."""
    x, y = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
    if isinstance(value, Formula):
        return value.values_at(x, y, what)
    return np.full(x.shape, float(value))
