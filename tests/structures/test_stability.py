"""Linear stability names from eigenvalues, on linearisations whose eigenvalues are known in
closed form (derived beside each case; the eigenvalues are also compared with numpy)."""

import numpy as np
import pytest

from phaselab.structures.stability import classify_flow, classify_map

J2 = np.array([[0.0, 1.0], [-1.0, 0.0]])


def _flow(hessian):
    """A = J Hess H for a Hamiltonian with the given Hessian (state order q..., p...)."""
    n = hessian.shape[0] // 2
    J = np.block([[np.zeros((n, n)), np.eye(n)], [-np.eye(n), np.zeros((n, n))]])
    return J @ hessian


def test_oscillator_is_elliptic_and_inverted_one_hyperbolic():
    # H = p^2/2 + w^2 q^2/2: eigenvalues +-i w (derivation: det(A - l) = l^2 + w^2)
    lam, kind = classify_flow(_flow(np.diag([4.0, 1.0])))
    assert kind == "elliptic"
    np.testing.assert_allclose(sorted(lam.imag), [-2.0, 2.0], atol=1e-12)
    # H = p^2/2 - q^2/2: eigenvalues +-1
    lam, kind = classify_flow(_flow(np.diag([-1.0, 1.0])))
    assert kind == "hyperbolic"
    np.testing.assert_allclose(sorted(lam.real), [-1.0, 1.0], atol=1e-12)


def test_mixed_types_are_named_by_their_pairs():
    # a saddle in (q1, p1) and a centre in (q2, p2): the collinear-point type
    lam, kind = classify_flow(_flow(np.diag([-1.0, 3.0, 1.0, 1.0])))
    assert kind == "saddle-centre"
    np.testing.assert_allclose(np.sort_complex(lam), np.sort_complex(np.linalg.eigvals(
        _flow(np.diag([-1.0, 3.0, 1.0, 1.0])))), atol=1e-12)


def test_complex_quartet_is_hyperbolic_alone_and_named_beside_a_centre():
    # H = (p1^2 + p2^2)/2 - (q1^2 + q2^2)/2 + w (q1 p2 - q2 p1): eigenvalues +-1 +- i w
    # (derivation: in rotating coordinates the saddle and the rotation commute)
    w = 0.7
    hess = np.array([[-1.0, 0.0, 0.0, w], [0.0, -1.0, -w, 0.0],
                     [0.0, -w, 1.0, 0.0], [w, 0.0, 0.0, 1.0]])
    lam, kind = classify_flow(_flow(hess))
    assert kind == "hyperbolic"  # no centre at all: the pure type (module docstring)
    np.testing.assert_allclose(sorted(np.abs(lam.real)), [1.0] * 4, atol=1e-12)
    np.testing.assert_allclose(sorted(np.abs(lam.imag)), [w] * 4, atol=1e-12)
    # the same quartet beside an oscillator in (q3, p3)
    big = np.zeros((6, 6))
    idx = [0, 1, 3, 4]
    big[np.ix_(idx, idx)] = hess
    big[2, 2] = big[5, 5] = 1.0
    assert classify_flow(_flow(big))[1] == "focus-focus-centre"


def test_zero_eigenvalue_or_jordan_block_is_degenerate():
    assert classify_flow(np.zeros((2, 2)))[1] == "degenerate"
    assert classify_flow(np.array([[0.0, 1.0], [0.0, 0.0]]))[1] == "degenerate"  # free particle


@pytest.mark.parametrize("angle", [0.3, 1.0, 2.5])
def test_rotation_map_is_elliptic_with_multipliers_on_the_circle(angle):
    R = np.array([[np.cos(angle), np.sin(angle)], [-np.sin(angle), np.cos(angle)]])
    lam, kind = classify_map(R)
    assert kind == "elliptic"
    np.testing.assert_allclose(np.abs(lam), 1.0, atol=1e-12)
    np.testing.assert_allclose(sorted(np.angle(lam)), [-angle, angle], atol=1e-12)


def test_hyperbolic_and_parabolic_maps():
    lam, kind = classify_map(np.diag([2.0, 0.5]))
    assert kind == "hyperbolic"
    np.testing.assert_allclose(sorted(lam.real), [0.5, 2.0], atol=1e-12)
    assert classify_map(np.array([[1.0, 1.0], [0.0, 1.0]]))[1] == "degenerate"  # shear: multiplier 1
    # a 4-D map with one rotation and one saddle block
    M = np.zeros((4, 4))
    M[:2, :2] = [[np.cos(0.4), np.sin(0.4)], [-np.sin(0.4), np.cos(0.4)]]
    M[2:, 2:] = np.diag([3.0, 1.0 / 3.0])
    assert classify_map(M)[1] == "saddle-centre"


def test_non_finite_linearisation_is_degenerate():
    assert classify_flow(np.array([[np.nan, 1.0], [-1.0, 0.0]]))[1] == "degenerate"
    assert classify_map(np.array([[np.inf, 0.0], [0.0, 1.0]]))[1] == "degenerate"
