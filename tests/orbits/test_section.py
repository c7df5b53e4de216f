"""Surfaces of section: plane crossings, stroboscopic sections, map iterates."""


import numpy as np
import pytest
from scipy.integrate import solve_ivp

import phaselab
from phaselab import IntegrationError, ModelError, ParameterError
from phaselab.orbits.seeds import shell_seeds
from phaselab.orbits.section import section
from phaselab.model.maps import AreaPreservingMap


# ----------------------------------------------------------------------------- systems
@pytest.fixture(scope="module")
def oscillators():
    return phaselab.Hamiltonian("(px**2 + py**2)/2 + (wx**2*x**2 + wy**2*y**2)/2", ["x", "y"], ["px", "py"],
                                params={"wx": 1.0, "wy": 1.0})


def hh_energy(Z):
    # Henon & Heiles, Astron. J. 69, 73 (1964)
    x, y, px, py = Z[..., 0], Z[..., 1], Z[..., 2], Z[..., 3]
    return (px**2 + py**2) / 2 + (x**2 + y**2) / 2 + x**2 * y - y**3 / 3


def hh_rhs(t, z):
    x, y, px, py = z
    return [px, py, -x - 2 * x * y, -y - x * x + y * y]


def hh_seeds(hh, E, n):
    y = np.linspace(-0.25, 0.35, n)
    s = shell_seeds(hh, {"y": y, "py": 0.0}, energy=E, plane={"x": 0.0}, solve_for="px")
    assert s.valid.all()
    return s


# ----------------------------------------------------------------------------- closed forms
def test_uncoupled_oscillators_lie_on_exact_ellipses(oscillators):
    # Separable H: each oscillator's energy is conserved, so on x = 0 the points (y, py) lie
    # on py^2/2 + wy^2 y^2/2 = E_y, and x(t) = A sin(wx t) crosses x = 0 upwards at
    # t = 2 pi k / wx (closed-form solution of the harmonic oscillator; common practice).
    wx, wy = 1.0, np.sqrt(2.0)
    Z0 = np.array([[0.0, 0.3, 0.5, 0.1], [0.0, -0.2, 0.8, 0.4], [0.0, 0.0, 0.2, 0.6]])
    sec = section(oscillators, Z0, plane={"x": 0.0}, crossings=40, params={"wx": wx, "wy": wy},
                  method="yoshida8", dt=0.02)
    assert sec.counts.tolist() == [40, 40, 40]
    assert sec.axes == (1, 3) and [s.name for s in sec.axis_symbols] == ["y", "py"]
    Ey = Z0[:, 3] ** 2 / 2 + wy**2 * Z0[:, 1] ** 2 / 2
    pts = sec.points
    on_ellipse = pts[..., 3] ** 2 / 2 + wy**2 * pts[..., 1] ** 2 / 2
    assert np.max(np.abs(on_ellipse - Ey[:, None])) < 1e-10
    np.testing.assert_allclose(pts[..., 2], Z0[:, 2:3] * np.ones((1, 40)), rtol=1e-10)
    np.testing.assert_array_equal(pts[..., 0], 0.0)
    t_exact = 2 * np.pi * np.arange(1, 41) / wx
    assert np.max(np.abs(sec.times - t_exact[None, :])) < 1e-9
    # y(t) at the crossing times from the closed-form solution
    y_exact = Z0[:, 1:2] * np.cos(wy * t_exact) + Z0[:, 3:4] / wy * np.sin(wy * t_exact)
    assert np.max(np.abs(pts[..., 1] - y_exact)) < 1e-9


def test_crossing_refinement_matches_scipy_event_location(hh):
    E = 1.0 / 8.0
    s = hh_seeds(hh, E, 3)
    sec = section(hh, s, plane={"x": 0.0}, crossings=4, method="yoshida8", dt=0.01)
    assert np.max(np.abs(sec.points[..., 0])) < 1e-13
    # reference: scipy DOP853, rtol 1e-12, with its own event location of x = 0 upwards
    # (the seed itself, on the plane, is reported by scipy as an event at t = 0)
    event = lambda t, z: z[0]
    event.direction = 1.0
    for i, z0 in enumerate(s.valid_states()):
        ref = solve_ivp(hh_rhs, (0, 60), z0, method="DOP853", rtol=1e-12, atol=1e-14, events=event)
        keep = ref.t_events[0] > 0
        t_ref = ref.t_events[0][keep][:4]
        z_ref = ref.y_events[0][keep][:4]
        assert np.max(np.abs(sec.points[i] - z_ref)) < 1e-9
        assert np.max(np.abs(sec.times[i] - t_ref)) < 1e-9


def test_refinement_is_exact_on_the_plane_for_other_values_and_direction(hh):
    s = hh_seeds(hh, 1.0 / 12.0, 4)
    sec = section(hh, s, plane={"y": 0.05}, direction=-1, crossings=20, dt=0.02)
    assert np.all(sec.counts == 20)
    assert np.max(np.abs(sec.points[..., 1] - 0.05)) < 1e-13
    assert np.all(sec.points[..., 3] < 0)  # dy/dt = py < 0 when crossing downwards
    assert sec.axes == (0, 2)  # plane through y: show (x, px)


# ----------------------------------------------------------------------------- Henon-Heiles
@pytest.mark.parametrize("E", [1.0 / 12.0, 1.0 / 8.0])
def test_henon_heiles_sections(hh, E):
    s = hh_seeds(hh, E, 6)
    sec = section(hh, s, plane={"x": 0.0}, crossings=150, dt=0.02)
    # bounded below the saddle energy 1/6 (Henon & Heiles 1964): every orbit gives all crossings
    assert sec.counts.tolist() == [150] * 6
    assert not sec.escaped.any()
    assert sec.energy == E and sec.method == "yoshida4" and sec.dt == 0.02
    assert np.all(np.diff(sec.times, axis=1) > 0)
    assert np.all(sec.points[..., 2] > 0)  # crossing x = 0 upwards: dx/dt = px > 0
    dH = np.abs(hh_energy(sec.points) - E)  # published formula, numpy
    assert dH.max() < 1e-7
    np.testing.assert_allclose(sec.energy_error, dH.max(axis=1), rtol=1e-6, atol=1e-15)
    x, y = sec.xy()
    assert x.shape == (900,) and np.all(np.isfinite(y))


def test_time_cap_comes_first(hh):
    s = hh_seeds(hh, 1.0 / 8.0, 2)
    sec = section(hh, s, plane={"x": 0.0}, crossings=300, t_max=50.0, dt=0.02)
    assert np.all(sec.counts < 300) and np.all(sec.counts > 3)
    assert np.nanmax(sec.times) <= 50.0
    assert not sec.escaped.any()


# ----------------------------------------------------------------------------- failures
def test_escapes_and_bad_seeds_are_flagged_while_the_rest_survive(hh):
    # above the saddle energy 1/6 orbits can leave (Henon & Heiles 1964)
    Z0 = np.array([[0.0, 0.1, 0.3, 0.0],          # bounded, E < 1/6
                   [0.0, 0.0, 0.9, 0.0],          # E = 0.405 > 1/6, leaves the box
                   [np.nan, 0.0, 0.1, 0.0],       # non-finite seed
                   [0.0, -0.1, 0.35, 0.05]])
    sec = section(hh, Z0, plane={"x": 0.0}, crossings=50, dt=0.02, box=4.0)
    np.testing.assert_array_equal(sec.escaped, [False, True, True, False])
    from phaselab.engine.status import LEFT_BOX, NOT_FINITE
    assert sec.status[1] == LEFT_BOX and sec.status[2] == NOT_FINITE
    assert sec.counts[0] == 50 and sec.counts[3] == 50 and sec.counts[2] == 0
    assert sec.counts[1] < 50
    assert np.isnan(sec.energy_error[2])
    assert np.all(np.isnan(sec.points[1, sec.counts[1]:]))


def test_plane_never_crossed_warns(hh):
    s = hh_seeds(hh, 1.0 / 12.0, 2)
    with pytest.warns(RuntimeWarning, match="never crossed"):
        sec = section(hh, s, plane={"x": 2.0}, crossings=5, t_max=30.0, dt=0.05)
    assert sec.counts.tolist() == [0, 0] and not sec.escaped.any()


def test_orbits_blown_up_by_a_huge_step_are_named_in_a_warning(hh):
    """Henon-Heiles is unbounded above E = 1/6: with dt = 5 a bound orbit at E = 1/12 is thrown
    out and overflows (the step is far past the stability limit of a composition method for a
    unit frequency, dt < 2; common practice). A seed that was non-finite from the start is not
    named (it never ran)."""
    s = hh_seeds(hh, 1.0 / 12.0, 2)
    states = np.vstack([s.valid_states(), [np.nan, 0.0, 0.0, 0.0]])
    with pytest.warns(RuntimeWarning, match=r"2 orbit\(s\) stopped early \(orbit 0, 1\): a non-finite state.*dt = 5 is too large"):
        sec = section(hh, states, plane={"x": 0.0}, crossings=5, dt=5.0)
    from phaselab.engine.status import NOT_FINITE
    assert (sec.status == NOT_FINITE).all()


def test_invalid_shell_seeds_are_left_out_with_a_warning(hh):
    s = shell_seeds(hh, {"y": [0.1, 0.95, 0.2], "py": 0.0}, energy=1.0 / 8.0, plane={"x": 0.0},
                    solve_for="px")
    with pytest.warns(RuntimeWarning, match="#1: outside the energetically allowed region"):
        sec = section(hh, s, plane={"x": 0.0}, crossings=3, dt=0.02)
    assert sec.n_orbits == 2
    np.testing.assert_array_equal(sec.seeds, s.valid_states())


def test_bad_arguments(hh):
    Z0 = np.array([[0.0, 0.1, 0.3, 0.0]])
    with pytest.raises(ParameterError, match="x, y, px, py"):
        section(hh, Z0, plane={"r": 0.0})
    with pytest.raises(ParameterError, match="direction"):
        section(hh, Z0, plane={"x": 0.0}, direction=0)
    with pytest.raises(ParameterError, match="crossings"):
        section(hh, Z0, plane={"x": 0.0}, crossings=0)
    with pytest.raises(ParameterError, match=r"shape \(4,\) or \(n_orbits, 4\)"):
        section(hh, np.zeros((2, 3)), plane={"x": 0.0})
    with pytest.raises(ModelError, match="autonomous"):
        section(hh, Z0, plane="stroboscopic")
    with pytest.raises(ParameterError, match="axes|axis"):
        section(hh, Z0, plane={"x": 0.0}, axes=("y", "q"))
    with pytest.raises(ParameterError, match="adaptive"):
        section(hh, Z0, plane={"x": 0.0}, method="dop853")
    # requests whose size is known up front are refused before any memory is taken
    with pytest.raises(ParameterError, match="GiB.*set_limits"):
        section(hh, Z0, plane={"x": 0.0}, crossings=10**8, dt=0.02, t_max=100.0)
    with pytest.raises(ParameterError, match="set_limits"):
        section(hh, Z0, plane={"x": 0.0}, crossings=10**20, dt=0.02)
    with pytest.raises(ParameterError, match="dt must be positive"):
        section(hh, Z0, plane={"x": 0.0}, dt=-0.1)
    with pytest.raises(ParameterError, match="box"):
        section(hh, Z0, plane={"x": 0.0}, box="big")
    sec = section(hh, Z0, plane={"x": 0.0}, crossings=2, dt=0.02, axes=("y", "px"))
    assert sec.axes == (1, 2)


# ----------------------------------------------------------------------------- driven flow
def test_stroboscopic_section_of_a_driven_oscillator():
    # x'' + w0^2 x = F cos(W t): x(t) = (x0 - A) cos(w0 t) + v0/w0 sin(w0 t) + A cos(W t),
    # A = F / (w0^2 - W^2) (closed-form solution; common practice). Sampled at t = k 2 pi / W.
    w0, F, W = 1.3, 0.4, 0.7
    H = phaselab.Hamiltonian("p**2/2 + w0**2*x**2/2 - F*x*cos(W*t)", ["x"], ["p"],
                             params={"w0": w0, "F": F, "W": W}, time="t", period="2*pi/W")
    Z0 = np.array([[0.5, 0.0], [0.0, 0.3], [-0.4, -0.2]])
    sec = section(H, Z0, plane="stroboscopic", crossings=40, method="yoshida8", dt=0.02)
    T = 2 * np.pi / W
    assert sec.plane == {"kind": "stroboscopic", "period": pytest.approx(T)}
    assert sec.counts.tolist() == [40] * 3 and sec.axes == (0, 1)
    assert abs(T / sec.dt - round(T / sec.dt)) < 1e-9  # the step divides the period
    t = np.arange(1, 41) * T
    np.testing.assert_allclose(sec.times[0], t, rtol=1e-14)
    A = F / (w0**2 - W**2)
    x0, v0 = Z0[:, 0:1], Z0[:, 1:2]
    x = (x0 - A) * np.cos(w0 * t) + v0 / w0 * np.sin(w0 * t) + A * np.cos(W * t)
    v = -(x0 - A) * w0 * np.sin(w0 * t) + v0 * np.cos(w0 * t) - A * W * np.sin(W * t)
    assert np.max(np.abs(sec.points[..., 0] - x)) < 1e-9
    assert np.max(np.abs(sec.points[..., 1] - v)) < 1e-9
    assert sec.energy_error.max() < 1e-9


# ----------------------------------------------------------------------------- maps
def numpy_standard_map(q, p, K, n, wrap_p):
    # Chirikov, Phys. Rep. 52, 263 (1979): p' = p + K sin q, q' = q + p' (mod 2 pi)
    out = np.empty((n, 2) + np.shape(q))
    for i in range(n):
        p = p + K * np.sin(q)
        q = np.mod(q + p, 2 * np.pi)
        if wrap_p:
            p = np.mod(p, 2 * np.pi)
        out[i, 0], out[i, 1] = q, p
    return out


def test_standard_map_section_equals_numpy_iteration():
    M = phaselab.models.standard_map()  # q and p on [0, 2 pi)
    K = 0.6  # mostly regular, so short-time comparison is not spoiled by chaos
    q0 = np.array([0.5, 1.5, 3.0, 5.0])
    p0 = np.array([0.2, 1.0, 2.5, 4.0])
    sec = section(M, np.column_stack([q0, p0]), crossings=200, params={"K": K})
    assert sec.method == "map" and np.isnan(sec.dt) and np.all(sec.energy_error == 0)
    assert sec.counts.tolist() == [200] * 4
    ref = numpy_standard_map(q0, p0, K, 200, wrap_p=True)  # (200, 2, 4)
    got = np.moveaxis(sec.points, 0, 2)
    # one iterate at a time, from phaselab's own previous point: agreement to round-off
    step = numpy_standard_map(sec.points[:, :-1, 0], sec.points[:, :-1, 1], K, 1, wrap_p=True)[0]
    assert np.max(np.abs(np.moveaxis(step, 0, 2) - sec.points[:, 1:])) <= 1e-15 * 2 * np.pi
    # whole orbits for the first 20 iterates
    assert np.max(np.abs(got[:20] - ref[:20])) < 1e-13
    np.testing.assert_array_equal(sec.times[0], np.arange(1, 201))


def test_map_with_unwrapped_momentum_and_escapes():
    M = AreaPreservingMap([("p", "p + K*sin(q)"), ("q", "q + p")], ["q"], ["p"], params={"K": 1.5},
                          modulus=[2 * np.pi, None], name="kicked rotor on a cylinder")
    Z0 = np.array([[0.5, 0.1], [2.0, 3.0], [np.inf, 0.0], [3.0, 0.0]])
    sec = section(M, Z0, crossings=300, box={"p": (-6.0, 6.0)})
    ref = numpy_standard_map(Z0[[0, 1, 3], 0], Z0[[0, 1, 3], 1], 1.5, 300, wrap_p=False)
    assert sec.escaped[2] and sec.counts[2] == 0
    for row, o in enumerate([0, 1, 3]):
        c = sec.counts[o]
        n = min(c, 20)
        assert np.max(np.abs(sec.points[o, :n] - ref[:n, :, row])) < 1e-13
        if sec.escaped[o]:
            # the last recorded iterate is inside the box and the next one (numpy) is not
            assert 0 < c < 300 and abs(sec.points[o, c - 1, 1]) <= 6.0
            nxt = numpy_standard_map(sec.points[o, c - 1, 0], sec.points[o, c - 1, 1], 1.5, 1, wrap_p=False)
            assert abs(nxt[0, 1]) > 6.0
            assert np.all(np.isnan(sec.points[o, c:]))
        else:
            assert c == 300 and np.all(np.abs(sec.points[o, :, 1]) <= 6.0)
    assert sec.escaped[1] and not sec.escaped[0]  # seen with this seed: p diffuses past 6
    assert np.all(sec.points[..., 0][np.isfinite(sec.points[..., 0])] < 2 * np.pi)
