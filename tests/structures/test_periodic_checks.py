"""What a periodic-orbit search reports about its own answer: the residual reached at the
rounding level, and how far the orbit lies from its guess; against scipy and closed forms."""

import warnings

import numpy as np
import pytest
from scipy.integrate import solve_ivp

import phaselab
from phaselab.errors import IntegrationError, PhaselabWarning

E = 1 / 8


def hh_rhs(t, z):
    x, y, px, py = z
    return [px, py, -x - 2 * x * y, -y - x * x + y * y]


def _on_shell(y, py):
    """The state (0, y, px, py) with px > 0 on H = E for Henon-Heiles,
    H = (px^2 + py^2 + x^2 + y^2)/2 + x^2 y - y^3/3 (Henon & Heiles 1964)."""
    return np.array([0.0, y, np.sqrt(2 * E - py**2 - y**2 + 2 * y**3 / 3), py])


def _return_time(z0):
    """Time to the next upward crossing of x = 0, by scipy's DOP853 with event location."""
    def cross(t, z):
        return z[0]
    cross.direction = 1.0
    sol = solve_ivp(hh_rhs, (0.0, 30.0), z0, method="DOP853", rtol=1e-12, atol=1e-12, events=cross)
    times = sol.t_events[0]
    return float(times[times > 1e-6][0])


def test_a_tolerance_below_rounding_ends_at_the_rounding_level(henon_heiles):
    """tol = 1e-17 is below one unit in the last place of the orbit's coordinates (~0.4), so
    no residual can meet it. The search stops where the residual is at its measured rounding
    noise (a few units of 2.2e-16 times the orbit's scale; common practice), reports the
    residual reached and that noise, and the orbit closes under scipy's DOP853."""
    o = phaselab.periodic_orbit(henon_heiles, [0.0, 0.31, 0.4, 0.01], plane={"x": 0.0}, energy=E, tol=1e-17,
                                method="yoshida8", dt=0.01)
    assert 0 < o.rounding < 1e-14 and o.residual <= 10 * o.rounding
    sol = solve_ivp(hh_rhs, (0, o.period), o.points[0], method="DOP853", rtol=1e-13, atol=1e-14)
    assert np.max(np.abs(sol.y[:, -1] - o.points[0])) < 1e-9
    # at the default tolerance nothing changes: the tolerance is met, no noise is measured
    d = phaselab.periodic_orbit(henon_heiles, [0.0, 0.31, 0.4, 0.01], plane={"x": 0.0}, energy=E)
    assert np.isnan(d.rounding) and d.residual <= 1e-11 * (1 + np.max(np.abs(d.points[0, [1, 3]])))


def test_a_guess_that_is_really_too_far_is_still_called_so(standard_map):
    """From (3.008, 1.003) no period-7 orbit of the standard map at K = 6 is near: the residual
    is of order one when the line search gives up, far above any rounding."""
    with pytest.raises(IntegrationError, match="too far"):
        phaselab.periodic_orbit(standard_map, [3.00844215, 1.00316038], returns=7,
                                params={"K": 6.0})


def test_distance_from_the_guess_is_reported_and_a_far_one_warned(henon_heiles):
    """From the middle of the section (y = py = 0) the search at E = 1/8 ends on the stable
    period-1 orbit, 0.3 away in y: a different place than asked, so it warns. The distance is
    that to the guess put on the shell (px from H = E in closed form), the period change that
    to the guess's return time found by scipy's DOP853 with event location. From the orbit's
    own point nothing is far and nothing is said."""
    with pytest.warns(PhaselabWarning, match="far from the guess"):
        o = phaselab.periodic_orbit(henon_heiles, [0.0, 0.0, 0.0, 0.0], plane={"x": 0.0}, energy=E,
                                    method="yoshida8", dt=0.01)
    start = _on_shell(0.0, 0.0)
    assert o.distance_from_guess == pytest.approx(np.max(np.abs(o.points[0] - start)), abs=1e-12)
    assert o.distance_from_guess > 0.25
    assert o.period_change == pytest.approx(o.period - _return_time(start), abs=1e-8)
    with warnings.catch_warnings():
        warnings.simplefilter("error", PhaselabWarning)
        again = phaselab.periodic_orbit(henon_heiles, o.points[0], plane={"x": 0.0}, energy=E,
                                        method="yoshida8", dt=0.01)
    assert again.distance_from_guess < 1e-9 and abs(again.period_change) < 1e-9


def test_an_orbit_of_a_resonant_drive_is_flagged_far():
    """q'' + q = e cos t, driven at its own frequency, has no periodic orbit: every solution
    grows like (e/2) t sin t (resonance; Landau & Lifshitz, Mechanics, sec. 22). The discrete
    stroboscopic map is slightly off resonance and has a fixed point at a large amplitude,
    which Newton's method finds from a small guess; the search says it is far away."""
    driven = phaselab.Hamiltonian("p**2/2 + q**2/2 - e*q*cos(t)", ["q"], ["p"], params={"e": 0.1},
                                  time="t", period="2*pi", name="resonant drive")
    with pytest.warns(PhaselabWarning, match="far from the guess"):
        o = phaselab.periodic_orbit(driven, [0.1, 0.0], dt=0.5)
    assert o.distance_from_guess == pytest.approx(np.max(np.abs(o.points[0] - [0.1, 0.0])), rel=1e-12)
    assert o.distance_from_guess > 10 and o.period_change == 0.0
