"""Level sets and zero-velocity curves, checked against closed-form curves and against
equilibria computed independently in the tests (scipy)."""

import math

import numpy as np
import pytest
from scipy import ndimage
from scipy.optimize import brentq

import phaselab
from phaselab.structures.levels import allowed_mask, level_set
from phaselab.errors import ModelError, ParameterError


@pytest.fixture(scope="module")
def oscillator():
    return phaselab.Hamiltonian("p**2/(2*m) + k*q**2/2", ["q"], ["p"], params={"m": 2.0, "k": 3.0})


@pytest.fixture(scope="module")
def pendulum():
    return phaselab.Hamiltonian("p**2/2 - w0**2*cos(q)", ["q"], ["p"], params={"w0": 1.0})


def three_body(mu):
    return phaselab.Hamiltonian(
        "(px**2+py**2)/2 + y*px - x*py - (1-mu)/sqrt((x+mu)**2+y**2) - mu/sqrt((x-1+mu)**2+y**2)",
        ["x", "y"], ["px", "py"], params={"mu": mu})


# --------------------------------------------------------------------------- one dof
def test_oscillator_levels_are_ellipses(oscillator):
    m, k = 2.0, 3.0
    levels = [0.25, 1.0, 2.0]
    ls = level_set(oscillator, {"q": (-2, 2), "p": (-3, 3)}, levels, resolution=300)
    assert ls.values.shape == (300, 300)
    assert [s.name for s in ls.axes] == ["q", "p"]
    for E, pieces in zip(levels, ls.lines):
        assert len(pieces) == 1  # one closed curve per energy (common practice)
        pts = pieces[0]
        np.testing.assert_allclose(pts[0], pts[-1], atol=1e-12)  # closed
        # q^2 / (2E/k) + p^2 / (2 m E) = 1: an ellipse with semi-axes sqrt(2E/k), sqrt(2mE)
        # (common practice); linear interpolation on the grid is accurate to ~h^2
        ellipse = pts[:, 0] ** 2 / (2 * E / k) + pts[:, 1] ** 2 / (2 * m * E)
        np.testing.assert_allclose(ellipse, 1.0, atol=2e-3)
        # the grid values are H itself (closed form, common practice)
    Q, P = np.meshgrid(ls.x, ls.y)
    np.testing.assert_allclose(ls.values, P**2 / (2 * m) + k * Q**2 / 2, rtol=1e-12, atol=1e-14)


def test_pendulum_separatrix(pendulum):
    w0 = 1.4
    ls = level_set(pendulum, {"q": (-math.pi, math.pi), "p": (-3 * w0, 3 * w0)}, [0.0], params={"w0": w0},
                   separatrices=True)
    assert len(ls.separatrices) == 1
    sep = ls.separatrices[0]
    assert sep.equilibrium.stability == "hyperbolic"
    assert sep.energy == pytest.approx(w0**2, rel=1e-12)  # H(pi, 0) = w0^2 (common practice)
    pts = np.vstack(sep.lines)
    h = max(ls.x[1] - ls.x[0], ls.y[1] - ls.y[0])
    # p = +-2 w0 cos(q/2) on the separatrix (common practice), to grid accuracy
    err = np.abs(np.abs(pts[:, 1]) - 2 * w0 * np.abs(np.cos(pts[:, 0] / 2)))
    assert err.max() < h
    # both branches are present: upper and lower arcs span the whole q window
    assert pts[:, 1].max() == pytest.approx(2 * w0, abs=h) and pts[:, 1].min() == pytest.approx(-2 * w0, abs=h)
    assert pts[:, 0].min() < -math.pi + h and pts[:, 0].max() > math.pi - h


def test_contour_at_another_level_and_allowed(oscillator):
    ls = level_set(oscillator, {"q": (-2, 2), "p": (-3, 3)}, 1.0, resolution=(200, 150))
    assert ls.values.shape == (150, 200) and ls.x.shape == (200,) and ls.y.shape == (150,)
    mask = ls.allowed(1.0)
    assert mask.dtype == bool and mask.shape == (150, 200)
    # the allowed set of an ellipse has area pi * a * b = 2 pi E sqrt(m/k) (common practice)
    cell = (ls.x[1] - ls.x[0]) * (ls.y[1] - ls.y[0])
    assert mask.sum() * cell == pytest.approx(2 * math.pi * math.sqrt(2.0 / 3.0), rel=0.02)
    other = ls.contour(0.5)
    assert len(other) == 1
    np.testing.assert_array_equal(allowed_mask(oscillator, {"q": (-2, 2), "p": (-3, 3)}, 1.0,
                                               resolution=(200, 150)), mask)


# --------------------------------------------------------------------------- more dof
def test_henon_heiles_section_boundary(henon_heiles):
    E = 1 / 8
    ls = level_set(henon_heiles, {"y": (-0.6, 0.8), "py": (-0.6, 0.6)}, E, plane={"x": 0.0}, resolution=300)
    assert ls.eliminated == ("px",)
    np.testing.assert_allclose(ls.minimisers["px"], 0.0, atol=1e-14)  # min of px^2/2 at px = 0
    Y, PY = np.meshgrid(ls.x, ls.y)
    # on x = 0 with px eliminated: py^2/2 + y^2/2 - y^3/3 (Henon & Heiles 1964 section boundary)
    np.testing.assert_allclose(ls.values, PY**2 / 2 + Y**2 / 2 - Y**3 / 3, rtol=1e-12, atol=1e-14)
    pts = np.vstack(ls.lines[0])
    np.testing.assert_allclose(pts[:, 1] ** 2, 2 * E - pts[:, 0] ** 2 + 2 * pts[:, 0] ** 3 / 3, atol=2e-3)
    assert "min over px" in ls.description


def test_three_body_zero_velocity_curve_through_L1():
    mu = 0.01
    r3 = three_body(mu)

    def dU(x):  # U = x^2/2 + (1-mu)/r1 + mu/r2 on y = 0 (Szebehely 1967, Theory of Orbits)
        return x - (1 - mu) * (x + mu) / abs(x + mu) ** 3 - mu * (x - 1 + mu) / abs(x - 1 + mu) ** 3

    xL1 = brentq(dU, -mu + 1e-9, 1 - mu - 1e-9, xtol=1e-15)  # scipy root, independent of phaselab
    E_L1 = -(xL1**2 / 2 + (1 - mu) / abs(xL1 + mu) + mu / abs(xL1 - 1 + mu))  # H = -U at rest in the rotating frame

    eqs = phaselab.equilibria(r3)
    L1 = min((e for e in eqs if abs(e.state[1]) < 1e-9 and -mu < e.state[0] < 1 - mu),
             key=lambda e: abs(e.state[0] - xL1))
    assert L1.energy == pytest.approx(E_L1, rel=1e-12)

    ls = level_set(r3, {"x": (-1.5, 1.5), "y": (-1.5, 1.5)}, L1.energy, resolution=401)
    assert ls.eliminated == ("px", "py")
    X, Y = np.meshgrid(ls.x, ls.y)
    with np.errstate(divide="ignore"):
        U = (X**2 + Y**2) / 2 + (1 - mu) / np.hypot(X + mu, Y) + mu / np.hypot(X - 1 + mu, Y)
    # away from the primaries, where 1/r loses all digits to rounding of x - x_primary
    finite = (np.hypot(X + mu, Y) > 1e-6) & (np.hypot(X - 1 + mu, Y) > 1e-6)
    # minimising over the momenta leaves minus the effective potential (Szebehely 1967)
    np.testing.assert_allclose(ls.values[finite], -U[finite], rtol=1e-12)
    np.testing.assert_allclose(ls.minimisers["px"], -Y, atol=1e-12)  # px = -y at the minimum
    np.testing.assert_allclose(ls.minimisers["py"], X, atol=1e-12)  # py = x
    pts = np.vstack(ls.lines[0])
    h = ls.x[1] - ls.x[0]
    assert np.min(np.hypot(pts[:, 0] - xL1, pts[:, 1])) < 2 * h  # the curve passes through L1

    # below E_L1 the regions around the two primaries are separate; above, joined at L1
    def joined(energy):
        labels, _ = ndimage.label(ls.allowed(energy))
        i1, i2 = np.argmin(np.abs(ls.x - (-mu + 0.1))), np.argmin(np.abs(ls.x - (1 - mu - 0.03)))
        j = np.argmin(np.abs(ls.y))
        return labels[j, i1] != 0 and labels[j, i1] == labels[j, i2]

    assert not joined(L1.energy - 0.01)
    assert joined(L1.energy + 0.01)


# --------------------------------------------------------------------------- bad input
@pytest.mark.parametrize("ranges, match", [
    ({"q": (-1, 1), "z": (-1, 1)}, "unknown state variable 'z'"),
    ({"q": (1, -1), "p": (-1, 1)}, "empty"),
    ({"q": (0, 0), "p": (-1, 1)}, "empty"),
    ({"q": (-1, math.nan), "p": (-1, 1)}, "finite"),
    ({"q": (-1, 1)}, "exactly two"),
    ([("q", (-1, 1)), ("p", (-1, 1))], "exactly two"),
])
def test_bad_ranges(oscillator, ranges, match):
    with pytest.raises(ParameterError, match=match):
        level_set(oscillator, ranges, 1.0)


@pytest.mark.parametrize("levels", [math.nan, math.inf, [1.0, -math.inf], "one", []])
def test_bad_levels(oscillator, levels):
    with pytest.raises(ParameterError, match="level"):
        level_set(oscillator, {"q": (-1, 1), "p": (-1, 1)}, levels)


def test_bad_plane_and_elimination(henon_heiles):
    rng = {"y": (-1, 1), "py": (-1, 1)}
    with pytest.raises(ParameterError, match="unknown plane component 'w'"):
        level_set(henon_heiles, rng, 0.1, plane={"w": 0.0})
    with pytest.raises(ParameterError, match="plane fixes 'y'"):
        level_set(henon_heiles, rng, 0.1, plane={"y": 0.0, "x": 0.0})
    with pytest.raises(ParameterError, match="finite"):
        level_set(henon_heiles, rng, 0.1, plane={"x": math.inf})
    with pytest.raises(ParameterError, match="coordinates x are neither shown"):
        level_set(henon_heiles, rng, 0.1)
    with pytest.raises(ParameterError, match="one degree of freedom"):
        level_set(henon_heiles, rng, 0.1, plane={"x": 0.0}, separatrices=True)
    with pytest.raises(ParameterError, match="resolution"):
        level_set(henon_heiles, rng, 0.1, plane={"x": 0.0}, resolution=1)
    with pytest.raises(ParameterError, match="energy"):
        level_set(henon_heiles, rng, 0.1, plane={"x": 0.0}, resolution=10).allowed(math.nan)


def test_no_minimum_in_momenta_is_refused():
    H = phaselab.Hamiltonian("(px**2 - py**2)/2 + (x**2+y**2)/2", ["x", "y"], ["px", "py"])
    with pytest.raises(ModelError, match="no minimum"):
        level_set(H, {"x": (-1, 1), "y": (-1, 1)}, 0.5, resolution=20)


def test_maps_and_time_dependence_refused():
    driven = phaselab.Hamiltonian("p**2/2 - (1 + eps*cos(t))*cos(q)", ["q"], ["p"], params={"eps": 0.3}, time="t")
    with pytest.raises(ModelError, match="time explicitly"):
        level_set(driven, {"q": (-1, 1), "p": (-1, 1)}, 0.0)
    try:
        sm = phaselab.models.standard_map()
    except AttributeError:
        return
    with pytest.raises(ModelError, match="map"):
        level_set(sm, {"q": (0, 1), "p": (0, 1)}, 0.0)
