"""Maps of 2n >= 4 dimensions must be symplectic (M^T J M = J), not only volume-preserving.

J = [[0, I], [-I, 0]] in the state order (q1, q2, p1, p2); the condition and the examples
are worked by hand beside each check.
"""

import numpy as np
import pytest
import sympy as sp

import phaselab
from phaselab.errors import ModelError
from phaselab.model.maps import AreaPreservingMap, SymplecticMap
from phaselab.model.symplectic import symplectic_defect, symplectic_form

FROESCHLE = [("p1", "p1 + K1*sin(q1) + b*sin(q1 + q2)"), ("p2", "p2 + K2*sin(q2) + b*sin(q1 + q2)"),
             ("q1", "q1 + p1"), ("q2", "q2 + p2")]


def test_old_name_is_the_same_class():
    assert AreaPreservingMap is SymplecticMap
    assert phaselab.AreaPreservingMap is phaselab.SymplecticMap is SymplecticMap


def test_coupled_standard_maps_are_accepted():
    """Two coupled standard maps (Froeschle 1971): the kick is p' = p - grad V with
    V = K1 cos q1 + K2 cos q2 + b cos(q1 + q2), so -dV/dq1 = K1 sin q1 + b sin(q1 + q2) and
    -dV/dq2 = K2 sin q2 + b sin(q1 + q2) (derived here); then the drift q' = q + p'. Both are
    time-one flows of Hamiltonians (V(q), then |p|^2/2), so the map is symplectic."""
    m = SymplecticMap(FROESCHLE, ["q1", "q2"], ["p1", "p2"], params={"K1": 0.9, "K2": 0.6, "b": 0.1},
                      modulus=2 * sp.pi, name="coupled standard maps")
    assert m.dof == 2 and m.symplectic_defect < 1e-13 and m.determinant == 1 and m.is_symplectic
    # the Jacobian at a point, formed by hand: kick K = [[I, 0], [-Hess V, I]], drift
    # D = [[I, I], [0, I]], map = D K (the kick acts first); M^T J M = J to rounding
    q1, q2 = 0.4, -1.1
    c = 0.1 * np.cos(q1 + q2)
    hess = -np.array([[0.9 * np.cos(q1) + c, c], [c, 0.6 * np.cos(q2) + c]])  # Hess V
    K = np.block([[np.eye(2), np.zeros((2, 2))], [-hess, np.eye(2)]])
    D = np.block([[np.eye(2), np.eye(2)], [np.zeros((2, 2)), np.eye(2)]])
    J = sp.lambdify(list(m.state_symbols) + list(m.param_symbols), m.jacobian_matrix)
    np.testing.assert_allclose(np.array(J(q1, q2, 0.3, 0.2, 0.9, 0.6, 0.1), dtype=float), D @ K, atol=1e-14)
    assert symplectic_defect(D @ K) < 1e-15


def test_canonical_scaling_is_accepted():
    """diag(2, 1, 1/2, 1) in (q1, q2, p1, p2) scales q1 by 2 and p1 by 1/2: M^T J M has the
    (q1, p1) entry 2 * 1/2 = 1, so it IS symplectic (worked by hand)."""
    M = np.diag([2.0, 1.0, 0.5, 1.0])
    assert symplectic_defect(M) == 0.0
    SymplecticMap(["2*q1", "q2", "p1/2", "p2"], ["q1", "q2"], ["p1", "p2"])


@pytest.mark.parametrize("rules", [
    ["2*q1", "q2/2", "p1", "p2"],            # diag(2, 1/2, 1, 1): det 1, (q1, p1) entry 2 != 1
    ["q1 + sin(p2)", "q2", "p1", "p2"],      # a shear of q1 by p2 alone: det 1, not symplectic
])
def test_volume_preserving_but_not_symplectic_is_refused(rules):
    """For diag(2, 1/2, 1, 1), (M^T J M)_{q1 p1} = 2 * 1 = 2 != 1 (worked by hand); for
    q1 += sin(p2), (M^T J M)_{p2 p1} = -cos(p2) != 0. Both have determinant 1."""
    assert symplectic_defect(np.diag([2.0, 0.5, 1.0, 1.0])) == pytest.approx(1.0 / 4.0)
    with pytest.raises(ModelError, match="not symplectic.*preserves volume") as info:
        SymplecticMap(rules, ["q1", "q2"], ["p1", "p2"], name="squeeze")
    assert "'squeeze'" in str(info.value)


def test_not_even_volume_preserving_is_refused():
    with pytest.raises(ModelError, match="does not even preserve volume.*determinant 2"):
        SymplecticMap(["2*q1", "q2", "p1", "p2"], ["q1", "q2"], ["p1", "p2"])


def test_symplectic_form():
    J = symplectic_form(2)
    np.testing.assert_array_equal(J, [[0, 0, 1, 0], [0, 0, 0, 1], [-1, 0, 0, 0], [0, -1, 0, 0]])
    # a rotation in each (q_i, p_i) plane is symplectic (common practice)
    c, s = np.cos(0.7), np.sin(0.7)
    R = np.array([[c, 0, s, 0], [0, 1, 0, 0], [-s, 0, c, 0], [0, 0, 0, 1]])
    assert symplectic_defect(R) < 1e-15


def test_two_dimensional_maps_unchanged():
    m = phaselab.models.standard_map()
    assert m.symplectic_defect == 0.0 and m.area_check == "symbolic"
    with pytest.raises(ModelError, match="not area-preserving"):
        SymplecticMap(["2*q", "p"], ["q"], ["p"])


def test_composed_four_dimensional_rules_are_checked_with_bounded_work():
    """Four rounds of a gradient kick p += grad(-cos(q1 + q2)) and a drift q1 += p1^2,
    q2 += p2 (each the time-one flow of a Hamiltonian, so symplectic: common practice)
    compose into large rules; the check stays within 4 s of CPU in a child process with
    hard limits. A kick that is no gradient (p1 += q2 sin q1, p2 += q1 sin q2:
    d(q2 sin q1)/dq2 = sin q1 != sin q2 = d(q1 sin q2)/dq1) is refused. Ten rounds nest too
    deep to differentiate in bounded time and are refused at once, saying so."""
    from bounded import run_bounded

    good = [["p1", "p1 + sin(q1 + q2)"], ["p2", "p2 + sin(q1 + q2)"], ["q1", "q1 + p1*p1"], ["q2", "q2 + p2"]] * 4
    deep = good * 3
    bad = [["p1", "p1 + q2*sin(q1)"], ["p2", "p2 + q1*sin(q2)"], ["q1", "q1 + p1"], ["q2", "q2 + p2"]] * 4
    out = run_bounded(f"""
        from phaselab import SymplecticMap
        bounded(lambda: SymplecticMap({good!r}, ["q1", "q2"], ["p1", "p2"]).symplectic_defect < 1e-12)
    """)
    assert out.finished and out.error is None and out.value == "True", out
    assert out.cpu < 4.0, out
    out = run_bounded(f"""
        from phaselab import SymplecticMap
        bounded(lambda: SymplecticMap({bad!r}, ["q1", "q2"], ["p1", "p2"]))
    """)
    assert out.finished and out.error == "ModelError" and "preserves volume" in out.message, out
    out = run_bounded(f"""
        from phaselab import SymplecticMap
        bounded(lambda: SymplecticMap({deep!r}, ["q1", "q2"], ["p1", "p2"]))
    """)
    assert out.finished and out.error == "ModelError" and "minutes" in out.message, out
    assert out.cpu < 4.0, out
