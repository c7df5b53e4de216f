"""One-turn maps composed from named elements: drifts, thin kicks, linear matrices."""

import numpy as np
import pytest
import sympy as sp

import phaselab
from phaselab.errors import ModelError
from phaselab.model.elements import Drift, LinearElement, ThinKick, compose_map


def _jacobian_at(m, z, params=()):
    fn = sp.lambdify(list(m.state_symbols) + list(m.param_symbols), m.jacobian_matrix)
    return np.array(fn(*z, *params), dtype=float)


def test_registered_on_the_package():
    assert phaselab.compose_map is compose_map and phaselab.ThinKick is ThinKick


def test_drift_kick_drift_equals_the_explicit_map():
    """Half drift, kick from V = -K cos(q1) - K cos(q2) - e cos(q1 - q2), half drift,
    against the same three steps written out with numpy."""
    m = compose_map([Drift("L/2"), ThinKick("-K*cos(q1) - K*cos(q2) - e*cos(q1 - q2)"), Drift("L/2")],
                    ["q1", "q2"], ["p1", "p2"], params={"K": 0.8, "e": 0.15, "L": 1.0})
    rng = np.random.default_rng(3)
    z = rng.uniform(-2, 2, size=(50, 4))
    q, p = z[:, :2] + 0.5 * z[:, 2:], z[:, 2:].copy()
    p[:, 0] -= 0.8 * np.sin(q[:, 0]) + 0.15 * np.sin(q[:, 0] - q[:, 1])
    p[:, 1] -= 0.8 * np.sin(q[:, 1]) - 0.15 * np.sin(q[:, 0] - q[:, 1])
    q = q + 0.5 * p
    np.testing.assert_allclose(m.step(z), np.hstack([q, p]), rtol=1e-13, atol=1e-13)
    assert m.symplectic_defect < 1e-12


@pytest.mark.parametrize("f, L", [(2.0, 1.0), (1.0, 1.5), (0.7, 1.2)])
def test_thin_lens_fodo_tune(f, L):
    """A thin-lens FODO cell: lens V = (x^2 - y^2)/(2f) (focusing in x, defocusing in y),
    drift L, the opposite lens, drift L. In x the matrices are F = [[1, 0], [-1/f, 1]],
    O = [[1, L], [0, 1]], D = [[1, 0], [1/f, 1]]; the cell O D O F has (worked by hand)
    O F = [[1 - L/f, L], [-1/f, 1]], D O F = [[1 - L/f, L], [-L/f^2, 1 + L/f]],
    O D O F = [[1 - L/f - L^2/f^2, 2L + L^2/f], [-L/f^2, 1 + L/f]], trace 2 - L^2/f^2;
    in y the same with f -> -f, the same trace. So cos(2 pi nu) = tr/2 = 1 - L^2/(2 f^2),
    the thin-lens FODO result sin(mu/2) = L/(2f) (common practice in accelerator texts)."""
    m = compose_map([ThinKick("(x**2 - y**2)/(2*f)"), Drift("L"), ThinKick("-(x**2 - y**2)/(2*f)"),
                     Drift("L")], ["x", "y"], ["px", "py"], params={"f": f, "L": L}, name="fodo")
    M = _jacobian_at(m, [0, 0, 0, 0], [f, L])
    Mx, My = M[np.ix_([0, 2], [0, 2])], M[np.ix_([1, 3], [1, 3])]
    np.testing.assert_allclose(Mx, [[1 - L / f - L**2 / f**2, 2 * L + L**2 / f], [-L / f**2, 1 + L / f]],
                               atol=1e-14)
    for block in (Mx, My):
        cos_mu = np.trace(block) / 2
        np.testing.assert_allclose(cos_mu, 1 - L**2 / (2 * f**2), atol=1e-14)
        nu = np.arccos(cos_mu) / (2 * np.pi)
        np.testing.assert_allclose(np.sin(np.pi * nu), L / (2 * f), rtol=1e-12)
    np.testing.assert_array_equal(M[np.ix_([0, 2], [1, 3])], 0.0)  # no x-y coupling


def test_linear_element_rotation():
    """A rotation by mu in (q, p) is symplectic; its trace is 2 cos mu (common practice)."""
    m = compose_map([LinearElement([["cos(mu)", "sin(mu)"], ["-sin(mu)", "cos(mu)"]])], ["q"], ["p"],
                    params={"mu": 0.9})
    M = _jacobian_at(m, [0.3, -0.2], [0.9])
    assert np.trace(M) == pytest.approx(2 * np.cos(0.9), abs=1e-14)
    np.testing.assert_allclose(m.step([1.0, 0.0]), [np.cos(0.9), -np.sin(0.9)], atol=1e-14)


@pytest.mark.parametrize("elements, match", [
    ([ThinKick("q*p**2")], r"element 0 \(ThinKick\).*may not use p"),
    ([Drift("q")], r"element 0 \(Drift\).*may not use q"),
    ([Drift(), LinearElement([[2, 0], [0, 1]])], r"element 1 \(LinearElement\).*not symplectic"),
    ([LinearElement([[1, 0]])], "2 rows of 2 entries"),
    (["drift"], "must be a Drift, ThinKick or LinearElement"),
    ([ThinKick("__import__('os')")], "__import__. is not allowed"),
])
def test_bad_elements_are_refused(elements, match):
    with pytest.raises(phaselab.PhaselabError, match=match) as info:
        compose_map(elements, ["q"], ["p"])
    assert isinstance(info.value, (ModelError, phaselab.ExpressionError))


def test_a_ring_of_floating_point_rotations_and_a_thin_sextupole_is_accepted():
    """A one-turn map written as beam physicists do: a thin sextupole kick, then the linear
    ring as a numeric matrix of two phase advances (rotations built from numpy's cos and
    sin, so det = 1 only to rounding). A rotation [[c, s], [-s, c]] in each plane is
    symplectic (common practice); the map's Jacobian at a point equals R K with the kick's
    Jacobian K = [[I, 0], [-Hess V, I]] formed here with numpy (V = k (x^3 - 3 x y^2)/3,
    Hess V = 2k [[x, -y], [-y, -x]], derived)."""
    mu_x, mu_y = 2 * np.pi * 0.31, 1.3
    cx, sx, cy, sy = np.cos(mu_x), np.sin(mu_x), np.cos(mu_y), np.sin(mu_y)
    R = np.array([[cx, 0, sx, 0], [0, cy, 0, sy], [-sx, 0, cx, 0], [0, -sy, 0, cy]])
    m = compose_map([ThinKick("k*(x**3 - 3*x*y**2)/3"), LinearElement(R)], ["x", "y"], ["px", "py"],
                    params={"k": 1.0}, name="sextupole ring")
    assert m.symplectic_defect < 1e-12 and abs(float(m.determinant) - 1.0) < 1e-12
    x, y, k = 0.3, -0.2, 1.0
    hess = 2 * k * np.array([[x, -y], [-y, -x]])
    K = np.block([[np.eye(2), np.zeros((2, 2))], [-hess, np.eye(2)]])
    jac = sp.lambdify(list(m.state_symbols) + list(m.param_symbols), m.jacobian_matrix)
    np.testing.assert_allclose(np.array(jac(x, y, 0.1, 0.05, k), dtype=float), R @ K, atol=1e-13)


def test_a_map_whose_determinant_is_a_number_other_than_one_is_refused_with_it():
    with pytest.raises(ModelError, match=r"determinant is 1.00000005, not 1"):
        phaselab.AreaPreservingMap([("q", "0.5*q"), ("p", "2.0000001*p")], ["q"], ["p"])
