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
