"""What a model's expressions may hold to become compiled numeric code.

One check, used twice: when a model is made (its expression and the derivatives its kernels
need, :mod:`phaselab.model.derivatives`) and again by the printer on what it prints. An
expression passes when every node is a state or parameter symbol, a finite real number, a
sum, product or real power, or one of :data:`SUPPORTED_FUNCTIONS`.
"""

from __future__ import annotations

import math

import sympy as sp

from phaselab.errors import ModelError

#: sympy function classes whose printed form compiles under numba.njit
SUPPORTED_FUNCTIONS = (
    sp.sin, sp.cos, sp.tan, sp.asin, sp.acos, sp.atan, sp.atan2, sp.sinh, sp.cosh, sp.tanh,
    sp.asinh, sp.acosh, sp.atanh, sp.exp, sp.log, sp.Abs, sp.sign, sp.sec, sp.csc, sp.cot,
    sp.Heaviside, sp.DiracDelta, sp.Max, sp.Min, sp.erf, sp.erfc,
)


def as_double(number) -> float:
    """``number`` as a double, or a ModelError when it does not fit (overflow, inf, nan)."""
    try:
        value = float(number)
    except (OverflowError, TypeError, ValueError):
        value = math.inf
    if not math.isfinite(value):
        raise ModelError(f"the number {short_text(number)} does not fit in a double-precision float")
    return value


def short_text(expr) -> str:
    """``str(expr)`` cut to 80 characters, for messages."""
    text = str(expr)
    return text if len(text) <= 80 else text[:77] + "..."


def check_supported(expr: sp.Expr, where: str = "expression", display: dict | None = None) -> None:
    """Refuse an expression the compiled kernels cannot hold.

    Parameters
    ----------
    expr : sympy.Expr
    where : str
        What the expression is (``"dH/dq1"``), for the message.
    display : dict, optional
        Symbol replacements that turn renamed kernel symbols back into the model's names
        for the message.

    Raises
    ------
    ModelError
        Naming the offending function or number.
    """
    try:
        _check_nodes(expr, where)
    except ModelError as exc:
        if not display:
            raise
        shown = expr.xreplace(display)
        raise ModelError(str(exc).replace(short_text(expr), short_text(shown))) from None


def _check_nodes(expr: sp.Expr, where: str) -> None:
    for node in sp.preorder_traversal(expr):
        if isinstance(node, sp.Pow):
            base, exponent = node.args
            if base.is_number and base.is_negative and not exponent.is_integer:
                raise ModelError(
                    f"the {where} {short_text(expr)} contains the complex number {short_text(node)}")
            continue
        if node.is_Symbol or isinstance(node, (sp.Add, sp.Mul)):
            continue
        if node in (sp.pi, sp.E) or isinstance(node, sp.NumberSymbol):
            continue
        if node.is_Number:
            if node in (sp.zoo, sp.oo, -sp.oo, sp.nan) or not node.is_finite:
                raise ModelError(f"the {where} {short_text(expr)} is infinite or undefined ({node})")
            as_double(node)
            continue
        if node is sp.I:
            raise ModelError(f"the {where} {short_text(expr)} contains the complex number {short_text(node)}")
        if isinstance(node, sp.Derivative):
            raise ModelError(
                f"the {where} needs the derivative {short_text(node)}, which has no closed form; "
                "use functions with known derivatives")
        if isinstance(node, SUPPORTED_FUNCTIONS):
            continue
        name = getattr(node.func, "__name__", type(node).__name__)
        raise ModelError(
            f"function `{name}` in the {where} {short_text(expr)} cannot be compiled to numeric code; "
            "supported functions: " + ", ".join(f.__name__ for f in SUPPORTED_FUNCTIONS))
