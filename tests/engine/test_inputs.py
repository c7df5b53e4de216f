"""The shared argument checks (engine/inputs.py) and the limits on work (engine/limits.py),
called directly. Each accepted form comes back in the form the compiled loops take; each
mistake is one ParameterError naming the argument (DEVELOPERS.md, "Inputs")."""

import math

import numpy as np
import pytest

from phaselab import ParameterError
from phaselab.engine import inputs, limits


@pytest.fixture(autouse=True)
def _restore_limits():
    before = limits.LIMITS
    yield
    limits.LIMITS = before


def test_numbers():
    assert inputs.number(np.float32(0.5), "x") == 0.5 and isinstance(inputs.number(3, "x"), float)
    for bad in (True, "1", 1 + 2j, None, math.nan, math.inf, 10**400):
        with pytest.raises(ParameterError, match="x"):
            inputs.number(bad, "x")
    with pytest.raises(ParameterError, match="positive"):
        inputs.positive_number(0.0, "tol")


def test_counts():
    assert inputs.count(np.int64(7), "n") == 7 and inputs.count(8.0, "n") == 8
    for bad, words in ((0, "at least 1"), (2.5, "integer"), (True, "integer"), (2**60, "2\\*\\*53"),
                       ("3", "integer")):
        with pytest.raises(ParameterError, match=words):
            inputs.count(bad, "n")
    with pytest.raises(ParameterError, match="at most 5"):
        inputs.count(6, "n", maximum=5)


def test_states_come_back_as_c_ordered_float64_batches():
    z = inputs.states([0.1, 0.2], 2, ("q", "p"))
    assert z.shape == (1, 2) and z.dtype == np.float64 and z.flags.c_contiguous
    z = inputs.states(np.asfortranarray(np.ones((3, 2), dtype=np.float32)), 2, ("q", "p"))
    assert z.shape == (3, 2) and z.dtype == np.float64 and z.flags.c_contiguous
    for bad in ([0.1], [[0.1, 0.2, 0.3]], "abc", [[0.1, None]]):
        with pytest.raises(ParameterError, match="seeds"):
            inputs.states(bad, 2, ("q", "p"))


def test_direction_and_step():
    assert inputs.direction(-1) == -1 and inputs.direction(1) == 1
    with pytest.raises(ParameterError, match="direction"):
        inputs.direction(0)
    assert inputs.step(None) is None and inputs.step(0.01) == 0.01
    for bad in (0.0, -0.1, math.nan):
        with pytest.raises(ParameterError, match="dt"):
            inputs.step(bad)


def test_budgets_refuse_before_work_and_say_how_to_raise_the_limit():
    limits.set_limits(memory_bytes=1e6, orbit_steps=1e6)
    limits.check_budget(10, 1e4, 1e4, "small")     # 1e5 steps, 80 kB: accepted
    with pytest.raises(ParameterError, match="set_limits"):
        limits.check_budget(1000, 1e4, 0, "many steps")
    with pytest.raises(ParameterError, match="set_limits"):
        limits.check_budget(1, 0, 1e6, "much memory")  # 8 MB of float64 over a 1 MB limit
    with pytest.raises(ParameterError, match="grid"):
        limits.grid_budget(1e6, 4, "a grid")
