"""Generated numba kernels against sympy's own evaluation, refusal of what cannot compile,
and the on-disk cache across processes."""

import json
import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest
import sympy as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from phaselab import Hamiltonian, models
from phaselab.codegen import compile_system
from phaselab.codegen.kernels import module_source
from phaselab.errors import ModelError

DIGITS = 30


# compile_system memoizes per process by system key, so a system compiled by an earlier test
# module keeps the module it loaded from that module's cache folder; the cross-process cache
# test below runs in subprocesses with a folder of its own for that reason.
@pytest.fixture(scope="module", autouse=True)
def _cache(tmp_path_factory):
    mp = pytest.MonkeyPatch()
    mp.setenv("PHASELAB_CACHE_DIR", str(tmp_path_factory.mktemp("kernels")))
    yield
    mp.undo()


def sympy_reference(H: Hamiltonian, z, prm):
    """H, dH/dq, dH/dp, the vector field and its Jacobian evaluated by sympy (evalf at 30
    digits), the reference the compiled kernels are checked against."""
    at = {s: sp.Float(float(v), DIGITS) for s, v in zip(H.state_symbols, z)}
    at.update({s: sp.Float(float(v), DIGITS) for s, v in zip(H.param_symbols, prm)})

    def ev(e):
        return float(sp.N(e.xreplace(at), DIGITS))

    dq = [sp.diff(H.expr, x) for x in H.coords]
    dp = [sp.diff(H.expr, x) for x in H.momenta]
    field = dp + [-d for d in dq]
    jac = [[sp.diff(f, x) for x in H.state_symbols] for f in field]
    return (ev(H.expr), np.array([ev(e) for e in dq]), np.array([ev(e) for e in dp]),
            np.array([ev(e) for e in field]), np.array([[ev(e) for e in row] for row in jac]))


def kernel_values(c, n, z, prm):
    z = np.asarray(z, dtype=float)
    gq, gp, f, J = np.empty(n), np.empty(n), np.empty(2 * n), np.empty((2 * n, 2 * n))
    h = c.hamiltonian(z, prm)
    c.grad_q(z, prm, gq)
    c.grad_p(z, prm, gp)
    c.vector_field(z, prm, f)
    c.jacobian(z, prm, J)
    return h, gq, gp, f, J


def assert_close(got, want, scale):
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12 * scale)


# ------------------------------------------------------------------ property test
@st.composite
def polynomial_systems(draw):
    n = draw(st.integers(1, 3))
    q = sp.symbols(f"q1:{n + 1}", real=True)
    p = sp.symbols(f"p1:{n + 1}", real=True)
    k = sp.Symbol("k", real=True)
    variables = q + p
    n_terms = draw(st.integers(1, 6))
    H = sp.Integer(0)
    for _ in range(n_terms):
        coeff = draw(st.sampled_from([sp.Integer(1), sp.Integer(-2), sp.Rational(1, 3), sp.Float(0.75),
                                      sp.Rational(-5, 2)]))
        powers = draw(st.lists(st.integers(0, 3), min_size=2 * n, max_size=2 * n))
        with_k = draw(st.booleans())
        term = coeff * sp.Mul(*[v**e for v, e in zip(variables, powers)])
        H += term * (k if with_k else 1)
    return Hamiltonian(H, q, p, params={k: draw(st.sampled_from([0.5, 1.0, -1.5]))}, name="poly")


@pytest.mark.slow
@settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(polynomial_systems(), st.lists(st.floats(-1.5, 1.5), min_size=6, max_size=6), st.floats(-2, 2))
def test_kernels_agree_with_sympy_on_random_polynomials(H, zs, kval):
    n = H.dof
    z = np.array(zs[: 2 * n])
    prm = H.param_values({"k": kval})
    c = compile_system(H)
    got = kernel_values(c, n, z, prm)
    want = sympy_reference(H, z, prm)
    # the size of the terms bounds round-off where terms cancel
    scale = 1.0 + float(sp.N(sum(abs(t) for t in sp.Add.make_args(sp.expand(H.expr))).xreplace(
        {**dict(zip(H.state_symbols, map(float, z))), **dict(zip(H.param_symbols, map(float, prm)))})))
    for g, w in zip(got, want):
        assert_close(g, w, scale * 10)


# ------------------------------------------------------------------ functions
def test_every_supported_function_compiles_and_matches_sympy():
    q1, q2, p1, p2 = sp.symbols("q1 q2 p1 p2", real=True)
    u = q1 / 4  # keeps arguments inside the domains of asin, acos, atanh
    V = (sp.sin(q1) + sp.cos(q2) + sp.tan(u) + sp.asin(u) + sp.acos(u) + sp.atan(q2) + sp.atan2(q2, 2 + q1**2)
         + sp.sinh(u) + sp.cosh(u) + sp.tanh(q2) + sp.asinh(q2) + sp.acosh(2 + q2**2) + sp.atanh(u)
         + sp.exp(-q1**2) + sp.log(1 + q2**2) + sp.sqrt(1 + q1**2) + sp.Abs(q1) * q2 + sp.sign(q2) * q1
         + sp.sec(u) + sp.csc(1 + u) + sp.cot(1 + u) + sp.Heaviside(q1 - sp.Rational(1, 10)) * q2
         + sp.Max(q1, q2**2) + sp.Min(q1, q2)
         + sp.erf(q1) + sp.erfc(q2) + sp.pi * q1 * q2 + sp.E * q2)
    H = Hamiltonian((p1**2 + p2**2) / 2 + p1 * p2 * q1 / 3 + V, [q1, q2], [p1, p2], name="functions")
    c = compile_system(H)
    for z in ([0.3, 0.7, 0.2, -0.1], [-0.55, 1.3, 1.0, 0.4], [0.9, -0.8, -0.3, 0.6]):
        got = kernel_values(c, 2, z, H.param_values())
        want = sympy_reference(H, z, H.param_values())
        for g, w in zip(got, want):
            assert_close(g, w, 100.0)


@pytest.mark.parametrize("expr, piece", [
    ("besselj", "besselj"),
    ("lambertw", "LambertW"),
    ("undefined", "`f`"),
    ("zeta", "zeta"),
    ("floor", "floor"),
    ("gamma", "gamma"),
])
def test_unsupported_function_is_a_model_error(expr, piece):
    q, p = sp.symbols("q p", real=True)
    V = {"besselj": sp.besselj(0, q), "lambertw": sp.LambertW(q), "undefined": sp.Function("f")(q),
         "zeta": sp.zeta(q), "floor": sp.floor(q), "gamma": sp.gamma(q)}[expr]
    H = Hamiltonian(p**2 / 2 + V, [q], [p], name=f"with_{expr}")
    with pytest.raises(ModelError, match=piece):
        compile_system(H)


@pytest.mark.parametrize("V, what", [
    (sp.I * sp.Symbol("q", real=True), "complex"),
    (sp.Integer(10)**400 * sp.Symbol("q", real=True), "does not fit"),
    (sp.Float("1e400") * sp.Symbol("q", real=True), "does not fit"),
    ((-2)**sp.Rational(1, 3) * sp.Symbol("q", real=True), "complex"),
])
def test_unrepresentable_numbers_are_model_errors(V, what):
    q, p = sp.symbols("q p", real=True)
    H = Hamiltonian(p**2 / 2 + V, [q], [p])
    with pytest.raises(ModelError, match=what):
        module_source(H)


def test_time_dependent_needs_extension():
    with pytest.raises(ModelError, match="extended"):
        compile_system(models.driven_pendulum())


def test_parameters_do_not_recompile_and_memo():
    H = models.pendulum()
    c = compile_system(H)
    assert compile_system(H) is c
    out = np.empty(2)
    for g in (1.0, 9.81, 20.0):
        c.vector_field(np.array([0.3, 0.1]), H.param_values({"g": g}), out)
        assert out[1] == pytest.approx(-g * np.sin(0.3), rel=1e-14)  # -m g l sin q with m = l = 1
    assert len(c.vector_field.signatures) == 1


def test_generated_module_header():
    H = models.henon_heiles()
    c = compile_system(H)
    assert c.NDOF == 2 and c.NSTATE == 4 and c.NPARAM == 0 and c.KIND == "flow"
    assert os.path.basename(c.path).startswith("flow_" + H.key[:12])


# ------------------------------------------------------------------ disk cache
CHILD = textwrap.dedent("""
    import json, sys, time
    import numpy as np
    t0 = time.perf_counter()
    import phaselab.codegen.kernels as kernels
    from phaselab import models
    if sys.argv[1] == "warm":
        def refuse(*a, **k):
            raise AssertionError("source generated again on a warm start")
        kernels.module_source = refuse
    H = models.henon_heiles()
    c = kernels.compile_system(H)
    out = np.empty(4)
    c.vector_field(np.array([0.1, 0.2, 0.3, 0.4]), H.param_values(), out)
    st = c.vector_field.stats
    print(json.dumps({"path": c.path, "hits": sum(st.cache_hits.values()),
                      "misses": sum(st.cache_misses.values()), "out": out.tolist(),
                      "seconds": time.perf_counter() - t0}))
""")


@pytest.mark.slow
def test_second_process_uses_disk_cache(tmp_path):
    env = dict(os.environ, PHASELAB_CACHE_DIR=str(tmp_path / "cache"))

    def run(mode):
        res = subprocess.run([sys.executable, "-c", CHILD, mode], env=env, capture_output=True, text=True,
                             timeout=300)
        assert res.returncode == 0, res.stderr
        return json.loads(res.stdout.strip().splitlines()[-1])

    cold = run("cold")
    assert cold["misses"] >= 1 and cold["hits"] == 0
    warm = run("warm")
    assert warm["path"] == cold["path"] and os.path.exists(warm["path"])
    # numba found the machine code on disk: a cache hit, no compilation
    assert warm["hits"] >= 1 and warm["misses"] == 0
    assert warm["out"] == cold["out"]
    # reference: Hamilton's equations of Henon-Heiles written out
    x, y, px, py = 0.1, 0.2, 0.3, 0.4
    np.testing.assert_allclose(cold["out"], [px, py, -x - 2 * x * y, -y - x**2 + y**2], rtol=1e-15)
