"""Equilibria of flows and fixed points of maps, checked against published values and
independent computations (sympy, scipy) made in the tests."""

import math

import numpy as np
import pytest
import sympy as sp
from scipy.optimize import brentq

import phaselab
from phaselab.structures.equilibria import classify_flow, equilibria
from phaselab.errors import ModelError, ParameterError


def henon_heiles():
    try:
        return phaselab.models.henon_heiles()
    except AttributeError:  # catalogue not there yet
        return phaselab.Hamiltonian("(px**2+py**2)/2 + (x**2+y**2)/2 + x**2*y - y**3/3",
                                    ["x", "y"], ["px", "py"])


def three_body(mu):
    return phaselab.Hamiltonian(
        "(px**2+py**2)/2 + y*px - x*py - (1-mu)/sqrt((x+mu)**2+y**2) - mu/sqrt((x-1+mu)**2+y**2)",
        ["x", "y"], ["px", "py"], params={"mu": mu})


def sympy_eigenvalues(system, state, params=None):
    """Eigenvalues of J * Hess H at ``state``, computed independently with sympy."""
    n = system.dof
    subs = dict(zip(system.state_symbols, [sp.nsimplify(v) for v in state]))
    subs.update({p.symbol: sp.nsimplify(v) for p, v in zip(system.parameters, system.param_values(params))})
    hess = sp.hessian(system.expr, system.state_symbols).subs(subs)
    J = sp.Matrix(sp.BlockMatrix([[sp.zeros(n), sp.eye(n)], [-sp.eye(n), sp.zeros(n)]]))
    vals = []
    for lam, mult in (J * hess).eigenvals().items():
        vals += [complex(sp.N(lam))] * mult
    return np.array(vals)


def same_spectrum(a, b, tol=1e-9):
    a, b = list(np.asarray(a, complex)), list(np.asarray(b, complex))
    if len(a) != len(b):
        return False
    for v in a:
        k = int(np.argmin([abs(v - w) for w in b]))
        if abs(v - b[k]) > tol * (1 + abs(v)):
            return False
        b.pop(k)
    return True


# --------------------------------------------------------------------------- Henon-Heiles
def test_henon_heiles_origin_and_saddles():
    hh = henon_heiles()
    eqs = equilibria(hh)
    assert len(eqs) == 4  # the origin and three saddles (Henon & Heiles 1964, Astron. J. 69, 73)
    origin = eqs[0]  # sorted by energy: H = 0 first
    np.testing.assert_allclose(origin.state, 0.0, atol=1e-12)
    assert origin.energy == pytest.approx(0.0, abs=1e-14)
    # unit frequencies in both directions: eigenvalues +-i, twice (Henon & Heiles 1964)
    assert same_spectrum(origin.eigenvalues, [1j, 1j, -1j, -1j])
    assert origin.stability == "elliptic"
    assert origin.method == "symbolic"
    saddles = eqs[1:]
    expected = [(0.0, 1.0), (math.sqrt(3) / 2, -0.5), (-math.sqrt(3) / 2, -0.5)]  # Henon & Heiles 1964
    for x, y in expected:
        match = [e for e in saddles if np.allclose(e.state, [x, y, 0, 0], atol=1e-10)]
        assert len(match) == 1, (x, y)
        e = match[0]
        assert e.energy == pytest.approx(1 / 6, abs=1e-12)  # saddle energy 1/6 (Henon & Heiles 1964)
        # linearisation checked with sympy's exact eigenvalues (reference library)
        assert same_spectrum(e.eigenvalues, sympy_eigenvalues(hh, e.state))
        assert e.stability == "saddle-centre"  # one saddle pair, one centre pair
    assert [e.energy for e in eqs] == sorted(e.energy for e in eqs)


def test_repr_is_readable():
    text = repr(equilibria(henon_heiles())[0])
    assert text.startswith("Equilibrium(elliptic at x=0, y=0, px=0, py=0; H=0")
    assert "1j" in text


# --------------------------------------------------------------------------- pendulum
@pytest.fixture(scope="module")
def pendulum():
    return phaselab.Hamiltonian("p**2/2 - w0**2*cos(q)", ["q"], ["p"], params={"w0": 1.3})


def test_pendulum_bottom_elliptic_top_hyperbolic(pendulum):
    w0 = 1.7
    eqs = equilibria(pendulum, params={"w0": w0})
    assert len(eqs) == 2  # q = 0 and q = pi modulo 2 pi (common practice)
    bottom, top = eqs
    np.testing.assert_allclose(bottom.state, [0.0, 0.0], atol=1e-12)
    assert bottom.stability == "elliptic"
    assert same_spectrum(bottom.eigenvalues, [1j * w0, -1j * w0])  # small oscillations at w0 (common practice)
    np.testing.assert_allclose(top.state, [math.pi, 0.0], atol=1e-12)  # reported in (-pi, pi]
    assert top.stability == "hyperbolic"
    assert same_spectrum(top.eigenvalues, [w0, -w0])  # inverted pendulum grows at rate w0 (common practice)
    assert top.energy == pytest.approx(w0**2, rel=1e-12)  # H(pi, 0) = w0^2 (common practice)
    assert bottom.method == "newton"


def test_bounds_select_and_angles_reduce(pendulum):
    eqs = equilibria(pendulum, ranges={"q": (2.0, 4.0)})
    assert len(eqs) == 1
    np.testing.assert_allclose(eqs[0].state, [math.pi, 0.0], atol=1e-12)  # sin q = 0 at q = pi (common practice)
    # a window away from (-pi, pi]: the representative inside it is reported
    eqs = equilibria(pendulum, ranges={"q": (5.0, 7.0)})
    assert len(eqs) == 1
    np.testing.assert_allclose(eqs[0].state, [2 * math.pi, 0.0], atol=1e-12)


def test_same_seed_same_result(pendulum):
    a = equilibria(pendulum, starts=20, seed=3)
    b = equilibria(pendulum, starts=20, seed=3)
    assert [tuple(e.state) for e in a] == [tuple(e.state) for e in b]


def test_frozen_time_as_parameter():
    # H = p^2/2 - (w0^2 + eps cos(W t)) cos q frozen at t = 0: the bottom oscillates at
    # sqrt(w0^2 + eps) (common practice: linearise the frozen potential)
    frozen = phaselab.Hamiltonian("p**2/2 - (w0**2 + eps*cos(W*t))*cos(q)", ["q"], ["p"],
                                  params={"w0": 1.0, "eps": 0.5, "W": 2.0, "t": 0.0})
    bottom = equilibria(frozen, params={"t": 0.0})[0]
    assert same_spectrum(bottom.eigenvalues, [1j * math.sqrt(1.5), -1j * math.sqrt(1.5)])


def test_time_dependent_is_refused():
    driven = phaselab.Hamiltonian("p**2/2 - (w0**2 + eps*cos(W*t))*cos(q)", ["q"], ["p"],
                                  params={"w0": 1.0, "eps": 0.5, "W": 2.0}, time="t")
    with pytest.raises(ModelError, match="time explicitly.*parameter"):
        equilibria(driven)


# --------------------------------------------------------------------------- three bodies
def collinear_points(mu):
    """L1, L2, L3 as brentq roots of dU/dx on y = 0, U = x^2/2 + (1-mu)/r1 + mu/r2 (scipy)."""
    def dU(x):
        return x - (1 - mu) * (x + mu) / abs(x + mu) ** 3 - mu * (x - 1 + mu) / abs(x - 1 + mu) ** 3
    eps = 1e-9
    L1 = brentq(dU, -mu + eps, 1 - mu - eps, xtol=1e-15)
    L2 = brentq(dU, 1 - mu + eps, 3.0, xtol=1e-15)
    L3 = brentq(dU, -3.0, -mu - eps, xtol=1e-15)
    return L1, L2, L3


@pytest.mark.parametrize("mu", [0.01, 0.05])
def test_three_body_lagrange_points(mu):
    eqs = equilibria(three_body(mu))
    assert len(eqs) == 5  # five Lagrange points (Szebehely 1967, Theory of Orbits)
    for e in eqs:  # on an equilibrium of the rotating frame px = -y, py = x (from dH/dp = 0)
        np.testing.assert_allclose(e.state[2:], [-e.state[1], e.state[0]], atol=1e-10)
    triangular = [e for e in eqs if abs(e.state[1]) > 0.1]
    assert len(triangular) == 2
    for sign in (1, -1):  # L4/L5 at (1/2 - mu, +-sqrt(3)/2) (Szebehely 1967)
        e = [t for t in triangular if np.sign(t.state[1]) == sign][0]
        np.testing.assert_allclose(e.state[:2], [0.5 - mu, sign * math.sqrt(3) / 2], atol=1e-10)
    collinear = sorted((e for e in eqs if abs(e.state[1]) <= 0.1), key=lambda e: e.state[0])
    L1, L2, L3 = collinear_points(mu)
    np.testing.assert_allclose([e.state[0] for e in collinear], [L3, L1, L2], atol=1e-10)
    np.testing.assert_allclose([e.state[1] for e in collinear], 0.0, atol=1e-12)
    for e in collinear:  # collinear points are saddle x centre for every mu (Szebehely 1967)
        assert e.stability == "saddle-centre"


def test_spatial_three_body_has_the_five_lagrange_points_and_no_false_one():
    """The spatial problem with a box around all five points: exactly L1..L5 in the plane
    (Szebehely 1967), the collinear ones at the brentq roots. Before the fix a Newton run
    that went off to z ~ -1e83 (where the gradient fades) was carried along its "line of
    equilibria" onto the box centre and reported as a rest point next to the planet."""
    mu = 0.015
    box = {"x": (-1.5, 1.5), "y": (-1.0, 1.0), "z": (-0.1, 0.1), "px": (-1.0, 1.0), "py": (-1.5, 1.5),
           "pz": (-0.1, 0.1)}
    eqs = equilibria(phaselab.models.spatial_restricted_three_body(), params={"mu": mu}, ranges=box, starts=400)
    assert len(eqs) == 5
    for e in eqs:   # grad H = 0 there, evaluated independently: px = -y, py = x, z = pz = 0
        np.testing.assert_allclose(e.state[3:5], [-e.state[1], e.state[0]], atol=1e-10)
        np.testing.assert_allclose(e.state[[2, 5]], 0.0, atol=1e-12)
    collinear = sorted((e.state[0] for e in eqs if abs(e.state[1]) <= 0.1))
    L1, L2, L3 = collinear_points(mu)
    np.testing.assert_allclose(collinear, [L3, L1, L2], atol=1e-10)


def test_routh_critical_mass_ratio():
    mu_c = (1 - math.sqrt(23 / 27)) / 2  # Routh (1875) critical mass ratio, about 0.0385
    assert 0.01 < mu_c < 0.05

    def l4(mu):
        return [e for e in equilibria(three_body(mu)) if e.state[1] > 0.1][0]

    assert l4(0.01).stability == "elliptic"  # linearly stable below mu_c (Routh 1875)
    assert l4(0.05).stability != "elliptic"  # unstable above (Routh 1875)
    assert l4(0.05).stability == "hyperbolic"  # complex quartet: all real parts nonzero
    assert l4(mu_c - 1e-3).stability == "elliptic"  # either side of the critical value (Routh 1875)
    assert l4(mu_c + 1e-3).stability == "hyperbolic"


# --------------------------------------------------------------------------- degenerate cases
def test_quartic_well_is_degenerate():
    # H = p^2/2 + q^4/4: the linearisation has a double zero eigenvalue (common practice)
    H = phaselab.Hamiltonian("p**2/2 + q**4/4", ["q"], ["p"])
    eqs = equilibria(H)
    assert len(eqs) == 1
    assert eqs[0].stability == "degenerate"


def test_jordan_block_is_degenerate():
    # a nilpotent linear field (free particle) and a defective imaginary pair: the
    # linearisation does not decide (common practice)
    assert classify_flow(np.array([[0.0, 1.0], [0.0, 0.0]]))[1] == "degenerate"
    A = np.array([[0, 1, 1, 0], [-1, 0, 0, 1], [0, 0, 0, 1], [0, 0, -1, 0]], dtype=float)
    assert classify_flow(A)[1] == "degenerate"
    assert classify_flow(np.diag([1.0, -1.0]))[1] == "hyperbolic"


def test_translation_invariant_lattice_gives_one_line():
    # a periodic three-particle chain depends on differences only, so equilibria form the
    # line q1 = q2 = q3 (common practice: translation symmetry)
    H = phaselab.Hamiltonian("(p1**2+p2**2+p3**2)/2 + exp(q1-q2) + exp(q2-q3) + exp(q3-q1)",
                             ["q1", "q2", "q3"], ["p1", "p2", "p3"])
    eqs = equilibria(H)
    assert len(eqs) == 1
    e = eqs[0]
    assert e.stability == "degenerate"
    np.testing.assert_allclose(e.state, 0.0, atol=1e-9)
    assert e.directions.shape == (1, 6)
    d = e.directions[0] * np.sign(e.directions[0][0])
    np.testing.assert_allclose(d, [1 / math.sqrt(3)] * 3 + [0, 0, 0], atol=1e-9)


def test_cyclic_coordinate_is_free():
    H = phaselab.Hamiltonian("pr**2/2 + pth**2/(2*r**2) + (r-1)**2/2", ["r", "th"], ["pr", "pth"])
    eqs = equilibria(H, ranges={"r": (0.5, 2.0)})
    assert len(eqs) == 1 and eqs[0].free == ("th",)
    np.testing.assert_allclose(eqs[0].state, [1.0, 0.0, 0.0, 0.0], atol=1e-10)  # V'(r) = 0 at r = 1
    assert eqs[0].stability == "degenerate"


# --------------------------------------------------------------------------- maps
def test_standard_map_fixed_points():
    try:
        sm = phaselab.models.standard_map()
    except AttributeError:
        pytest.skip("catalogue standard map not available")
    for K in (0.9716, 5.0):
        pts = equilibria(sm, params={"K": K})
        assert len(pts) == 2  # (0, 0) and (pi, 0) in [0, 2 pi)^2 while K < 2 pi (common practice)
        origin, half = pts
        np.testing.assert_allclose(origin.state, [0.0, 0.0], atol=1e-12)
        np.testing.assert_allclose(half.state, [math.pi, 0.0], atol=1e-12)
        # Jacobian [[1 + K cos q, 1], [K cos q, 1]]: trace 2 + K cos q, det 1, so the
        # eigenvalues solve l^2 - tr l + 1 = 0 (Chirikov 1979, Phys. Rep. 52, 263)
        for pt, tr in ((origin, 2 + K), (half, 2 - K)):
            assert same_spectrum(pt.eigenvalues, np.roots([1.0, -tr, 1.0]).astype(complex))
        assert origin.stability == "hyperbolic"
        # |trace| < 2 is elliptic, > 2 hyperbolic (Greene 1979 residue in (0, 1))
        assert half.stability == ("elliptic" if K < 4 else "hyperbolic")
        assert math.isnan(origin.energy)


# --------------------------------------------------------------------------- bad input
@pytest.mark.parametrize("bounds, match", [
    ({"z": (0, 1)}, "unknown state variable 'z'"),
    ({"q": (1.0, 1.0)}, "empty"),
    ({"q": (2.0, 1.0)}, "empty"),
    ({"q": (0.0, math.inf)}, "finite"),
    ({"q": 3.0}, "low, high"),
    ([("q", (0, 1))], "mapping"),
])
def test_bad_bounds(pendulum, bounds, match):
    with pytest.raises(ParameterError, match=match):
        equilibria(pendulum, ranges=bounds)


def test_bad_starts_and_params(pendulum):
    with pytest.raises(ParameterError, match="starts"):
        equilibria(pendulum, starts=-1)
    with pytest.raises(ParameterError, match="unknown parameters"):
        equilibria(pendulum, params={"g": 1.0})
