"""The symbolic Hamiltonian: equations, structure, conserved quantities, energy, extended
phase space."""

import numpy as np
import pytest
import sympy as sp
from scipy.integrate import solve_ivp

from phaselab import Hamiltonian, models
from phaselab.errors import ExpressionError, ModelError, ParameterError

q, p, t = sp.symbols("q p t", real=True)


def poisson(f, g, H):
    """{f, g} = sum dF/dq dG/dp - dF/dp dG/dq (common practice)."""
    return sum(sp.diff(f, qi) * sp.diff(g, pi) - sp.diff(f, pi) * sp.diff(g, qi)
               for qi, pi in zip(H.coords, H.momenta))


# ------------------------------------------------------------------ equations
def test_equations_of_an_oscillator():
    m, k = sp.symbols("m k", real=True)
    H = Hamiltonian(p**2 / (2 * m) + k * q**2 / 2, [q], [p], params={m: 2.0, k: 3.0})
    eqs = H.equations()
    # Hamilton's equations dq/dt = dH/dp, dp/dt = -dH/dq (common practice)
    assert [e.lhs for e in eqs] == [sp.Derivative(q, t), sp.Derivative(p, t)]
    assert sp.simplify(eqs[0].rhs - p / m) == 0
    assert sp.simplify(eqs[1].rhs + k * q) == 0


def test_equations_from_string_match_sympy_built():
    H = Hamiltonian("p**2/2 - cos(q)", ["q"], ["p"])
    # reference: the derivatives of p^2/2 - cos q worked by hand: p and -sin q
    assert sp.simplify(H.equations()[0].rhs - p) == 0
    assert sp.simplify(H.equations()[1].rhs + sp.sin(q)) == 0
    assert H.vector_field() == [e.rhs for e in H.equations()]


# ------------------------------------------------------------------ structure
def test_cyclic_coordinates_and_conserved_of_kepler():
    H = models.kepler()
    theta, p_theta = H.coords[1], H.momenta[1]
    assert H.cyclic_coordinates == (theta,)
    cons = H.conserved()
    assert set(cons) == {"p_theta", "H"}
    # each reported quantity Poisson-commutes with H (common practice)
    for f in cons.values():
        assert sp.simplify(poisson(f, H.expr, H)) == 0
    assert cons["p_theta"] == p_theta


def test_coordinate_without_its_momentum_is_conserved():
    q1, q2, p1, p2 = sp.symbols("q1 q2 p1 p2", real=True)
    H = Hamiltonian(p1**2 / 2 + q1**2 / 2 + sp.cos(q2), [q1, q2], [p1, p2])
    cons = H.conserved()
    assert cons["q2"] == q2  # dq2/dt = dH/dp2 = 0
    assert "p2" not in cons  # dp2/dt = sin(q2) != 0
    assert sp.simplify(poisson(q2, H.expr, H)) == 0
    assert sp.simplify(poisson(p2, H.expr, H)) != 0


def test_time_dependent_energy_not_reported_conserved():
    H = models.driven_pendulum()
    assert not H.is_autonomous
    assert "H" not in H.conserved()


@pytest.mark.parametrize("factory, separable", [
    (models.henon_heiles, True), (models.pendulum, True), (models.fput_chain, True),
    (models.restricted_three_body, False), (models.double_pendulum, False), (models.kepler, False),
])
def test_is_separable(factory, separable):
    # T(p) + V(q) by inspection of each published form (common practice)
    assert factory().is_separable is separable


def test_dof_and_autonomy():
    H = models.henon_heiles()
    assert H.dof == 2 and H.is_autonomous
    D = models.driven_pendulum()
    assert D.dof == 1 and not D.is_autonomous
    assert D.extended().dof == 2 and D.extended().is_autonomous


# ------------------------------------------------------------------ energy
def test_energy_matches_numpy_formula():
    H = models.henon_heiles()
    rng = np.random.default_rng(1)
    z = rng.uniform(-0.5, 0.5, size=(50, 4))
    x, y, px, py = z.T
    # the Henon-Heiles form written out with numpy (Henon & Heiles 1964, eq. of H)
    expected = (px**2 + py**2) / 2 + (x**2 + y**2) / 2 + x**2 * y - y**3 / 3
    np.testing.assert_allclose(H.energy(z), expected, rtol=1e-14, atol=1e-15)
    assert isinstance(H.energy(z[0]), float)


def test_energy_uses_parameters():
    H = models.pendulum()
    z = np.array([[0.3, 0.7]])
    for m, l, g in [(1.0, 1.0, 9.81), (2.0, 0.5, 1.6)]:
        got = H.energy(z, params={"m": m, "l": l, "g": g})
        # H = p^2/(2 m l^2) - m g l cos q written out
        assert got[0] == pytest.approx(0.7**2 / (2 * m * l**2) - m * g * l * np.cos(0.3), rel=1e-14)


def test_energy_of_time_dependent_system_uses_t():
    H = models.driven_pendulum()
    z = np.array([0.4, 0.2])
    w0, eps, W = 1.0, 0.5, 2.0
    for tt in (0.0, 1.3):
        expected = 0.2**2 / 2 - (w0**2 + eps * np.cos(W * tt)) * np.cos(0.4)
        assert H.energy(z, t=tt) == pytest.approx(expected, rel=1e-14)


def test_energy_refuses_bad_shape_and_params():
    H = models.henon_heiles()
    with pytest.raises(ModelError, match="4 columns"):
        H.energy(np.zeros((3, 3)))
    P = models.pendulum()
    with pytest.raises(ParameterError, match="unknown parameters: mass"):
        P.energy([0.0, 0.0], params={"mass": 2.0})
    with pytest.raises(ParameterError, match="finite"):
        P.energy([0.0, 0.0], params={"g": float("nan")})


# ------------------------------------------------------------------ extended phase space
def test_extended_vector_field_agrees_with_time_dependent_one():
    H = models.driven_pendulum()
    K = H.extended()
    (qs, ps), (tau, p_tau) = H.coords + H.momenta, (K.coords[1], K.momenta[1])
    assert K.coords == (qs, tau) and K.momenta == (ps, p_tau)
    assert K.time_coordinate == 1 and K.original is H
    prm = dict(zip(H.param_symbols, H.param_values()))
    f_time = [sp.diff(H.expr, ps), -sp.diff(H.expr, qs), sp.Integer(1), -sp.diff(H.expr, H.time)]
    f_ext = K.vector_field()  # order: dq, dtau, dp, dp_tau
    rng = np.random.default_rng(7)
    for qv, pv, tv, ptv in rng.uniform(-3, 3, size=(10, 4)):
        at_t = {qs: qv, ps: pv, H.time: tv, **prm}
        at_k = {qs: qv, ps: pv, tau: tv, p_tau: ptv, **prm}
        want = [float(e.evalf(subs=at_t)) for e in f_time]  # sympy's own evaluation
        got = [float(e.evalf(subs=at_k)) for e in f_ext]
        np.testing.assert_allclose([got[0], got[2], got[1], got[3]], want, rtol=1e-13, atol=1e-14)


def test_extended_orbit_matches_time_dependent_orbit():
    """Integrate both forms with scipy's DOP853 (reference) and compare."""
    H = models.driven_pendulum()
    K = H.extended()
    prm = H.param_values()
    vf_t = sp.lambdify([q_ for q_ in H.state_symbols] + [H.time] + list(H.param_symbols),
                       H.vector_field(), "numpy")
    vf_k = sp.lambdify(list(K.state_symbols) + list(K.param_symbols), K.vector_field(), "numpy")
    z0 = np.array([0.5, 0.1])
    a = solve_ivp(lambda tt, z: vf_t(*z, tt, *prm), (0, 10), z0, method="DOP853", rtol=1e-11, atol=1e-12,
                  dense_output=True)
    b = solve_ivp(lambda tt, z: vf_k(*z, *prm), (0, 10), [z0[0], 0.0, z0[1], 0.0], method="DOP853",
                  rtol=1e-11, atol=1e-12, dense_output=True)
    ts = np.linspace(0, 10, 21)
    za, zb = a.sol(ts), b.sol(ts)
    np.testing.assert_allclose(zb[0], za[0], atol=1e-8)
    np.testing.assert_allclose(zb[2], za[1], atol=1e-8)
    np.testing.assert_allclose(zb[1], ts, atol=1e-8)  # tau advances at unit rate
    # K = H + p_tau is conserved along the extended orbit
    Kz = K.energy(zb.T)
    assert np.max(np.abs(Kz - Kz[0])) < 1e-8


def test_extended_of_autonomous_is_itself():
    H = models.henon_heiles()
    assert H.extended() is H


def test_driving_period():
    H = models.driven_pendulum()
    assert H.driving_period() == pytest.approx(np.pi)  # 2 pi / Omega with Omega = 2
    assert H.driving_period({"Omega": 4.0}) == pytest.approx(np.pi / 2)
    with pytest.raises(ModelError, match="no driving period"):
        models.henon_heiles().driving_period()
    with pytest.raises(ModelError, match="positive"):
        H.driving_period({"Omega": -1.0})


# ------------------------------------------------------------------ construction errors
def test_construction_errors_are_clear():
    with pytest.raises(ModelError, match="1 coordinates but 2 momenta"):
        Hamiltonian("p**2", ["q"], ["p", "r"])
    with pytest.raises(ExpressionError, match="unknown symbols: w"):
        Hamiltonian("p**2 + w*q", ["q"], ["p"])
    with pytest.raises(ModelError, match="unknown symbols in the Hamiltonian: w"):
        Hamiltonian(p**2 + sp.Symbol("w") * q, [q], [p])
    with pytest.raises(ModelError, match="used twice"):
        Hamiltonian("q**2", ["q"], ["q"])
    with pytest.raises(ModelError, match="no time symbol"):
        Hamiltonian("p**2", ["q"], ["p"], period=1.0)
    with pytest.raises(ParameterError, match="clash"):
        Hamiltonian("p**2", ["q"], ["p"], params={"q": 1.0})


def test_key_depends_on_form_only():
    a = Hamiltonian("p**2/2 + q**4", ["q"], ["p"])
    b = Hamiltonian("q**4 + p**2/2", ["q"], ["p"])
    c = Hamiltonian("p**2/2 + q**3", ["q"], ["p"])
    assert a.key == b.key != c.key


def test_systems_pickle_after_use():
    # Dask ships systems to worker processes by pickle; cached numeric functions must not
    # block that, and the copy must evaluate the same (reference: the original object)
    import pickle

    import numpy as np

    import phaselab

    for system in (phaselab.models.henon_heiles(), phaselab.models.standard_map()):
        z = np.full((3, len(system.state_symbols)), 0.1)
        before = system.energy(z) if system.kind == "flow" else system.step(z)
        copy = pickle.loads(pickle.dumps(system))
        after = copy.energy(z) if copy.kind == "flow" else copy.step(z)
        np.testing.assert_array_equal(before, after)


# ------------------------------------------------------------------ bounded symbolic work
def test_separability_of_a_high_power_is_decided_without_expanding():
    """H = (x + y + px + py + 1)**1000 is not separable: d2H/dx dpx = 999000 s**998 with
    s = x + y + px + py + 1 is nonzero wherever s is (differentiated by hand). Expanding H
    first (half a million terms per derivative) must not happen: the decision, and the
    integrator choice of method="auto" that rests on it, stay within 2 s of CPU and a few
    hundred MiB, in a child process with hard limits."""
    from bounded import run_bounded

    out = run_bounded("""
        from phaselab import Hamiltonian
        from phaselab.engine.integrators import choose_method
        H = Hamiltonian("(x + y + px + py + 1)**1000", ["x", "y"], ["px", "py"])
        bounded(lambda: (H.is_separable, choose_method(H).separable_only))
    """)
    assert out.finished and out.error is None, out
    assert out.value == "(False, False)", out
    assert out.cpu < 2.0 and out.rss_mib < 400, out


@pytest.mark.parametrize("text", [
    "(x + y + 1)**7", "(x + 1)**(5/2)", "(E + 5)**(6 - x)", "(pi + E)**(3 + y)",
    "(x + y)**(-4)", "exp(x + 1)**3", "(x + 1)**y", "(2 + sqrt(3))**(4 - x) * (x + y)**2",
    "x**1000", "(x + y + 1)**3 / (x - y)**2", "7**(6 - x) * (x + 1)",
])
def test_expansion_estimate_bounds_sympys_expansion(text):
    """expanded_terms is an upper bound on the terms sympy's own ``expand`` produces (the
    reference), including the powers ``expand`` splits off an exponent ``c + rest`` of a
    positive base (``(E + 5)**(6 - x)`` becomes six terms over ``(E + 5)**x``)."""
    from phaselab.model.limits import expanded_terms

    x, y = sp.symbols("x y")
    expr = sp.sympify(text, locals={"x": x, "y": y})
    expanded = sp.expand(expr)
    actual = len(expanded.args) if expanded.is_Add else 1
    assert actual <= expanded_terms(expr) <= 400, (actual, expanded_terms(expr))


def test_powers_that_would_compute_huge_numbers_are_recognised():
    """7**(10**15 - x) expands (and cse's preprocessing factors) to 7**(10**15) * 7**(-x),
    a number of 2.8e15 bits; 7**(6 - x) gives 117649 * 7**(-x), which is harmless."""
    from phaselab.model.limits import EXPAND_MAX_TERMS, expanded_terms, has_huge_number_power

    x = sp.Symbol("x")
    huge = sp.Integer(7) ** (10**15 - x)
    assert has_huge_number_power(huge) and expanded_terms(huge) > EXPAND_MAX_TERMS
    assert has_huge_number_power(sp.Rational(3, 2) ** (sp.Rational(10**6, 7) + x))
    assert not has_huge_number_power(sp.Integer(7) ** (6 - x))
    assert not has_huge_number_power(sp.Float(2.5) ** (10**15 + x))  # floats are cheap


def test_separability_says_how_it_was_decided():
    assert models.henon_heiles().separable_check == "symbolic"
    # p (sin 2q - 2 sin q cos q) vanishes by the double-angle identity (common practice), but
    # sympy keeps both terms: the mixed derivative is zero only numerically, and it says so
    H = Hamiltonian(p**2 / 2 + q**2 / 2 + p * (sp.sin(2 * q) - 2 * sp.sin(q) * sp.cos(q)), [q], [p])
    assert H.is_separable and H.separable_check == "numeric"
    H = Hamiltonian(p**2 / 2 + q * p * (sp.sin(2 * q) - sp.sin(q) * sp.cos(q)), [q], [p])
    assert not H.is_separable
