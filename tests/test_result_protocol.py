"""One protocol for every public result, checked the way a library checks every estimator:
one builder per result class (a small instance on a tiny system), and the same checks run on
each.

- where the result holds orbits: ``status`` (ints) and ``status_text`` (one word per orbit);
- where it is a batch: ``take`` and ``concat`` give the same orbits back;
- every result: ``to_xarray()`` is an ``xarray.Dataset`` with the CF attributes
  (``Conventions``, ``title``, ``history``, ``source``; ``long_name`` on every variable);
  ``save(path)`` writes every suffix of its row of the one format table
  (``phaselab.export.SAVERS``) and refuses another suffix naming those that fit;
  ``plot()`` returns a matplotlib ``Figure``.

The CF checks are those of the CF conventions 1.10, section 2.6 (global attributes) and
3.1-3.2 (``units``, ``long_name``), read back by xarray and by cf_xarray (a reference
reader of the conventions).
"""

import numpy as np
import pytest

import phaselab
from phaselab import models

xr = pytest.importorskip("xarray")

ROTOR = models.standard_map()
PARAMS = {"K": 1.2}
STATES = np.array([[0.3, 0.2], [1.0, 0.5], [2.0, 1.0]])
GOLDEN = (5 ** 0.5 - 1) / 2


def _pendulum():
    return models.pendulum()


def _grid():
    return phaselab.state_grid(ROTOR, {"q": (0.1, 6.0, 3), "p": (0.1, 6.0, 2)})


def _orbit(q=3.1, K=0.5):
    return phaselab.periodic_orbit(ROTOR, [q, 0.0], params={"K": K})


def _slice():
    c1, s1 = np.cos(2 * np.pi * 0.1234), np.sin(2 * np.pi * 0.1234)
    c2, s2 = np.cos(2 * np.pi * 0.3071), np.sin(2 * np.pi * 0.3071)
    rot = [[c1, 0, s1, 0], [0, c2, 0, s2], [-s1, 0, c1, 0], [0, -s2, 0, c2]]
    m = phaselab.compose_map([phaselab.LinearElement(rot)], ["q1", "q2"], ["p1", "p2"], name="rotations")
    sec = phaselab.section(m, np.array([[0.5, 0.2, 0.0, 0.1], [0.2, 0.6, 0.1, 0.0]]), crossings=40)
    return phaselab.section_slice(sec, "q2", 0.1, 0.3)


def _scan_point(point):
    return {"K2": point["K"] ** 2}


BUILDERS = {
    "Trajectory": lambda: phaselab.trajectory(_pendulum(), [[0.5, 0.0], [1.0, 0.0]], 2.0, dt=0.05),
    "Section": lambda: phaselab.section(ROTOR, STATES, crossings=20, params=PARAMS),
    "ShellSeeds": lambda: phaselab.shell_seeds(models.henon_heiles(),
                                               {"y": np.linspace(-0.2, 0.3, 4), "py": np.zeros(4)},
                                               energy=1 / 8, plane={"x": 0.0}, solve_for="px"),
    "LevelSet": lambda: phaselab.level_set(_pendulum(), {"q": (-3.0, 3.0), "p": (-2.0, 2.0)}, [0.0, 0.5],
                                           resolution=40),
    "Equilibrium": lambda: phaselab.equilibria(_pendulum())[0],
    "ChaosIndicators": lambda: phaselab.chaos_indicators(ROTOR, STATES, 40, params=PARAMS),
    "ChaosMap": lambda: phaselab.chaos_map(ROTOR, _grid(), 20, params=PARAMS, progress=False),
    "EscapeMap": lambda: phaselab.escape_map(ROTOR, _grid(), 20, box=4.0, params=PARAMS,
                                             progress=False),
    "FrequencyMap": lambda: phaselab.frequency_map(ROTOR, _grid(), samples=64, params={"K": 0.3},
                                                   progress=False),
    "ParameterScan": lambda: phaselab.parameter_scan(_scan_point, {"K": [0.5, 1.0, 1.5]}, progress=False),
    "Frequencies": lambda: phaselab.frequencies(ROTOR, STATES, samples=64, params={"K": 0.3}),
    "PeriodicOrbit": lambda: _orbit(),
    "PeriodicOrbits": lambda: phaselab.find_periodic_orbits(ROTOR, 1,
                                                            ranges={"q": (0.0, 6.2), "p": (-0.5, 0.5)},
                                                            params={"K": 0.5}, resolution=3),
    "Manifold": lambda: phaselab.manifold(_orbit(0.01, 1.2), length=1.0),
    "Family": lambda: phaselab.continue_family(_orbit(), "K", (0.5, 0.7), steps=4),
    "TorusBreakup": lambda: phaselab.torus_breakup(ROTOR, GOLDEN, "K", (0.9, 1.05), max_returns=5,
                                                   steps=3),
    "SectionSlice": _slice,
    "NormalForm": lambda: phaselab.normal_form(_pendulum(), [0.0, 0.0], 4),
    "NormalFormCheck": lambda: phaselab.normal_form_check(_pendulum(), phaselab.normal_form(_pendulum(), [0.0, 0.0], 4),
                                                          [[0.05], [0.1]], 60.0, samples=256),
}

ORBITS = {"Trajectory", "Section", "ChaosIndicators", "Frequencies"}
"""Results that hold orbits, each with its status."""

BATCHES = {"Trajectory", "Section", "ChaosIndicators"}
"""Results that are batches of orbits (select with take, join with concat)."""

_BUILT = {}


def built(name):
    if name not in _BUILT:
        _BUILT[name] = BUILDERS[name]()
    return _BUILT[name]


def test_every_public_result_class_is_walked():
    """The lazy table of phaselab is the list of public names: every class there (a name
    starting with a capital, not a model or an error) must have a builder here."""
    from phaselab import _LAZY

    model_classes = {"Hamiltonian", "AreaPreservingMap", "SymplecticMap", "Drift", "ThinKick", "LinearElement"}
    public = {n for n in _LAZY if n[0].isupper() and n not in model_classes}
    assert public == set(BUILDERS)
    assert set(phaselab.export.SAVERS) >= set(BUILDERS)


@pytest.mark.parametrize("name", sorted(BUILDERS))
def test_to_xarray_is_a_cf_dataset(name):
    ds = built(name).to_xarray()
    assert isinstance(ds, xr.Dataset)
    assert ds.attrs["Conventions"] == "CF-1.10"
    for key in ("title", "history", "source"):
        assert ds.attrs[key], key
    assert "phaselab" in ds.attrs["history"]
    for var in ds.variables:
        assert ds[var].attrs.get("long_name"), var
        assert "model time" not in str(ds[var].attrs.get("units", "")), var


@pytest.mark.parametrize("name", sorted(BUILDERS))
def test_plot_is_a_matplotlib_figure(name):
    from matplotlib.figure import Figure

    fig = built(name).plot()
    assert isinstance(fig, Figure)
    assert fig.axes


@pytest.mark.parametrize("name", sorted(BUILDERS))
def test_save_writes_every_format_of_its_row_and_names_them_otherwise(name, tmp_path):
    result = built(name)
    table = phaselab.export.SAVERS[name]
    for suffix in table:
        if suffix in ("", ".html"):
            continue                       # by size / bokeh page: checked in the export tests
        path = result.save(tmp_path / f"out{suffix}")
        assert path.exists(), suffix
        if suffix == ".nc":
            with xr.open_dataset(path) as back:
                assert back.attrs["Conventions"] == "CF-1.10"
        if suffix == ".zarr":
            back = xr.open_zarr(path)
            assert back.attrs["Conventions"] == "CF-1.10"
    with pytest.raises(phaselab.ParameterError) as err:
        result.save(tmp_path / "out.xyz")
    for suffix in table:
        if suffix:
            assert suffix in str(err.value)


@pytest.mark.parametrize("name", sorted(ORBITS))
def test_status_and_its_words(name):
    result = built(name)
    status = np.asarray(result.status)
    assert status.dtype.kind == "i"
    words = result.status_text
    assert len(words) == len(status)
    assert all(isinstance(w, str) and w for w in words)


@pytest.mark.parametrize("name", sorted(BATCHES))
def test_take_and_concat_give_the_same_orbits(name):
    result = built(name)
    first, rest = result.take([0]), result.take(list(range(1, len(result.status))))
    joined = type(result).concat([first, rest])
    np.testing.assert_array_equal(joined.status, result.status)
    data = {"Trajectory": "states", "Section": "points", "ChaosIndicators": "megno"}[name]
    np.testing.assert_array_equal(getattr(joined, data), getattr(result, data))


def test_cf_readers_find_the_axes_and_the_units(tmp_path):
    """cf_xarray finds the grid axes of a scan and the time axis of a trajectory, with the
    units the model declares (CF 1.10 section 4: axis attributes X, Y, T)."""
    cfx = pytest.importorskip("cf_xarray")  # noqa: F841 (registers the .cf accessor)
    rotor = phaselab.AreaPreservingMap(["q + p", "p + K*sin(q + p)"], ["q"], ["p"], params={"K": 1.2},
                                       units={"q": "rad", "p": "rad"})
    grid = phaselab.state_grid(rotor, {"q": (0.1, 6.0, 3), "p": (0.1, 6.0, 2)})
    path = phaselab.chaos_map(rotor, grid, 10, progress=False).save(tmp_path / "map.nc")
    with xr.open_dataset(path) as ds:
        assert ds.cf.axes == {"X": ["q"], "Y": ["p"]}
        assert ds.cf["X"].attrs["units"] == "rad" and ds.cf["Y"].attrs["units"] == "rad"
    flow = phaselab.Hamiltonian("p**2/(2*m) + k*x**2/2", ["x"], ["p"], params={"m": 1.0, "k": 1.0},
                                units={"x": "m", "p": "kg m/s", "t": "s", "m": "kg", "k": "kg/s^2"})
    tr = phaselab.trajectory(flow, [[1.0, 0.0]], 1.0, dt=0.1)
    path = tr.save(tmp_path / "orbit.nc")
    with xr.open_dataset(path) as ds:
        assert ds.cf.axes["T"] == ["time"]
        assert ds.cf["T"].attrs["units"] == "s"
        assert ds.attrs["Conventions"] == "CF-1.10" and "phaselab" in ds.attrs["source"]
    square = phaselab.state_grid(flow, {"x": (-1.0, 1.0, 2), "p": (-1.0, 1.0, 2)})
    path = phaselab.escape_map(flow, square, 1.0, box=5.0, dt=0.1, progress=False).save(tmp_path / "escape.nc")
    with xr.open_dataset(path) as ds:      # the model's time unit replaces "model time units"
        assert ds["survival_time"].attrs["units"] == "s"
        assert ds.cf["X"].attrs["units"] == "m" and ds.cf["Y"].attrs["units"] == "kg m s^-1"


def test_scan_store_opens_with_xarray_resumes_aloud_and_is_never_overwritten(tmp_path, capsys):
    """A scan's resume store is a Zarr group xarray.open_zarr reads (dimension names on every
    array); a resumed scan says how many chunks were done; save() refuses the store's name."""
    grid = _grid()
    store = tmp_path / "megno.zarr"
    first = phaselab.chaos_map(ROTOR, grid, 20, params=PARAMS, progress=False, store=store, batch_size=2)
    assert "resuming" not in capsys.readouterr().err
    again = phaselab.chaos_map(ROTOR, grid, 20, params=PARAMS, progress=False, store=store, batch_size=2)
    assert "resuming: 3 of 3 chunks done" in capsys.readouterr().err
    np.testing.assert_array_equal(again.values, first.values)
    ds = xr.open_zarr(store)
    assert ds.attrs["Conventions"] == "CF-1.10"
    np.testing.assert_array_equal(ds["values"].values, first.values)
    with pytest.raises(phaselab.ParameterError, match="resume store of a scan.*megno.zarr"):
        again.save(store)
    xr.open_zarr(store)        # still the store


def test_take_and_concat_keep_running_values_and_refuse_parts_that_do_not_fit():
    ci = phaselab.chaos_indicators(ROTOR, STATES, 40, params=PARAMS, history=True, save_every=10)
    back = type(ci).concat([ci.take([2]), ci.take([0, 1])])
    np.testing.assert_array_equal(back.history["megno"], ci.history["megno"][[2, 0, 1]])
    np.testing.assert_array_equal(back.seeds, ci.seeds[[2, 0, 1]])
    other = phaselab.chaos_indicators(ROTOR, STATES, 40, params=PARAMS, history=True, save_every=20)
    with pytest.raises(phaselab.ParameterError, match="record times"):
        type(ci).concat([ci, other])
    tr = built("Trajectory")
    longer = phaselab.trajectory(_pendulum(), [[0.5, 0.0]], 3.0, dt=0.05)
    with pytest.raises(phaselab.ParameterError, match="same times"):
        type(tr).concat([tr, longer])


# ------------------------------------------------------------------------------ figure footers
#: The system each builder's figure must name in its footer (None: a scan of a plain function).
SYSTEM_NAMES = {name: ROTOR.name for name in BUILDERS}
SYSTEM_NAMES.update({"Trajectory": models.pendulum().name, "LevelSet": models.pendulum().name,
                     "Equilibrium": models.pendulum().name, "NormalForm": models.pendulum().name,
                     "NormalFormCheck": models.pendulum().name, "ShellSeeds": models.henon_heiles().name,
                     "SectionSlice": "rotations", "ParameterScan": None})


def _footer(fig):
    """The figure-level texts that carry ``phaselab <version>`` and the lines above them."""
    texts = [t for t in fig.texts if t.get_text()]
    return " ".join(t.get_text() for t in texts), texts


def _kinds(ax):
    """Distinct (artist type, colour) pairs drawn in ``ax`` that a reader must tell apart:
    lines with data and markers or collections that are not colour-mapped; grey reference
    lines (equal red, green and blue) are not counted."""
    from matplotlib.colors import to_rgb

    kinds = set()
    for line in ax.get_lines():
        if len(np.atleast_1d(line.get_xdata())) and line.get_label() != "_nolegend_":
            r, g, b = to_rgb(line.get_color())
            if not (r == g == b):
                kinds.add(("line", line.get_linestyle(), line.get_marker(), (r, g, b)))
    for art in ax.collections:
        if art.get_array() is None and len(art.get_offsets()):
            kinds.add(("points", tuple(np.round(art.get_facecolor()[:1].ravel(), 3))))
    return kinds


@pytest.mark.parametrize("name", sorted(BUILDERS))
def test_every_figure_has_a_footer_keys_and_labelled_colour_bars(name):
    fig = built(name).plot()
    words, texts = _footer(fig)
    assert "phaselab " + phaselab.__version__ in words
    if SYSTEM_NAMES[name]:
        assert SYSTEM_NAMES[name] in words
    # every footer line lies inside the figure (matplotlib's own text measurement)
    fig.canvas.draw()
    right = fig.get_size_inches()[0] * fig.dpi
    for text in texts:
        assert text.get_window_extent().x1 <= right + 1, text.get_text()
    for ax in fig.axes:
        for art in list(ax.collections) + list(ax.images):
            bar = getattr(art, "colorbar", None)
            if bar is not None:
                assert (bar.ax.get_ylabel() or bar.ax.get_xlabel()).strip(), name
        kinds = _kinds(ax)
        if len(kinds) > 1:            # a key, with at least one entry for each kind drawn
            legend = ax.get_legend() or (fig.legends[0] if fig.legends else None)
            assert legend is not None, (name, kinds)
            assert len([t for t in legend.get_texts() if t.get_text()]) >= len(kinds), name


def test_footer_names_the_parameters_and_can_be_left_out():
    words, _ = _footer(built("Section").plot())
    assert all(f"{k} = {v:g}" in words for k, v in PARAMS.items())       # the section's own params
    words, _ = _footer(built("Family").plot())
    family = built("Family")
    assert f"K from {min(family.values):g} to {max(family.values):g}" in words
    assert "Model results" in words
    for name in ("Trajectory", "ChaosMap", "Family", "Section"):
        words, _ = _footer(built(name).plot(footer=False))
        assert "phaselab " + phaselab.__version__ not in words


def test_colour_bars_and_footers_carry_the_models_units():
    """A flow with declared units: the Lyapunov exponent's colour bar is per second and the
    survival time in seconds (common practice: an exponent of growth in time has the unit of
    inverse time); the footer gives each parameter and the step with their units."""
    flow = phaselab.Hamiltonian("p**2/(2*m) + k*x**2/2", ["x"], ["p"], params={"m": 1.0, "k": 1.0},
                                units={"x": "m", "p": "kg m/s", "t": "s", "m": "kg", "k": "kg/s^2"})
    square = phaselab.state_grid(flow, {"x": (-1.0, 1.0, 2), "p": (-1.0, 1.0, 2)})
    for result, label in ((phaselab.chaos_map(flow, square, 1.0, dt=0.1, indicator="lyapunov", progress=False),
                           "largest Lyapunov exponent (1/s)"),
                          (phaselab.escape_map(flow, square, 1.0, box=5.0, dt=0.1, progress=False),
                           "survival time (s)")):
        fig = result.plot()
        bars = [art.colorbar for ax in fig.axes for art in ax.collections if getattr(art, "colorbar", None)]
        assert [bar.ax.get_ylabel() for bar in bars] == [label]
        assert fig.axes[0].get_xlabel() == "$x$ [m]"      # typeset as on a section
        words, _ = _footer(fig)
        assert "m = 1 kg" in words and "dt = 0.1 s" in words and "Model results" in words
