"""The one way from symbols to numbers (model/numeric.py): the energy, a map's step and the
shell-seed root formulas are printed from renamed symbols, so parameter names that are also
constants or functions cannot change a value."""

import math

import numpy as np
import pytest
import sympy as sp

from phaselab import Hamiltonian, shell_seeds
from phaselab.codegen import compile_kernel
from phaselab.model.maps import AreaPreservingMap

#: names of sympy/numpy constants and functions, and of the kernels' own identifiers
SHADOWING = ["pi", "E", "I", "S", "N", "e", "cos", "sqrt", "exp", "abs", "oo", "nan", "inf",
             "zoo", "numpy", "math", "lambda", "Float", "Symbol", "s0", "k0", "a0"]


def _reference(expr, at: dict) -> float:
    """sympy's value of ``expr`` at 30 digits (symbols replaced by object, not by name)."""
    return float(sp.N(expr.xreplace({s: sp.Float(v, 30) for s, v in at.items()}), 30))


@pytest.mark.parametrize("name", SHADOWING)
def test_energy_equals_the_kernel_and_sympy_when_a_parameter_shadows_a_name(name):
    q, p = sp.symbols("q p", real=True)
    k = sp.Symbol(name, real=True)
    # acos(0) is sympy's pi/2 and E its constant: both must keep their values
    expr = p**2 / 2 + sp.acos(0) * q**2 + k * sp.cos(q) + sp.E * sp.sqrt(1 + q**2) + k**2 * sp.exp(-q**2)
    H = Hamiltonian(expr, [q], [p], params={name: 10.0})
    z = np.array([0.3, 0.1])
    energy = H.energy(z)
    kernel = compile_kernel(H).call("hamiltonian", z, H.param_values())
    reference = _reference(expr, {q: 0.3, p: 0.1, k: 10.0})  # reference: sympy at 30 digits
    assert energy == pytest.approx(reference, rel=1e-13)
    assert kernel == pytest.approx(reference, rel=1e-13)


def test_issue_example_energy():
    H = Hamiltonian("p**2/2+acos(0)*q**2", ["q"], ["p"], params={"pi": 10.0})
    # reference: 0.1**2/2 + (pi/2) * 0.3**2, evaluated by sympy
    expected = float(sp.Rational(1, 200) + sp.pi / 2 * sp.Rational(9, 100))
    assert H.energy([0.3, 0.1]) == pytest.approx(expected, rel=1e-15)


def test_huge_whole_numbers_evaluate_as_doubles():
    # a whole number past 2**53 reaches numpy as the nearest double (common practice: numbers
    # are rounded to doubles before evaluation), as the kernel prints it; numpy would
    # otherwise get a Python int and fail on sin()
    H = Hamiltonian("p**2/2 + q**2 + sin(10**30)*q", ["q"], ["p"])
    kernel = compile_kernel(H).call("hamiltonian", np.array([0.5, 0.0]), H.param_values())
    expected = 0.25 + math.sin(1e30) * 0.5  # Python's libm on the rounded argument
    assert H.energy([0.5, 0.0]) == pytest.approx(expected, rel=1e-15)
    assert kernel == pytest.approx(expected, rel=1e-15)


def test_map_step_with_a_shadowing_parameter():
    # the standard map with its kick strength called pi: y' = y + pi*sin(x), x' = x + y'
    m = AreaPreservingMap(["x + y + pi*sin(x)", "y + pi*sin(x)"], ["x"], ["y"], params={"pi": 0.5})
    out = np.asarray(m.step([[0.2, 0.1]])).ravel()
    expected = [0.2 + 0.1 + 0.5 * np.sin(0.2), 0.1 + 0.5 * np.sin(0.2)]  # the formula above, numpy
    assert np.allclose(out, expected, rtol=1e-15, atol=0)


def test_shell_seeds_with_a_shadowing_parameter():
    H = Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)*E/2", ["x", "y"], ["px", "py"], params={"E": 3.0})
    s = shell_seeds(H, {"y": [0.0, 0.5], "py": 0.0}, energy=1.0, plane={"x": 0.0}, solve_for="px")
    # with E the parameter 3: px = sqrt(2 - 3 y**2) (the energy equation solved by hand)
    expected = np.sqrt(2.0 - 3.0 * np.array([0.0, 0.5]) ** 2)
    assert np.allclose(s.states[:, 2], expected, rtol=1e-14)
