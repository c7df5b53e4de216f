"""Area-preserving maps: update rules, the determinant check, wrapping, compiled kernels."""

import numpy as np
import pytest
import sympy as sp

import phaselab
from phaselab import models
from phaselab.errors import ModelError
from phaselab.model import maps as maps_module
from phaselab.model.maps import AreaPreservingMap

q, p, K = sp.symbols("q p K", real=True)


def test_lazy_export():
    assert phaselab.AreaPreservingMap is AreaPreservingMap


def test_standard_map_det_is_one_symbolically():
    m = models.standard_map()
    assert m.kind == "map" and m.dof == 1 and m.name == "standard_map"
    assert m.area_check == "symbolic" and m.determinant == 1
    # reference: the Jacobian of p' = p + K sin q, q' = q + p' worked by hand,
    # [[1 + K cos q, 1], [K cos q, 1]], whose determinant is 1
    J = m.jacobian_matrix
    qs, ps = m.state_symbols
    Ks = m.param_symbols[0]
    assert sp.simplify(J - sp.Matrix([[1 + Ks * sp.cos(qs), 1], [Ks * sp.cos(qs), 1]])) == sp.zeros(2, 2)


def test_sequential_rules_use_updated_values():
    m = AreaPreservingMap([("p", "p + K*sin(q)"), ("q", "q + p")], ["q"], ["p"], params={"K": 1.2})
    # q' is written in the old variables after substitution of the new p
    assert sp.simplify(m.update[0] - (q + p + K * sp.sin(q))) == 0
    assert sp.simplify(m.update[1] - (p + K * sp.sin(q))) == 0


def test_simultaneous_rules_equal_sequential_ones():
    a = AreaPreservingMap([("p", p + K * sp.sin(q)), ("q", q + p)], [q], [p], params={K: 1.2})
    b = AreaPreservingMap([q + p + K * sp.sin(q), p + K * sp.sin(q)], [q], [p], params={K: 1.2})
    assert a.key == b.key


def test_kick_drift_kick_with_repeated_target():
    m = AreaPreservingMap([("p", "p - sin(q)/2"), ("q", "q + p"), ("p", "p - sin(q)/2")], ["q"], ["p"])
    assert m.area_check == "symbolic"
    z = np.array([0.7, -0.3])
    # reference: the three assignments applied by hand with numpy
    p1 = z[1] - np.sin(z[0]) / 2
    q1 = z[0] + p1
    p2 = p1 - np.sin(q1) / 2
    np.testing.assert_allclose(m.step(z), [q1, p2], rtol=1e-14)


@pytest.mark.parametrize("rules, det", [
    (["2*q", "p"], "2"),
    (["q + p", "p + sin(q)"], "cos"),
    ([("p", "p + q**2"), ("q", "q*exp(p)")], "exp"),
    (["q*cosh(p)", "p"], "cosh"),
])
def test_not_area_preserving_refused(rules, det):
    with pytest.raises(ModelError, match="not area-preserving") as info:
        AreaPreservingMap(rules, ["q"], ["p"], name="bad")
    assert det in str(info.value) and "'bad'" in str(info.value)


def test_numeric_check_when_simplify_is_skipped(monkeypatch):
    # an area-preserving map (a rotation composed with a shear) with the symbolic
    # simplification turned off must pass on the numerical check alone
    monkeypatch.setattr(maps_module, "SIMPLIFY_MAX_OPS", -1)
    a = sp.Symbol("a", real=True)
    rules = [q * sp.cos(a) - (p - q**2) * sp.sin(a), q * sp.sin(a) + (p - q**2) * sp.cos(a)]
    m = AreaPreservingMap(rules, [q], [p], params={a: 1.3})
    assert m.area_check == "numeric"
    with pytest.raises(ModelError, match="which is"):
        AreaPreservingMap([q * (1 + sp.sin(a) ** 2 / 10), p], [q], [p], params={a: 1.3})


def test_four_dimensional_symplectic_map():
    q1, q2, p1, p2, e = sp.symbols("q1 q2 p1 p2 e", real=True)
    # two coupled standard-map kicks from a potential V = -cos q1 - cos q2 - e cos(q1 - q2)
    V = -sp.cos(q1) - sp.cos(q2) - e * sp.cos(q1 - q2)
    rules = [(p1, p1 - sp.diff(V, q1)), (p2, p2 - sp.diff(V, q2)), (q1, q1 + p1), (q2, q2 + p2)]
    m = AreaPreservingMap(rules, [q1, q2], [p1, p2], params={e: 0.1}, modulus=2 * sp.pi)
    assert m.dof == 2 and m.determinant == 1 and m.is_symplectic
    # a volume-preserving but not symplectic map: det 1, yet J^T Omega J != Omega: refused
    with pytest.raises(ModelError, match="preserves volume"):
        AreaPreservingMap([2 * q1, q2 / 2, p1, p2], [q1, q2], [p1, p2])


def test_modulus_forms_and_wrap():
    m = models.standard_map()
    assert m.modulus == (pytest.approx(2 * np.pi),) * 2 and m.modulus_low == (0.0, 0.0)
    w = m.wrap(np.array([[7.0, -1.0]]))
    np.testing.assert_allclose(w, [[7.0 - 2 * np.pi, 2 * np.pi - 1.0]], rtol=1e-14)
    c = AreaPreservingMap([("p", "p + sin(q)"), ("q", "q + p")], ["q"], ["p"],
                          modulus=[("-pi", "pi"), None])
    assert c.modulus[1] is None and c.modulus_low[0] == pytest.approx(-np.pi)
    np.testing.assert_allclose(c.wrap([4.0, 9.0]), [4.0 - 2 * np.pi, 9.0])
    # one interval tuple for every component
    d = AreaPreservingMap(["q + p", "p"], ["q"], ["p"], modulus=("-pi", "pi"))
    np.testing.assert_allclose(d.wrap([4.0, -4.0]), [4.0 - 2 * np.pi, 2 * np.pi - 4.0])
    with pytest.raises(ModelError, match="positive period"):
        AreaPreservingMap(["q + p", "p"], ["q"], ["p"], modulus=[-1.0, None])
    with pytest.raises(ModelError, match="3 entries"):
        AreaPreservingMap(["q + p", "p"], ["q"], ["p"], modulus=[1.0, 1.0, 1.0])


def test_rule_errors_are_clear():
    with pytest.raises(ModelError, match="3 expressions but the state has 2"):
        AreaPreservingMap(["q", "p", "q"], ["q"], ["p"])
    with pytest.raises(ModelError, match="target 'r'"):
        AreaPreservingMap([("r", "q")], ["q"], ["p"])
    with pytest.raises(ModelError, match="mixes"):
        AreaPreservingMap([("p", "p + q"), "q"], ["q"], ["p"])
    with pytest.raises(phaselab.ExpressionError, match="unknown symbols: w"):
        AreaPreservingMap(["q + w", "p"], ["q"], ["p"])
    with pytest.raises(ModelError, match="unknown symbols in the update of q: w"):
        AreaPreservingMap([q + sp.Symbol("w"), p], [q], [p])


def test_step_matches_chirikov_form():
    m = models.standard_map()
    rng = np.random.default_rng(5)
    z = rng.uniform(0, 2 * np.pi, size=(30, 2))
    k = 1.7
    # reference: Chirikov's form I' = I + K sin(theta), theta' = theta + I', both mod 2 pi
    p_new = np.mod(z[:, 1] + k * np.sin(z[:, 0]), 2 * np.pi)
    q_new = np.mod(z[:, 0] + z[:, 1] + k * np.sin(z[:, 0]), 2 * np.pi)
    got = m.step(z, params={"K": k})
    np.testing.assert_allclose(got, np.column_stack([q_new, p_new]), rtol=1e-12, atol=1e-12)


def test_compiled_map_kernels():
    from phaselab.codegen import compile_kernel

    m = models.standard_map()
    c = compile_kernel(m)
    assert c.kind == "map"
    prm = m.param_values({"K": 2.3})
    rng = np.random.default_rng(11)
    ref_jac = sp.lambdify(list(m.state_symbols) + list(m.param_symbols), m.jacobian_matrix, "numpy")
    for z in rng.uniform(0, 2 * np.pi, size=(10, 2)):
        out = c.call("map_step", z, prm)
        J = c.call("map_jacobian", z, prm)
        # unwrapped iterate against the numpy reference before wrapping
        np.testing.assert_allclose(m.wrap(out), m.step(z, {"K": 2.3}), rtol=1e-13, atol=1e-13)
        np.testing.assert_allclose(J, ref_jac(*z, *prm), rtol=1e-13, atol=1e-13)
        assert np.linalg.det(J) == pytest.approx(1.0, abs=1e-12)


def test_compiled_wrap_matches_numpy_mod():
    import phaselab

    m = AreaPreservingMap([("p", "p + sin(q)"), ("q", "q + p")], ["q"], ["p"],
                          modulus=[("-pi", "pi"), None], name="wrap_check")
    rng = np.random.default_rng(4)
    z = rng.uniform(-20, 20, size=(10, 2))
    got = phaselab.section(m, z, crossings=1).points[:, 0]
    # reference: numpy's floor-mod onto [-pi, pi) of the unwrapped iterate; p is not wrapped
    p_new = z[:, 1] + np.sin(z[:, 0])
    q_new = z[:, 0] + p_new
    np.testing.assert_allclose(got[:, 0], -np.pi + np.mod(q_new + np.pi, 2 * np.pi), atol=1e-12)
    np.testing.assert_array_equal(got[:, 1], p_new)


def test_composed_rules_are_checked_with_bounded_work():
    """Sequential rules substitute into each other, so an expression can double at each
    rule. Five kick-drift pairs p += q sin q, q += p are area-preserving (each is a shear
    with unit determinant, common practice) and must pass, though expanding the composed
    determinant is out of budget (the check evaluates it at 30 digits, where the
    cancellation between its large products cannot pass for a failure). Forty pairs of
    p += sin q + cos q, q += sin p + cos p double past any size and are refused with a clear
    error. Each within 2 s of CPU in a child process with hard limits."""
    from bounded import run_bounded

    five = [["p", "p + sin(q)*q"], ["q", "q + p"]] * 5
    forty = [["p", "p + sin(q) + cos(q)"], ["q", "q + sin(p) + cos(p)"]] * 40
    out = run_bounded(f"""
        from phaselab import AreaPreservingMap
        bounded(lambda: AreaPreservingMap({five!r}, ["q"], ["p"]).area_check)
    """)
    assert out.finished and out.error is None and out.value in ("'numeric'", "'symbolic'"), out
    assert out.cpu < 2.0, out
    out = run_bounded(f"""
        from phaselab import AreaPreservingMap
        bounded(lambda: AreaPreservingMap({forty!r}, ["q"], ["p"]))
    """)
    assert out.finished and out.error == "ModelError" and "compose into an expression" in out.message, out
    assert out.cpu < 2.0, out
