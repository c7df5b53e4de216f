"""The limits on work one call may ask for (engine/limits.py), called directly: a request
over a limit is refused before any work, naming the limit and how to raise it."""

import pytest

from phaselab import ParameterError
from phaselab.engine import limits


@pytest.fixture(autouse=True)
def _restore_limits():
    before = limits.LIMITS
    yield
    limits.LIMITS = before


def test_budgets_refuse_before_work_and_say_how_to_raise_the_limit():
    limits.set_limits(memory_bytes=1e6, orbit_steps=1e6)
    limits.check_budget(10, 1e4, 1e4, "small")     # 1e5 steps, 80 kB: accepted
    with pytest.raises(ParameterError, match="set_limits"):
        limits.check_budget(1000, 1e4, 0, "many steps")
    with pytest.raises(ParameterError, match="set_limits"):
        limits.check_budget(1, 0, 1e6, "much memory")  # 8 MB of float64 over a 1 MB limit
    with pytest.raises(ParameterError, match="grid"):
        limits.grid_budget(1e6, 4, "a grid")
