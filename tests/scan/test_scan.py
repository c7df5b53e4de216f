"""Scans over grids of seeds and parameters: chaos maps, escape maps, parameter scans; their
labels and files, resuming from a store, progress. Dask runs are in test_scan_cluster.py."""

import math
import os

import numpy as np
import pytest

import phaselab
from phaselab.errors import ModelError, ParameterError
from phaselab.scan import chaos_map, escape_map, parameter_scan, state_grid


@pytest.fixture(scope="module")
def kicked_rotor():
    return phaselab.models.standard_map()


@pytest.fixture(scope="module")
def oscillator():
    """H = (p^2 + q^2) / 2: q(t) = q0 cos t + p0 sin t (common practice)."""
    return phaselab.Hamiltonian("p**2/2 + q**2/2", ["q"], ["p"], name="oscillator")


@pytest.fixture(scope="module")
def rotation():
    """A rotation of the (q, p) plane by w per iterate: area-preserving and linear."""
    return phaselab.AreaPreservingMap(["q*cos(w) + p*sin(w)", "-q*sin(w) + p*cos(w)"], ["q"], ["p"],
                                      params={"w": 0.5}, name="rotation")


def chaotic_fraction(cmap, threshold=3.0):
    v = cmap.values[np.isfinite(cmap.values)]
    return float(np.mean(v > threshold))


# ----------------------------------------------------------------------------- chaos maps
def test_standard_map_chaos_grows_with_the_kick(kicked_rotor):
    # Chirikov 1979 (Phys. Rep. 52, 263): for K well below the break-up of the last
    # invariant circle (K ~ 0.97, Greene 1979) most of the phase space is regular; for
    # K = 5 almost all of it is a chaotic sea (a few small islands remain). MEGNO near 2
    # marks regular orbits, large values chaotic ones (Cincotta & Simo 2000).
    grid = state_grid(kicked_rotor, {"q": (0.0, 2 * np.pi, 24), "p": (0.0, 2 * np.pi, 24)})
    weak = chaos_map(kicked_rotor, grid, 400, params={"K": 0.3})
    strong = chaos_map(kicked_rotor, grid, 400, params={"K": 5.0})
    assert weak.image.shape == (24, 24)
    assert chaotic_fraction(weak) < 0.1
    assert chaotic_fraction(strong) > 0.8


def test_chunks_and_order_do_not_change_results(kicked_rotor):
    """Each orbit's deviation vector depends only on the seed and its own state, so the
    chunking and the position of an orbit among the others change nothing, to the bit."""
    grid = state_grid(kicked_rotor, {"q": (0.1, 6.0, 7), "p": (0.1, 6.0, 5)})
    one = chaos_map(kicked_rotor, grid, 200, indicator="lyapunov")
    many = chaos_map(kicked_rotor, grid, 200, indicator="lyapunov", batch_size=4)
    np.testing.assert_array_equal(one.values, many.values)
    backwards = chaos_map(kicked_rotor, grid.states[::-1], 200, indicator="lyapunov", batch_size=3)
    np.testing.assert_array_equal(backwards.values[::-1], one.values)
    assert one.run.chunks == 1 and many.run.chunks == 9 and many.run.computed == 9


def test_sali_uses_two_vectors_and_the_rest_one(kicked_rotor):
    """SALI needs two deviation vectors (Skokos 2001); with K = 0.3 the orbit near the
    elliptic point (pi, 0) is regular, so its SALI stays away from 0 (Skokos 2001: SALI > 0
    on regular orbits of two-dimensional maps)."""
    seeds = [[np.pi + 0.1, 0.0], [0.5, 3.0]]
    sali = chaos_map(kicked_rotor, seeds, 500, indicator="sali", params={"K": 0.3})
    assert sali.meta["deviation_vectors"] == 2 and np.all(sali.values > 1e-3)
    fli = chaos_map(kicked_rotor, seeds, 500, indicator="fli", params={"K": 0.3})
    assert fli.meta["deviation_vectors"] == 1


def test_chaos_map_is_labelled(tmp_path, hh, monkeypatch):
    xr = pytest.importorskip("xarray")
    pytest.importorskip("zarr")
    grid = phaselab.shell_grid(hh, {"y": (-0.5, 0.75, 5), "py": (-0.5, 0.5, 4)}, energy=0.125,
                               plane={"x": 0.0}, solve_for="px")
    cmap = chaos_map(hh, grid, 4.0, indicator="megno", method="yoshida4", dt=0.01)
    ds = cmap.to_xarray()
    assert ds["megno"].dims == ("py", "y") and ds["seeds"].dims == ("py", "y", "state")
    np.testing.assert_array_equal(ds["y"].values, grid.x)
    np.testing.assert_array_equal(ds["py"].values, grid.y)
    assert list(ds["state"].values) == ["x", "y", "px", "py"]
    np.testing.assert_array_equal(ds["valid"].values.ravel() == 1, grid.valid)
    np.testing.assert_array_equal(ds["status"].values.ravel()[~grid.valid], -1)
    # CF 1.10 section 3.1: units must be UDUNITS-readable; phaselab's wording moves to comment
    assert "units" not in ds["t_end"].attrs and ds["t_end"].attrs["comment"] == "in model time units"
    a = ds.attrs
    assert a["expression"] == str(hh.expr) and a["energy"] == 0.125 and a["method"] == "yoshida4"
    assert a["dt"] == 0.01 and a["t"] == 4.0 and a["indicator"] == "megno"
    for lib in ("phaselab", "numpy", "numba", "scipy", "sympy", "xarray", "zarr"):
        assert f"{lib}_version" in a
    # files: by suffix, and by size without one (NetCDF small, Zarr large)
    nc = cmap.save(tmp_path / "megno.nc")
    zr = cmap.save(tmp_path / "megno.zarr")
    auto = cmap.save(tmp_path / "small")
    assert auto.name == "small.nc"
    monkeypatch.setattr(phaselab.scan.datasets, "SMALL_BYTES", 0)
    assert cmap.save(tmp_path / "large").name == "large.zarr"
    for path, engine in ((nc, None), (zr, "zarr")):
        back = xr.open_dataset(path, engine=engine)
        np.testing.assert_array_equal(back["megno"].values, ds["megno"].values)
        assert back.attrs["expression"] == a["expression"]
        back.close()
    assert sorted(os.listdir(tmp_path)) == ["large.zarr", "megno.nc", "megno.zarr", "small.nc"]
    cmap.save(tmp_path / "megno.zarr")                        # replacing a store leaves nothing behind
    assert sorted(os.listdir(tmp_path)) == ["large.zarr", "megno.nc", "megno.zarr", "small.nc"]
    with pytest.raises(ParameterError, match=r"use \.nc, \.zarr, \.svg, \.pdf, \.png"):
        cmap.save(tmp_path / "megno.csv")


# ----------------------------------------------------------------------------- stores
def test_interrupted_scan_resumes_from_its_store(tmp_path, kicked_rotor, monkeypatch):
    """A scan interrupted after two chunks leaves them in the store; the rerun computes
    only the other chunks, and the result equals an uninterrupted run exactly."""
    pytest.importorskip("zarr")
    from phaselab.scan import chaos_maps

    grid = state_grid(kicked_rotor, {"q": (0.1, 6.0, 9), "p": (0.1, 6.0, 8)})
    whole = chaos_map(kicked_rotor, grid, 300, indicator="megno", params={"K": 1.2}, batch_size=10)
    store = tmp_path / "megno.zarr"
    real = chaos_maps._chunk
    calls = []

    def interrupted(*args, **kwargs):
        if len(calls) == 2:
            raise KeyboardInterrupt
        calls.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(chaos_maps, "_chunk", interrupted)
    with pytest.raises(KeyboardInterrupt):
        chaos_map(kicked_rotor, grid, 300, indicator="megno", params={"K": 1.2}, batch_size=10, store=store)
    monkeypatch.setattr(chaos_maps, "_chunk", real)
    resumed = chaos_map(kicked_rotor, grid, 300, indicator="megno", params={"K": 1.2}, store=store)
    assert (resumed.run.chunks, resumed.run.reused, resumed.run.computed) == (8, 2, 6)
    assert resumed.run.chunk == 10                               # the store's own chunking
    np.testing.assert_array_equal(resumed.values, whole.values)
    np.testing.assert_array_equal(resumed.status, whole.status)
    again = chaos_map(kicked_rotor, grid, 300, indicator="megno", params={"K": 1.2}, store=store)
    assert again.run.computed == 0 and again.run.reused == 8
    np.testing.assert_array_equal(again.values, whole.values)
    assert again.meta["method"] == "map"
    with pytest.raises(ParameterError, match=r"different scan \(it differs in: params\)"):
        chaos_map(kicked_rotor, grid, 300, indicator="megno", params={"K": 1.3}, store=store)
    with pytest.raises(ParameterError, match="differs in: indicator, t"):
        chaos_map(kicked_rotor, grid, 200, indicator="fli", params={"K": 1.2}, store=store)
    (tmp_path / "notes.txt").write_text("x")
    with pytest.raises(ParameterError, match="a file of that name exists"):
        chaos_map(kicked_rotor, grid, 300, store=tmp_path / "notes.txt")


def test_frequency_map_resumes_and_is_labelled_by_the_same_helper(tmp_path, kicked_rotor):
    """A frequency map read back from its store equals the computed one, descriptions and
    all (the first chunk's description is kept in the store)."""
    pytest.importorskip("zarr")
    grid = state_grid(kicked_rotor, {"q": (0.1, 6.0, 4), "p": (0.5, 2.5, 3)})
    first = phaselab.frequency_map(kicked_rotor, grid, samples=256, params={"K": 0.5}, batch_size=4,
                                   store=tmp_path / "tunes.zarr")
    again = phaselab.frequency_map(kicked_rotor, grid, samples=256, params={"K": 0.5},
                                   store=tmp_path / "tunes.zarr")
    assert (first.run.computed, again.run.computed, again.run.reused) == (3, 0, 3)
    np.testing.assert_array_equal(first.nu, again.nu)
    assert again.names == first.names and again.unit == first.unit
    a, b = first.to_xarray(), again.to_xarray()
    assert a["nu"].dims == ("p", "q", "dof") and a.attrs["expression"] == b.attrs["expression"]
    assert a.attrs["params"] == b.attrs["params"] and a.attrs["phaselab_version"] == phaselab.__version__


# ----------------------------------------------------------------------------- escape maps
def first_exit(q0, p0, R):
    """First t > 0 with |q(t)| > R for q(t) = r cos(t - phi) (closed form, common practice):
    |cos u| > R / r on the intervals (k pi - a, k pi + a), a = arccos(R / r); inf if r <= R,
    0 for a seed outside from the start."""
    r = math.hypot(q0, p0)
    if abs(q0) > R:
        return 0.0
    if r <= R:
        return math.inf
    a = math.acos(R / r)
    u0 = -math.atan2(p0, q0)
    k = math.floor((u0 + a) / math.pi) + 1
    return k * math.pi - a - u0


def test_escape_times_of_an_oscillator(oscillator):
    """Escape from |q| <= R = 1: seeds of amplitude r <= R never leave; the others leave
    at the closed-form time of first_exit, found at the first step past it."""
    grid = state_grid(oscillator, {"q": (-1.5, 1.5, 31), "p": (-1.5, 1.5, 31)})
    dt = 0.01
    em = escape_map(oscillator, grid, 10.0, box={"q": (-1.0, 1.0)}, dt=dt, method="yoshida4")
    r = np.hypot(grid.states[:, 0], grid.states[:, 1])
    clear = (np.abs(r - 1.0) > 1e-3) & (np.abs(np.abs(grid.states[:, 0]) - 1.0) > 1e-9)  # no grazing
    np.testing.assert_array_equal(em.survived[clear], (r <= 1.0)[clear])
    exact = np.array([first_exit(q, p, 1.0) for q, p in grid.states])
    gone = np.isfinite(exact) & clear & (exact < 10.0)
    assert gone.sum() > 300
    err = em.survival[gone] - exact[gone]
    assert np.all(err > -1e-6) and np.all(err <= dt + 1e-6)
    np.testing.assert_array_equal(em.survival[em.survived], 10.0)
    assert em.image().shape == (31, 31)
    ap = em.aperture(center=(0.0, 0.0), directions=8)
    # the surviving set is the unit disc: every direction reaches r = 1 to the grid's
    # resolution (spacing 0.1; the ray is sampled every 0.05)
    assert np.all(np.abs(ap.radius - 1.0) <= 0.1) and not ap.at_edge.any()
    assert ap.minimum == pytest.approx(min(ap.radius))


def test_escape_iterates_of_a_rotation_map(rotation, monkeypatch):
    """q_k = r cos(phi - k w) for the rotation by w (closed form): the escape iterate from
    |q| <= 1 is the first k >= 1 with |q_k| > 1. Long caps run in segments that continue
    exactly where the last one stopped."""
    seeds = np.array([[0.3, 0.2], [0.9, 0.6], [1.2, 0.0], [0.0, 1.05], [0.5, -0.5], [2.0, 2.0]])
    w = 0.5
    k = np.arange(1, 401)
    r = np.hypot(seeds[:, 0], seeds[:, 1])
    phi = np.arctan2(seeds[:, 1], seeds[:, 0])
    qk = r[:, None] * np.cos(phi[:, None] - k[None, :] * w)
    outside = np.abs(qk) > 1.0
    expected = np.where(outside.any(axis=1), k[np.argmax(outside, axis=1)], 400).astype(float)
    expected[np.abs(seeds[:, 0]) > 1.0] = 0.0                 # outside from the start
    em = escape_map(rotation, seeds, 400, box={"q": (-1.0, 1.0)})
    np.testing.assert_array_equal(em.survival, expected)
    np.testing.assert_array_equal(em.survived, expected == 400)
    from phaselab.scan import escape

    monkeypatch.setattr(escape, "MAP_SEGMENT_VALUES", 40)     # segments of a few iterates
    pieces = escape_map(rotation, seeds, 400, box={"q": (-1.0, 1.0)})
    np.testing.assert_array_equal(pieces.survival, expected)


def test_escape_map_is_labelled(oscillator):
    pytest.importorskip("xarray")
    grid = state_grid(oscillator, {"q": (-1.5, 1.5, 4), "p": (-1.0, 1.0, 3)})
    em = escape_map(oscillator, grid, 5.0, box=1.0, dt=0.05)
    ds = em.to_xarray()
    assert ds["survival_time"].dims == ("p", "q") and ds["survival_time"].attrs["comment"] == "in model time units"
    assert ds.attrs["region"] == 1.0 and ds.attrs["t"] == 5.0 and ds.attrs["dt"] == 0.05
    np.testing.assert_array_equal(ds["survived"].values.ravel(), em.survived)


# ----------------------------------------------------------------------------- parameter scans
def test_parameter_scan_over_a_grid(tmp_path):
    # small-oscillation frequency of H = p^2/2 + w^2 q^2/2 is w (common practice): scan w and
    # read the period back from the equilibrium's eigenvalues
    O = phaselab.Hamiltonian("p**2/2 + w**2*q**2/2", ["q"], ["p"], params={"w": 1.0})

    def frequency(params):
        (eq,) = phaselab.equilibria(O, params=params)
        return float(np.max(np.abs(np.imag(eq.eigenvalues))))

    scan = parameter_scan(frequency, {"w": [0.5, 1.0, 2.0]})
    np.testing.assert_allclose(scan.array(), [0.5, 1.0, 2.0], rtol=1e-10)
    assert scan.points[2] == {"w": 2.0}
    ds = scan.to_xarray()
    assert ds["result"].dims == ("w",) and "frequency" in ds.attrs["function"]
    both = parameter_scan(lambda p: {"sum": p["a"] + p["b"], "product": p["a"] * p["b"]},
                          {"a": [1.0, 2.0], "b": [3.0, 4.0, 5.0]})
    ds = both.to_xarray()
    assert ds["product"].dims == ("a", "b")
    np.testing.assert_array_equal(ds["product"].values, [[3, 4, 5], [6, 8, 10]])
    pytest.importorskip("zarr")
    stored = parameter_scan(frequency, {"w": [0.5, 1.0, 2.0]}, store=tmp_path / "w.zarr")
    again = parameter_scan(frequency, {"w": [0.5, 1.0, 2.0]}, store=tmp_path / "w.zarr")
    assert again.run.computed == 0 and again.results == stored.results


# ----------------------------------------------------------------------------- progress
def test_progress_bar_shows_when_asked_or_when_long(kicked_rotor, capsys, monkeypatch):
    grid = state_grid(kicked_rotor, {"q": (0.1, 6.0, 6), "p": (0.1, 6.0, 6)})
    chaos_map(kicked_rotor, grid, 50, batch_size=9, progress=True)
    assert "megno" in capsys.readouterr().err
    chaos_map(kicked_rotor, grid, 50, batch_size=9, progress=False)
    chaos_map(kicked_rotor, grid, 50, batch_size=9)            # quick: no bar
    assert capsys.readouterr().err == ""
    from phaselab.scan import runner

    monkeypatch.setattr(runner, "AUTO_PROGRESS_SECONDS", 0.0)   # now every scan is "long"
    chaos_map(kicked_rotor, grid, 50, batch_size=9)
    err = capsys.readouterr().err
    assert "megno" in err and "36/36" in err


def test_run_batches_keeps_the_order():
    from phaselab.scan import run_batches

    assert run_batches(sum, [[1, 2], [3], [4, 5, 6]], progress=False) == [3, 3, 15]


# ----------------------------------------------------------------------------- bad input
def test_bad_input(kicked_rotor, oscillator):
    with pytest.raises(ParameterError, match="unknown indicator"):
        chaos_map(kicked_rotor, [[0.1, 0.2]], 10, indicator="colour")
    with pytest.raises(ParameterError, match="unknown state component"):
        state_grid(kicked_rotor, {"x": (0, 1), "p": (0, 1)})
    with pytest.raises(ParameterError, match="low < high"):
        state_grid(kicked_rotor, {"q": (1, 0), "p": (0, 1)})
    with pytest.raises(ParameterError, match="unknown parameters"):
        chaos_map(kicked_rotor, [[0.1, 0.2]], 10, params={"kick": 1.0})
    with pytest.raises(ParameterError, match="finite"):
        parameter_scan(lambda p: 0, {"K": [1.0, float("nan")]})
    with pytest.raises(ParameterError, match=r"states must have shape \(n_seeds, 2\)"):
        chaos_map(kicked_rotor, [[0.1, 0.2, 0.3]], 10)
    with pytest.raises(ParameterError, match="batch_size must be at least 1"):
        chaos_map(kicked_rotor, [[0.1, 0.2]], 10, batch_size=0)
    with pytest.raises(ParameterError, match="progress must be True, False or None"):
        chaos_map(kicked_rotor, [[0.1, 0.2]], 10, progress="yes")
    with pytest.raises(ParameterError, match="t must be positive"):
        chaos_map(oscillator, [[0.1, 0.2]], -1.0)
    with pytest.raises(ParameterError, match="not symplectic"):
        chaos_map(oscillator, [[0.1, 0.2]], 1.0, method="rk4")
    with pytest.raises(ParameterError, match="client must be a dask.distributed Client"):
        chaos_map(kicked_rotor, [[0.1, 0.2]], 10, client="localhost:8786")
    with pytest.raises(ParameterError, match="needs the region"):
        escape_map(oscillator, [[0.1, 0.2]], 1.0, box=None)
    with pytest.raises(ParameterError, match="box must be a positive number"):
        escape_map(oscillator, [[0.1, 0.2]], 1.0, box="wide")
    em = escape_map(oscillator, [[0.1, 0.2]], 1.0, box=1.0)
    with pytest.raises(ParameterError, match="needs an escape map over a grid"):
        em.aperture()
    grid = state_grid(oscillator, {"q": (-1, 1, 3), "p": (-1, 1, 3)})
    with pytest.raises(ParameterError, match="outside the grid"):
        escape_map(oscillator, grid, 1.0, box=2.0).aperture(center=(5.0, 0.0))
    with pytest.raises(ParameterError, match="must be callable"):
        parameter_scan(3, {"K": [1.0]})


def test_a_grid_prints_its_axes_and_valid_count_not_its_arrays():
    H = phaselab.Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)/2", ["x", "y"], ["px", "py"])
    g = phaselab.shell_grid(H, {"y": (-1.5, 1.5, 30), "py": (-0.7, 0.7, 20)}, energy=0.5, plane={"x": 0.0},
                            solve_for="px")
    # y^2/2 + py^2/2 <= E = 0.5 inside the unit circle (closed form): count the grid points there
    inside = int(np.count_nonzero(np.add.outer(np.linspace(-0.7, 0.7, 20) ** 2,
                                               np.linspace(-1.5, 1.5, 30) ** 2) <= 1.0))
    assert repr(g) == (f"StateGrid(y: 30 points in [-1.5, 1.5], py: 20 points in [-0.7, 0.7] on the shell "
                       f"E = 0.5; {inside} of 600 valid)")
