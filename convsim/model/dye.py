"""Starting shapes of the passive dye: a layer, a blob, or a function of x and z.

Each maker returns a function ``Grid -> (nz, nx)`` cell values, the ``start`` of
the dye's ``FieldDeclaration`` (``convsim.model.fields.dye_field``).

- ``layer(bottom, top)``: 1 between two heights, 0 elsewhere; each cell holds the
  covered fraction of its height (the exact cell average), so the total dye is
  aspect * (top - bottom) on any grid;
- ``blob(x0, z0, radius)``: 1 in the cells whose centre lies within ``radius`` of
  (x0, z0), 0 elsewhere;
- ``expression(text)``: a numpy expression in x and z evaluated at the cell
  centres, such as ``"0.5 * (1 + tanh((z - 0.8) / 0.02))"``.  Only numbers, the
  names x, z, aspect, pi and e, arithmetic (+ - * / ** %), comparisons and the
  functions of ``FUNCTIONS`` are allowed; the text is checked on its syntax tree
  before it is compiled and runs with no builtins, so it cannot reach anything else.
"""

from __future__ import annotations

import ast
from typing import Callable

import numpy as np

from convsim.model.grid import Grid

__all__ = ["layer", "blob", "expression", "check_expression", "FUNCTIONS", "NAMES"]

FUNCTIONS = {name: getattr(np, name) for name in (
    "sin", "cos", "tan", "arctan", "sinh", "cosh", "tanh", "exp", "log", "sqrt", "abs",
    "minimum", "maximum", "where", "clip", "floor", "ceil", "sign", "hypot")}
NAMES = ("x", "z", "aspect", "pi", "e")
MAX_LENGTH = 500
_OPERATORS = (ast.Add, ast.Sub, ast.Mult, ast.Div, ast.Pow, ast.Mod, ast.USub, ast.UAdd,
              ast.Lt, ast.LtE, ast.Gt, ast.GtE, ast.Eq, ast.NotEq)
_NODES = (ast.Expression, ast.BinOp, ast.UnaryOp, ast.Compare, ast.Call, ast.Name, ast.Load,
          ast.Constant) + _OPERATORS


def layer(bottom: float, top: float) -> Callable:
    """Dye 1 for bottom <= z <= top: the covered fraction of each cell's height."""
    def start(grid: Grid) -> np.ndarray:
        lower = grid.z_node[:-1]
        covered = np.clip(np.minimum(grid.z_node[1:], top) - np.maximum(lower, bottom), 0.0, None)
        height = grid.dz_cell if grid.stretched else grid.dz
        return np.repeat(np.minimum(covered / height, 1.0)[:, None], grid.nx, axis=1)
    return start


def blob(x0: float, z0: float, radius: float) -> Callable:
    """Dye 1 in the cells whose centre is within ``radius`` of (x0, z0)."""
    def start(grid: Grid) -> np.ndarray:
        X, Z = grid.cell_mesh()
        return ((X - x0) ** 2 + (Z - z0) ** 2 <= radius * radius).astype(float)
    return start


def check_expression(text: str) -> ast.Expression:
    """The syntax tree of an allowed expression; ``ValueError`` says what is not allowed."""
    if not isinstance(text, str) or not text.strip():
        raise ValueError("empty expression")
    if len(text) > MAX_LENGTH:
        raise ValueError(f"longer than {MAX_LENGTH} characters")
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        raise ValueError(f"not an expression ({exc.msg})") from None
    for node in ast.walk(tree):
        if not isinstance(node, _NODES):
            raise ValueError(f"{type(node).__name__} not allowed")
        if isinstance(node, ast.Constant) and (isinstance(node.value, bool)
                                               or not isinstance(node.value, (int, float))):
            raise ValueError(f"constant {node.value!r} not allowed: numbers only")
        if isinstance(node, ast.Call) and (node.keywords or not isinstance(node.func, ast.Name)
                                           or node.func.id not in FUNCTIONS):
            raise ValueError("calls only to " + ", ".join(FUNCTIONS) + ", without keywords")
        if isinstance(node, ast.Name) and node.id not in NAMES and node.id not in FUNCTIONS:
            raise ValueError(f"name {node.id!r} unknown; allowed {', '.join(NAMES)}")
    for node in ast.walk(tree):            # numbers as floats: 9**9**9 overflows, never hangs
        if isinstance(node, ast.Constant):
            node.value = float(node.value)
    return tree


def expression(text: str) -> Callable:
    """Dye from a numpy expression in x and z at the cell centres (checked first)."""
    code = compile(check_expression(text), "<tracer.expression>", "eval")

    def start(grid: Grid) -> np.ndarray:
        X, Z = grid.cell_mesh()
        names = dict(FUNCTIONS, x=X, z=Z, aspect=float(grid.aspect), pi=np.pi, e=np.e)
        try:
            with np.errstate(all="ignore"):
                values = eval(code, {"__builtins__": {}}, names)  # noqa: S307 - checked tree
            values = np.broadcast_to(np.asarray(values, dtype=float), grid.cell_shape)
        except (ArithmeticError, TypeError, ValueError) as exc:
            raise ValueError(f"cannot be evaluated ({exc})") from None
        if not np.all(np.isfinite(values)):
            raise ValueError("not finite everywhere in the box")
        return values.copy()
    return start
