"""Invariant manifolds of orbits that wind in an angle (driven flows), against closed forms
derived in the docstrings."""

import numpy as np
import pytest

import phaselab

IOTA0, SHEAR, EPS = 0.9, 0.5, 1e-3


@pytest.fixture(scope="module")
def field_line():
    """A field-line Hamiltonian with one resonance, the toroidal angle as time (period 2 pi):
    H(theta, psi, t) = iota0 psi + iota' psi^2 / 2 + eps cos(theta - t)."""
    return phaselab.Hamiltonian("i0*psi + s*psi**2/2 + eps*cos(theta - t)", ["theta"], ["psi"],
                                params={"i0": IOTA0, "s": SHEAR, "eps": EPS}, time="t", period="2*pi")


@pytest.fixture(scope="module")
def x_point(field_line):
    """The X-point of the 1/1 island: it advances theta by 2 pi per period of the drive."""
    psi_r = (1 - IOTA0) / SHEAR
    o = phaselab.periodic_orbit(field_line, [0.01, psi_r + 1e-3], shift={"theta": 2 * np.pi})
    assert o.stability == "unstable" and o.shift[0] == pytest.approx(2 * np.pi)
    return o


def test_winding_x_point_manifold_is_one_lobe_of_the_island_width(x_point):
    """Island full width against 4 sqrt(eps / iota') (derived here).

    With chi = theta - t (generating function F2 = (theta - t) J, psi = J) the Hamiltonian
    becomes autonomous, K = H - psi = (iota0 - 1) psi + iota' psi^2 / 2 + eps cos chi, and with
    x = psi - psi_r, psi_r = (1 - iota0) / iota' (where iota(psi) = iota0 + iota' psi = 1),
    K = iota' x^2 / 2 + eps cos chi + const: a pendulum. Its saddle is chi = 0, x = 0
    (d2K/dchi2 = -eps < 0 < iota'), on K = eps, so the separatrix is
    iota' x^2 / 2 = eps (1 - cos chi), x = +-2 sqrt(eps / iota') sin(chi / 2), and the island's
    full width (at chi = pi) is 4 sqrt(eps / iota'). At t = 2 pi k, chi = theta - 2 pi k: the
    stroboscopic X-point advances theta by 2 pi per period. Its unstable manifold leaves along
    the upper separatrix (side +1, theta increasing) and the lower one (side -1, decreasing).
    Before the fix the 2 pi advance was left in the map and the curve ran to theta ~ 700.
    """
    psi_r = (1 - IOTA0) / SHEAR
    np.testing.assert_allclose(x_point.points[0], [0.0, psi_r], atol=1e-9)
    upper = phaselab.manifold(x_point, side=+1, length=4.0)
    lower = phaselab.manifold(x_point, side=-1, length=4.0)
    for man, sign in ((upper, 1), (lower, -1)):
        assert man.complete and len(man.branches) == 1      # one connected curve
        curve = man.branches[0]
        np.testing.assert_allclose(curve[0], x_point.points[0], atol=1e-12)   # starts at the X-point
        assert np.max(np.linalg.norm(np.diff(curve, axis=0), axis=1)) <= 4.0 / 2000 + 1e-12
        theta, x = curve[:, 0], curve[:, 1] - psi_r
        assert np.all(sign * theta > -1e-9) and np.all(sign * theta < 2 * np.pi)   # within one lobe
        assert np.max(np.abs(sign * theta)) > np.pi + 0.5                          # past the O-point
        # every point on the separatrix iota' x^2 / 2 = eps (1 - cos chi) (derived above)
        assert np.max(np.abs(SHEAR * x**2 / 2 - EPS * (1 - np.cos(theta)))) < 1e-10
    width = np.max(upper.branches[0][:, 1]) - np.min(lower.branches[0][:, 1])
    assert width == pytest.approx(4 * np.sqrt(EPS / SHEAR), rel=1e-6)


def test_long_winding_branch_is_wrapped_into_the_lobe(x_point):
    """Grown past the next copy of the X-point, the branch stays in theta in [0, 2 pi) (wrapped
    modulo the orbit's advance; the integrator's map splits the separatrix by a hair), and
    its lifted curve never jumps."""
    man = phaselab.manifold(x_point, side=+1, length=6.5)
    pts = np.vstack(man.branches)
    assert np.all(pts[:, 0] >= -1e-9) and np.all(pts[:, 0] < 2 * np.pi)
    lifted = man.lifted[0]
    assert np.max(np.abs(lifted[:, 0])) < 2 * np.pi + 0.1
    assert np.max(np.linalg.norm(np.diff(lifted, axis=0), axis=1)) <= 6.5 / 2000 + 1e-12

