"""Print sympy expressions as the body of numba-compilable Python functions.

Every symbol of a system is renamed to a safe identifier (``s0, s1, ...`` for the state,
``k0, k1, ...`` for parameters) before printing, common subexpressions are shared with
:func:`sympy.cse`, and the printer's output is checked for constructs numba cannot compile.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import sympy as sp
from sympy.printing.codeprinter import PrintMethodNotImplementedError
from sympy.printing.precedence import PRECEDENCE
from sympy.printing.pycode import PythonCodePrinter

from phaselab.errors import ModelError
from phaselab.model.compilable import as_double, check_supported, short_text
from phaselab.model.limits import CSE_BASIC_MAX_NODES, has_huge_number_power, tree_size


class KernelPrinter(PythonCodePrinter):
    """Python code printer restricted to what ``numba.njit`` compiles: ``math`` functions,
    float literals at full precision."""

    def __init__(self):
        super().__init__({"fully_qualified_modules": True, "standard": "python3"})

    def _print_Float(self, expr):
        return repr(float(expr))

    def _print_Rational(self, expr):
        # the correctly rounded value of p/q (float(p) and float(q) apart could overflow)
        return repr(as_double(expr))

    def _print_Half(self, expr):
        return "0.5"

    def _print_Integer(self, expr):
        value = int(expr)
        if abs(value) < 2**53:
            return str(value)
        return repr(as_double(expr))

    def _print_NumberSymbol(self, expr):
        return repr(float(expr))

    def _print_Pow(self, expr, rational=False):
        # numba raises ZeroDivisionError for 0.0 ** -n whatever the error model; 1.0 / x**n is
        # the same arithmetic (numba computes x**-n as 1.0 / x**n), divided as IEEE does
        if expr.exp.is_Integer and expr.exp < -1:
            return f"(1.0/{self.parenthesize(sp.Pow(expr.base, -expr.exp), PRECEDENCE['Pow'])})"
        return super()._print_Pow(expr, rational=rational)

    def _print_sign(self, expr):
        a = self._print(expr.args[0])
        return f"(math.copysign(1.0, {a}) if {a} != 0 else 0.0)"

    def _print_DiracDelta(self, expr):
        return "0.0"

    def _print_Heaviside(self, expr):
        a = self._print(expr.args[0])
        return f"(0.0 if {a} < 0 else (0.5 if {a} == 0 else 1.0))"

    # sympy's code printer has no math name for these and rewrites the whole call (with
    # automatic evaluation and assumption queries, which take tens of seconds on nested
    # arguments); the reciprocal is printed directly, the same arithmetic as the rewrite
    def _print_sec(self, expr):
        return f"(1/math.cos({self._print(expr.args[0])}))"

    def _print_csc(self, expr):
        return f"(1/math.sin({self._print(expr.args[0])}))"

    def _print_cot(self, expr):
        return f"(1/math.tan({self._print(expr.args[0])}))"

    def _print_Max(self, expr):
        return "max(" + ", ".join(self._print(a) for a in expr.args) + ")"

    def _print_Min(self, expr):
        return "min(" + ", ".join(self._print(a) for a in expr.args) + ")"


def unpack_lines(n_state: int, n_params: int, used: set[str], indent: str = "    ") -> list[str]:
    """Lines reading state and parameter entries into local names (only those used)."""
    lines = [f"{indent}s{i} = z[{i}]" for i in range(n_state) if f"s{i}" in used]
    lines += [f"{indent}k{j} = prm[{j}]" for j in range(n_params) if f"k{j}" in used]
    return lines


@dataclass
class Printed:
    """Printed code of a group of expressions with shared common subexpressions.

    Attributes
    ----------
    temps : list of (str, str)
        ``(name, code)`` of each shared subexpression, in evaluation order.
    values : list of (int, str)
        ``(index, code)`` of each output (its position in the expression list); outputs
        that are identically zero are left out when ``skip_zero`` was given.
    used : set of str
        The names of state (``s0..``) and parameter (``k0..``) symbols the code reads.
    """

    temps: list
    values: list
    used: set


def print_expressions(exprs: Sequence[sp.Expr], skip_zero: bool = False, what: str = "expression",
                      display: dict | None = None) -> Printed:
    """Print expressions (already in renamed symbols) as numba-compilable Python code.

    Parameters
    ----------
    exprs : sequence of sympy.Expr
    skip_zero : bool
        Leave out outputs that are identically zero (the caller zeroes the output first).
    what : str
        What the expressions are, for error messages.
    display : dict, optional
        Renamed symbol -> model symbol, for error messages.

    Returns
    -------
    Printed
    """
    pairs = [(i, e) for i, e in enumerate(exprs) if not (skip_zero and e == 0)]
    if not pairs:
        return Printed([], [], set())
    for i, e in pairs:
        check_supported(e, f"{what} (entry {i})", display)
    # cse's "basic" preprocessing pulls numbers out of powers exactly: a power such as
    # 7**(10**15 - x) would be computed to 10**15 digits, so such sets are taken as they are;
    # its cost also grows faster than the size of the set, so large sets are taken as they are
    plain = any(has_huge_number_power(e) for _, e in pairs) or _group_size(pairs) > CSE_BASIC_MAX_NODES
    replacements, reduced = sp.cse([e for _, e in pairs], symbols=sp.numbered_symbols("c"),
                                   optimizations=None if plain else "basic")
    printer = KernelPrinter()
    temps, values = [], []
    used: set[str] = set()
    for sym, sub in replacements:
        used |= {s.name for s in sub.free_symbols}
        temps.append((str(sym), _checked(printer, sub)))
    for (i, _), e in zip(pairs, reduced):
        used |= {s.name for s in e.free_symbols}
        values.append((i, _checked(printer, e)))
    return Printed(temps, values, used)


def _group_size(pairs) -> int:
    """Nodes of a group of expressions counted as a tree (capped past the limit)."""
    total = 0
    for _, e in pairs:
        total += tree_size(e, limit=CSE_BASIC_MAX_NODES)
        if total > CSE_BASIC_MAX_NODES:
            break
    return total


def _checked(printer: KernelPrinter, expr: sp.Expr) -> str:
    try:
        code = printer.doprint(expr)
    except PrintMethodNotImplementedError as exc:
        raise ModelError(f"cannot generate numeric code for {short_text(expr)}: {str(exc).splitlines()[0]}") from None
    if printer._not_supported or "# Not supported" in code:
        bad = ", ".join(sorted({type(e).__name__ for e in printer._not_supported})) or code
        printer._not_supported.clear()
        raise ModelError(f"cannot generate numeric code for {bad} in {expr}")
    return f"float({code})" if expr.is_Number else code
