"""A kernel singularity (a collision, a negative power at zero) stops that orbit with a
status, in every loop and with every method, and the other orbits of the batch come out
bit-identical to running them alone.

Kernels divide as IEEE arithmetic does (x / 0 is inf, 0 / 0 is nan; common practice, IEEE
754), and the loops check the values they compute.
"""

import numpy as np
import pytest

from phaselab import Hamiltonian, chaos_indicators, equilibria, section, trajectory
from phaselab.engine import status as codes
from phaselab.structures.returns import return_map
from phaselab.model.maps import AreaPreservingMap


@pytest.fixture(scope="module")
def steep():
    """A particle on a wall q**-12: at q = 1e-27 the potential (1e324) exceeds the doubles."""
    return Hamiltonian("p**2/2+q**(-12)", ["q"], ["p"])


@pytest.fixture(scope="module")
def bodies():
    """Two bodies on a line attracting as -1/|x1 - x2|: singular where they meet."""
    return Hamiltonian("(p1**2+p2**2)/2 - 1/sqrt((x1-x2)**2)", ["x1", "x2"], ["p1", "p2"])


def _same(a, b):
    """Bit-identical arrays (NaN where NaN)."""
    return np.array_equal(np.asarray(a), np.asarray(b), equal_nan=True)


@pytest.mark.parametrize("method", ["leapfrog", "yoshida4", "rk4", "gauss4"])
def test_trajectory_stops_at_a_negative_power_of_zero(steep, method):
    batch = np.array([[1e-27, 0.0], [1.0, 0.5]])
    tr = trajectory(steep, batch, t=2, dt=0.001, method=method, check_step=False)
    assert tr.status[0] == codes.SINGULAR and tr.escaped[0]
    assert tr.status[1] == codes.OK
    alone = trajectory(steep, batch[1:], t=2, dt=0.001, method=method, check_step=False)
    assert _same(tr.states[1], alone.states[0]) and _same(tr.energy_error[1], alone.energy_error[0])


def test_bodies_starting_together_are_singular(bodies):
    batch = np.array([[0.0, 0.0, 0.0, 0.0], [0.0, 2.0, 0.1, -0.1]])
    tr = trajectory(bodies, batch, t=1, dt=0.001, check_step=False)
    assert tr.status[0] == codes.SINGULAR
    assert tr.status[1] == codes.OK
    alone = trajectory(bodies, batch[1:], t=1, dt=0.001, check_step=False)
    assert _same(tr.states[1], alone.states[0])


def test_no_equilibria_on_the_collision_line(bodies):
    # dH/dx1 = (x1 - x2) / |x1 - x2|**3 never vanishes (a derivation by hand): no equilibria
    assert equilibria(bodies) == []


def test_section_stops_a_singular_orbit(bodies):
    seeds = np.array([[0.0, 0.0, 0.0, 0.0], [0.0, 2.0, 0.0, 0.0], [0.0, 3.0, 0.0, 0.0]])
    sec = section(bodies, seeds, plane={"x1": 1.0}, crossings=2, t_max=20.0, dt=0.001)
    assert sec.status[0] == codes.SINGULAR
    alone = section(bodies, seeds[1:], plane={"x1": 1.0}, crossings=2, t_max=20.0, dt=0.001)
    assert _same(sec.status[1:], alone.status) and _same(sec.points[1:], alone.points)


def test_chaos_indicators_stop_a_singular_orbit(steep):
    batch = np.array([[1e-27, 0.0], [1.0, 0.5]])
    with pytest.warns(RuntimeWarning, match=r"1 orbit\(s\) stopped early \(orbit 0 at t = 0\).*singularity"):
        r = chaos_indicators(steep, batch, t=1.0, dt=0.001)
    assert r.status[0] in codes.STOPPED and r.status[1] == codes.OK
    alone = chaos_indicators(steep, batch[1:], t=1.0, dt=0.001)
    assert _same(r.megno[1], alone.megno[0]) and _same(r.lyapunov[1], alone.lyapunov[0])


def test_map_return_stops_at_a_pole():
    # a kicked map y' = y - 1/x**3, x' = x + y' (area-preserving for any kick): a pole at x = 0
    m = AreaPreservingMap(["x + y - 1/x**3", "y - 1/x**3"], ["x"], ["y"])
    ret = return_map(m, 2)
    images = ret.apply(np.array([[0.0, 0.3], [1.5, 0.2]]))
    assert images.status[0] == codes.SINGULAR or images.status[0] == codes.NOT_FINITE
    assert images.status[1] == codes.OK
    alone = ret.apply(np.array([[1.5, 0.2]]))
    assert _same(images.u[1], alone.u[0]) and _same(images.jacobian[1], alone.jacobian[0])
