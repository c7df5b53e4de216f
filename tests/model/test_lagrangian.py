"""The Legendre transform from a Lagrangian to a Hamiltonian."""

import numpy as np
import pytest
import sympy as sp
from sympy.physics.mechanics import LagrangesMethod, dynamicsymbols, msubs

from phaselab import Hamiltonian, models
from phaselab.errors import ModelError


def test_double_pendulum_agrees_with_sympy_mechanics():
    """Hamilton's equations of the transformed double pendulum against the Euler-Lagrange
    accelerations from sympy.physics.mechanics.LagrangesMethod (reference library), at
    random states and parameters."""
    H = models.double_pendulum()
    L = H.lagrangian
    (t1, t2), (w1, w2) = H.coords, H.velocity_symbols
    P = H.momenta
    a1, a2 = dynamicsymbols("a1 a2")
    a1d, a2d = dynamicsymbols("a1 a2", 1)
    L_dyn = msubs(L, {w1: a1d, w2: a2d, t1: a1, t2: a2})
    lm = LagrangesMethod(L_dyn, [a1, a2])
    lm.form_lagranges_equations()
    rhs = lm.rhs()  # [a1', a2', a1'', a2''] in terms of a, a'
    qdd_ref = [rhs[2], rhs[3]]

    dHdp = [sp.diff(H.expr, pi) for pi in P]
    dHdq = [sp.diff(H.expr, qi) for qi in H.coords]
    grad_v = [sp.diff(L, w) for w in (w1, w2)]
    rng = np.random.default_rng(3)
    for _ in range(8):
        qv = rng.uniform(-np.pi, np.pi, 2)
        vv = rng.uniform(-2, 2, 2)
        prm = {s: float(v) for s, v in zip(H.param_symbols, rng.uniform(0.5, 2.0, len(H.param_symbols)))}
        at_qv = {t1: qv[0], t2: qv[1], w1: vv[0], w2: vv[1], **prm}
        # momenta from the Lagrangian at (q, v)
        pv = [float(g.evalf(subs=at_qv)) for g in grad_v]
        at_qp = {t1: qv[0], t2: qv[1], P[0]: pv[0], P[1]: pv[1], **prm}
        # dq/dt = dH/dp must give back the velocities
        np.testing.assert_allclose([float(e.evalf(subs=at_qp)) for e in dHdp], vv, rtol=1e-11, atol=1e-12)
        # dp/dt = -dH/dq must equal d/dt (dL/dv) along the Euler-Lagrange motion:
        # d2L/dv dq . v + d2L/dv2 . qdd, with qdd from LagrangesMethod
        subs_dyn = {a1d: vv[0], a2d: vv[1], a1: qv[0], a2: qv[1], **prm}
        qdd = [float(msubs(e, subs_dyn)) for e in qdd_ref]
        pdot_L = []
        for g in grad_v:
            total = sum(sp.diff(g, c) * vc for c, vc in zip((t1, t2), vv))
            total += sum(sp.diff(g, w) * a for w, a in zip((w1, w2), qdd))
            pdot_L.append(float(total.evalf(subs=at_qv)))
        pdot_H = [float((-e).evalf(subs=at_qp)) for e in dHdq]
        np.testing.assert_allclose(pdot_H, pdot_L, rtol=1e-10, atol=1e-10)


def test_charged_particle_symmetric_gauge_cartesian():
    """L = m v^2/2 + e v.A with A = B (-y, x)/2 gives H = |p - e A|^2 / (2 m): minimal
    coupling, J. D. Jackson, Classical Electrodynamics, 3rd ed., sec. 12.1 (the
    non-relativistic limit of the charged-particle Hamiltonian; section recalled from
    memory)."""
    x, y, vx, vy, m, e, B = sp.symbols("x y vx vy m e B", real=True)
    A = sp.Matrix([-B * y / 2, B * x / 2])
    L = m * (vx**2 + vy**2) / 2 + e * (vx * A[0] + vy * A[1])
    H = Hamiltonian.from_lagrangian(L, [x, y], [vx, vy], params={m: 1.0, e: 1.0, B: 1.0})
    px, py = H.momenta
    expected = ((px - e * A[0])**2 + (py - e * A[1])**2) / (2 * m)
    assert sp.simplify(H.expr - expected) == 0
    assert H.cyclic_coordinates == ()  # the symmetric gauge keeps both x and y in H


def test_charged_particle_symmetric_gauge_polar_angle_momentum_conserved():
    """In polar coordinates the angle is cyclic, so its canonical momentum
    p_phi = m r^2 phidot + e B r^2 / 2 is conserved (common practice)."""
    r, phi, vr, vphi, m, e, B = sp.symbols("r phi vr vphi m e B", real=True)
    L = m * (vr**2 + r**2 * vphi**2) / 2 + e * B * r**2 * vphi / 2
    H = Hamiltonian.from_lagrangian(L, [r, phi], [vr, vphi], params={m: 1.0, e: 1.0, B: 1.0})
    p_r, p_phi = H.momenta
    assert H.cyclic_coordinates == (phi,)
    assert "p_phi" in H.conserved()
    assert sp.simplify(H.expr - (p_r**2 / (2 * m) + (p_phi - e * B * r**2 / 2)**2 / (2 * m * r**2))) == 0
    # the velocity map inverts p_phi = m r^2 vphi + e B r^2 / 2
    vphi_of_p = H.velocities_from_momenta[vphi]
    assert sp.simplify(vphi_of_p - (p_phi - e * B * r**2 / 2) / (m * r**2)) == 0


def test_central_force_polar():
    r, th, vr, vth, m = sp.symbols("r theta vr vtheta m", real=True)
    V = sp.Function("V")
    L = m * (vr**2 + r**2 * vth**2) / 2 - V(r)
    H = Hamiltonian.from_lagrangian(L, [r, th], [vr, vth], params={m: 1.0})
    p_r, p_th = H.momenta
    assert H.cyclic_coordinates == (th,)
    cons = H.conserved()
    assert cons["p_theta"] == p_th and "H" in cons
    # H = p_r^2/2m + p_theta^2/(2 m r^2) + V(r) (common practice)
    assert sp.simplify(H.expr - (p_r**2 / (2 * m) + p_th**2 / (2 * m * r**2) + V(r))) == 0


@pytest.mark.parametrize("L, coords, vels", [
    ("x*vy - y*vx", ["x", "y"], ["vx", "vy"]),           # linear in the velocities
    ("(vx + vy)**2/2 - x**2", ["x", "y"], ["vx", "vy"]),  # singular kinetic matrix
    ("vx*cos(x)", ["x"], ["vx"]),
])
def test_degenerate_lagrangian_refused(L, coords, vels):
    with pytest.raises(ModelError, match="degenerate Lagrangian"):
        Hamiltonian.from_lagrangian(L, coords, vels)


def test_explicit_time_carries_over():
    """dH/dt = -dL/dt at corresponding points (common practice), for an oscillator with a
    time-dependent damping factor and spring."""
    x, v, t, m, k, g, w = sp.symbols("x v t m k gamma omega", real=True)
    L = sp.exp(g * t) * (m * v**2 / 2 - k * (1 + sp.cos(w * t) / 3) * x**2 / 2)
    H = Hamiltonian.from_lagrangian(L, [x], [v], params={m: 1.0, k: 1.0, g: 0.1, w: 2.0}, time=t,
                                    period=2 * sp.pi / w)
    assert not H.is_autonomous and H.time == t
    lhs = sp.diff(H.expr, t)
    rhs = -sp.diff(L, t).subs(H.velocities_from_momenta)
    assert sp.simplify(lhs - rhs) == 0
    assert H.driving_period() == pytest.approx(np.pi)


def test_non_quadratic_lagrangian():
    """The free relativistic particle, L = -m c^2 sqrt(1 - v^2/c^2), has
    H = c sqrt(p^2 + m^2 c^2) (common practice)."""
    v = sp.Symbol("v", real=True)
    m, c = sp.symbols("m c", positive=True)
    H = Hamiltonian.from_lagrangian(-m * c**2 * sp.sqrt(1 - v**2 / c**2), ["x"], [v], params={m: 1.0, c: 1.0})
    (px,) = H.momenta
    assert sp.simplify(H.expr - c * sp.sqrt(px**2 + m**2 * c**2)) == 0


def test_string_lagrangian_and_errors():
    H = Hamiltonian.from_lagrangian("vq**2/2 - q**4", ["q"], ["vq"], momenta=["pq"])
    assert sp.simplify(H.expr - (sp.Symbol("pq", real=True)**2 / 2 + sp.Symbol("q", real=True)**4)) == 0
    with pytest.raises(ModelError, match="1 coordinates but 2 velocities"):
        Hamiltonian.from_lagrangian("vq**2", ["q"], ["vq", "w"])
    with pytest.raises(ModelError, match="no time symbol"):
        Hamiltonian.from_lagrangian("vq**2", ["q"], ["vq"], period=1.0)


# ------------------------------------------------------------------ bounded symbolic work
def test_velocity_equation_without_closed_form_is_refused_quickly():
    """L = qd**5/5 + q qd**3 + qd**2 gives p = qd**4 + 3 q qd**2 + 2 qd (differentiated by
    hand), a quartic in qd: no usable closed form, so the transform is refused with a clear
    ModelError after bounded work (2 s of CPU, a few hundred MiB) instead of solving and
    simplifying forever."""
    from bounded import run_bounded

    out = run_bounded("""
        from phaselab import Hamiltonian
        bounded(lambda: Hamiltonian.from_lagrangian("qd**5/5 + q*qd**3 + qd**2", ["q"], ["qd"]))
    """)
    assert out.finished, out
    assert out.error == "ModelError", out
    assert "no closed form" in out.message and "degree 4" in out.message, out
    assert "give the Hamiltonian directly" in out.message
    assert out.cpu < 2.0 and out.rss_mib < 400, out


@pytest.mark.parametrize("L", ["qd**3 + sin(qd)", "qd**2*abs(qd)", "cosh(qd) + qd**4", "exp(qd)*qd"])
def test_transcendental_velocity_equations_are_a_model_error(L):
    """sympy raises NotImplementedError on some of these, or solves others with a branch of
    the Lambert W function; either way there is no bounded closed form to rely on: a
    ModelError saying so, within 2 s of CPU (child process with hard limits)."""
    from bounded import run_bounded

    out = run_bounded(f"""
        from phaselab import Hamiltonian
        bounded(lambda: Hamiltonian.from_lagrangian({L!r}, ["q"], ["qd"]))
    """)
    assert out.finished and out.error == "ModelError", out
    assert "no closed form" in out.message and out.cpu < 2.0, out


def test_cubic_lagrangian_picks_the_branch_that_inverts_the_momentum():
    """L = qd**3/3 + (2 + q) qd**2/2 gives p = qd**2 + (2 + q) qd, a quadratic in qd with two
    roots; the one that gives back qd > -(2 + q)/2 (where d2L/dqd2 > 0) is kept. Check:
    dH/dp at p(qd) returns qd (Hamilton's first equation, common practice)."""
    H = Hamiltonian.from_lagrangian("qd**3/3 + (2 + q)*qd**2/2", ["q"], ["qd"])
    qs, (ps,) = H.coords[0], H.momenta
    for qv, vv in [(0.4, 0.3), (1.1, -0.2), (0.7, 1.5)]:
        pv = vv**2 + (2 + qv) * vv
        got = float(sp.diff(H.expr, ps).evalf(subs={qs: qv, ps: pv}))
        assert got == pytest.approx(vv, rel=1e-12, abs=1e-12)


def test_coupled_kinetic_matrices_are_transformed_with_bounded_work():
    """Two velocities coupled through long trigonometric sums, and four coupled through a
    state-dependent matrix: the transform must not simplify the inverse (sympy's own 2 x 2
    determinant simplifies its products, and cancel multiplies the nested fractions of the
    linear solve out). Each ends within 5 s of CPU (the bound on every model, issue 24) in a
    child process with hard limits; these two are refused when they are made, because the
    second derivatives their compiled kernels need are past the size budget (model/derivatives.py;
    they were refused at compile time before), and the transform alone, checked without the
    kernels, gives back the velocities from dH/dp (Hamilton's first equation, common practice)."""
    from bounded import run_bounded

    k = 60
    s1 = "+".join(f"cos({i}*q0)" for i in range(1, k))
    s2 = "+".join(f"sin({i}*q1+q0)" for i in range(1, k))
    two = f"(3*{k}+{s1})*v0**2/2 + (3*{k}+{s2})*v1**2/2 + ({s1})*v0*v1/{k} - q0**2 - q1**2"
    four = (" + ".join(f"(2+cos(q{i}))*v{i}**2/2" for i in range(4)) + " + "
            + " + ".join(f"cos(q{i}-q{i + 1})*v{i}*v{i + 1}/3" for i in range(3)))
    for L, n in ((two, 2), (four, 4)):
        out = run_bounded(f"""
            import sympy as sp
            from phaselab import Hamiltonian
            names = [f"q{{i}}" for i in range({n})], [f"v{{i}}" for i in range({n})]

            def build_and_check():
                from phaselab.errors import ModelError
                try:
                    Hamiltonian.from_lagrangian({L!r}, *names)
                except ModelError as exc:
                    assert "too large to compile" in str(exc), str(exc)
                else:
                    raise AssertionError("expected the size refusal")

                class SymbolicOnly(Hamiltonian):
                    kernel_derivatives = None     # the transform alone, no kernels formed

                H = SymbolicOnly.from_lagrangian({L!r}, *names)
                point = {{q: 0.3 + 0.2 * i for i, q in enumerate(H.coords)}}
                vel = {{v: 0.5 - 0.3 * i for i, v in enumerate(H.velocity_symbols)}}
                momenta = [sp.diff(H.lagrangian, v).evalf(subs={{**point, **vel}}) for v in H.velocity_symbols]
                at = {{**point, **dict(zip(H.momenta, momenta))}}
                back = [float(sp.diff(H.expr, p).evalf(subs=at)) for p in H.momenta]
                return max(abs(b - float(vel[v])) for b, v in zip(back, H.velocity_symbols))

            bounded(build_and_check)
        """)
        assert out.finished and out.error is None, out
        assert float(out.value) < 1e-10, out
        assert out.cpu < 5.0 and out.rss_mib < 400, out
