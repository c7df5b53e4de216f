"""phaselab.normal_form: Birkhoff and resonant normal forms at elliptic equilibria.

Outside references: action-energy relations and periods by quadrature (mpmath), the
first-order averaging of a quartic and a resonant cubic term (derived in the docstrings),
Landau & Lifshitz's anharmonic-oscillator formula, orbits integrated with
phaselab.trajectory and frequencies measured by phaselab.frequencies (Laskar's method).
"""

import json

import mpmath as mp
import numpy as np
import pytest
import sympy as sp

import phaselab
from phaselab import ModelError, ParameterError

q, p, q1, q2, p1, p2, eps = sp.symbols("q p q1 q2 p1 p2 eps", real=True)


def pendulum_unit():
    return phaselab.Hamiltonian(p**2 / 2 - sp.cos(q), [q], [p], name="unit pendulum")


def one_dof_action_and_frequency(V, E):
    """Action J(E) = (1/pi) int sqrt(2 (E - V)) dq and frequency 2 pi / T(E),
    T = 2 int dq / sqrt(2 (E - V)), between the turning points of a potential well about 0
    (mpmath quadrature, tanh-sinh handles the square-root end points)."""
    with mp.workdps(30):
        E = mp.mpf(E)
        lo = mp.findroot(lambda x: V(x) - E, -mp.sqrt(2 * E))
        hi = mp.findroot(lambda x: V(x) - E, mp.sqrt(2 * E))
        J = mp.quad(lambda x: mp.sqrt(2 * max(E - V(x), 0)), [lo, 0, hi]) / mp.pi
        T = 2 * mp.quad(lambda x: 1 / mp.sqrt(2 * (E - V(x))), [lo, 0, hi])
        return float(J), float(2 * mp.pi / T)


# ----------------------------------------------------------------------------- pendulum
def test_pendulum_birkhoff_series_matches_the_action_integral():
    """E(J) of H = p^2/2 - cos q. Reference: the action J(E) = (1/2 pi) oint p dq computed
    by mpmath quadrature at small energies, inverted, and fitted by a polynomial in J;
    its coefficients of J^2 and J^3 must agree with the Birkhoff series."""
    nf = phaselab.normal_form(pendulum_unit(), [0, 0], 8)
    assert nf.arithmetic == "exact"
    J = nf.actions[0]
    series = sp.Poly(nf.hamiltonian, J)
    # the quadrature: E + 1 sampled at small J, interpolated by a polynomial through J = 0
    with mp.workdps(30):
        samples = []
        for j in [mp.mpf(i) / 400 for i in range(1, 8)]:
            E = mp.findroot(lambda e: _pendulum_action(e) - j, j)
            samples.append((j, E))
        A = mp.matrix([[j ** k for k in range(1, 8)] for j, _ in samples])
        c = mp.lu_solve(A, mp.matrix([E for _, E in samples]))
    assert abs(float(c[0]) - 1) < 1e-9
    for power in (2, 3, 4):
        assert abs(float(series.coeff_monomial(J**power)) - float(c[power - 1])) < 1e-9
    # and the truncated series against the quadrature itself at J = 0.05: error O(J^5)
    j = 0.05
    E_quad = float(mp.findroot(lambda e: _pendulum_action(e) - j, j))
    assert abs(float(nf.energy([j])) + 1 - E_quad) < 1e-3 * j**5  # next coefficient ~1e-4
    assert all(v.is_Rational for v in series.coeffs())


def _pendulum_action(E):
    """Action of H = p^2/2 + 1 - cos q at energy E (mpmath quadrature)."""
    top = mp.acos(1 - E)
    return mp.quad(lambda x: mp.sqrt(2 * max(E - 1 + mp.cos(x), 0)), [-top, top]) / mp.pi


# ----------------------------------------------------------------------------- quartic oscillator
def quartic():
    H = p**2 / 2 + q**2 / 2 + eps * q**4 / 4
    return phaselab.Hamiltonian(H, [q], [p], params={eps: 0.1}, name="quartic oscillator")


def test_quartic_oscillator_detuning_is_exact():
    """H = p^2/2 + q^2/2 + eps q^4/4. Derivation: with q = sqrt(2 J) cos(phi) the degree-4
    Birkhoff term is the angle average of eps q^4/4 = eps J^2 cos^4(phi) (there is no cubic
    term), and <cos^4> = 3/8, so H = J + 3 eps J^2/8 + O(J^3) and omega(J) = 1 + 3 eps J/4
    (first-order averaging, Lindstedt's amplitude-frequency relation omega = 1 + 3 eps a^2/8
    with a^2 = 2J). eps = 0.1 is read as 1/10, so the coefficient must be exactly 3/80."""
    nf = phaselab.normal_form(quartic(), [0, 0], 4)
    J = nf.actions[0]
    poly = sp.Poly(nf.hamiltonian, J)
    assert poly.coeff_monomial(J**2) == sp.Rational(3, 80)
    assert poly.coeff_monomial(J) == 1
    assert nf.omega_exact == (sp.Integer(1),)
    assert np.allclose(nf.frequencies([[0.2]]), 1 + 0.75 * 0.1 * 0.2, rtol=0, atol=1e-15)


def test_quartic_oscillator_frequency_against_quadrature():
    """Reference: omega(E) = 2 pi / T(E) and J(E) by mpmath quadrature; the order-6
    normal form's dH/dJ differs by O(J^3), so halving J divides the error by about 8."""
    nf = phaselab.normal_form(quartic(), [0, 0], 6)
    V = lambda x: x**2 / 2 + mp.mpf(1) / 10 * x**4 / 4  # noqa: E731
    errors = []
    for E in (0.02, 0.01):
        J, w = one_dof_action_and_frequency(V, E)
        errors.append(abs(float(nf.frequencies([[J]])[0, 0]) - w))
    assert errors[0] < 1e-7
    assert 5 < errors[0] / errors[1] < 12  # J^3 scaling: about 2^3


# ----------------------------------------------------------------------------- Henon-Heiles
def test_henon_heiles_needs_the_one_to_one_resonance(hh):
    with pytest.raises(ModelError, match="resonance"):
        phaselab.normal_form(hh, [0, 0, 0, 0], 4)


def test_henon_heiles_resonant_form_on_the_y_axis_family(hh):
    """The 1:1 resonant normal form of Henon-Heiles (Gustavson's normal form; his published
    coefficients are not quoted here from memory). On the invariant plane x = px = 0 H is
    the cubic oscillator p^2/2 + y^2/2 - y^3/3, so at J1 = 0:
    (1) Landau & Lifshitz, Mechanics §28: for x'' + x = -alpha x^2 the frequency is
        1 - 5 alpha^2 a^2/12, i.e. with a^2 = 2 J, dH/dJ2 = 1 - 5 J2/6 and H = J2 - 5 J2^2/12;
    (2) quadrature of the cubic well (mpmath): the error of dH/dJ2 falls like J2^2 at order 4;
    (3) the frequency of an integrated orbit measured by phaselab.frequencies (Laskar)."""
    nf = phaselab.normal_form(hh, [0, 0, 0, 0], 4, resonances=[(1, -1)])
    J1, J2 = nf.actions
    H = sp.expand(nf.hamiltonian)
    assert H.coeff(J2, 2).subs(J1, 0) == sp.Rational(-5, 12)
    V = lambda y: y**2 / 2 - y**3 / 3  # noqa: E731
    errors = []
    for E in (0.004, 0.002):
        J, w = one_dof_action_and_frequency(V, E)
        errors.append(abs(nf.frequencies([[0.0, J]])[0, 1] - w))
    assert errors[0] < 5e-5 and 2.8 < errors[0] / errors[1] < 6  # J^2 scaling: about 4
    seeds = np.array([[0.0, 0.08, 0.0, 0.0], [0.0, 0.04, 0.0, 0.0]])
    measured = 2 * np.pi * phaselab.frequencies(hh, seeds, t=400.0, samples=2048).nu[:, 1]
    J, _ = nf.to_normal(seeds)
    predicted = nf.frequencies(J)[:, 1]
    gap = np.abs(predicted - measured)
    assert gap[0] < 2e-5 and gap[1] < gap[0] / 2.5


def test_henon_heiles_resonant_terms_against_measured_frequencies(hh):
    """All three degree-4 coefficients of the 1:1 form (a J^2 terms, b J1 J2, c J1 J2
    cos 2(phi1 - phi2)) tested through periodic orbits whose frequencies they fix:
    the loop orbit (J1 = J2, phi1 - phi2 = pi/2) and the straight-line orbit along the
    symmetry line at -30 degrees (phi1 = phi2), against frequencies measured by Laskar's
    method (phaselab.frequencies) on integrated orbits; the gap must fall like J^2."""
    nf = phaselab.normal_form(hh, [0, 0, 0, 0], 4, resonances=[(1, -1)])
    seeds = []
    for j in (0.004, 0.002):
        seeds.append(nf.from_normal([[j, j]], [[0.0, -np.pi / 2]])[0])  # the loop orbit
        r = np.sqrt(4 * j)
        seeds.append([r * np.cos(-np.pi / 6), r * np.sin(-np.pi / 6), 0.0, 0.0])  # a symmetry line
    seeds = np.array(seeds)
    measured = 2 * np.pi * phaselab.frequencies(hh, seeds, t=600.0, samples=4096).nu
    J, phi = nf.to_normal(seeds)
    gap = np.abs(nf.frequencies(J, phi) - measured).max(axis=1)
    assert gap[0] < 6e-5 and gap[1] < 1.2e-4
    assert gap[0] / gap[2] > 2.8 and gap[1] / gap[3] > 2.8  # J halves: about 4


def test_henon_heiles_normal_form_reproduces_h_to_its_order(hh):
    """H(z) and the normal form at to_normal(z) agree to O(|z|^5) at order 4 and O(|z|^7) at
    order 6 (the change of variables is canonical; reference: the model's own H)."""
    rng = np.random.default_rng(3)
    directions = rng.normal(size=(8, 4))
    directions /= np.linalg.norm(directions, axis=1)[:, None]
    h = sp.lambdify([hh.state_symbols], hh.expr, "numpy")
    for order, slope in ((4, 5), (6, 7)):
        nf = phaselab.normal_form(hh, [0, 0, 0, 0], order, resonances=[(1, -1)])
        gaps = []
        for r in (0.04, 0.02):
            z = r * directions
            J, phi = nf.to_normal(z)
            gaps.append(np.abs(nf.energy(J, phi) - h(z.T)).max())
        assert gaps[0] / gaps[1] > 2 ** (slope - 0.7), (order, gaps)


# ----------------------------------------------------------------------------- transformation
def two_modes():
    """Frequencies 1 and sqrt(2) (floating arithmetic), no resonance below degree 7."""
    H = (p1**2 + q1**2) / 2 + (p2**2 + 2 * q2**2) / 2 + q1**2 * q2 + q1 * q2**2 / 3 - q2**3 / 5 + q1**4 / 7
    return phaselab.Hamiltonian(H, [q1, q2], [p1, p2], name="two modes")


def test_round_trip_to_the_order():
    """to_normal(from_normal(J, phi)) = (J, phi) up to the truncation: the relative error of
    J falls like |z|^(order-1) (common practice: a truncated transformation and its inverse
    compose to the identity to their order)."""
    nf = phaselab.normal_form(two_modes(), [0, 0, 0, 0], 6)
    assert nf.arithmetic == "float"
    rng = np.random.default_rng(1)
    phi = rng.uniform(-np.pi, np.pi, (5, 2))
    errors = []
    for a in (1e-2, 2.5e-3):
        J = np.full((5, 2), a)
        J2, phi2 = nf.to_normal(nf.from_normal(J, phi))
        errors.append(np.abs(J2 / J - 1).max())
        assert np.abs(np.angle(np.exp(1j * (phi2 - phi)))).max() < 2e-3
    assert errors[0] < 1e-3 and errors[0] / errors[1] > 2 ** 4.5  # |z| halves: 2^5


def test_actions_are_conserved_along_orbits_to_the_order():
    """J of an orbit integrated with phaselab.trajectory varies by O(|z|^(order+1)):
    halving the amplitude divides the variation by about 2^5 at order 4 (reference: the
    integrated orbit)."""
    nf = phaselab.normal_form(two_modes(), [0, 0, 0, 0], 4)
    spread = []
    for amp in (0.05, 0.025):
        tr = phaselab.trajectory(two_modes(), np.array([[amp, 0, 0, amp]]), 50.0, method="yoshida6")
        J, _ = nf.to_normal(tr.states[0])
        spread.append((J.max(0) - J.min(0)).max())
        assert spread[-1] < 1e-3 * J.mean()
    assert spread[0] / spread[1] > 2 ** 4.4


# ----------------------------------------------------------------------------- resonant form
def two_to_one():
    """omega = (1, 2): H2 = (p1^2 + q1^2)/2 + (p2^2 + 4 q2^2)/2, cubic coupling q1^2 q2."""
    H = (p1**2 + q1**2) / 2 + (p2**2 + 4 * q2**2) / 2 + q1**2 * q2 + q2**3 / 3
    return phaselab.Hamiltonian(H, [q1, q2], [p1, p2], name="two to one")


def test_resonant_form_keeps_exactly_the_resonant_terms():
    """2:1 resonance, k = (2, -1). Derivation of the degree-3 term: with
    q1 = sqrt(2 J1) cos(phi1), q2 = sqrt(J2) cos(phi2) (q = sqrt(2 J/omega) cos(phi)),
    q1^2 q2 = J1 sqrt(J2) (1 + cos 2 phi1) cos(phi2), whose only slow part is
    J1 sqrt(J2) cos(2 phi1 - phi2)/2; q2^3 has no slow part. So the degree-3 normal form is
    exactly (1/2) J1 J2^(1/2) cos(2 phi1 - phi2) (first-order averaging)."""
    system = two_to_one()
    with pytest.raises(ModelError, match=r"k = \(2, -1\)|k = \(-2, 1\)"):
        phaselab.normal_form(system, [0, 0, 0, 0], 3)
    nf = phaselab.normal_form(system, [0, 0, 0, 0], 6, resonances=[(2, -1)])
    assert nf.arithmetic == "exact"
    for t in nf.terms:
        k = t.harmonic
        assert k[0] * 1 + k[1] * 2 == 0 and (k == (0, 0) or k[0] % 2 == 0)
    third = [t for t in nf.terms if t.degree == 3]
    assert len(third) == 1
    assert third[0].harmonic == (2, -1) and third[0].powers == (1, sp.Rational(1, 2))
    assert third[0].cos_coef == sp.Rational(1, 2) and third[0].sin_coef == 0
    assert {t.harmonic for t in nf.terms} == {(0, 0), (2, -1), (4, -2)}


# ----------------------------------------------------------------------------- reports and errors
def test_reports_and_files(tmp_path):
    nf = phaselab.normal_form(quartic(), [0, 0], 6)
    assert nf.latex().startswith("H = ")
    rows = nf.table()
    assert rows[1]["cos"] == "1" and rows[2]["cos"] == "3/80"
    ds = nf.to_xarray()
    assert ds.sizes["term"] == len(rows)
    data = json.loads(nf.save(tmp_path / "nf.json").read_text())
    assert data["arithmetic"] == "exact" and data["order"] == 6
    assert "frac" in nf.save(tmp_path / "nf.tex").read_text()
    nf.save(tmp_path / "nf.nc")
    import xarray as xr

    with xr.open_dataset(tmp_path / "nf.nc") as back:
        assert np.allclose(back["cos"].values, ds["cos"].values)
    with pytest.raises(ParameterError, match=".csv"):
        nf.save(tmp_path / "nf.csv")
    assert not [f for f in tmp_path.iterdir() if f.name.endswith(".tmp")]


def test_equilibrium_object_and_floats():
    system = pendulum_unit()
    eq = [e for e in phaselab.equilibria(system) if e.stability == "elliptic"][0]
    nf = phaselab.normal_form(system, eq, 4)
    assert np.allclose(nf.frequencies([[0.1]]), 1 - 0.1 / 8, atol=1e-12)
    assert phaselab.normal_form(system, [0, 0], 4, arithmetic="float").arithmetic == "float"


def test_bad_arguments_and_models(hh):
    system = pendulum_unit()
    with pytest.raises(ModelError, match="not elliptic"):
        phaselab.normal_form(system, [sp.pi, 0], 4)
    with pytest.raises(ModelError, match="not an equilibrium"):
        phaselab.normal_form(system, [0.3, 0], 4)
    with pytest.raises(ParameterError, match="order"):
        phaselab.normal_form(system, [0, 0], 1)
    q3, p3 = sp.symbols("q3 p3", real=True)
    three = phaselab.Hamiltonian((p1**2 + p2**2 + p3**2 + q1**2 + q2**2 + q3**2) / 2 + q1 * q2 * q3,
                                 [q1, q2, q3], [p1, p2, p3])
    with pytest.raises(ParameterError, match="budget"):
        phaselab.normal_form(three, [0] * 6, 12)
    with pytest.raises(ParameterError, match="resonance"):
        phaselab.normal_form(hh, [0, 0, 0, 0], 4, resonances=[(1, -1, 0)])
    with pytest.raises(ParameterError, match="components"):
        phaselab.normal_form(system, [0, 0, 0], 4)
    with pytest.raises(ParameterError, match="exact arithmetic"):
        phaselab.normal_form(two_modes(), [0, 0, 0, 0], 4, arithmetic="exact")
    t = sp.Symbol("t", real=True)
    driven = phaselab.Hamiltonian(p**2 / 2 + q**2 / 2 + q * sp.cos(t), [q], [p], time=t)
    with pytest.raises(ModelError, match="autonomous"):
        phaselab.normal_form(driven, [0, 0], 4)
    nf = phaselab.normal_form(system, [0, 0], 4)
    with pytest.raises(ParameterError, match="last axis"):
        nf.frequencies([[0.1, 0.2]])
    with pytest.raises(ParameterError, match=">= 0"):
        nf.frequencies([[-0.1]])


# ----------------------------------------------------------------------------- island width
def detuned_two_to_one():
    """omega = (1, 21/10) with a quartic twist in mode 1: the 2:1 resonance 2 w1 = w2 is met
    at J1 ~ 0.17, away from the equilibrium, where the cubic coupling makes an island."""
    H = ((p1**2 + q1**2) / 2 + (p2**2 + sp.Rational(21, 10)**2 * q2**2) / 2
         + sp.Rational(1, 200) * q1**2 * q2 + q1**4 / 10)
    return phaselab.Hamiltonian(H, [q1, q2], [p1, p2], name="detuned two to one")


def test_island_width_of_an_isolated_resonance():
    """The full width of the 2:1 island from the resonant normal form's pendulum model
    against integrated orbits (phaselab.trajectory) started on the line J = J* + I k through
    the island centre: an orbit is inside when its resonant angle 2 phi1 - phi2, read from
    the linear normal-mode angles phi_k = -arg(omega_k q_k + i p_k) alone (no normal-form
    transformation, common practice for a resonant angle), librates instead of circulating."""
    from scipy.optimize import brentq

    system = detuned_two_to_one()
    nf = phaselab.normal_form(system, [0, 0, 0, 0], 6, resonances=[(2, -1)])
    J2 = 0.1
    J1 = brentq(lambda j: nf.frequencies([[j, J2]])[0] @ (2, -1), 1e-3, 1.0)
    island = nf.resonance_width([J1, J2])
    assert island.resonance == (2, -1) and abs(island.detuning) < 1e-12
    half = island.width / 2
    I = np.concatenate([[0.0], half * np.linspace(0.85, 1.15, 7), -half * np.linspace(0.85, 1.15, 7)])
    J = np.stack([J1 + 2 * I, J2 - I], axis=1)
    phi = np.zeros_like(J)
    phi[:, 0] = island.center_angle / 2
    tr = phaselab.trajectory(system, nf.from_normal(J, phi), 5000.0, method="yoshida6")
    z = tr.states[:, ::25]
    angles = -np.angle(z[..., :2] * nf.omega + 1j * z[..., 2:])
    psi = np.unwrap(2 * angles[..., 0] - angles[..., 1], axis=1)
    librates = np.ptp(psi, axis=1) < 2 * np.pi
    assert librates[0]
    for side in (I > 0, I < 0):
        inside = np.abs(I[side & librates]).max() if np.any(side & librates) else 0.0
        outside = np.abs(I[side & ~librates]).min()
        assert inside < outside  # one boundary on each side
        assert 0.85 * half <= inside + 1e-12 and outside <= 1.15 * half + 1e-12


def test_birkhoff_form_does_not_depend_on_linear_coordinates():
    """Birkhoff's normal form of non-resonant frequencies is unique (a fact of the trade), so
    rotating the coordinates (q, p) -> (R q, R p), a symplectic change that couples the
    quadratic part, must give the same coefficients: the floating route (eigenvectors of
    J Hess H, numpy) against the exact route on the uncoupled form."""
    Q1, Q2, P1, P2 = sp.symbols("Q1 Q2 P1 P2", real=True)
    w2 = sp.Rational(7, 5)
    H = (P1**2 + P2**2 + Q1**2 + w2**2 * Q2**2) / 2 + Q1**2 * Q2 / 3 + Q2**4 / 5 - Q1 * Q2**3 / 7
    plain = phaselab.Hamiltonian(H, [Q1, Q2], [P1, P2])
    c, s = sp.Rational(3, 5), sp.Rational(4, 5)  # a rotation with rational entries
    turned = H.xreplace({Q1: c * q1 - s * q2, Q2: s * q1 + c * q2, P1: c * p1 - s * p2, P2: s * p1 + c * p2})
    rotated = phaselab.Hamiltonian(sp.expand(turned), [q1, q2], [p1, p2])
    exact = phaselab.normal_form(plain, [0, 0, 0, 0], 6)
    numeric = phaselab.normal_form(rotated, [0, 0, 0, 0], 6)
    assert exact.arithmetic == "exact" and numeric.arithmetic == "float"
    assert np.allclose(numeric.omega, [1, 1.4])
    a = {(t.powers, t.harmonic): float(t.cos_coef) for t in exact.terms}
    b = {(t.powers, t.harmonic): float(t.cos_coef) for t in numeric.terms}
    assert a.keys() == b.keys()
    assert max(abs(a[k] - b[k]) for k in a) < 1e-10


def test_negative_energy_mode():
    """An elliptic equilibrium whose quadratic part is indefinite (H2 = J1 - (3/2) J2) keeps
    a negative frequency; the exact and floating routes agree (numpy's eigenvectors against
    the closed form)."""
    H = (p1**2 + q1**2) / 2 - (p2**2 + sp.Rational(9, 4) * q2**2) / 2 + q1**2 * q2
    system = phaselab.Hamiltonian(H, [q1, q2], [p1, p2])
    exact = phaselab.normal_form(system, [0, 0, 0, 0], 4)
    numeric = phaselab.normal_form(system, [0, 0, 0, 0], 4, arithmetic="float")
    assert exact.omega_exact == (1, sp.Rational(-3, 2))
    assert np.allclose(numeric.omega, [1, -1.5])
    for t, u in zip(exact.terms, numeric.terms):
        assert t.powers == u.powers and abs(float(t.cos_coef) - float(u.cos_coef)) < 1e-12
    J = np.array([[1e-3, 2e-3]])
    phi = np.array([[0.4, -2.0]])
    back = numeric.to_normal(exact.from_normal(J, phi))
    assert np.allclose(back[0], J, rtol=1e-3)


def test_one_degree_of_freedom_has_no_resonance_and_states_must_be_finite():
    system = pendulum_unit()
    with pytest.raises(ParameterError, match="one degree of freedom"):
        phaselab.normal_form(system, [0, 0], 4, resonances=[(1,)])
    nf = phaselab.normal_form(system, [0, 0], 4)
    with pytest.raises(ParameterError, match="finite"):
        nf.to_normal([[np.nan, 0.0]])
    with pytest.raises(ModelError, match="no resonance"):
        nf.resonance_width([0.1])


# ----------------------------------------------------------------------------- maps
def test_map_normal_form_of_a_conjugated_twist_map():
    """A twist map R: (J, phi) -> (J, phi + theta + a J) (in (q, p): a rotation by
    alpha = theta + a (q^2 + p^2)/2), conjugated by the shear S: p -> p + c q^2. The rotation
    angle per iterate as a function of the normal-form action is a conjugacy invariant (a
    fact of the trade), so Birkhoff's normal form of S^-1 R S must give exactly
    nu(J) = theta + a J: nu_0 = theta, nu_1 = a and no higher terms (the construction is
    the reference)."""
    q_, p_ = sp.symbols("q p", real=True)
    theta, a, c = sp.Integer(1), sp.Rational(3, 10), sp.Rational(2, 5)
    p1_ = p_ + c * q_**2
    alpha = theta + a * (q_**2 + p1_**2) / 2
    q2 = q_ * sp.cos(alpha) + p1_ * sp.sin(alpha)
    p2 = -q_ * sp.sin(alpha) + p1_ * sp.cos(alpha)
    twist = phaselab.AreaPreservingMap([q2, p2 - c * q2**2], [q_], [p_], name="sheared twist")
    nf = phaselab.normal_form(twist, [0, 0], 7)
    assert nf.kind == "map" and nf.arithmetic == "float"
    coeffs = {t.powers[0]: float(t.cos_coef) * int(t.powers[0]) for t in nf.terms}  # nu_(k-1)
    assert abs(coeffs[1] - 1.0) < 1e-12 and abs(coeffs[2] - 0.3) < 1e-10
    assert all(abs(v) < 1e-9 for k, v in coeffs.items() if k > 2)
    assert nf.area_defect < 1e-12
    J = np.array([[1e-3], [2e-2]])
    assert np.allclose(nf.frequencies(J)[:, 0], 1 + 0.3 * J[:, 0], atol=1e-10)


def test_map_detuning_against_measured_tunes(standard_map):
    """The standard map at K = 1/2 about its elliptic point (pi, 0): the rotation angle per
    iterate of the normal form against Laskar's frequency analysis of iterated orbits
    (phaselab.frequencies); order 6 leaves an O(J^3) gap, falling about 8 times when J halves."""
    nf = phaselab.normal_form(standard_map, [np.pi, 0.0], 6, params={"K": 0.5})
    assert abs(nf.omega[0] - np.arccos(1 - 0.25)) < 1e-12  # trace of the linear map: 2 - K
    seeds = np.array([[np.pi + 0.4, 0.0], [np.pi + 0.4 / 2**0.5, 0.0]])
    measured = 2 * np.pi * phaselab.frequencies(standard_map, seeds, samples=4096,
                                                params={"K": 0.5}).nu[:, 0]
    J, _ = nf.to_normal(seeds)
    gap = np.abs(nf.frequencies(J)[:, 0] - measured)
    assert gap[0] < 1e-4 and 5 < gap[0] / gap[1] < 12
    # the action of an orbit stays put, and the wrapped momentum is read modulo 2 pi
    z = np.array([np.pi + 0.2, 0.0])
    orbit = [z]
    for _ in range(300):
        orbit.append(standard_map.step(orbit[-1], {"K": 0.5}))
    Jt, _ = nf.to_normal(np.array(orbit))
    assert np.ptp(Jt) < 1e-6 * Jt.mean()


def test_map_errors(standard_map):
    with pytest.raises(ModelError, match="not elliptic"):
        phaselab.normal_form(standard_map, [0.0, 0.0], 4, params={"K": 0.5})
    with pytest.raises(ModelError, match="not a fixed point"):
        phaselab.normal_form(standard_map, [1.0, 0.0], 4, params={"K": 0.5})
    with pytest.raises(ModelError, match="resonant"):  # K = 2: a quarter turn per iterate
        phaselab.normal_form(standard_map, [np.pi, 0.0], 4, params={"K": 2.0})
    with pytest.raises(ParameterError, match="resonant normal forms of maps"):
        phaselab.normal_form(standard_map, [np.pi, 0.0], 4, resonances=[(1,)])


def test_taylor_expansion_by_jets_matches_sympy_derivatives():
    """The truncated power-series expansion against sympy's own derivatives at the point
    (reference: sympy.diff), for a tree of functions, quotients and fractional powers."""
    from phaselab.structures.normal_forms.expansion import taylor

    expr = sp.exp(q) * sp.sin(p + q**2) / (1 + q) + sp.sqrt(2 + p) - sp.cos(q * p) ** 3
    at = [sp.Integer(0), sp.Rational(1, 2)]
    got = taylor(expr, (q, p), at, 5)
    for i in range(6):
        for j in range(6 - i):
            want = sp.diff(expr, q, i, p, j).subs({q: at[0], p: at[1]}) / (sp.factorial(i) * sp.factorial(j))
            assert abs(float(got.get((i, j), 0)) - float(want)) < 1e-12 * (1 + abs(float(want)))
    exact = taylor(sp.exp(q) * sp.cos(p) / (1 - q), (q, p), [0, 0], 6)
    assert all(v.is_Rational for v in exact.values())  # rationals stay rationals
    assert exact[(2, 2)] == sp.Rational(-5, 4)  # e^q/(1-q): 5/2 q^2; cos p: -p^2/2 (by hand)
