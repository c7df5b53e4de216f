"""Chaos indicators: Benettin's Lyapunov exponent, MEGNO, FLI and SALI."""

import numpy as np
import pytest
from scipy.integrate import solve_ivp

import phaselab
from phaselab.orbits.chaos import chaos_indicators
from phaselab.errors import ParameterError


@pytest.fixture(scope="module")
def quartic():
    """One compiled 1-dof system serves as saddle (c < 0), oscillator (c > 0) and runaway
    (d > 0), to keep compile time down."""
    return phaselab.Hamiltonian("p**2/2 + c*q**2/2 - d*q**4/4", ["q"], ["p"],
                                params={"c": 1.0, "d": 0.0})


def hh_seed(y, energy):
    """x = 0, py = 0, px > 0 solved from H = E."""
    return [0.0, y, np.sqrt(2 * energy - y**2 + 2 * y**3 / 3), 0.0]


def test_linear_saddle_exponent_is_its_eigenvalue(quartic):
    # H = p^2/2 - a^2 q^2/2 has eigenvalues +-a; the Lyapunov exponent of a linear flow is
    # the largest real part of its eigenvalues (common practice). With deviation w0 the
    # finite-time estimate is log|w(t)|/t, w(t) = e^{At} w0 exactly, computed here with scipy.
    from scipy.linalg import expm

    a = 0.7
    T = 60.0
    w0 = np.random.default_rng(3).standard_normal(2)
    w0 /= np.linalg.norm(w0)
    r = chaos_indicators(quartic, [0.0, 0.0], T, method="yoshida4", dt=0.01, vectors=1,
                         deviations=w0.reshape(1, 2, 1), params={"c": -a**2})
    A = np.array([[0.0, 1.0], [a**2, 0.0]])
    exact = np.log(np.linalg.norm(expm(A * T) @ w0)) / T
    assert r.lyapunov[0] == pytest.approx(exact, rel=1e-6)
    assert r.lyapunov[0] == pytest.approx(a, rel=0.05)  # finite-time transient ~ log|a.w0|/T


def test_isochronous_oscillator_megno_tends_to_zero(quartic):
    # Cincotta & Simo 2000 (A&AS 147, 205): <Y> -> 0 for stable isochronous motion.
    r = chaos_indicators(quartic, [[1.0, 0.0]], 400.0, dt=0.01, params={"c": 1.3**2})
    assert abs(r.megno[0]) < 0.01
    assert abs(r.lyapunov[0]) < 0.01


def test_henon_heiles_regular_and_chaotic(henon_heiles):
    E = 1 / 8
    seeds = [hh_seed(0.0, E), hh_seed(-0.2, E)]
    r = chaos_indicators(henon_heiles, seeds, 3000.0, dt=0.02, history=True)
    regular, chaotic = 0, 1
    # quasi-periodic orbits: <Y> -> 2 (Cincotta & Simo 2000); SALI stays O(1) (Skokos 2001)
    assert abs(r.megno[regular] - 2.0) < 0.5
    assert r.sali[regular] > 1e-2
    # chaotic orbits: <Y> grows like lambda t / 2, SALI -> 0 exponentially
    assert r.megno[chaotic] > 20
    assert r.sali[chaotic] < 1e-8
    assert r.fli[chaotic] > 10 * r.fli[regular] / 2
    # the exponent agrees with the growth of the distance between two nearby orbits
    # integrated independently with scipy DOP853 (reference library), renormalised every 10
    # time units (Benettin's algorithm done by hand)
    def rhs(_, s):
        x, y, px, py = s
        return [px, py, -x - 2 * x * y, -y - x**2 + y**2]

    z = np.array(seeds[chaotic], dtype=float)
    d0 = 1e-8
    w = z + d0 * np.array([1.0, 1.0, 0.0, 0.0]) / np.sqrt(2)
    total, span, chunks = 0.0, 10.0, 150
    for _ in range(chunks):
        z = solve_ivp(rhs, (0, span), z, method="DOP853", rtol=1e-12, atol=1e-14).y[:, -1]
        w = solve_ivp(rhs, (0, span), w, method="DOP853", rtol=1e-12, atol=1e-14).y[:, -1]
        d = np.linalg.norm(w - z)
        total += np.log(d / d0)
        w = z + (w - z) * d0 / d
    reference = total / (span * chunks)
    at = np.argmin(np.abs(r.t - span * chunks))  # same finite time for both estimates
    assert r.history["lyapunov"][chaotic, at] == pytest.approx(reference, rel=0.35)
    assert r.lyapunov[chaotic] > 5 * r.lyapunov[regular]


def test_gauss_tangent_agrees_with_splitting_tangent(henon_heiles):
    # two different symplectic tangent maps of the same flow must give the same finite-time
    # exponent to the accuracy of the methods (the tangent flow is unique; common practice)
    seeds = [hh_seed(0.1, 1 / 12)]
    a = chaos_indicators(henon_heiles, seeds, 100.0, method="yoshida6", dt=0.01, seed=1, history=True)
    b = chaos_indicators(henon_heiles, seeds, 100.0, method="gauss6", dt=0.02, seed=1, history=True)
    np.testing.assert_allclose(a.history["lyapunov"], b.history["lyapunov"], rtol=1e-6, atol=1e-9)


def test_driven_system_runs_in_extended_phase_space():
    D = phaselab.Hamiltonian("p**2/2 - cos(q) - eps*q*cos(W*t)", ["q"], ["p"],
                             params={"eps": 0.0, "W": 1.0}, time="t", period="2*pi/W")
    # with eps = 0 it is the free pendulum: a libration is regular (MEGNO near 2, since the
    # pendulum is not isochronous; Cincotta & Simo 2000). The deviation starts across the
    # flow (along q at the turning point, where the flow is along p): a deviation along the
    # flow would reach the limit only slowly
    r = chaos_indicators(D, [[1.0, 0.0]], 1000.0, dt=0.02, vectors=1,
                         deviations=np.array([[[1.0], [0.0]]]))
    assert abs(r.megno[0] - 2.0) < 0.3


def test_bad_input_is_refused(henon_heiles):
    seed = [hh_seed(0.0, 0.1)]
    with pytest.raises(ParameterError, match="not symplectic"):
        chaos_indicators(henon_heiles, seed, 10.0, method="rk4")
    with pytest.raises(ParameterError, match="positive"):
        chaos_indicators(henon_heiles, seed, -1.0)
    with pytest.raises(ParameterError, match="shape"):
        chaos_indicators(henon_heiles, [[0.0, 0.1, 0.2]], 10.0)
    with pytest.raises(ParameterError, match="dt must be finite"):
        chaos_indicators(henon_heiles, seed, 10.0, dt=float("nan"))
    # raw Python errors of old became the package's own
    with pytest.raises(ParameterError, match="t must be a real number"):
        chaos_indicators(henon_heiles, seed, None)
    with pytest.raises(ParameterError, match="dt must be a real number"):
        chaos_indicators(henon_heiles, seed, 10.0, dt=[0.05])
    with pytest.raises(ParameterError, match="rows of different lengths|ragged"):
        chaos_indicators(henon_heiles, [[0.0, 0.1, 0.2, 0.3], [0.0, 0.1]], 10.0)
    with pytest.raises(ParameterError, match="text"):
        chaos_indicators(henon_heiles, [["a", "b", "c", "d"]], 10.0)
    with pytest.raises(ParameterError, match="complex"):
        chaos_indicators(henon_heiles, [[0.0, 0.1j, 0.2, 0.3]], 10.0)
    with pytest.raises(ParameterError, match="booleans"):
        chaos_indicators(henon_heiles, [[True, False, True, False]], 10.0)
    with pytest.raises(ParameterError, match="maxit must be at least 1"):
        chaos_indicators(henon_heiles, seed, 10.0, method="gauss6", maxit=0)
    with pytest.raises(ParameterError, match="save_every must be at least 1"):
        chaos_indicators(henon_heiles, seed, 10.0, save_every=-1)
    # a request far over the work limit is refused before it starts, naming the way out
    with pytest.raises(ParameterError, match="set_limits"):
        chaos_indicators(henon_heiles, seed, 1e12)


def test_deviation_vectors_do_not_depend_on_the_batch(henon_heiles):
    """The same orbit gets the same indicators wherever it sits in a batch (its deviation
    vector depends on the seed and its own state only)."""
    seeds = np.array([hh_seed(y, 1 / 8) for y in (-0.1, 0.0, 0.1, 0.2, 0.3)])
    a = chaos_indicators(henon_heiles, seeds, 200.0, dt=0.02, vectors=1)
    order = np.array([3, 0, 4, 1, 2])
    b = chaos_indicators(henon_heiles, seeds[order], 200.0, dt=0.02, vectors=1)
    c = chaos_indicators(henon_heiles, seeds[2:3], 200.0, dt=0.02, vectors=1)
    np.testing.assert_array_equal(a.megno[order], b.megno)
    assert c.megno[0] == a.megno[2]


def test_escaping_orbit_is_flagged_and_batch_survives(quartic):
    # with c = 0, d = 1 an orbit with energy above 0 reaches infinity in finite time
    with pytest.warns(RuntimeWarning, match=r"1 orbit\(s\) stopped early \(orbit 1 at t = "):
        r = chaos_indicators(quartic, [[0.0, 0.0], [2.0, 3.0]], 50.0, dt=0.01, params={"c": 0.0, "d": 1.0})
    assert not r.escaped[0] and r.escaped[1]
    assert r.status_text[1] in ("non-finite state", "implicit step did not converge", "left the box")
    assert np.isfinite(r.lyapunov[0])


def test_cat_map_exponent_is_log_of_its_eigenvalue():
    # the linear automorphism (q, p) -> (2q + p, q + p) mod 1 has Lyapunov exponent
    # log of its largest eigenvalue (common practice); numpy.linalg.eigvals is the reference
    cat = phaselab.AreaPreservingMap(["2*q + p", "q + p"], ["q"], ["p"], modulus=1.0)
    r = chaos_indicators(cat, [[0.1, 0.3], [0.7, 0.2]], 5000)  # transient ~ 1/n
    expected = np.log(np.max(np.abs(np.linalg.eigvals([[2.0, 1.0], [1.0, 1.0]]))))
    np.testing.assert_allclose(r.lyapunov, expected, rtol=1e-3)


def test_standard_map_strong_kick_exponent():
    # for K >> 1 the standard map's exponent approaches ln(K/2) (Chirikov 1979, Phys. Rep.
    # 52, 263, eq. 5.3; from memory); averaged over many orbits in the chaotic sea
    K = 12.0
    sm = phaselab.models.standard_map()
    rng = np.random.default_rng(0)
    seeds = rng.uniform(0, 2 * np.pi, size=(40, 2))
    r = chaos_indicators(sm, seeds, 4000, params={"K": K})
    assert np.mean(r.lyapunov) == pytest.approx(np.log(K / 2), rel=0.05)
    assert np.all(r.sali < 1e-8)


def test_chaos_indicators_state_the_error_of_their_step(hh):
    """The stated step error of a leapfrog run falls by 2^2 when the step is halved (a
    method of order p has a timing error ~ h^p: common practice), and maps state none."""
    seeds = [[0.0, 0.1, 0.35, 0.0]]
    coarse = phaselab.chaos_indicators(hh, seeds, 50.0, method="leapfrog", dt=0.02)
    fine = phaselab.chaos_indicators(hh, seeds, 50.0, method="leapfrog", dt=0.01)
    assert 0 < fine.error_estimate < coarse.error_estimate
    assert coarse.error_estimate / fine.error_estimate == pytest.approx(4.0, rel=0.15)
    sm = phaselab.models.standard_map()
    assert np.isnan(phaselab.chaos_indicators(sm, [[0.1, 0.2]], 50).error_estimate)


def test_orbits_stopped_by_a_huge_step_are_named_in_a_warning(henon_heiles):
    """dt = 5 is far past the stability limit of a composition method for unit frequencies
    (dt < 2, common practice): the orbit overflows; the warning names it with the time it
    reached, and its status says why."""
    from phaselab.engine.status import NOT_FINITE

    with pytest.warns(RuntimeWarning, match=r"1 orbit\(s\) stopped early \(orbit 0 at t = .*dt = 5 is too large"):
        res = phaselab.chaos_indicators(henon_heiles, [[0.0, 0.1, 0.3, 0.0]], 100.0, dt=5.0)
    assert res.status[0] == NOT_FINITE and res.t_end[0] < 100.0
