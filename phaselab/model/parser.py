"""Safe parsing of user expressions into sympy.

A string is parsed with Python's :mod:`ast` and only a whitelist of node types is
accepted: numbers, names, the operators ``+ - * / **``, unary minus and plus, and calls to
a fixed set of mathematical functions. Every accepted node is mapped onto a sympy object by
hand, so no user text ever reaches ``eval``, ``exec`` or ``sympify``.
"""

from __future__ import annotations

import ast
import math

import sympy as sp

from phaselab.errors import ExpressionError

MAX_LENGTH = 5000
MAX_DEPTH = 60
MAX_NODES = 4000

FUNCTIONS = {
    "sin": sp.sin,
    "cos": sp.cos,
    "tan": sp.tan,
    "asin": sp.asin,
    "acos": sp.acos,
    "atan": sp.atan,
    "atan2": sp.atan2,
    "sinh": sp.sinh,
    "cosh": sp.cosh,
    "tanh": sp.tanh,
    "asinh": sp.asinh,
    "acosh": sp.acosh,
    "atanh": sp.atanh,
    "exp": sp.exp,
    "log": sp.log,
    "sqrt": sp.sqrt,
    "abs": sp.Abs,
    "sec": sp.sec,
    "csc": sp.csc,
    "cot": sp.cot,
}

CONSTANTS = {"pi": sp.pi, "E": sp.E}

_BINARY = {
    ast.Add: lambda a, b: a + b,
    ast.Sub: lambda a, b: a - b,
    ast.Mult: lambda a, b: a * b,
    ast.Div: lambda a, b: a / b,
    ast.Pow: lambda a, b: a**b,
}


_CHAINS = {ast.Add: "sum", ast.Sub: "sum", ast.Mult: "product", ast.Div: "product"}


def _describe(node: ast.AST, text: str) -> str:
    piece = ast.get_source_segment(text, node) or type(node).__name__
    if len(piece) > 60:
        piece = piece[:57] + "..."
    return f"{type(node).__name__} `{piece}`"


def _clip(text: str) -> str:
    return f"`{text}`" if len(text) <= 60 else f"`{text[:57]}...`"


def parse_expression(text: str, symbols: dict[str, sp.Symbol] | None = None,
                     allowed: set[str] | None = None) -> sp.Expr:
    """Parse ``text`` into a sympy expression without executing anything.

    Parameters
    ----------
    text : str
        The expression, in Python arithmetic syntax (``p**2/2 - cos(q)``).
    symbols : dict of str to sympy.Symbol, optional
        Symbols to use for given names, so that a parsed expression shares symbols with the
        rest of a model. Names not in it become plain real symbols.
    allowed : set of str, optional
        If given, every free name must be in this set; the error lists the unknown ones.

    Returns
    -------
    sympy.Expr

    Raises
    ------
    ExpressionError
        For any syntax outside the whitelist, naming the offending piece, for input that is
        too long or too deeply nested, and for unknown names.
    """
    if not isinstance(text, str):
        raise ExpressionError(f"expected an expression string, got {type(text).__name__}")
    if len(text) > MAX_LENGTH:
        raise ExpressionError(
            f"expression is {len(text)} characters long; the limit is {MAX_LENGTH}")
    if not text.strip():
        raise ExpressionError("expression is empty")
    # a cheap guard against pathological nesting before ast.parse recurses
    depth = 0
    for ch in text:
        depth += ch == "("
        depth -= ch == ")"
        if depth > MAX_DEPTH:
            raise ExpressionError(f"expression is nested more than {MAX_DEPTH} levels deep")
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        raise ExpressionError(f"cannot parse expression {text!r}: {exc.msg}") from None
    except RecursionError:
        raise ExpressionError(f"expression is nested more than {MAX_DEPTH} levels deep") from None
    except (MemoryError, ValueError) as exc:
        raise ExpressionError(f"cannot parse expression: {exc}") from None

    nodes = sum(1 for _ in ast.walk(tree))
    if nodes > MAX_NODES:
        raise ExpressionError(f"expression has {nodes} syntax nodes; the limit is {MAX_NODES}")

    symbols = dict(symbols or {})
    unknown: list[str] = []
    src = text.strip()

    def convert(node: ast.AST, level: int) -> sp.Expr:
        if level > MAX_DEPTH:
            raise ExpressionError(f"expression is nested more than {MAX_DEPTH} levels deep")
        if isinstance(node, ast.Expression):
            return convert(node.body, level + 1)
        if isinstance(node, ast.Constant):
            value = node.value
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise ExpressionError(f"only numbers are allowed as constants, not {_describe(node, src)}")
            if isinstance(value, float):
                if not math.isfinite(value):
                    raise ExpressionError(f"non-finite number in {_describe(node, src)}")
                return sp.Float(repr(value)) if value != int(value) else sp.Integer(int(value))
            return sp.Integer(value)
        if isinstance(node, ast.Name):
            name = node.id
            if name.startswith("_"):
                raise ExpressionError(f"names starting with an underscore are not allowed: `{name}`")
            if name in symbols:
                return symbols[name]
            if name in CONSTANTS:
                return CONSTANTS[name]
            if name in FUNCTIONS:
                raise ExpressionError(f"function `{name}` is used without being called")
            if allowed is not None and name not in allowed:
                unknown.append(name)
            sym = sp.Symbol(name, real=True)
            symbols[name] = sym
            return sym
        if isinstance(node, ast.BinOp) and type(node.op) in _CHAINS:
            # a + b - c + ... is a left-leaning tree as deep as it is long; walk the chain
            # without recursion so long sums and products count as one level
            group = _CHAINS[type(node.op)]
            steps = []
            while isinstance(node, ast.BinOp) and _CHAINS.get(type(node.op)) == group:
                steps.append((type(node.op), node.right))
                node = node.left
            value = convert(node, level + 1)
            for op, right in reversed(steps):
                value = _BINARY[op](value, convert(right, level + 1))
            return value
        if isinstance(node, ast.BinOp):
            op = type(node.op)
            if op not in _BINARY:
                raise ExpressionError(
                    f"operator {op.__name__} is not allowed (only + - * / **) in {_describe(node, src)}")
            left = convert(node.left, level + 1)
            right = convert(node.right, level + 1)
            if op is ast.Pow and right.is_Number:
                too_big = abs(float(right)) > 1000
                if left.is_Number and not too_big and left != 0:
                    # refuse numbers with more than ~10^4 digits before sympy builds them
                    try:
                        too_big = abs(float(right)) * abs(math.log10(abs(float(left)))) > 1e4
                    except (OverflowError, ValueError):
                        too_big = True
                if too_big:
                    raise ExpressionError(f"exponent too large in {_describe(node, src)}")
            return _BINARY[op](left, right)
        if isinstance(node, ast.UnaryOp):
            if isinstance(node.op, ast.USub):
                return -convert(node.operand, level + 1)
            if isinstance(node.op, ast.UAdd):
                return convert(node.operand, level + 1)
            raise ExpressionError(f"unary operator {type(node.op).__name__} is not allowed in {_describe(node, src)}")
        if isinstance(node, ast.Call):
            if not isinstance(node.func, ast.Name):
                raise ExpressionError(f"only calls of plain function names are allowed, not {_describe(node.func, src)}")
            name = node.func.id
            if name not in FUNCTIONS:
                raise ExpressionError(
                    f"function `{name}` is not allowed; allowed functions: {', '.join(sorted(FUNCTIONS))}")
            if node.keywords:
                raise ExpressionError(f"keyword arguments are not allowed in {_describe(node, src)}")
            args = []
            for arg in node.args:
                if isinstance(arg, ast.Starred):
                    raise ExpressionError(f"starred arguments are not allowed in {_describe(node, src)}")
                args.append(convert(arg, level + 1))
            try:
                return FUNCTIONS[name](*args)
            except TypeError:
                raise ExpressionError(f"wrong number of arguments to `{name}` in {_describe(node, src)}") from None
        raise ExpressionError(f"{_describe(node, src)} is not allowed in an expression")

    try:
        expr = convert(tree, 0)
    except RecursionError:
        raise ExpressionError(f"expression is nested more than {MAX_DEPTH} levels deep") from None
    bad = [a for a in (sp.zoo, sp.nan, sp.oo, -sp.oo) if expr.has(a)]
    if bad:
        raise ExpressionError(f"expression {_clip(src)} is undefined or infinite (it evaluates to {bad[0]}, "
                              "e.g. a division by zero)")
    if expr.has(sp.I) or any(b.is_number and b.is_negative and not e.is_integer
                             for b, e in (a.args for a in expr.atoms(sp.Pow))):
        raise ExpressionError(f"expression {_clip(src)} is complex-valued (it contains sqrt of a negative "
                              "number or similar); phaselab works with real expressions")
    if unknown:
        raise ExpressionError(
            "unknown symbols: " + ", ".join(sorted(set(unknown)))
            + (f"; known names are: {', '.join(sorted(allowed))}" if allowed else ""))
    return expr
