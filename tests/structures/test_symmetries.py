"""Continuous symmetries of flows and periodic orbits that they make degenerate, against
Noether's theorem, a published choreography and scipy."""

import numpy as np
import pytest
import sympy as sp
from scipy.integrate import solve_ivp

import phaselab
from phaselab.structures.periodic.symmetries import newton_steps, point_symmetries
from phaselab.errors import IntegrationError


def _field(system):
    """The vector field of ``system`` by sympy's lambdify (independent of phaselab's kernels)."""
    z = list(system.coords) + list(system.momenta)
    H = system.expr.subs({p.symbol: p.default for p in system.parameters})
    grad = [sp.diff(H, s) for s in z]
    n = len(system.coords)
    rhs = sp.lambdify(z, grad[n:] + [-g for g in grad[:n]], "numpy")
    return lambda Z: np.array([np.broadcast_to(c, (len(Z),)) for c in rhs(*Z.T)], dtype=float).T


def _in_span(basis, v):
    """Whether the vector ``v`` lies in the row span of ``basis``."""
    coef = np.linalg.lstsq(basis.T, v, rcond=None)[0]
    return np.max(np.abs(basis.T @ coef - v)) < 1e-8 * np.max(np.abs(v))


def _three_bodies():
    """Three unit masses in the plane, G = 1, in Cartesian coordinates."""
    x = sp.symbols("x1 y1 x2 y2 x3 y3", real=True)
    p = sp.symbols("px1 py1 px2 py2 px3 py3", real=True)
    r = [sp.sqrt((x[2 * i] - x[2 * j])**2 + (x[2 * i + 1] - x[2 * j + 1])**2) for i, j in ((0, 1), (0, 2), (1, 2))]
    H = sum(s**2 for s in p) / 2 - sum(1 / d for d in r)
    return phaselab.Hamiltonian(H, list(x), list(p), name="three_bodies")


def test_conserved_momenta_are_found_from_the_vector_field():
    """Noether's theorem (Goldstein, Classical Mechanics, ch. 2 and 8): the Toda ring conserves
    its total momentum and nothing else of the form a.z + q^T B p; the Kepler problem in polar
    coordinates p_theta (theta cyclic); Henon-Heiles nothing; three bodies in the plane the
    total momentum (P_x, P_y), the angular momentum L = sum x py - y px and the product
    X x P = (sum q) x (sum p) (d/dt (sum q) = P, so d/dt (X x P) = P x P = 0; derived here)."""
    toda = phaselab.models.toda_lattice(3)
    sym = point_symmetries(_field(toda), np.array([0.3, -0.1, 0.2, 0.1, 0.4, -0.2]))
    assert sym.count == 1 and _in_span(sym.linear, np.array([0, 0, 0, 1.0, 1.0, 1.0]))
    assert np.max(np.abs(sym.bilinear)) < 1e-8

    kepler = phaselab.models.kepler()
    sym = point_symmetries(_field(kepler), np.array([1.0, 0.3, 0.1, 0.9]))
    assert sym.count == 1 and _in_span(sym.linear, np.array([0, 0, 0, 1.0]))

    assert point_symmetries(_field(phaselab.models.henon_heiles()), np.array([0.0, 0.2, 0.3, 0.1])).count == 0

    three = _three_bodies()
    sym = point_symmetries(_field(three), np.array([0.97, -0.24, -0.97, 0.24, 0.0, 0.0,
                                                    0.47, 0.43, 0.47, 0.43, -0.93, -0.86]))
    assert sym.count == 4
    coef = np.hstack([sym.linear, sym.bilinear.reshape(4, 36)])
    px, py = np.zeros(48), np.zeros(48)
    px[[6, 8, 10]] = 1.0
    py[[7, 9, 11]] = 1.0
    L = np.zeros((6, 6))
    for b in range(3):       # x_b py_b - y_b px_b
        L[2 * b, 2 * b + 1], L[2 * b + 1, 2 * b] = 1.0, -1.0
    ang = np.concatenate([np.zeros(12), L.ravel()])
    XP = np.zeros((6, 6))
    XP[0::2, 1::2], XP[1::2, 0::2] = 1.0, -1.0
    for v in (px, py, ang, np.concatenate([np.zeros(12), XP.ravel()])):
        assert _in_span(coef, v)


def test_newton_steps_name_a_family_beyond_the_symmetries():
    """A x = -F with a null direction that no phase condition removes is singular (the step is
    undefined); with the null direction as the phase condition the minimum-norm step solves
    the rest exactly (linear algebra, checked by numpy's solve on the reduced system)."""
    A = np.array([[[2.0, 0.0, 0.0], [0.0, 3.0, 0.0], [0.0, 0.0, 0.0]]])
    F = np.array([[1.0, -3.0, 0.0]])
    steps, singular, _ = newton_steps(A, F, [np.zeros((0, 3))])
    assert singular[0]
    steps, singular, smallest = newton_steps(A, F, [np.array([[0.0, 0.0, 1.0]])])
    assert not singular[0] and smallest[0] == pytest.approx(2.0)
    np.testing.assert_allclose(steps[0], [-0.5, 1.0, 0.0], atol=1e-15)


def test_figure_eight_choreography_from_cartesian_coordinates():
    """The figure-eight of three equal masses (Chenciner & Montgomery, Ann. Math. 152 (2000)
    881, with the initial state computed by C. Simo quoted there; values as given in the task
    and as recalled from the paper, from memory): x1 = -x2 = (0.97000436, -0.24308753),
    x3 = 0, v3 = -2 v1 = -2 v2 = (-0.93240737, -0.86473146), G = m = 1, period T = 6.32591398.
    In plain Cartesian coordinates P - I on the section is singular at the orbit (translations
    and rotations map it to copies of itself); the search must converge, to the published
    period (to the 8 digits of the initial state), and the orbit must close under scipy's
    DOP853. Its zero total and angular momentum are those of the published orbit (ibid.)."""
    three = _three_bodies()
    v3 = np.array([-0.93240737, -0.86473146])
    z0 = np.array([0.97000436, -0.24308753, -0.97000436, 0.24308753, 0.0, 0.0,
                   *(-v3 / 2), *(-v3 / 2), *v3])
    o = phaselab.periodic_orbit(three, z0, 1, plane={"x3": 0.0}, direction=-1, dt=2e-3)
    assert o.period == pytest.approx(6.32591398, abs=1e-7)
    assert o.symmetries == 3      # translations in x and y, rotation
    assert o.distance_from_guess < 1e-7 and abs(o.period_change) < 1e-7
    z = o.points[0]
    assert abs(z[6::2].sum()) < 1e-9 and abs(z[7::2].sum()) < 1e-9
    assert abs(sum(z[2 * b] * z[7 + 2 * b] - z[2 * b + 1] * z[6 + 2 * b] for b in range(3))) < 1e-9
    field = _field(three)
    sol = solve_ivp(lambda t, y: field(y[None])[0], (0.0, o.period), z, method="DOP853", rtol=1e-13, atol=1e-13)
    assert np.max(np.abs(sol.y[:, -1] - z)) < 1e-8
    # the four multipliers left after the six trivial ones lie on the unit circle
    assert len(o.multipliers) == 4 and np.max(np.abs(np.abs(o.multipliers) - 1.0)) < 1e-6


def test_a_family_of_closed_orbits_is_named_not_blamed_on_the_guess():
    """Every bound Kepler orbit is closed (Kepler's first law; Goldstein ch. 3): on the section
    p_r = 0 all of them are fixed points, P - I is (nearly) zero beyond the rotation, and the
    answer is not unique. The search says so instead of asking for a closer guess."""
    kepler = phaselab.models.kepler()
    with pytest.raises(IntegrationError, match="continuous family") as err:
        phaselab.periodic_orbit(kepler, [1.0, 0.0, 0.0, 0.9], plane={"p_r": 0.0}, direction=-1,
                                shift={"theta": 2 * np.pi})
    assert "closer guess will" in str(err.value) and "try a closer guess" not in str(err.value)
