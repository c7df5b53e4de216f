"""Periodic orbits, residues, invariant manifolds, families and torus breakup, against
closed forms, published values and scipy."""

import json

import numpy as np
import pytest
import sympy as sp
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

import phaselab
from phaselab.errors import IntegrationError, ModelError, ParameterError


@pytest.fixture(scope="module")
def mcmillan():
    """x' = y, y' = -x + 2 mu y / (1 + y^2): area-preserving ((x, y) -> (y, -x + f(y)) has
    Jacobian [[0, 1], [-1, f']], determinant 1)."""
    return phaselab.AreaPreservingMap(["y", "-x + 2*mu*y/(1 + y**2)"], ["x"], ["y"], params={"mu": 1.6},
                                      name="McMillan map")


# ----------------------------------------------------------------------------- residues
@pytest.mark.parametrize("K", [0.3, 1.2, 3.5])
def test_standard_map_period_one_residues(standard_map, K):
    """p' = p + K sin q, q' = q + p' has Jacobian [[1 + K cos q, 1], [K cos q, 1]] in (q, p),
    trace 2 + K cos q, so R = (2 - tr)/4 = -K cos(q)/4: -K/4 at (0, 0) and +K/4 at (pi, 0)
    (Greene 1979, derived here)."""
    o = phaselab.periodic_orbit(standard_map, [0.02, 0.03], params={"K": K})
    assert o.residue == pytest.approx(-K / 4, abs=1e-12) and o.stability == "unstable"
    np.testing.assert_allclose(o.points[0], [0.0, 0.0], atol=1e-12)
    o = phaselab.periodic_orbit(standard_map, [np.pi + 0.05, 0.04], params={"K": K})
    assert o.residue == pytest.approx(K / 4, abs=1e-12)
    assert o.stability == ("stable" if K < 4 else "inverse-unstable")
    if K < 4:   # multipliers exp(+-i theta), cos theta = tr/2 = 1 - K/2
        assert o.rotation_number == pytest.approx(np.arccos(1 - K / 2) / (2 * np.pi), abs=1e-12)


def test_standard_map_period_two_residues(standard_map):
    """Period-2 orbits of rotation number 1/2 (q advances 2 pi in two iterates, p returns):
    with p2 = p1 + K sin q1, q2 = q1 + p2, p1 = p2 + K sin q2, q1 + 2 pi = q2 + p1 one needs
    sin q2 = -sin q1 and p1 + p2 = 2 pi. Either q2 = q1 + pi, p1 = p2 = pi, sin q1 = 0: the
    orbit {(0, pi), (pi, pi)}; or q2 = 2 pi - q1, p1 = 2 q1 with 4 q1 + K sin q1 = 2 pi.
    For J(a) = [[1 + K a, 1], [K a, 1]] (a = cos q) the trace of J(a2) J(a1) is
    2 + 2K(a1 + a2) + K^2 a1 a2, so R = K^2/4 for the first and R = -K c - K^2 c^2/4 with
    c = cos q1 for the second (Greene 1979's construction, derived here; q1 by scipy's brentq)."""
    K = 0.8
    found = phaselab.find_periodic_orbits(standard_map, 2,
                                          ranges={"q": (0.1, 6.1), "p": (2.0, 4.2)}, resolution=7,
                                          params={"K": K})
    residues = sorted(o.residue for o in found)
    q1 = brentq(lambda q: 4 * q + K * np.sin(q) - 2 * np.pi, 0.0, np.pi)
    c = np.cos(q1)
    expected = sorted([K**2 / 4, -K * c - K**2 * c**2 / 4])
    assert len(found) == 2, found
    np.testing.assert_allclose(residues, expected, atol=1e-11)
    assert all(o.crossings == 2 and o.shift[0] == pytest.approx(2 * np.pi) for o in found)
    assert found.failed.get("least period smaller than asked", 0) > 0   # fixed points left out


def test_symmetric_orbit_agrees_with_newton(standard_map):
    """Greene's symmetric search and plain Newton find the same period-5 orbit (same residue)."""
    K = 0.7
    sym = phaselab.periodic_orbit(standard_map, [0.0, 2 * np.pi * 2 / 5], returns=5,
                                  params={"K": K}, symmetric=True)
    plain = phaselab.periodic_orbit(standard_map, sym.points[0] + [1e-5, -1e-5], returns=5,
                                    params={"K": K})
    assert sym.residue == pytest.approx(plain.residue, rel=1e-9, abs=1e-12)
    assert sym.shift[0] == pytest.approx(2 * 2 * np.pi)   # rotation number 2/5


# ----------------------------------------------------------------------------- flows
def hh_rhs(t, z):
    x, y, px, py = z
    return [px, py, -x - 2 * x * y, -y - x * x + y * y]


def test_henon_heiles_period_one_orbits_close_under_scipy(henon_heiles):
    """The stable and unstable period-1 orbits of Henon-Heiles at E = 1/8 on x = 0: each
    closes after its period when integrated independently by scipy's DOP853 (rtol 1e-13)."""
    E = 1 / 8
    found = phaselab.find_periodic_orbits(henon_heiles, 1,
                                          ranges={"y": (-0.4, 0.6), "py": (-0.3, 0.3)},
                                          plane={"x": 0.0}, energy=E, resolution=6,
                                          method="yoshida8", dt=0.01)
    words = {o.stability for o in found}
    assert {"stable", "unstable"} <= words
    for o in found:
        assert o.energy == E
        assert abs(henon_heiles.energy(o.points[0]) - E) < 1e-13
        sol = solve_ivp(hh_rhs, (0, o.period), o.points[0], method="DOP853", rtol=1e-13, atol=1e-14)
        assert np.max(np.abs(sol.y[:, -1] - o.points[0])) < 1e-9, o


def test_a_guess_close_to_the_orbit_converges_fast(henon_heiles):
    o = phaselab.periodic_orbit(henon_heiles, [0.0, 0.31, 0.4, 0.01], plane={"x": 0.0}, energy=1 / 8)
    assert o.iterations <= 8 and o.stability == "stable"
    assert o.orbit is not None and o.orbit.states.shape[0] == 1
    assert 0 < o.residue < 1


@pytest.mark.slow
def test_arenstorf_orbit_period(tmp_path):
    """The Arenstorf orbit of the restricted three-body problem: mu = 0.012277471, from
    (x, y, x', y') = (0.994, 0, 0, -2.00158510637908252240537862224), period
    17.0652165601579625588917206249 (Hairer, Norsett & Wanner, Solving ODEs I, sec. II.0).
    In the catalogue's rotating-frame Hamiltonian px = x' - y, py = y' + x. The orbit crosses
    y = 0 downwards three times per period. Found from a guess off by 1e-4 in x and px at
    the orbit's energy."""
    R = phaselab.models.restricted_three_body()
    p = {"mu": 0.012277471}
    z0 = np.array([0.994, 0.0, 0.0, -2.00158510637908252240537862224 + 0.994])
    E = R.energy(z0, params=p)
    o = phaselab.periodic_orbit(R, z0 + [1e-4, 0.0, 1e-4, 0.0], returns=3, plane={"y": 0.0},
                                energy=E, direction=-1, params=p, dt=2.5e-4, method="gauss6",
                                t_max=20.0)
    assert o.period == pytest.approx(17.0652165601579625588917206249, rel=1e-9)
    np.testing.assert_allclose(o.points[0], z0, atol=1e-8)
    o.save(tmp_path / "arenstorf.json")
    assert json.loads((tmp_path / "arenstorf.json").read_text())["orbits"][0]["stability"] == "unstable"


def test_stroboscopic_periodic_orbit_of_a_driven_oscillator():
    """x'' + w0^2 x = F cos(W t) has the periodic response x = A cos(W t), A = F/(w0^2 - W^2)
    (common practice): the fixed point of the stroboscopic map is (A, 0), with multipliers
    exp(+-i w0 T), T = 2 pi / W, so R = (1 - cos(w0 T))/2."""
    w0, F, W = 1.3, 0.4, 0.7
    H = phaselab.Hamiltonian("p**2/2 + w0**2*x**2/2 - F*x*cos(W*t)", ["x"], ["p"],
                             params={"w0": w0, "F": F, "W": W}, time="t", period="2*pi/W")
    o = phaselab.periodic_orbit(H, [0.3, 0.1], method="gauss6", dt=0.01)
    A = F / (w0**2 - W**2)
    np.testing.assert_allclose(o.points[0], [A, 0.0], atol=1e-9)
    T = 2 * np.pi / W
    assert o.period == pytest.approx(T)
    assert o.residue == pytest.approx((1 - np.cos(w0 * T)) / 2, abs=1e-9)


# ----------------------------------------------------------------------------- manifolds
def test_mcmillan_manifolds_lie_on_the_separatrix(mcmillan):
    """The McMillan map x' = y, y' = -x + 2 mu y/(1 + y^2) keeps
    I(x, y) = x^2 y^2 + x^2 + y^2 - 2 mu x y (McMillan 1971; check: with u = -x + f(y),
    u^2 (1 + y^2) - 2 mu y u = x^2 (1 + y^2) - 2 mu x y since f (1 + y^2) = 2 mu y). For
    mu > 1 the origin is hyperbolic (trace 2 mu > 2) and its manifolds lie on I = I(0) = 0."""
    mu = 1.6
    o = phaselab.periodic_orbit(mcmillan, [0.01, -0.02])
    assert o.stability == "unstable"
    assert o.residue == pytest.approx((2 - 2 * mu) / 4, abs=1e-12)
    for branch in ("unstable", "stable"):
        for side in (+1, -1):
            man = phaselab.manifold(o, branch=branch, side=side, length=4.0, max_segment=2e-3)
            pts = np.vstack(man.branches)
            x, y = pts[:, 0], pts[:, 1]
            assert np.max(np.abs(x**2 * y**2 + x**2 + y**2 - 2 * mu * x * y)) < 1e-9
            assert man.complete and man.length == pytest.approx(4.0, rel=1e-3)


def _distance_to_polyline(points, line):
    a, b = line[:-1], line[1:]
    ab = b - a
    out = np.empty(len(points))
    for i, p in enumerate(points):
        t = np.clip(np.einsum("ij,ij->i", p - a, ab) / np.maximum(np.einsum("ij,ij->i", ab, ab), 1e-300), 0, 1)
        out[i] = np.min(np.linalg.norm(a + t[:, None] * ab - p, axis=1))
    return out


def test_standard_map_manifold_is_invariant(standard_map):
    """Images of points of the computed unstable manifold lie on the computed manifold
    (invariance, the defining property; numpy iteration of the map as the reference)."""
    K = 1.5
    o = phaselab.periodic_orbit(standard_map, [0.01, 0.0], params={"K": K})
    man = phaselab.manifold(o, length=6.0, max_segment=2e-3)
    curve = man.lifted[0]
    assert np.max(np.linalg.norm(np.diff(curve, axis=0), axis=1)) <= 2e-3 + 1e-12
    pick = curve[np.linspace(1, len(curve) // 3, 40).astype(int)]
    p_new = pick[:, 1] + K * np.sin(pick[:, 0])
    q_new = pick[:, 0] + p_new
    images = np.column_stack([q_new, p_new])
    assert np.max(_distance_to_polyline(images, curve)) < 2e-3


def test_manifold_needs_an_unstable_orbit(standard_map):
    o = phaselab.periodic_orbit(standard_map, [3.1, 0.0], params={"K": 0.5})
    with pytest.raises(ModelError, match="stable"):
        phaselab.manifold(o)
    u = phaselab.periodic_orbit(standard_map, [0.0, 0.0], params={"K": 0.5})
    with pytest.raises(ParameterError, match="branch"):
        phaselab.manifold(u, branch="sideways")


# ----------------------------------------------------------------------------- families
def test_small_orbits_tend_to_the_linear_period():
    """Along the family of the y mode of H = (px^2 + py^2)/2 + (x^2 + 2.25 y^2)/2 + a x^2 y
    (x = px = 0 is invariant: the fixed point (x, px) = (0, 0) of the section y = 0), the
    period tends to 2 pi / omega as E -> 0, omega^2 the eigenvalue of the Hessian of V at
    the origin for y (sympy)."""
    x, y = sp.symbols("x y", real=True)
    V = (x**2 + sp.Rational(9, 4) * y**2) / 2 + sp.Rational(1, 2) * x**2 * y
    omega = float(sp.sqrt(sp.hessian(V, (x, y)).subs({x: 0, y: 0})[1, 1]))
    H = phaselab.Hamiltonian("(px**2+py**2)/2 + (x**2 + 2.25*y**2)/2 + a*x**2*y", ["x", "y"], ["px", "py"],
                             params={"a": 0.5})
    E = 0.02
    o = phaselab.periodic_orbit(H, [0.0, 0.0, 0.0, np.sqrt(2 * E)], plane={"y": 0.0}, energy=E,
                                method="yoshida8", dt=0.01)
    fam = phaselab.continue_family(o, "energy", (1e-6, 0.02), steps=60)
    assert fam.values.min() < 1e-4
    low = np.argmin(fam.values)
    assert fam.period[low] == pytest.approx(2 * np.pi / omega, rel=1e-9)
    assert all(w == "stable" for w in fam.stability)


def test_standard_map_fixed_point_doubles_its_period_at_K_4(standard_map, tmp_path):
    """R = K/4 at (pi, 0) crosses 1 at K = 4 (the closed form of the first test): the family
    followed in K flags a period doubling there."""
    o = phaselab.periodic_orbit(standard_map, [3.1, 0.01], params={"K": 0.5})
    fam = phaselab.continue_family(o, "K", (0.5, 5.0))
    doubling = [b for b in fam.bifurcations if b["kind"].startswith("period doubling")]
    assert len(doubling) == 1 and doubling[0]["parameter"] == pytest.approx(4.0, abs=1e-9)
    ds = fam.to_xarray()
    assert "K" in ds.coords and ds.sizes["member"] == len(fam)
    out = fam.save(tmp_path / "family.png")
    assert out.exists() and out.stat().st_size > 1000


# ----------------------------------------------------------------------------- torus breakup
@pytest.mark.slow
def test_golden_torus_breaks_near_the_published_value(standard_map):
    """Greene's criterion for the golden-mean torus of the standard map: the residues of the
    convergents' symmetric orbits reach 1/4 at parameters converging to K = 0.971635
    (Greene 1979; MacKay 1983 gives 0.971635406, recalled from memory)."""
    golden = (np.sqrt(5) - 1) / 2
    res = phaselab.torus_breakup(standard_map, golden, "K", (0.9, 1.05), max_returns=89, steps=8)
    assert [c.denominator for c in res.convergents][-3:] == [34, 55, 89]
    assert abs(res.estimate - 0.971635406) < 2e-3
    crit = res.critical[np.isfinite(res.critical)]
    assert abs(crit[-1] - 0.971635406) < abs(crit[-3] - 0.971635406) + 1e-4


# ----------------------------------------------------------------------------- refusals
def test_bad_requests_are_refused(henon_heiles, standard_map):
    with pytest.raises(ParameterError, match="plane"):
        phaselab.periodic_orbit(henon_heiles, [0, 0.1, 0.3, 0])
    with pytest.raises(ParameterError, match="shape"):
        phaselab.periodic_orbit(henon_heiles, [0, 0.1, 0.3], plane={"x": 0.0})
    with pytest.raises(ParameterError, match="returns"):
        phaselab.periodic_orbit(standard_map, [0.1, 0.1], returns=0)
    with pytest.raises(IntegrationError, match="energy shell|no period-1 orbit"):
        phaselab.periodic_orbit(henon_heiles, [0, 3.0, 0.3, 0], plane={"x": 0.0}, energy=1 / 8)
    with pytest.raises(ModelError, match="reversor"):
        phaselab.periodic_orbit(phaselab.AreaPreservingMap(["q + p", "p - 0.1*sin(q + p)"], ["q"], ["p"]),
                                [0.1, 0.1], symmetric=True)


def test_results_save_and_label(tmp_path, standard_map):
    found = phaselab.find_periodic_orbits(standard_map, 1,
                                          ranges={"q": (0.1, 6.2), "p": (-0.5, 0.5)}, resolution=4,
                                          params={"K": 1.0})
    assert {o.stability for o in found} == {"stable", "unstable"}
    ds = found[0].to_xarray()
    assert ds["points"].shape[1:] == (1, 2) and "stability" in ds
    for suffix in (".json", ".nc", ".svg"):
        out = found.save(tmp_path / f"fixed{suffix}")
        assert out.exists()
    text = (tmp_path / "fixed.svg").read_text()
    assert "stable" in text and "unstable" in text   # the legend names the marker shapes
    assert "Model results" in text


def test_every_integrating_result_states_its_step_error(henon_heiles):
    """The stable period-1 orbit of Henon-Heiles at E = 1/8 on x = 0 with a coarse step: the
    period's relative error against scipy's DOP853 return time (rtol 1e-13, event location)
    is the stated ``error_estimate`` to within a factor 2 (step doubling measures the
    leading error term; common practice), and a section and a trajectory state theirs too."""
    o = phaselab.periodic_orbit(henon_heiles, [0.0, 0.31, 0.4, 0.01], plane={"x": 0.0}, energy=1 / 8,
                                method="leapfrog", dt=0.02)
    est = o.error_estimate
    assert 0 < est < 1e-2

    def crossing(t, z):
        return z[0]
    crossing.direction = 1.0
    crossing.terminal = False
    z0 = np.array(o.points[0], dtype=float)
    sol = solve_ivp(hh_rhs, (0, 1.5 * o.period), z0, method="DOP853", rtol=1e-13, atol=1e-14,
                    events=crossing)
    times = sol.t_events[0][sol.t_events[0] > 1e-6]
    reference = times[0]
    # measured: 2.27e-5 against an estimate of 2.36e-5 (dt 0.02)
    assert 0.5 * est <= abs(o.period / reference - 1.0) <= 2 * est
    sec = phaselab.section(henon_heiles, [z0], plane={"x": 0.0}, crossings=5, method="leapfrog",
                           dt=0.02)
    assert sec.error_estimate == pytest.approx(est, rel=0.5)
    assert np.isnan(phaselab.section(phaselab.models.standard_map(), [[0.1, 0.2]], plane=None,
                                     crossings=3).error_estimate)
