"""The compiled steppers: tableaux, order, symplecticity, reversibility, tangent maps.

Systems are built here with phaselab.Hamiltonian and compiled once per module.
"""

import numpy as np
import pytest
import sympy as sp
from scipy.special import ellipj, ellipk

from phaselab import Hamiltonian, ModelError, ParameterError
from phaselab.engine.compiled import loops
from phaselab.engine.integrators import METHODS, choose_method, gauss_legendre_tableau, get_method

SYMPLECTIC_EXPLICIT = ["leapfrog", "yoshida4", "yoshida6", "yoshida8"]
SYMPLECTIC_IMPLICIT = ["implicit_midpoint", "gauss4", "gauss6"]
SYMMETRIC = SYMPLECTIC_EXPLICIT + SYMPLECTIC_IMPLICIT


def _hh():
    return Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)/2 + x**2*y - y**3/3",
                       ["x", "y"], ["px", "py"], name="hh")


def _quartic():
    # non-separable: the q*p term couples coordinate and momentum
    return Hamiltonian("(p**2 + q**2)**2/4 + q*p", ["q"], ["p"], name="quartic")


def _pendulum():
    return Hamiltonian("p**2/2 - w**2*cos(q)", ["q"], ["p"], params={"w": 1.3}, name="bead")


@pytest.fixture(scope="module")
def hh():
    H = _hh()
    return H, loops(H), H.param_values()


@pytest.fixture(scope="module")
def quartic():
    H = _quartic()
    return H, loops(H), H.param_values()


@pytest.fixture(scope="module")
def pendulum():
    H = _pendulum()
    return H, loops(H), H.param_values()


def _J(m):
    n = m // 2
    return np.block([[np.zeros((n, n)), np.eye(n)], [-np.eye(n), np.zeros((n, n))]])


def _run(cs, prm, z0, h, n_steps, me, tol=1e-15, maxit=200):
    """Final state after n_steps of method me, through the compiled ensemble loop."""
    Z = np.atleast_2d(np.asarray(z0, dtype=float)).copy()
    m = Z.shape[1]
    states = np.full((len(Z), 2, m), np.nan)
    energy = np.full((len(Z), 2), np.nan)
    status = np.zeros(len(Z), dtype=np.int64)
    stop = np.zeros(len(Z), dtype=np.int64)
    lo = np.full(m, -np.inf)
    cs.run_orbits(Z, prm, h, n_steps, n_steps, me.kind, me.weights, me.A, me.b, tol, maxit,
                  lo, -lo, states, energy, status, stop)
    assert np.all(status == 0)
    return states[:, -1]


# --------------------------------------------------------------------------- tableaux
def test_gauss2_tableau_matches_published_values():
    A, b = gauss_legendre_tableau(2)
    r = np.sqrt(3.0) / 6.0
    # Hairer, Norsett & Wanner, Solving ODEs I, Table II.7.3 (two-stage Gauss method)
    np.testing.assert_allclose(A, [[0.25, 0.25 - r], [0.25 + r, 0.25]], atol=1e-15)
    np.testing.assert_allclose(b, [0.5, 0.5], atol=1e-15)


@pytest.mark.parametrize("s", [1, 2, 3])
def test_gauss_tableau_satisfies_collocation_conditions(s):
    A, b = gauss_legendre_tableau(s)
    c = A.sum(axis=1)
    # Butcher's simplifying assumptions B(2s) and C(s) that define the s-stage Gauss method
    # (Hairer, Norsett & Wanner, Solving ODEs I, sec. II.7, Theorem 7.4)
    for k in range(1, 2 * s + 1):
        assert abs(b @ c ** (k - 1) - 1.0 / k) < 1e-14
    for k in range(1, s + 1):
        np.testing.assert_allclose(A @ c ** (k - 1), c ** k / k, atol=1e-14)
    # nodes are the Gauss-Legendre points on [0, 1] (roots of the shifted Legendre
    # polynomial, from sympy as the reference library)
    x = sp.Symbol("x")
    roots = sorted(float(r) for r in sp.Poly(sp.legendre(s, 2 * x - 1), x).nroots(n=30))
    np.testing.assert_allclose(np.sort(c), roots, atol=1e-14)


def test_composition_weights_sum_to_one():
    # consistency of a composition: the substeps add up to the step (Yoshida 1990, eq. 4.2)
    for name in SYMPLECTIC_EXPLICIT:
        assert abs(METHODS[name].weights.sum() - 1.0) < 1e-14
        np.testing.assert_array_equal(METHODS[name].weights, METHODS[name].weights[::-1])


# --------------------------------------------------------------------------- method table
def test_method_lookup_and_choice(hh, quartic):
    H, _, _ = hh
    Q, _, _ = quartic
    assert choose_method(H).name == "yoshida4"
    assert choose_method(Q).name == "gauss6"
    assert get_method("Stormer_Verlet").name == "leapfrog"
    with pytest.raises(ParameterError, match="unknown method 'rk45'"):
        get_method("rk45", H)
    with pytest.raises(ModelError, match="T\\(p\\) \\+ V\\(q\\)"):
        get_method("yoshida6", Q)


# --------------------------------------------------------------------------- tangent maps
def _central_difference(cs, prm, z, h, me, eps=1e-5):
    cols = []
    for e in np.eye(len(z)):
        plus, minus = _run(cs, prm, [z + eps * e, z - eps * e], h, 1, me)
        cols.append((plus - minus) / (2 * eps))
    return np.column_stack(cols)


def _step_matrix(cs, z, h, prm, me):
    out = np.empty((len(z), len(z)))
    assert cs.step_matrix(np.asarray(z, dtype=float), h, prm, me.kind, me.weights, me.A, me.b, 1e-15,
                          200, out) == 0
    return out


@pytest.mark.parametrize("name", list(METHODS))
def test_tangent_map_is_the_derivative_of_the_step(hh, quartic, name):
    me = METHODS[name]
    cases = [hh] + ([quartic] if not me.separable_only else [])
    for H, cs, prm in cases:
        z = np.array([0.1, 0.2, 0.3, -0.1]) if H.dof == 2 else np.array([0.5, 0.3])
        M = _step_matrix(cs, z, 0.1, prm, me)
        F = _central_difference(cs, prm, z, 0.1, me)
        # central differences (common practice): truncation ~ eps^2 = 1e-10, rounding ~1e-11
        np.testing.assert_allclose(M, F, atol=1e-8)


@pytest.mark.parametrize("name", SYMPLECTIC_EXPLICIT + SYMPLECTIC_IMPLICIT + ["rk4"])
def test_symplecticity_of_one_step(hh, quartic, name):
    me = METHODS[name]
    cases = [(hh, np.array([0.1, 0.2, 0.3, -0.1]))]
    if not me.separable_only:
        cases.append((quartic, np.array([0.5, 0.3])))
    for (H, cs, prm), z in cases:
        J = _J(len(z))
        for h in (0.05, 0.2):
            M = _step_matrix(cs, z, h, prm, me)
            defect = np.abs(M.T @ J @ M - J).max()
            if me.symplectic:
                # M^T J M = J defines a symplectic map (Hairer, Lubich & Wanner, GNI, Def. VI.2.2)
                assert defect < 1e-12, (name, H.name, h, defect)
            else:
                # classical RK4 is not symplectic (GNI Theorem VI.4.3: its coefficients
                # violate b_i a_ij + b_j a_ji = b_i b_j): its defect is a power of h far above
                # the 1e-12 round-off level the symplectic methods reach
                assert defect > 100 * 1e-12, (name, H.name, h, defect)


# --------------------------------------------------------------------------- reversibility
@pytest.mark.parametrize("name", SYMMETRIC + ["rk4"])
def test_time_reversibility(hh, quartic, name):
    me = METHODS[name]
    H, cs, prm = hh if me.separable_only or name in SYMPLECTIC_EXPLICIT else quartic
    z0 = np.array([[0.1, 0.2, 0.3, -0.1]]) if H.dof == 2 else np.array([[0.5, 0.3]])
    h, N = 0.05, 400
    back = _run(cs, prm, _run(cs, prm, z0, h, N, me), -h, N, me)
    err = np.abs(back - z0).max()
    if name == "rk4":
        # RK4 is not symmetric (GNI sec. V.1: Phi_{-h} != Phi_h^{-1}); with h = 0.05 the
        # round trip misses by the local error, O(h^5) per step
        assert err > 1e-10, err
    else:
        # symmetric methods satisfy Phi_{-h} = Phi_h^{-1} (GNI Def. V.1.4); only round-off
        # and the implicit solve's tolerance remain
        assert err < 1e-12, (name, err)


# --------------------------------------------------------------------------- order
ORDER_STEPS = {  # numbers of steps over T = 6 where the error is above round-off
    "leapfrog": [40, 80, 160, 320, 640],
    "yoshida4": [40, 80, 160, 320, 640],
    "yoshida6": [20, 30, 40, 60, 80, 120, 160],
    "yoshida8": [20, 30, 40, 60, 80],
    "implicit_midpoint": [40, 80, 160, 320, 640],
    "gauss4": [40, 80, 160, 320, 640],
    "gauss6": [20, 30, 40, 60, 80, 120],
    "rk4": [40, 80, 160, 320, 640],
}


@pytest.mark.parametrize("name", list(METHODS))
def test_observed_order_matches_nominal(pendulum, name):
    H, cs, prm = pendulum
    me = METHODS[name]
    w, th0, T = 1.3, 1.5, 6.0
    # exact pendulum orbit released at rest from th0: q(t) = 2 arcsin(k sn(K - w t | m)),
    # k = sin(th0/2), m = k^2 (Abramowitz & Stegun 16.1, 17.3; scipy.special.ellipj/ellipk)
    k = np.sin(th0 / 2)
    m = k * k
    sn, cn, dn, _ = ellipj(ellipk(m) - w * T, m)
    exact = np.array([2 * np.arcsin(k * sn), -2 * k * w * cn * dn / np.sqrt(1 - m * sn * sn)])
    hs, errs = [], []
    for N in ORDER_STEPS[name]:
        z = _run(cs, prm, [th0, 0.0], T / N, N, me)[0]
        hs.append(T / N)
        errs.append(np.abs(z - exact).max())
    slope = np.polyfit(np.log(hs), np.log(errs), 1)[0]
    # nominal orders: leapfrog 2, Yoshida compositions 4/6/8 (Yoshida 1990, Phys. Lett. A 150,
    # 262), s-stage Gauss-Legendre 2s (Butcher 1964), RK4 4
    assert abs(slope - me.order) < 0.3, (name, slope, errs)
