"""The section plane parsed in one place (engine/inputs.py) and refused alike by every caller."""
import math

import numpy as np
import pytest
import sympy as sp

import phaselab
from phaselab import ParameterError
from phaselab.engine import inputs

H2 = phaselab.Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)/2", ["x", "y"], ["px", "py"])


@pytest.mark.parametrize("value, kind, fixed", [
    (None, "none", {}),
    ("stroboscopic", "stroboscopic", {}),
    ({"x": 0.0}, "fixed", {"x": 0.0}),
    ({sp.Symbol("y"): 0.25}, "fixed", {"y": 0.25}),          # a sympy symbol names the component
    ({"x": np.float32(0.5), "py": 1}, "fixed", {"x": 0.5, "py": 1.0}),
    ({"x": np.array(-0.5)}, "fixed", {"x": -0.5}),             # a 0-d array is a number
    ({}, "fixed", {}),
])
def test_accepted_forms(value, kind, fixed):
    where = inputs.plane(H2, value)
    assert where.kind == kind
    assert where.as_dict() == fixed
    assert inputs.plane(H2, where) is where                    # a parsed plane passes through


def test_a_sympy_number_is_its_float():
    # reference: math.pi (the value float() gives a sympy constant)
    assert inputs.plane(H2, {"x": sp.pi}).values == (math.pi,)


@pytest.mark.parametrize("value, words", [
    ("strobe", "mapping such as"),
    ([("x", 0.0)], "mapping such as"),
    (5, "mapping such as"),
    ({"w": 0.0}, "unknown plane component 'w'"),
    ({"x": "0"}, "real number"),
    ({"x": True}, "real number"),
    ({"x": 1j}, "real number"),
    ({"x": [0.0]}, "real number"),
    ({"x": math.nan}, "finite"),
    ({"x": 0.0, sp.Symbol("x"): 1.0}, "fixes 'x' twice"),
])
def test_refused_forms_name_the_problem(value, words):
    with pytest.raises(ParameterError, match=words):
        inputs.plane(H2, value)


def test_single_component_and_stroboscopic_only_where_meant():
    assert inputs.plane(H2, {"py": 0.1}).single() == (3, 0.1)
    with pytest.raises(ParameterError, match="exactly one state component"):
        inputs.plane(H2, {"x": 0.0, "y": 0.0}).single()
    with pytest.raises(ParameterError, match="state names to values"):
        inputs.plane(H2, "stroboscopic", stroboscopic=False)


@pytest.mark.parametrize("call", [
    lambda p: phaselab.section(H2, [[0.0, 0.1, 0.2, 0.0]], plane=p, crossings=2, dt=0.05),
    lambda p: phaselab.periodic_orbit(H2, [0.0, 0.1, 0.2, 0.0], plane=p, energy=0.1),
    lambda p: phaselab.frequencies(H2, [[0.0, 0.1, 0.2, 0.0]], samples=64, plane=p),
    lambda p: phaselab.level_set(H2, {"y": (-1, 1), "py": (-1, 1)}, 0.1, plane=p, resolution=8),
    lambda p: phaselab.shell_seeds(H2, {"y": [0.1], "py": [0.0]}, energy=0.1, plane=p,
                                   solve_for="px"),
])
def test_every_caller_refuses_a_bad_plane_with_the_same_words(call):
    # one parser: the same message wherever a plane is taken, before any integration
    with pytest.raises(ParameterError, match="unknown plane component 'w'; the state components"):
        call({"w": 0.0})
    with pytest.raises(ParameterError, match="plane value of 'x' must be finite"):
        call({"x": math.inf})
