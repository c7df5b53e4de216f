"""Safe parsing of user expressions into sympy.

A string is parsed with Python's :mod:`ast` and only a whitelist of node types is
accepted: numbers, names, the operators ``+ - * / **``, unary minus and plus, and calls to
a fixed set of mathematical functions. Every accepted node is mapped onto a sympy object by
hand, so no user text ever reaches ``eval``, ``exec`` or ``sympify``.

The size of every number is bounded while the expression is built, before sympy is asked
to compute anything big: an exact number (integer or fraction) has at most
:data:`MAX_DIGITS` digits above and below the line, every constant part of an expression
stays below ``10**MAX_DIGITS`` in magnitude, and a constant exponent is at most
:data:`MAX_EXPONENT` in size. Constant parts are followed by a numeric value computed with
mpmath at :data:`VALUE_BITS` bits, so a power tower such as ``E**E**E**E**E`` is refused
as soon as one of its levels gets too large, without sympy ever trying to evaluate it.
"""

from __future__ import annotations

import ast
import math

import mpmath
import sympy as sp

from phaselab.errors import ExpressionError

MAX_LENGTH = 5000
MAX_DEPTH = 60
MAX_NODES = 4000
#: most decimal digits in the numerator or the denominator of an exact number, and the
#: largest magnitude (10**MAX_DIGITS) of any constant part of an expression. Far inside the
#: double-precision range (about 1.8e308) on purpose: differentiating twice (the kernels'
#: Jacobians) squares and multiplies constants, and c**4 must still be a finite double
MAX_DIGITS = 75
#: largest size of a constant exponent (x**1000 is accepted, x**1001 is not)
MAX_EXPONENT = 1000
#: precision (bits) of the values that follow constant parts of an expression; far above
#: the 250 bits of the largest allowed magnitude, so sums that cancel keep their small part
VALUE_BITS = 600


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

# the values of constant parts: a private mpmath context, so the global one is untouched
_MP = mpmath.MPContext()
_MP.prec = VALUE_BITS
_LIMIT = _MP.mpf(10) ** MAX_DIGITS

_VALUE_FUNCTIONS = {
    "sin": _MP.sin, "cos": _MP.cos, "tan": _MP.tan, "asin": _MP.asin, "acos": _MP.acos,
    "atan": _MP.atan, "atan2": _MP.atan2, "sinh": _MP.sinh, "cosh": _MP.cosh,
    "tanh": _MP.tanh, "asinh": _MP.asinh, "acosh": _MP.acosh, "atanh": _MP.atanh,
    "exp": _MP.exp, "log": _MP.log, "sqrt": _MP.sqrt, "abs": abs, "sec": _MP.sec,
    "csc": _MP.csc, "cot": _MP.cot,
}
_VALUE_CONSTANTS = {"pi": _MP.pi, "E": _MP.e}
_VALUE_BINARY = {
    ast.Add: lambda a, b: a + b,
    ast.Sub: lambda a, b: a - b,
    ast.Mult: lambda a, b: a * b,
    ast.Div: lambda a, b: a / b,
    ast.Pow: lambda a, b: _MP.power(a, b),
}


def _describe(node: ast.AST, text: str) -> str:
    piece = ast.get_source_segment(text, node) or type(node).__name__
    if len(piece) > 60:
        piece = piece[:57] + "..."
    return f"{type(node).__name__} `{piece}`"


def _clip(text: str) -> str:
    return f"`{text}`" if len(text) <= 60 else f"`{text[:57]}...`"


# ---------------------------------------------------------------------------- number sizes
def _digits(n: int) -> int:
    """Decimal digits of the integer ``n`` (within one), without converting it to text."""
    return int(math.log10(abs(n))) + 1 if n else 1


def number_problem(number) -> str | None:
    """Why the sympy number ``number`` is too large to accept, or None when it is fine."""
    if number.is_Rational:
        digits = max(_digits(number.p), _digits(number.q))
        if digits > MAX_DIGITS:
            return f"an exact number with about {digits} digits (the limit is {MAX_DIGITS})"
    elif number.is_Float:
        if abs(_MP.make_mpf(number._mpf_)) > _LIMIT:
            return f"a number above 1e{MAX_DIGITS} in size"
    return None


def _node_problem(e: sp.Basic) -> str | None:
    """Why the single node ``e`` is beyond the limits: an oversized number, or a power with a
    constant exponent above :data:`MAX_EXPONENT`."""
    if e.is_Number:
        return number_problem(e)
    if e.is_Pow and e.exp.is_Number and abs(e.exp) > MAX_EXPONENT:
        return f"a power with an exponent larger than {MAX_EXPONENT}"
    return None


def _near_problem(expr: sp.Basic) -> str | None:
    """Look for an oversized number or exponent in ``expr`` and two levels of its arguments:
    where sympy's automatic evaluation puts what it combines (the number in front of a
    product, the constant of a sum, powers of powers, a number distributed over a sum)."""
    level = [expr]
    for depth in range(3):
        for e in level:
            problem = _node_problem(e)
            if problem:
                return problem
        if depth < 2:
            level = [a for e in level for a in e.args]
    return None


def size_problem(expr: sp.Basic) -> str | None:
    """Why ``expr`` holds a number or a constant exponent beyond the parser's limits (the
    first one found, in words), or None. Walks the whole tree once."""
    for e in sp.preorder_traversal(expr):
        problem = _node_problem(e)
        if problem:
            return problem
    return None


def _value_problem(value) -> tuple[str, str] | None:
    """Why a constant's numeric value cannot be accepted, as (kind, words): kind is
    "undefined", "complex" or "large"."""
    if not _MP.isfinite(value):
        return "undefined", "undefined or infinite"
    # (rounding at VALUE_BITS can leave a tiny imaginary part on a real value, as in
    # asin of 1 + 1e-170: far below this tolerance)
    if isinstance(value, _MP.mpc) and abs(value.imag) > 1e-30 * abs(value):
        return "complex", "not a real number"
    if abs(value) > _LIMIT:
        return "large", f"about 10**{int(_MP.log10(abs(value)))}, above 1e{MAX_DIGITS} in size"
    return None


def _exact_value(expr):
    """The mpmath value of a sympy Rational or Float (exact up to VALUE_BITS)."""
    if expr.is_Rational:
        return _MP.mpf(expr.p) / expr.q
    return _MP.make_mpf(expr._mpf_)


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
        too long or too deeply nested, for numbers or exponents beyond the size limits
        (:data:`MAX_DIGITS`, :data:`MAX_EXPONENT`), and for unknown names.
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
        raise ExpressionError(f"cannot parse expression {_clip(text.strip())}: {exc.msg}") from None
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

    def number(node: ast.Constant):
        value = node.value
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ExpressionError(f"only numbers are allowed as constants, not {_describe(node, src)}")
        if isinstance(value, float):
            if not math.isfinite(value):
                raise ExpressionError(f"non-finite number in {_describe(node, src)}")
            # whole floats that are exactly integers stay exact; large ones stay floats, so
            # 2.9e260 never becomes a 261-digit integer
            if value.is_integer() and abs(value) < 2.0**53:
                out = sp.Integer(int(value))
            else:
                out = sp.Float(repr(value))
        else:
            if _digits(value) > MAX_DIGITS:
                raise ExpressionError(f"number too large in {_describe(node, src)}: it has about "
                                      f"{_digits(value)} digits; the limit is {MAX_DIGITS}")
            out = sp.Integer(value)
        problem = number_problem(out)
        if problem:
            raise ExpressionError(f"number too large in {_describe(node, src)}: {problem}")
        return out, _exact_value(out)

    def check_value(value, node, power: bool):
        """The value of a constant part as a real number; refused when it is undefined,
        complex, or too large."""
        problem = _value_problem(value)
        if problem is None:
            return _MP.re(value) if isinstance(value, _MP.mpc) else value
        kind, words = problem
        if kind == "complex":
            raise ExpressionError(f"expression {_clip(src)} is complex-valued ({_describe(node, src)} is "
                                  f"{words}); phaselab works with real expressions")
        what = {"undefined": "undefined value", "large": "exponent too large" if power else "number too large"}
        raise ExpressionError(f"{what[kind]} in {_describe(node, src)}: it is {words}")

    def combine(op, node, left, right):
        """``left op right`` as a sympy expression and its value, refusing oversized results
        before sympy builds them. ``left`` and ``right`` are (expression, value) pairs; the
        value is None when the expression has symbols."""
        (a, va), (b, vb) = left, right
        if op is ast.Pow and vb is not None:
            # a constant exponent: bounded in size whatever the base
            if _MP.isfinite(vb) and abs(vb) > MAX_EXPONENT:
                raise ExpressionError(f"exponent too large in {_describe(node, src)}: the limit is "
                                      f"{MAX_EXPONENT}")
            if a.is_Rational and b.is_Rational and a not in (0, 1, -1):
                # an exact power: its digits are those of the base times the exponent
                digits = int(max(math.log10(abs(a.p)), math.log10(a.q)) * abs(float(b))) + 1
                if digits > MAX_DIGITS:
                    raise ExpressionError(
                        f"exponent too large in {_describe(node, src)}: the result would have about "
                        f"{int(digits)} digits; the limit is {MAX_DIGITS}")
        value = None
        if va is not None and vb is not None:
            try:
                value = _VALUE_BINARY[op](va, vb)
            except ZeroDivisionError:
                raise ExpressionError(f"{_describe(node, src)} is undefined (a division by zero)") from None
            except (ValueError, TypeError, OverflowError) as exc:
                raise ExpressionError(f"{_describe(node, src)} cannot be evaluated: {exc}") from None
            value = check_value(value, node, op is ast.Pow)
        out = _BINARY[op](a, b)
        problem = _near_problem(out)
        if problem:
            what = "exponent too large in" if "exponent" in problem else "number too large in"
            raise ExpressionError(f"{what} {_describe(node, src)}: it makes {problem}")
        if value is not None and (out.is_Rational or out.is_Float):
            value = _exact_value(out)
        return out, value

    def convert(node: ast.AST, level: int):
        if level > MAX_DEPTH:
            raise ExpressionError(f"expression is nested more than {MAX_DEPTH} levels deep")
        if isinstance(node, ast.Expression):
            return convert(node.body, level + 1)
        if isinstance(node, ast.Constant):
            return number(node)
        if isinstance(node, ast.Name):
            name = node.id
            if name.startswith("_"):
                raise ExpressionError(f"names starting with an underscore are not allowed: `{name}`")
            if name in symbols:
                return symbols[name], None
            if name in CONSTANTS:
                return CONSTANTS[name], _VALUE_CONSTANTS[name]
            if name in FUNCTIONS:
                raise ExpressionError(f"function `{name}` is used without being called")
            if allowed is not None and name not in allowed:
                unknown.append(name)
            sym = sp.Symbol(name, real=True)
            symbols[name] = sym
            return sym, None
        if isinstance(node, ast.BinOp) and type(node.op) in _CHAINS:
            # a + b - c + ... is a left-leaning tree as deep as it is long; walk the chain
            # without recursion so long sums and products count as one level
            group = _CHAINS[type(node.op)]
            steps = []
            while isinstance(node, ast.BinOp) and _CHAINS.get(type(node.op)) == group:
                steps.append((type(node.op), node.right, node))
                node = node.left
            value = convert(node, level + 1)
            for op, right, whole in reversed(steps):
                value = combine(op, whole, value, convert(right, level + 1))
            return value
        if isinstance(node, ast.BinOp):
            op = type(node.op)
            if op not in _BINARY:
                raise ExpressionError(
                    f"operator {op.__name__} is not allowed (only + - * / **) in {_describe(node, src)}")
            left = convert(node.left, level + 1)
            right = convert(node.right, level + 1)
            return combine(op, node, left, right)
        if isinstance(node, ast.UnaryOp):
            if isinstance(node.op, ast.USub):
                expr, value = convert(node.operand, level + 1)
                return -expr, (None if value is None else -value)
            if isinstance(node.op, ast.UAdd):
                return convert(node.operand, level + 1)
            raise ExpressionError(f"unary operator {type(node.op).__name__} is not allowed in {_describe(node, src)}")
        if isinstance(node, ast.Call):
            return call(node, level)
        raise ExpressionError(f"{_describe(node, src)} is not allowed in an expression")

    def call(node: ast.Call, level: int):
        if not isinstance(node.func, ast.Name):
            raise ExpressionError(f"only calls of plain function names are allowed, not {_describe(node.func, src)}")
        name = node.func.id
        if name not in FUNCTIONS:
            raise ExpressionError(
                f"function `{name}` is not allowed; allowed functions: {', '.join(sorted(FUNCTIONS))}")
        if node.keywords:
            raise ExpressionError(f"keyword arguments are not allowed in {_describe(node, src)}")
        args, values = [], []
        for arg in node.args:
            if isinstance(arg, ast.Starred):
                raise ExpressionError(f"starred arguments are not allowed in {_describe(node, src)}")
            expr, value = convert(arg, level + 1)
            args.append(expr)
            values.append(value)
        if len(args) != (2 if name == "atan2" else 1):
            raise ExpressionError(f"wrong number of arguments to `{name}` in {_describe(node, src)}")
        value = None
        if all(v is not None for v in values):
            try:
                value = _VALUE_FUNCTIONS[name](*values)
            except ZeroDivisionError:
                raise ExpressionError(f"{_describe(node, src)} is undefined (a division by zero)") from None
            except (ValueError, TypeError, ArithmeticError) as exc:
                raise ExpressionError(f"{_describe(node, src)} cannot be evaluated: {exc}") from None
            value = check_value(value, node, False)
        try:
            out = FUNCTIONS[name](*args)
        except TypeError:
            raise ExpressionError(f"wrong number of arguments to `{name}` in {_describe(node, src)}") from None
        problem = _near_problem(out)
        if problem:
            raise ExpressionError(f"number too large in {_describe(node, src)}: it makes {problem}")
        if value is not None and (out.is_Rational or out.is_Float):
            value = _exact_value(out)
        return out, value

    try:
        expr, _ = convert(tree, 0)
    except RecursionError:
        raise ExpressionError(f"expression is nested more than {MAX_DEPTH} levels deep") from None
    problem = size_problem(expr)
    if problem:
        raise ExpressionError(f"expression {_clip(src)} is too large: it holds {problem}")
    bad = [a for a in (sp.zoo, sp.nan, sp.oo, -sp.oo) if expr.has(a)]
    if bad:
        raise ExpressionError(f"expression {_clip(src)} is undefined or infinite (it evaluates to {bad[0]}, "
                              "e.g. a division by zero)")
    if expr.has(sp.I) or any(b.is_number and b.is_negative and not e.is_integer
                             for b, e in (a.args for a in expr.atoms(sp.Pow))):
        raise ExpressionError(f"expression {_clip(src)} is complex-valued (it contains sqrt of a negative "
                              "number or similar); phaselab works with real expressions")
    if any(b.is_zero and not e.is_number for b, e in (a.args for a in expr.atoms(sp.Pow))):
        raise ExpressionError(f"expression {_clip(src)} raises 0 to a symbolic power (0 or infinite "
                              "by the sign of the exponent, with no derivative); write 0 or the case meant")
    if unknown:
        raise ExpressionError(
            "unknown symbols: " + ", ".join(sorted(set(unknown)))
            + (f"; known names are: {', '.join(sorted(allowed))}" if allowed else ""))
    return expr
