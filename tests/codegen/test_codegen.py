"""Generated kernels against sympy's own evaluation, refusal of what cannot compile, the
on-disk cache across processes and its repair, and generated source that carries no user
text."""

import json
import math
import os
import stat
import subprocess
import sys
import textwrap

import numpy as np
import pytest
import sympy as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import phaselab
from phaselab import Hamiltonian, models
from phaselab.codegen import compile_kernel
from phaselab.codegen.kernels import kernel_code, kernel_functions_source, kernel_source
from phaselab.errors import ModelError

DIGITS = 30
NAMES = ("hamiltonian", "grad_q", "grad_p", "vector_field", "jacobian")


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
    """The compiled kernel's five results at one state."""
    z = np.asarray(z, dtype=float)
    return tuple(c.call(name, z, prm) for name in NAMES)


def inlined_values(H, n, z, prm):
    """The same five results from the text of the inlined kernels run as plain Python (the
    decorator replaced by the identity): both generated forms must agree to the last bit."""
    space = {"math": math, "njit": lambda **kw: (lambda f: f)}
    exec(compile(kernel_functions_source(kernel_code(H)), "<inlined kernels>", "exec"), space)  # noqa: S102
    z = np.asarray(z, dtype=float)
    outs = (np.zeros(n), np.zeros(n), np.zeros(2 * n), np.zeros((2 * n, 2 * n)))
    h = space["k_hamiltonian"](z, prm)
    for name, out in zip(NAMES[1:], outs):
        space[f"k_{name}"](z, prm, out)
    return (h, *outs)


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
    c = compile_kernel(H)
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
    c = compile_kernel(H)
    for z in ([0.3, 0.7, 0.2, -0.1], [-0.55, 1.3, 1.0, 0.4], [0.9, -0.8, -0.3, 0.6]):
        got = kernel_values(c, 2, z, H.param_values())
        want = sympy_reference(H, z, H.param_values())
        for g, w in zip(got, want):
            assert_close(g, w, 100.0)
        for g, w in zip(got, inlined_values(H, 2, z, H.param_values())):
            np.testing.assert_array_equal(g, w)


@pytest.mark.parametrize("expr, piece", [
    ("besselj", "besselj"),
    ("lambertw", "LambertW"),
    ("undefined", "`f`"),
    ("zeta", "zeta"),
    ("floor", "floor"),
    ("gamma", "gamma"),
])
def test_unsupported_function_is_a_model_error(expr, piece):
    """Refused when the model is made, not later when its kernels are compiled."""
    q, p = sp.symbols("q p", real=True)
    V = {"besselj": sp.besselj(0, q), "lambertw": sp.LambertW(q), "undefined": sp.Function("f")(q),
         "zeta": sp.zeta(q), "floor": sp.floor(q), "gamma": sp.gamma(q)}[expr]
    if expr == "undefined":   # a symbolic-only model (V(q) without a definition) is made
        H = Hamiltonian(p**2 / 2 + V, [q], [p], name=f"with_{expr}")
        with pytest.raises(ModelError, match=piece):
            compile_kernel(H)
        return
    with pytest.raises(ModelError, match=piece):
        Hamiltonian(p**2 / 2 + V, [q], [p], name=f"with_{expr}")


@pytest.mark.parametrize("V, what", [
    (sp.I * sp.Symbol("q", real=True), "complex"),
    (sp.Integer(10)**400 * sp.Symbol("q", real=True), "does not fit"),
    (sp.Float("1e400") * sp.Symbol("q", real=True), "does not fit"),
    ((-2)**sp.Rational(1, 3) * sp.Symbol("q", real=True), "complex"),
])
def test_unrepresentable_numbers_are_model_errors(V, what):
    q, p = sp.symbols("q p", real=True)
    with pytest.raises(ModelError, match=what):
        Hamiltonian(p**2 / 2 + V, [q], [p])


def test_time_dependent_needs_extension():
    with pytest.raises(ModelError, match="extended"):
        compile_kernel(models.driven_pendulum())


def test_parameters_do_not_recompile_and_memo():
    H = models.pendulum()
    c = compile_kernel(H)
    assert compile_kernel(H) is c
    for g in (1.0, 9.81, 20.0):
        out = c.call("vector_field", np.array([0.3, 0.1]), H.param_values({"g": g}))
        assert out[1] == pytest.approx(-g * np.sin(0.3), rel=1e-14)  # -m g l sin q with m = l = 1


def test_generated_file_is_named_by_the_system_key():
    H = models.henon_heiles()
    c = compile_kernel(H)
    assert os.path.basename(c.path).startswith("kernel_flow_" + H.key[:16])


# ------------------------------------------------------------------ no user text in code
HOSTILE = [
    '"""\nimport os; os.system("echo owned")\n"""',
    "'''; raise SystemExit; '''",
    "x\n__import__('os').system('id')",
    "\\u0022\\u0022\\u0022 injected",
    "$\\frac{$ title } {",
]


@pytest.mark.parametrize("name", HOSTILE)
def test_generated_source_holds_no_user_text(name):
    """A name, a title or a parameter description reaches no generated source: the kernel
    module and the loop modules of systems named with hostile text contain none of it (the
    key and the printed expressions are all they hold)."""
    from phaselab.engine.compiled import closure, generic_source, inlined_source

    H = Hamiltonian("px**2/2 + x**4/4 + w*x", ["x"], ["px"], params={"w": 0.5}, name=name)
    M = phaselab.AreaPreservingMap(["q + p", "p - k*sin(q + p)"], ["q"], ["p"], params={"k": 0.3},
                                   name=name)
    files = closure(["sections", "tangent"])
    for system in (H, M):
        code = kernel_code(system)
        for text in (kernel_source(code), inlined_source(code, files), generic_source(files)):
            for piece in {name, name.strip(), name[:12]}:
                assert piece not in text
            compile(text, "<generated>", "exec")  # well-formed Python


def test_name_does_not_change_the_generated_module():
    a = Hamiltonian("p**2/2 + q**2/2", ["q"], ["p"], name="plain")
    b = Hamiltonian("p**2/2 + q**2/2", ["q"], ["p"], name='"""; import os #')
    assert a.key == b.key
    assert kernel_source(kernel_code(a)) == kernel_source(kernel_code(b))


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
        kernels.kernel_code = refuse
    H = models.henon_heiles()
    c = kernels.compile_kernel(H)
    out = c.call("vector_field", np.array([0.1, 0.2, 0.3, 0.4]), H.param_values())
    print(json.dumps({"path": c.path, "out": out.tolist(), "seconds": time.perf_counter() - t0,
                      "code": c.code is not None}))
""")


def _child(env, mode):
    res = subprocess.run([sys.executable, "-c", CHILD, mode], env=env, capture_output=True, text=True,
                         timeout=300)
    assert res.returncode == 0, res.stderr
    return json.loads(res.stdout.strip().splitlines()[-1]), res.stderr


def test_second_process_uses_disk_cache(tmp_path):
    env = dict(os.environ, PHASELAB_CACHE_DIR=str(tmp_path / "cache"))
    cold, _ = _child(env, "cold")
    assert cold["code"]
    warm, _ = _child(env, "warm")   # would raise if the source were generated again
    assert warm["path"] == cold["path"] and os.path.exists(warm["path"]) and not warm["code"]
    assert warm["out"] == cold["out"]
    # reference: Hamilton's equations of Henon-Heiles written out
    x, y, px, py = 0.1, 0.2, 0.3, 0.4
    np.testing.assert_allclose(cold["out"], [px, py, -x - 2 * x * y, -y - x**2 + y**2], rtol=1e-15)
    # the folder is private to the user
    assert stat.S_IMODE(os.stat(tmp_path / "cache").st_mode) & (stat.S_IWGRP | stat.S_IWOTH) == 0


def test_damaged_or_edited_module_is_rebuilt(tmp_path):
    """A truncated file, an edited file and garbage in numba's cached machine code each lead
    to a rebuild with the right numbers, never to an error or to other numbers."""
    folder = tmp_path / "cache"
    env = dict(os.environ, PHASELAB_CACHE_DIR=str(folder))
    first, _ = _child(env, "cold")
    path = next(folder.glob("kernel_*.py"))
    text = path.read_text()
    path.write_text(text[: len(text) // 2])                        # truncated
    again, _ = _child(env, "cold")
    assert again["out"] == first["out"] and path.read_text() == text
    path.write_text(text.replace("out[2] = ", "out[2] = 1.0 + "))   # edited to give other numbers
    again, _ = _child(env, "cold")
    assert again["out"] == first["out"] and path.read_text() == text
    damaged = list((folder / "__pycache__").glob(path.stem + ".*"))
    assert damaged
    for item in damaged:                                             # corrupt machine code
        item.write_bytes(b"not a pickle")
    again, _ = _child(env, "cold")
    assert again["out"] == first["out"]


def test_unusable_cache_folder_falls_back_with_a_warning(tmp_path):
    """A cache path that is a file, and a read-only folder, give a one-line warning and a
    private temporary cache; the computation still answers."""
    afile = tmp_path / "a-file"
    afile.write_text("not a folder")
    res, err = _child(dict(os.environ, PHASELAB_CACHE_DIR=str(afile)), "cold")
    assert "not usable" in err and "it is a file" in err
    assert res["out"][0] == pytest.approx(0.3)
    if os.geteuid() != 0:  # root writes anywhere, so a read-only folder cannot be shown as root
        ro = tmp_path / "ro"
        ro.mkdir()
        os.chmod(ro, 0o500)
        res, err = _child(dict(os.environ, PHASELAB_CACHE_DIR=str(ro)), "cold")
        assert "not usable" in err


def test_a_kernel_the_compiler_refuses_is_a_model_error(monkeypatch):
    """A printed kernel that numba still cannot type (found once by the expression fuzz: a
    complex literal reaching math.cos) ends in phaselab's ModelError, not numba's
    TypingError."""
    from numba.core.errors import TypingError

    from phaselab.codegen import kernels
    from phaselab.errors import ModelError

    def refuse(name, make_source):
        raise TypingError("No implementation of function Function(<built-in function cos>) found")

    monkeypatch.setattr(kernels, "load_module", refuse)
    H = phaselab.Hamiltonian("px**2/2 + x**2/2 + 0.123456*y**2", ["x", "y"], ["px", "py"])
    with pytest.raises(ModelError, match="cannot be compiled to numeric code"):
        kernels.compile_kernel(H)
