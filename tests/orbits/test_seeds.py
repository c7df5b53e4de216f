"""Seeds on an energy shell: the solved component puts H = E, forbidden points are reported."""

import numpy as np
import pytest

import phaselab
from phaselab import ModelError, ParameterError
from phaselab.orbits.seeds import ShellSeeds, shell_seeds


def hh_potential(x, y):
    # Henon & Heiles, Astron. J. 69, 73 (1964): V = (x^2 + y^2)/2 + x^2 y - y^3/3
    return (x**2 + y**2) / 2 + x**2 * y - y**3 / 3


def hh_energy(Z):
    return (Z[:, 2] ** 2 + Z[:, 3] ** 2) / 2 + hh_potential(Z[:, 0], Z[:, 1])


def test_henon_heiles_seeds_lie_on_the_shell(hh):
    E = 1.0 / 8.0
    y = np.linspace(-0.35, 0.55, 13)
    py = np.linspace(-0.2, 0.2, 13)
    s = shell_seeds(hh, np.column_stack([y, py]), energy=E, plane={"x": 0.0}, solve_for="px")
    assert isinstance(s, ShellSeeds)
    assert s.method == "closed form"
    assert s.free == ("y", "py")
    Z = s.valid_states()
    assert len(Z) == s.valid.sum() > 0
    # H evaluated with the published formula (numpy), independent of phaselab's kernels
    assert np.max(np.abs(hh_energy(Z) - E)) < 1e-13
    # px = +sqrt(2 (E - py^2/2 - V(0, y))): kinetic energy of a unit mass (common practice)
    ref = np.sqrt(2 * (E - py[s.valid] ** 2 / 2 - hh_potential(0.0, y[s.valid])))
    np.testing.assert_allclose(Z[:, 2], ref, rtol=1e-14, atol=1e-15)
    np.testing.assert_array_equal(Z[:, 0], 0.0)
    np.testing.assert_array_equal(Z[:, 1], y[s.valid])


def test_sign_picks_the_crossing_direction(hh):
    pts = {"y": [0.1, 0.2], "py": 0.05}
    up = shell_seeds(hh, pts, energy=0.1, plane={"x": 0.0}, solve_for="px", sign=+1).states
    down = shell_seeds(hh, pts, energy=0.1, plane={"x": 0.0}, solve_for="px", sign=-1).states
    assert np.all(up[:, 2] > 0) and np.all(down[:, 2] < 0)
    # the two roots of p^2/2 = E - V are +-sqrt(2 (E - V)) (common practice)
    np.testing.assert_allclose(up[:, 2], -down[:, 2], rtol=1e-15)


def test_forbidden_points_are_reported_not_dropped(hh):
    E = 1.0 / 8.0
    pts = np.array([[0.1, 0.0], [0.9, 0.0], [0.0, 0.6], [np.nan, 0.0]])
    s = shell_seeds(hh, pts, energy=E, plane={"x": 0.0}, solve_for="px")
    assert s.states.shape == (4, 4)
    np.testing.assert_array_equal(s.valid, [True, False, False, False])
    assert s.reasons[0] == ""
    assert np.all(np.isnan(s.states[1:]))
    assert "outside the energetically allowed region" in s.reasons[1]
    assert "at px = 0" in s.reasons[1]
    # H - E at px = 0 for y = 0.9: V(0, 0.9) - 1/8 by the published formula
    gap = hh_potential(0.0, 0.9) - E
    assert f"{gap:.3g}" in s.reasons[1]
    gap2 = 0.6**2 / 2 - E  # py^2/2 alone exceeds E (hand computation)
    assert f"{gap2:.3g}" in s.reasons[2]
    assert "non-finite" in s.reasons[3]
    assert [i for i, _ in s.invalid()] == [1, 2, 3]


def test_points_as_mapping_broadcast(hh):
    s = shell_seeds(hh, {"y": np.linspace(-0.2, 0.2, 5), "py": 0.0}, energy=0.1, plane={"x": 0.0},
                    solve_for="px")
    assert s.states.shape == (5, 4)
    np.testing.assert_array_equal(s.states[:, 3], 0.0)
    assert np.max(np.abs(hh_energy(s.states) - 0.1)) < 1e-13  # published formula, numpy


def test_bracketed_root_when_no_closed_form():
    # H = cosh(p) + q^2/2 is not polynomial in p: p = arccosh(E - q^2/2) (numpy arccosh)
    H = phaselab.Hamiltonian("cosh(p) + q**2/2", ["q"], ["p"])
    q = np.array([0.0, 0.5, 1.0, 2.0])
    s = shell_seeds(H, q, energy=2.0, plane={}, solve_for="p")
    assert s.method == "bracketed root"
    np.testing.assert_array_equal(s.valid, [True, True, True, False])
    np.testing.assert_allclose(s.states[:3, 1], np.arccosh(2.0 - q[:3] ** 2 / 2), rtol=1e-14)
    assert "outside the energetically allowed region" in s.reasons[3]
    neg = shell_seeds(H, q[:3], energy=2.0, plane={}, solve_for="p", sign=-1)
    np.testing.assert_allclose(neg.states[:, 1], -np.arccosh(2.0 - q[:3] ** 2 / 2), rtol=1e-14)


def test_linear_term_in_momentum_takes_the_forward_root():
    # H = (p - a q)^2/2 + q^2/2: roots p = a q +- sqrt(2E - q^2) (quadratic formula); sign=+1
    # takes the larger one, where dq/dt = p - a q >= 0
    H = phaselab.Hamiltonian("(p - a*q)**2/2 + q**2/2", ["q"], ["p"], params={"a": 0.7})
    q = np.array([-0.5, 0.0, 0.8])
    s = shell_seeds(H, q, energy=0.5, plane={}, solve_for="p", params={"a": 0.3})
    np.testing.assert_allclose(s.states[:, 1], 0.3 * q + np.sqrt(1.0 - q**2), rtol=1e-14)


def test_bad_input_errors_name_the_problem(hh):
    with pytest.raises(ParameterError, match="x, y, px, py"):
        shell_seeds(hh, [[0.0, 0.0]], energy=0.1, plane={"z": 0.0}, solve_for="px")
    with pytest.raises(ParameterError, match="x, y, px, py"):
        shell_seeds(hh, [[0.0, 0.0]], energy=0.1, plane={"x": 0.0}, solve_for="pz")
    with pytest.raises(ParameterError, match="both fixed"):
        shell_seeds(hh, [[0.0]], energy=0.1, plane={"x": 0.0, "px": 0.0}, solve_for="px")
    with pytest.raises(ParameterError, match=r"\(y, py\)"):
        shell_seeds(hh, np.zeros((3, 3)), energy=0.1, plane={"x": 0.0}, solve_for="px")
    with pytest.raises(ParameterError, match="missing: py"):
        shell_seeds(hh, {"y": [0.1]}, energy=0.1, plane={"x": 0.0}, solve_for="px")
    with pytest.raises(ParameterError, match="energy"):
        shell_seeds(hh, [[0.0, 0.0]], energy=float("nan"), plane={"x": 0.0}, solve_for="px")
    with pytest.raises(ParameterError, match="sign"):
        shell_seeds(hh, [[0.0, 0.0]], energy=0.1, plane={"x": 0.0}, solve_for="px", sign=0)
