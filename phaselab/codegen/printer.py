"""Print sympy expressions as the body of numba-compilable Python functions.

Every symbol of a system is renamed to a safe identifier (``s0, s1, ...`` for the state,
``k0, k1, ...`` for parameters) before printing, common subexpressions are shared with
:func:`sympy.cse`, and the printer's output is checked for constructs numba cannot compile.
"""

from __future__ import annotations

from typing import Sequence

import sympy as sp
from sympy.printing.pycode import PythonCodePrinter

from phaselab.errors import ModelError


class KernelPrinter(PythonCodePrinter):
    """Python code printer restricted to what ``numba.njit`` compiles: ``math`` functions,
    float literals at full precision."""

    def __init__(self):
        super().__init__({"fully_qualified_modules": True, "standard": "python3"})

    def _print_Float(self, expr):
        return repr(float(expr))

    def _print_Rational(self, expr):
        return f"({float(expr.p)!r}/{float(expr.q)!r})"

    def _print_Half(self, expr):
        return "0.5"

    def _print_sign(self, expr):
        a = self._print(expr.args[0])
        return f"(math.copysign(1.0, {a}) if {a} != 0 else 0.0)"


def rename_map(state: Sequence[sp.Symbol], params: Sequence[sp.Symbol]) -> dict:
    """Map the system's symbols onto safe identifiers."""
    mapping = {s: sp.Symbol(f"s{i}", real=True) for i, s in enumerate(state)}
    mapping.update({s: sp.Symbol(f"k{j}", real=True) for j, s in enumerate(params)})
    return mapping


def unpack_lines(n_state: int, n_params: int, used: set[str], indent: str = "    ") -> list[str]:
    """Lines reading state and parameter entries into local names (only those used)."""
    lines = [f"{indent}s{i} = z[{i}]" for i in range(n_state) if f"s{i}" in used]
    lines += [f"{indent}k{j} = prm[{j}]" for j in range(n_params) if f"k{j}" in used]
    return lines


def print_assignments(targets: Sequence[str], exprs: Sequence[sp.Expr], indent: str = "    ",
                      skip_zero: bool = False) -> tuple[list[str], set[str]]:
    """Print ``target = expr`` lines with shared common subexpressions.

    Parameters
    ----------
    targets : sequence of str
        Left-hand sides (``out[0]``, ``return`` for a single returned value).
    exprs : sequence of sympy.Expr
        Expressions already in renamed symbols.
    skip_zero : bool
        Leave out assignments whose expression is identically zero (the output array is
        zeroed beforehand).

    Returns
    -------
    lines : list of str
    used : set of str
        The names of state and parameter symbols the lines read.
    """
    pairs = [(t, e) for t, e in zip(targets, exprs) if not (skip_zero and e == 0)]
    if not pairs:
        return [], set()
    replacements, reduced = sp.cse([e for _, e in pairs], symbols=sp.numbered_symbols("c"),
                                   optimizations="basic")
    printer = KernelPrinter()
    lines: list[str] = []
    used: set[str] = set()
    for sym, sub in replacements:
        used |= {s.name for s in sub.free_symbols}
        lines.append(f"{indent}{sym} = {_checked(printer, sub)}")
    for (target, _), e in zip(pairs, reduced):
        used |= {s.name for s in e.free_symbols}
        code = _checked(printer, e)
        if target == "return":
            lines.append(f"{indent}return {code}")
        else:
            lines.append(f"{indent}{target} = {code}")
    return lines, used


def _checked(printer: KernelPrinter, expr: sp.Expr) -> str:
    code = printer.doprint(expr)
    if printer._not_supported or "# Not supported" in code:
        bad = ", ".join(sorted({type(e).__name__ for e in printer._not_supported})) or code
        printer._not_supported.clear()
        raise ModelError(f"cannot generate numeric code for {bad} in {expr}")
    return f"float({code})" if expr.is_Number else code
