"""The gallery notebooks run top to bottom from their parameters cell, headless, and a
changed parameter changes what they compute.

Every notebook in gallery/ is executed with papermill (two at a time, since numba compiles
on one core) into a temporary folder: once with its own defaults and, for the six
scenario notebooks, once more with one parameter changed. Each scenario notebook writes a
``summary.json`` into its ``out_dir``; the checks below compare those numbers with
references computed here independently (scipy, sympy, closed forms).
"""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import pytest

pytestmark = pytest.mark.slow

GALLERY = Path(__file__).resolve().parents[1] / "gallery"
SCENARIOS = ["bead_on_spinning_hoop", "two_mode_molecule", "satellite_near_a_moon",
             "driven_oscillator", "kicked_rotor", "oscillator_chain"]

# the one parameter changed in the second run of each notebook
CHANGED = {
    "bead_on_spinning_hoop": {"R": 0.5, "periods": 40},
    "two_mode_molecule": {"kappa": 1.1, "energies": [0.1], "crossings": 40},
    "satellite_near_a_moon": {"mass_ratio": 0.03, "crossings": 20},
    "driven_oscillator": {"torque": 0.3, "periods": 60},
    "kicked_rotor": {"kicks": [0.3, 4.5], "iterates": 100},
    "oscillator_chain": {"alpha": 0.0, "t_end": 400.0},
}


def notebooks() -> list[str]:
    names = [p.stem for p in sorted(GALLERY.glob("*.ipynb"))]
    return [n for n in names if not n.endswith(".out")]


@pytest.fixture(scope="module")
def kernel_env(tmp_path_factory):
    """An environment whose ``python3`` kernel is this interpreter (a private kernelspec
    put first on JUPYTER_PATH, so no user-level kernel can shadow it)."""
    from ipykernel.kernelspec import install

    root = tmp_path_factory.mktemp("jupyter")
    install(kernel_name="python3", prefix=str(root))
    data = root / "share" / "jupyter"
    spec = json.loads((data / "kernels" / "python3" / "kernel.json").read_text())
    assert Path(spec["argv"][0]).resolve() == Path(sys.executable).resolve() or spec["argv"][0] == "python"
    env = dict(os.environ)
    env["JUPYTER_PATH"] = os.pathsep.join([str(data)] + [p for p in [env.get("JUPYTER_PATH")] if p])
    env.setdefault("MPLBACKEND", "Agg")
    return env


# Cells may wait for numba on a cold kernel cache: the restricted three-body section loop
# took about 5 minutes to compile here (measured), so the per-cell limit is generous.
def execute(env, name: str, workdir: Path, parameters: dict) -> subprocess.CompletedProcess:
    workdir.mkdir(parents=True, exist_ok=True)
    cmd = [sys.executable, "-m", "papermill", str(GALLERY / f"{name}.ipynb"), str(workdir / f"{name}.out.ipynb"),
           "-k", "python3", "--cwd", str(workdir), "--execution-timeout", "1200", "--no-progress-bar",
           "-y", json.dumps(parameters)]
    return subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=1500)


@pytest.fixture(scope="module")
def runs(kernel_env, tmp_path_factory):
    """Every notebook with its defaults, then each scenario with one parameter changed."""
    base = tmp_path_factory.mktemp("gallery")
    jobs = [(name, "default", {"out_dir": str(base / "default" / name)} if name in SCENARIOS else {})
            for name in notebooks()]
    jobs += [(name, "changed", {"out_dir": str(base / "changed" / name), **CHANGED[name]})
             for name in SCENARIOS if name in notebooks()]
    results = {}

    def one(job):
        name, kind, params = job
        proc = execute(kernel_env, name, base / kind, params)
        return (name, kind), (proc, params)

    # defaults first (they compile the kernels), then the changed runs on a warm cache
    with ThreadPoolExecutor(max_workers=2) as pool:
        results.update(pool.map(one, [j for j in jobs if j[1] == "default"]))
    with ThreadPoolExecutor(max_workers=2) as pool:
        results.update(pool.map(one, [j for j in jobs if j[1] == "changed"]))
    return results


def summary(runs, name, kind="default") -> dict:
    proc, params = runs[(name, kind)]
    assert proc.returncode == 0, f"{name} ({kind}) failed:\n{proc.stderr[-4000:]}"
    return json.loads((Path(params["out_dir"]) / "summary.json").read_text())


# ------------------------------------------------------------------------------ structure
@pytest.mark.parametrize("name", notebooks())
def test_notebook_starts_with_one_parameters_cell_and_is_stripped(name):
    import nbformat

    nb = nbformat.read(GALLERY / f"{name}.ipynb", as_version=4)
    tagged = [i for i, c in enumerate(nb.cells) if "parameters" in c.metadata.get("tags", [])]
    assert tagged == [0], f"{name}: the first cell, and only it, carries the 'parameters' tag"
    assert nb.cells[0].cell_type == "code"
    if name in SCENARIOS:  # the widget demo belongs to its own helper; ours are committed stripped
        for cell in nb.cells:
            if cell.cell_type == "code":
                assert cell.outputs == [] and cell.execution_count is None, f"{name}: outputs not stripped"
        assert "out_dir" in nb.cells[0].source


def test_all_six_scenarios_are_present():
    assert set(SCENARIOS) <= set(notebooks())


@pytest.mark.parametrize("name", notebooks())
def test_notebook_executes_headless(runs, name):
    proc, params = runs[(name, "default")]
    assert proc.returncode == 0, f"{name} failed:\n{proc.stderr[-4000:]}"
    if name in SCENARIOS:
        out = Path(params["out_dir"])
        figures = [p for p in out.iterdir() if p.suffix in (".png", ".svg", ".pdf")]
        assert figures, f"{name} exported no figures into {out}"
        for png in out.glob("*.png"):
            assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec, sec. 5.2)


# ------------------------------------------------------------------------------ results
def test_bead_rest_points_follow_the_closed_form_and_move_with_the_radius(runs):
    for kind, R in (("default", 0.25), ("changed", 0.5)):
        s = summary(runs, "bead_on_spinning_hoop", kind)
        g = 9.81
        # the tilted rest point of a bead on a hoop spinning at w: cos(theta*) = g / (R w^2)
        # for w > sqrt(g/R) (closed form from dV_eff/dtheta = 0 of the Lagrangian in the notebook)
        assert s["critical_spin"] == pytest.approx(math.sqrt(g / R), rel=1e-12)
        for w, angle, n_stable in zip(s["spins"], s["tilted_angle"], s["stable_count"]):
            if w > math.sqrt(g / R) * 1.001:
                assert angle == pytest.approx(math.acos(g / (R * w * w)), abs=1e-7)
                assert n_stable == 2  # the two tilted points (mirror images)
            elif w < math.sqrt(g / R) * 0.999:
                assert angle == 0.0 and n_stable == 1
    a = summary(runs, "bead_on_spinning_hoop")
    b = summary(runs, "bead_on_spinning_hoop", "changed")
    assert a["tilted_angle"] != b["tilted_angle"]


def _molecule_escape_energy(wx, wy, kappa):
    """Lowest saddle of the molecule's potential, by sympy (reference library)."""
    import sympy as sp

    x, y = sp.symbols("x y", real=True)
    V = (wx**2 * x**2 + wy**2 * y**2) / 2 + kappa * (x**2 * y - y**3 / 3)
    sols = sp.solve([sp.diff(V, x), sp.diff(V, y)], [x, y], dict=True)
    energies = [float(V.subs(s)) for s in sols if all(v.is_real for v in s.values())]
    return min(e for e in energies if e > 1e-12)


def test_molecule_escape_energy_and_a_changed_coupling(runs):
    a = summary(runs, "two_mode_molecule")
    b = summary(runs, "two_mode_molecule", "changed")
    assert a["escape_energy"] == pytest.approx(_molecule_escape_energy(1.0, 1.2, 0.9), rel=1e-9)
    assert b["escape_energy"] == pytest.approx(_molecule_escape_energy(1.0, 1.2, 1.1), rel=1e-9)
    assert a["points"] == [10 * 120] * 3 and b["points"] == [10 * 40]
    # 4th-order symplectic steps at dt = 0.05: |dE/E| far below 1e-4 (common practice)
    assert a["worst_energy_error"] < 1e-4


def _L1(mu):
    """x of the collinear point between the primaries: d/dx of the effective potential
    x^2/2 + (1-mu)/|x+mu| + mu/|x-1+mu| vanishes; root by scipy.optimize.brentq."""
    from scipy.optimize import brentq

    def f(x):
        return x - (1 - mu) * (x + mu) / abs(x + mu)**3 - mu * (x - 1 + mu) / abs(x - 1 + mu)**3

    return brentq(f, -mu + 1e-6, 1 - mu - 1e-6, xtol=1e-14)


def test_satellite_L1_point_against_scipy_and_a_changed_moon(runs):
    a = summary(runs, "satellite_near_a_moon")
    b = summary(runs, "satellite_near_a_moon", "changed")
    assert a["L1_x"] == pytest.approx(_L1(0.02), abs=1e-9)
    assert b["L1_x"] == pytest.approx(_L1(0.03), abs=1e-9)
    assert a["L1_x"] != b["L1_x"]
    assert a["stopped"] == 0
    assert a["worst_energy_error"] < 1e-6  # Gauss-Legendre 6 at dt = 1e-3 (common practice: ~1e-9)


def test_driven_oscillator_step_divides_the_period_and_torque_matters(runs):
    a = summary(runs, "driven_oscillator")
    b = summary(runs, "driven_oscillator", "changed")
    period = 2 * math.pi / 1.7  # drive period of the notebook's defaults
    steps = period / a["dt_used"]
    assert steps == pytest.approx(round(steps), abs=1e-9)
    assert a["points"] == 12 * 150 and b["points"] == 12 * 60
    assert a["mean_square_angle"] != b["mean_square_angle"]
    assert all(0.0 <= r <= 0.5 + 1e-9 for r in a["rotation"])


def test_kicked_rotor_fixed_point_turns_hyperbolic_past_K_4(runs):
    a = summary(runs, "kicked_rotor")
    b = summary(runs, "kicked_rotor", "changed")

    def stability_at_pi(s, K):
        for q, p, kind in s["fixed_points"][str(K)]:
            # p is wrapped into [0, 2 pi): compare modulo the period
            if abs(q - math.pi) < 1e-6 and abs((p + math.pi) % (2 * math.pi) - math.pi) < 1e-5:
                return kind
        raise AssertionError(f"no fixed point at (pi, 0) for K = {K}")

    # linear stability of (pi, 0): trace of the Jacobian is 2 - K, elliptic iff |2 - K| < 2
    # (area-preserving 2x2 maps, common practice)
    for K in a["kicks"]:
        assert stability_at_pi(a, K) == "elliptic"
    assert stability_at_pi(b, 0.3) == "elliptic"
    assert stability_at_pi(b, 4.5) == "hyperbolic"
    # the chaotic sea grows with the kick: the widest orbit covers more at K = 3 than at 0.4
    assert a["widest_orbit_cover"][-1] > a["widest_orbit_cover"][0]
    assert b["widest_orbit_cover"][-1] > b["widest_orbit_cover"][0]


def test_chain_shares_energy_only_when_nonlinear(runs):
    a = summary(runs, "oscillator_chain")
    b = summary(runs, "oscillator_chain", "changed")
    # alpha = 0: a normal mode of the linear chain keeps all its energy (common practice);
    # only the integrator's error moves any
    assert b["lowest_share"] > 1 - 1e-6
    assert a["lowest_share"] < 0.95
    assert np.isclose(sum(a["final_share"]), 1.0)
