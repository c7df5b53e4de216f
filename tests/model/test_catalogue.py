"""The catalogue of published models: each builds, compiles, and its compiled kernels agree
with the model's own energy and with facts from the published sources."""

import re
import subprocess
import sys
import zlib

import numpy as np
import pytest

from phaselab import models
from phaselab.codegen import compile_kernel
from phaselab.errors import ModelError

FLOWS = ["pendulum", "henon_heiles", "kepler", "double_pendulum", "restricted_three_body",
         "spatial_restricted_three_body", "toda_lattice", "fput_chain", "driven_pendulum"]


def compiled(system):
    return compile_kernel(system if system.is_autonomous else system.extended())


def test_catalogue_does_not_import_numerics_or_widgets():
    code = ("import sys, phaselab; phaselab.models.henon_heiles(); phaselab.models.standard_map(); "
            "print(sorted(m for m in ('numba', 'bokeh', 'ipywidgets') if m in sys.modules))")
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stderr
    assert res.stdout.strip() == "[]"


def test_catalogue_lists_every_model():
    assert set(models.available()) == set(FLOWS) | {"standard_map"}
    assert models.available() == list(models.MODELS)


@pytest.mark.parametrize("name", FLOWS + ["standard_map"])
def test_model_is_documented_and_parametrised(name):
    factory = getattr(models, name)
    doc = factory.__doc__
    assert "Source:" in doc and re.search(r"\b(19|20)\d\d\b", doc), "docstring must cite a publication"
    system = factory()
    assert system.name.startswith(name)
    for prm in system.parameters:
        assert prm.range is not None and prm.range[0] <= prm.default <= prm.range[1]


@pytest.mark.parametrize("name", FLOWS)
def test_kernel_energy_matches_model_energy(name):
    system = getattr(models, name)()
    c = compiled(system)
    target = system if system.is_autonomous else system.extended()
    n = len(target.state_symbols)
    rng = np.random.default_rng(zlib.crc32(name.encode()))
    z = rng.uniform(0.2, 0.9, size=(6, n))
    prm = target.param_values()
    got = np.array([c.call("hamiltonian", zi, prm) for zi in z])
    np.testing.assert_allclose(got, target.energy(z), rtol=1e-12, atol=1e-12)
    if not system.is_autonomous:
        # extended K = H(q, p, t) + p_t: compare with the time-dependent H at t = tau
        tau, p_tau = z[:, target.time_coordinate], z[:, -1]
        direct = system.energy(np.column_stack([z[:, 0], z[:, 2]]), t=tau)
        np.testing.assert_allclose(got, direct + p_tau, rtol=1e-12, atol=1e-12)


def _field(c, z, prm):
    return c.call("vector_field", np.asarray(z, dtype=float), prm)


def _jac(c, z, prm):
    return c.call("jacobian", np.asarray(z, dtype=float), prm)


def test_henon_heiles_saddle():
    # Henon & Heiles 1964: saddle points of the potential at energy 1/6, e.g. (x, y) = (0, 1)
    H = models.henon_heiles()
    c = compiled(H)
    z = np.array([0.0, 1.0, 0.0, 0.0])
    assert c.call("hamiltonian", z, H.param_values()) == pytest.approx(1 / 6, rel=1e-15)
    np.testing.assert_allclose(_field(c, z, H.param_values()), 0.0, atol=1e-15)


def test_restricted_three_body_triangular_point():
    # Szebehely 1967: L4 at (1/2 - mu, sqrt(3)/2) is an equilibrium of the rotating frame;
    # there xdot = px + y = 0 and ydot = py - x = 0 give px = -y, py = x
    H = models.restricted_three_body()
    mu = 0.0123
    prm = H.param_values({"mu": mu})
    x, y = 0.5 - mu, np.sqrt(3) / 2
    np.testing.assert_allclose(_field(compiled(H), [x, y, -y, x], prm), 0.0, atol=1e-14)


def test_kepler_circular_orbit():
    # circular orbit radius r = p_theta^2 / (m k) (Goldstein ch. 3): dp_r/dt vanishes
    H = models.kepler()
    m, k, L = 2.0, 3.0, 1.7
    f = _field(compiled(H), [L**2 / (m * k), 0.4, 0.0, L], H.param_values({"m": m, "k": k}))
    assert abs(f[2]) < 1e-14 and f[0] == 0.0
    assert f[1] == pytest.approx(L / (m * (L**2 / (m * k))**2), rel=1e-14)  # theta dot = p/(m r^2)


def test_pendulum_small_oscillation_frequency():
    # linearised pendulum: omega^2 = g / l (common practice)
    H = models.pendulum()
    prm = H.param_values({"g": 9.81, "l": 2.0, "m": 0.3})
    ev = np.linalg.eigvals(_jac(compiled(H), [0.0, 0.0], prm))
    np.testing.assert_allclose(sorted(ev.imag), [-np.sqrt(9.81 / 2.0), np.sqrt(9.81 / 2.0)], rtol=1e-12)


def test_double_pendulum_normal_modes():
    # equal masses and lengths: omega^2 = (g/l)(2 -+ sqrt 2) (normal modes of the
    # linearised double pendulum, common practice; recalled from memory)
    H = models.double_pendulum()
    g, l = 9.81, 1.3
    prm = H.param_values({"g": g, "l1": l, "l2": l, "m1": 1.0, "m2": 1.0})
    ev = np.linalg.eigvals(_jac(compiled(H), [0.0, 0.0, 0.0, 0.0], prm))
    w = np.sort(ev.imag[ev.imag > 0])
    np.testing.assert_allclose(w, np.sqrt(g / l * np.array([2 - np.sqrt(2), 2 + np.sqrt(2)])), rtol=1e-10)


def test_fput_linear_mode_frequencies():
    # fixed-end harmonic chain: omega_k = 2 sin(k pi / (2 (n + 1))), k = 1..n (FPU 1955)
    n = 16
    H = models.fput_chain(n)
    J = _jac(compiled(H), np.zeros(2 * n), H.param_values())
    w = np.sort(np.linalg.eigvals(J).imag)[n:]
    k = np.arange(1, n + 1)
    np.testing.assert_allclose(w, 2 * np.sin(k * np.pi / (2 * (n + 1))), rtol=1e-10)


def test_toda_total_momentum_conserved():
    # the periodic Toda lattice conserves sum p (Toda 1967): the forces add up to zero
    H = models.toda_lattice(4)
    rng = np.random.default_rng(2)
    f = _field(compiled(H), rng.uniform(-1, 1, 8), H.param_values({"a": 1.3, "b": 0.7}))
    assert abs(f[4:].sum()) < 1e-13


def test_driven_pendulum_extended_kernel():
    H = models.driven_pendulum()
    K = H.extended()
    c = compiled(H)
    prm = K.param_values()
    z = np.array([0.3, 1.1, -0.4, 0.0])  # q, tau, p, p_tau
    f = _field(c, z, prm)
    w0, eps, W = 1.0, 0.5, 2.0
    # dq/dt = p, dtau/dt = 1, dp/dt = -(w0^2 + eps cos(W t)) sin q, dp_tau/dt = -dH/dt
    assert f[0] == pytest.approx(-0.4) and f[1] == 1.0
    assert f[2] == pytest.approx(-(w0**2 + eps * np.cos(W * 1.1)) * np.sin(0.3), rel=1e-14)
    assert f[3] == pytest.approx(-eps * W * np.sin(W * 1.1) * np.cos(0.3), rel=1e-14)


def test_standard_map_fixed_points():
    # (0, 0) and (pi, 0) are fixed points of the standard map (Chirikov 1979)
    m = models.standard_map()
    c = compile_kernel(m)
    prm = m.param_values({"K": 1.4})
    for z in ([0.0, 0.0], [np.pi, 0.0]):
        out = c.call("map_step", np.array(z), prm)
        np.testing.assert_allclose(m.wrap(out), m.wrap(z), atol=1e-14)


def test_bad_chain_sizes_refused():
    with pytest.raises(ModelError, match="integer >= 2"):
        models.toda_lattice(1)
    with pytest.raises(ModelError, match="integer >= 1"):
        models.fput_chain(0)
    with pytest.raises(ModelError):
        models.fput_chain(2.5)
