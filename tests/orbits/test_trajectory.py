"""phaselab.trajectory against published formulas and scipy, and its handling of bad input.

Systems are built here with phaselab.Hamiltonian (scenarios of our own: a bead swinging on a
hoop, a probe around an invented moon) and compiled once per module.
"""

import warnings

import numpy as np
import pytest
import sympy as sp
from scipy.integrate import quad, solve_ivp
from scipy.special import ellipk

import phaselab
from phaselab import Hamiltonian, IntegrationError, ModelError, ParameterError
from phaselab.orbits.trajectory import trajectory

W = 1.3     # small-oscillation frequency of the bead (rad per unit time)
MU = 2.5    # gravitational parameter of the invented moon


@pytest.fixture(scope="module")
def bead():
    return Hamiltonian("p**2/2 - w**2*cos(q)", ["q"], ["p"], params={"w": W}, name="bead on a hoop")


@pytest.fixture(scope="module")
def polar_moon():
    return Hamiltonian("pr**2/2 + pth**2/(2*r**2) - mu/r", ["r", "th"], ["pr", "pth"],
                       params={"mu": MU}, name="probe (polar)")


@pytest.fixture(scope="module")
def quartic():
    return Hamiltonian("(p**2 + q**2)**2/4 + q*p", ["q"], ["p"], name="quartic")


def _hermite_roots(t, f, df, direction):
    """Times where the sampled f crosses 0 in ``direction`` (+1 up, -1 down), refined on
    each bracketing step by the root of the cubic Hermite interpolant of (f, df)."""
    out = []
    for i in np.flatnonzero((f[:-1] * direction < 0) & (f[1:] * direction >= 0)):
        h = t[i + 1] - t[i]
        f0, f1, d0, d1 = f[i], f[i + 1], df[i] * h, df[i + 1] * h
        # f(s) = (2s^3 - 3s^2 + 1) f0 + (s^3 - 2s^2 + s) d0 + (-2s^3 + 3s^2) f1 + (s^3 - s^2) d1
        coeffs = [2 * f0 + d0 - 2 * f1 + d1, -3 * f0 - 2 * d0 + 3 * f1 - d1, d0, f0]
        roots = [r.real for r in np.roots(coeffs) if abs(r.imag) < 1e-12 and -1e-9 <= r.real <= 1 + 1e-9]
        out.append(t[i] + h * min(roots, key=lambda s: abs(s - 0.5)))
    return np.array(out)


# --------------------------------------------------------------------------- pendulum
def test_pendulum_period_small_medium_and_near_separatrix(bead):
    theta0 = np.array([0.1, 1.5, 3.1])
    k = np.sin(theta0 / 2)
    # T = 4 K(k) / omega0 with k = sin(theta0/2) (Abramowitz & Stegun 17.3; scipy.special.ellipk
    # takes the parameter m = k^2)
    expected = 4 * ellipk(k ** 2) / W
    seeds = np.column_stack([theta0, np.zeros(3)])
    dt = 0.005
    tr = trajectory(bead, seeds, 2.2 * expected.max(), dt=dt, method="gauss6")
    assert tr.method == "gauss6" and tr.dt == pytest.approx(dt, rel=1e-3)
    for o in range(3):
        q, p = tr.states[o, :, 0], tr.states[o, :, 1]
        down = _hermite_roots(tr.t, q, p, direction=-1)  # dq/dt = dH/dp = p
        assert len(down) >= 2
        period = down[1] - down[0]
        # gauss6 at dt = 0.005: integration error ~1e-13; the cubic Hermite refinement of the
        # crossing errs by ~dt^4/384 * max|q''''| < 1e-10
        assert period == pytest.approx(expected[o], rel=1e-9), (theta0[o], period, expected[o])
    assert np.abs(tr.energy_error).max() < 1e-12


def test_default_step_follows_the_linearised_frequency(bead):
    theta0 = 0.1
    tr = trajectory(bead, [theta0, 0.0], 10.0)
    assert tr.method == "yoshida4"  # separable H -> Yoshida 4 ("auto")
    # linearising dq/dt = p, dp/dt = -w^2 sin q at the seed gives omega = w sqrt(cos q0)
    # (common practice); the documented default is 2 pi / omega / 100 for a fourth-order
    # method, rounded down onto the ladder 2^(k/4) (at most 2^(1/4) smaller), then shrunk
    # to fit a whole number of steps into the span
    nominal = 2 * np.pi / (W * np.sqrt(np.cos(theta0))) / 100
    assert 0.99 * nominal / 2**0.25 <= tr.dt <= nominal
    assert tr.t[-1] == 10.0 and tr.t[0] == 0.0
    assert np.abs(tr.energy_error).max() < 1e-8


# --------------------------------------------------------------------------- Kepler
def _runge_lenz_polar(states, mu):
    r, th, pr, pth = states.T
    x, y = r * np.cos(th), r * np.sin(th)
    vx = pr * np.cos(th) - pth / r * np.sin(th)
    vy = pr * np.sin(th) + pth / r * np.cos(th)
    # A = v x L - mu r_hat with L = pth along z (Goldstein, Classical Mechanics, sec. 3.9)
    return np.column_stack([vy * pth - mu * x / r, -vx * pth - mu * y / r])


def test_kepler_polar_period_and_runge_lenz_vector(polar_moon):
    a, e = 1.2, 0.5
    r_peri = a * (1 - e)
    v_peri = np.sqrt(MU * (1 + e) / r_peri)  # vis-viva at periapsis (Goldstein sec. 3.7)
    period = 2 * np.pi * np.sqrt(a ** 3 / MU)  # Kepler's third law
    dt = period / 4000
    tr = trajectory(polar_moon, [r_peri, 0.0, 0.0, r_peri * v_peri], 3.2 * period, dt=dt)
    assert tr.method == "gauss6"  # non-separable in polar form -> Gauss-Legendre ("auto")
    s = tr.states[0]
    th_dot = s[:, 3] / s[:, 0] ** 2  # dth/dt = dH/dpth
    passes = [_hermite_roots(tr.t, s[:, 1] - 2 * np.pi * j, th_dot, +1) for j in (1, 2, 3)]
    # a Kepler ellipse is closed: th grows by 2 pi per period (Kepler's third law for T)
    for j, hit in enumerate(passes, start=1):
        assert len(hit) == 1
        assert hit[0] == pytest.approx(j * period, rel=1e-9)
    A = _runge_lenz_polar(s, MU)
    # the Runge-Lenz vector is conserved, points to periapsis and has length mu e (Goldstein 3.9)
    np.testing.assert_allclose(A[0], [MU * e, 0.0], atol=1e-13)
    assert np.abs(A - A[0]).max() < 1e-10 * MU
    # energy of the ellipse E = -mu / (2a) (Goldstein eq. 3.61)
    E = polar_moon.energy(s[-1])
    assert E == pytest.approx(-MU / (2 * a), rel=1e-11)


def test_kepler_cartesian_separable_with_yoshida8():
    H = Hamiltonian("(px**2 + py**2)/2 - mu/sqrt(x**2 + y**2)", ["x", "y"], ["px", "py"],
                    params={"mu": 1.0}, name="probe (cartesian)")
    mu, a, e = 0.8, 1.0, 0.3
    r_peri = a * (1 - e)
    period = 2 * np.pi * np.sqrt(a ** 3 / mu)  # Kepler's third law
    v_peri = np.sqrt(mu * (1 + e) / r_peri)     # vis-viva
    tr = trajectory(H, [r_peri, 0.0, 0.0, v_peri], np.linspace(0.0, 2 * period, 2001),
                    method="yoshida8", params={"mu": mu})
    assert tr.params == {"mu": mu} and tr.method == "yoshida8"
    # after whole periods the orbit is back at periapsis (Kepler's third law)
    np.testing.assert_allclose(tr.states[0, 1000], [r_peri, 0, 0, v_peri], atol=1e-9)
    np.testing.assert_allclose(tr.states[0, 2000], [r_peri, 0, 0, v_peri], atol=1e-9)
    x, y, px, py = tr.states[0].T
    r = np.hypot(x, y)
    L = x * py - y * px
    A = np.column_stack([py * L - mu * x / r, -px * L - mu * y / r])  # Goldstein sec. 3.9
    assert np.abs(A - [mu * e, 0.0]).max() < 1e-9


# --------------------------------------------------------------------------- against scipy
def test_agrees_with_scipy_dop853(hh):
    z0 = np.array([0.1, -0.2, 0.35, 0.1])
    T = 20.0
    tr = trajectory(hh, z0, T, dt=0.005, method="yoshida8", save_every=20)
    # reference: scipy's DOP853 on the right-hand side lambdified from sympy directly
    f = sp.lambdify([list(hh.state_symbols)], hh.vector_field(), "numpy")
    ref = solve_ivp(lambda t, z: f(z), (0.0, T), z0, method="DOP853", t_eval=tr.t,
                    rtol=1e-12, atol=1e-15)
    assert ref.success
    np.testing.assert_allclose(tr.states[0], ref.y.T, rtol=0, atol=1e-9)
    # phaselab's own method="dop853" (compiled vector field) agrees with the same reference
    tr2 = trajectory(hh, z0, tr.t, method="dop853", rtol=1e-12, atol=1e-15)
    assert tr2.method == "dop853" and np.isnan(tr2.dt)
    np.testing.assert_allclose(tr2.states[0], ref.y.T, rtol=0, atol=1e-9)


def test_time_dependent_forced_oscillator_against_sympy():
    H = Hamiltonian("p**2/2 + q**2/2 - F*q*cos(w*t)", ["q"], ["p"], params={"F": 0.5, "w": 1.7},
                    time="t", name="shaken spring")
    F, w, t0, t1 = 0.8, 1.7, 2.0, 12.0
    tr = trajectory(H, [1.0, -0.5], (t0, t1), dt=0.002, params={"F": F})
    assert tr.method == "yoshida4"          # K = H + p_t is separable
    assert tr.states.shape[2] == 2           # original coordinates
    # reference: sympy.dsolve of q'' + q = F cos(w t), q(t0) = 1, q'(t0) = -0.5
    ts, Fs = sp.Symbol("t"), sp.Rational(4, 5)
    qf = sp.Function("q")
    sol = sp.dsolve(sp.Eq(qf(ts).diff(ts, 2) + qf(ts), Fs * sp.cos(sp.Rational(17, 10) * ts)), qf(ts),
                    ics={qf(sp.Integer(2)): 1, qf(ts).diff(ts).subs(ts, 2): sp.Rational(-1, 2)}).rhs
    q_ref = sp.lambdify(ts, sol, "numpy")(tr.t)
    p_ref = sp.lambdify(ts, sol.diff(ts), "numpy")(tr.t)
    np.testing.assert_allclose(tr.states[0, :, 0], q_ref, atol=1e-9)
    np.testing.assert_allclose(tr.states[0, :, 1], p_ref, atol=1e-9)
    assert tr.t[0] == t0 and tr.t[-1] == t1
    # K = H + p_t is conserved (K(0) = 0 by construction of the seed)
    assert np.abs(tr.energy_error).max() < 1e-9


def test_backward_integration_returns_to_the_seed(hh):
    z0 = np.array([0.1, -0.2, 0.35, 0.1])
    fwd = trajectory(hh, z0, (0.0, 10.0), dt=0.01, method="gauss6")
    back = trajectory(hh, fwd.states[0, -1], (10.0, 0.0), dt=0.01, method="gauss6")
    assert back.t[0] == 10.0 and back.t[-1] == 0.0
    # gauss6 is symmetric (GNI Def. V.1.4): the backward run retraces the forward one
    np.testing.assert_allclose(back.states[0, -1], z0, atol=1e-12)
    np.testing.assert_allclose(back.states[0, ::-1], fwd.states[0], atol=1e-12)


def test_output_times_array(hh):
    times = np.linspace(1.0, 6.0, 11)
    tr = trajectory(hh, [0.1, 0, 0, 0.2], times, dt=0.05)
    np.testing.assert_array_equal(tr.t, times)
    assert tr.dt == pytest.approx(0.05)
    with pytest.raises(ParameterError, match="does not divide"):
        trajectory(hh, [0.1, 0, 0, 0.2], times, dt=0.07)
    with pytest.raises(ParameterError, match="equally spaced"):
        trajectory(hh, [0.1, 0, 0, 0.2], [0.0, 1.0, 3.0])
    tr = trajectory(hh, [0.1, 0, 0, 0.2], times)  # default step fitted to the spacing
    assert round(0.5 / tr.dt, 9) == int(round(0.5 / tr.dt))


# --------------------------------------------------------------------------- escapes
def test_henon_heiles_escape_above_saddle_energy(hh):
    x, y = sp.symbols("x y", real=True)
    V = (x ** 2 + y ** 2) / 2 + x ** 2 * y - y ** 3 / 3
    saddle_E = V.subs({x: 0, y: 1})
    # the saddles are at energy 1/6 (Henon & Heiles 1964); sympy confirms (0, 1) is critical
    assert saddle_E == sp.Rational(1, 6)
    assert [sp.diff(V, v).subs({x: 0, y: 1}) for v in (x, y)] == [0, 0]
    E_hi, E_lo = 0.2, 0.1
    seeds = np.array([
        [0.0, 0.0, 0.0, np.sqrt(2 * E_hi)],   # straight up the y axis at the saddle (0, 1)
        [0.0, 0.0, np.sqrt(2 * E_lo), 0.0],   # below 1/6: bounded by the zero-velocity curve
        [0.0, 0.0, np.nan, 0.0],              # a broken seed in the same batch
        [0.0, 0.0, 0.3, 0.5],                 # E = 0.17 > 1/6 in another direction
    ])
    with pytest.warns(RuntimeWarning, match=r"seeds \[2\] have non-finite"):
        tr = trajectory(hh, seeds, 100.0, dt=0.01, box={"x": (-2, 2), "y": (-2, 2)})
    assert tr.escaped[0] and not tr.escaped[1] and tr.escaped[2]
    # x = px = 0 is invariant, so orbit 0 runs along the y axis: the time to reach y = 2 is
    # the quadrature of dy / sqrt(2 (E - V(0, y))) (scipy.integrate.quad)
    t_exit = quad(lambda s: 1.0 / np.sqrt(2 * (E_hi - (s ** 2 / 2 - s ** 3 / 3))), 0.0, 2.0)[0]
    assert abs(tr.escape_time[0] - t_exit) <= 0.011
    assert tr.escape_time[2] == 0.0
    assert np.isnan(tr.escape_time[1])
    last = np.flatnonzero(np.isfinite(tr.states[0, :, 0]))[-1]
    assert tr.t[last] <= tr.escape_time[0] and np.all(np.isnan(tr.states[0, last + 1:]))
    assert np.isfinite(tr.states[1]).all() and np.abs(tr.energy_error[1]).max() < 1e-8
    assert np.abs(np.nan_to_num(tr.energy_error[0])).max() < 1e-6
    # the saved seed of the broken orbit is shown as given
    assert np.isnan(tr.states[2, 0, 2]) and np.all(np.isnan(tr.states[2, 1:]))


def test_box_forms_and_bad_boxes(hh):
    """One accepted form of box for every call: a radius, or bounds by name."""
    seeds = [[0.0, 0.0, 0.0, 0.63], [0.0, 0.0, 0.2, 0.0]]
    tr = trajectory(hh, seeds, 40.0, dt=0.01, box={"x": (-2, 2), "y": (-2, 2)})
    assert tr.escaped.tolist() == [True, False]
    tr = trajectory(hh, seeds, 40.0, dt=0.01, box=2.0)
    assert tr.escaped.tolist() == [True, False]
    with pytest.raises(ParameterError, match="unknown box component 'z'"):
        trajectory(hh, [0.1, 0, 0, 0], 1.0, box={"z": (-1, 1)})
    with pytest.raises(ParameterError, match="low < high"):
        trajectory(hh, [0.1, 0, 0, 0], 1.0, box={"x": (1, -1)})
    with pytest.raises(ParameterError, match="box must be a positive number"):
        trajectory(hh, [0.1, 0, 0, 0], 1.0, box=([-2, -2, -1, -1], [2, 2, 1, 1]))


def test_non_converging_implicit_step_stops_only_that_orbit(quartic):
    # near q^2 + p^2 = 100 the frequency is ~100, so h = 0.05 is beyond the reach of the
    # fixed-point iteration (it converges only for h |J| < ~1); the small orbit is fine
    with pytest.warns(RuntimeWarning, match="did not converge"):
        tr = trajectory(quartic, [[10.0, 0.0], [0.3, 0.1]], 5.0, dt=0.05, method="gauss6")
    assert tr.escaped.tolist() == [True, False]
    assert tr.escape_time[0] == pytest.approx(0.05)
    assert np.abs(tr.energy_error[1]).max() < 1e-8


# --------------------------------------------------------------------------- bad input
def test_bad_input_errors(hh, quartic, bead):
    z = [0.1, 0.0, 0.0, 0.2]
    with pytest.raises(ParameterError, match=r"shape \(4,\)"):
        trajectory(hh, [0.1, 0.2, 0.3], 1.0)
    with pytest.raises(ParameterError, match="numbers"):
        trajectory(hh, ["a", 0, 0, 0], 1.0)
    with pytest.raises(ModelError, match="separable|T\\(p\\) \\+ V\\(q\\)"):
        trajectory(quartic, [0.3, 0.1], 1.0, method="leapfrog")
    with pytest.raises(ParameterError, match="unknown method 'rk45'"):
        trajectory(hh, z, 1.0, method="rk45")
    with pytest.raises(ParameterError, match="unknown parameters: g"):
        trajectory(bead, [0.1, 0.0], 1.0, params={"g": 9.8})
    with pytest.raises(ParameterError, match="finite"):
        trajectory(bead, [0.1, 0.0], 1.0, params={"w": np.inf})
    for bad in (0.0, -0.1, np.nan, np.inf, "big", [0.05], 1e-301):
        with pytest.raises(ParameterError, match="dt"):
            trajectory(hh, z, 1.0, dt=bad)
    with pytest.raises(ParameterError, match="empty"):
        trajectory(hh, z, (1.0, 1.0))
    with pytest.raises(ParameterError, match="save_every"):
        trajectory(hh, z, 1.0, save_every=0)
    with pytest.raises(ParameterError, match="save_every"):
        trajectory(hh, z, 1.0, save_every=-1)
    with pytest.raises(ParameterError, match="an area-preserving map"):
        trajectory(phaselab.models.standard_map(), z, 1.0)
    with pytest.raises(ParameterError, match="needs a Hamiltonian flow, got _FakeMap"):
        trajectory(_FakeMap(), z, 1.0)   # an object that only says it is a map is no system
    # bounds known up front: steps and memory
    with pytest.raises(ParameterError, match="integrator steps.*set_limits"):
        trajectory(hh, z, 1e6, dt=1e-9)
    with pytest.raises(ParameterError, match="maxit"):
        trajectory(hh, z, 1.0, maxit=0)


class _FakeMap:
    kind = "map"


def test_too_large_step_is_refused(hh, bead):
    with pytest.raises(IntegrationError, match="too large"):
        trajectory(hh, [[0.1, 0.0, 0.0, 0.2], [0.2, 0.1, 0.1, 0.0]], 20.0, dt=1.9)
    with pytest.raises(IntegrationError, match="too large"):
        trajectory(bead, [1.0, 0.0], 50.0, dt=2.5, method="leapfrog")
    # the probe can be switched off; the result is then what the step gives
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        tr = trajectory(bead, [1.0, 0.0], 50.0, dt=2.5, method="leapfrog", check_step=False)
    assert np.nanmax(np.abs(tr.energy_error)) > 0.1


def test_single_state_and_lazy_public_name(hh):
    tr = phaselab.trajectory(hh, [0.1, 0.0, 0.0, 0.2], 1.0, dt=0.1)
    assert isinstance(tr, phaselab.Trajectory)
    assert tr.states.shape == (1, 11, 4) and tr.energy_error.shape == (1, 11)
    np.testing.assert_allclose(tr.t, np.linspace(0, 1, 11), atol=1e-15)


def test_status_tells_why_orbits_stopped():
    # a free particle leaves any box in finite time: x = x0 + p t (common practice)
    free = phaselab.Hamiltonian("p**2/2", ["x"], ["p"])
    with pytest.warns(RuntimeWarning, match="non-finite"):
        tr = phaselab.trajectory(free, [[0.0, 1.0], [0.0, 0.0], [float("nan"), 0.0]], 5.0, dt=0.01,
                                 box={"x": (-2.0, 2.0)})
    assert tr.status.tolist()[:2] == [1, 0]   # left the box, ran to the end
    assert tr.status[2] == 2                  # non-finite seed
    assert tr.escape_time[0] == pytest.approx(2.0, abs=0.011)


def test_one_bad_orbit_does_not_refuse_the_batch(hh):
    """The step probe is per orbit: an orbit for which dt is far too large is flagged and
    not integrated, the others are returned (energy errors: common practice for a
    fourth-order method, error ~ (omega dt)^4 small at E = 1e-4)."""
    from phaselab.engine.status import OK, STEP_TOO_LARGE

    small = [0.0, 0.01, 0.01, 0.0]          # E ~ 1e-4
    fast = [0.0, 0.0, 30.0, 30.0]           # E = 900: leaves at once, huge error per step
    with pytest.warns(RuntimeWarning, match="too large"):
        tr = trajectory(hh, [small, fast, small], 5.0, dt=0.3, method="yoshida4")
    assert tr.status.tolist() == [OK, STEP_TOO_LARGE, OK]
    assert tr.status_text[1].startswith("step too large")
    assert np.all(np.isfinite(tr.states[0])) and np.all(np.isnan(tr.states[1, 1:]))


def test_orbit_through_a_singularity_is_not_reported_ok():
    """A radial Kepler orbit (zero angular momentum) falls into r = 0, where H is singular:
    the integration cannot keep H (common practice), and the status says so."""
    from phaselab.engine.status import OK

    kepler = phaselab.Hamiltonian("(px**2 + py**2)/2 - 1/sqrt(x**2 + y**2)", ["x", "y"], ["px", "py"])
    circular = [1.0, 0.0, 0.0, 1.0]        # r = 1, v = 1: a circle, H = -1/2 exactly
    radial = [1.0, 0.0, 0.0, 0.0]
    with pytest.warns(RuntimeWarning):
        tr = trajectory(kepler, [circular, radial], 3.0, dt=0.01, method="yoshida4", check_step=False)
    assert tr.status[0] == OK
    assert tr.status[1] != OK
    assert tr.status_text[1] in ("relative energy error above the limit", "non-finite state")


def test_an_orbit_running_away_is_named_in_a_warning_with_its_time(hh):
    """Henon-Heiles above the saddle energy 1/6 (Henon & Heiles 1964): an orbit with
    E = 0.308 (computed by hand) leaves through a channel and the cubic potential throws it to infinity in
    finite time; the warning names it with the time it stopped, and a bound orbit beside it
    is not named."""
    states = [[0.0, 0.5, 0.6, 0.3], [0.0, 0.1, 0.2, 0.0]]
    with pytest.warns(RuntimeWarning, match=r"1 orbit\(s\) stopped early \(orbit 0 at t = [0-9.]+\): a non-finite state"):
        tr = phaselab.trajectory(hh, states, 50.0, dt=0.01)
    assert tr.escaped.tolist() == [True, False]
