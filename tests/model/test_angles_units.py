"""Angles and units declared with a model, and where they are used: sections, trajectories'
drawing, return maps and periodic orbits, frequency analysis, figures, files, the explorer.

References: wrapping is checked against numpy's ``np.mod`` on the lifted values (common
practice: an angle and the same angle plus a whole number of periods are one point); unit
strings against their canonical forms (the grammar in :mod:`phaselab.model.units`).
"""

import json
import math
import pickle
import warnings

import numpy as np
import pytest
import sympy as sp

import phaselab as pl
from phaselab import models
from phaselab.errors import ModelError
from phaselab.model.units import parse_unit

TWO_PI = 2 * math.pi


@pytest.fixture(scope="module")
def driven():
    return models.driven_pendulum()


@pytest.fixture(scope="module")
def strobe(driven):
    """Librating and rotating orbits of the driven pendulum, wrapped and lifted."""
    seeds = np.array([[0.5, 0.0], [2.5, 1.5], [0.1, 2.5], [3.0, -2.0]])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        wrapped = pl.section(driven, seeds, plane="stroboscopic", crossings=150)
        lifted = pl.section(driven, seeds, plane="stroboscopic", crossings=150, lifted=True)
    return wrapped, lifted


# ----------------------------------------------------------------------------- declaring
def test_angle_declarations_in_every_plain_form():
    q, p = sp.symbols("q p", real=True)
    forms = [{"q": 2 * sp.pi}, {"q": TWO_PI}, {q: "2*pi"}, ["q"], "q"]
    for form in forms:
        h = pl.Hamiltonian("p**2/2 - cos(q)", ["q"], ["p"], angles=form)
        assert h.angles == {"q": pytest.approx(TWO_PI)}
        assert h.angle_intervals["q"] == pytest.approx((-math.pi, math.pi))   # the centred convention
    h = pl.Hamiltonian("p**2/2 - cos(q)", ["q"], ["p"], angles={"q": (0, "2*pi")})
    assert h.angle_intervals == {"q": (0.0, pytest.approx(TWO_PI))}
    assert pl.Hamiltonian("p**2/2 - cos(q)", ["q"], ["p"]).angles == {}


@pytest.mark.parametrize("form, words", [
    ({"p": 2 * math.pi}, "momentum"),
    ({"r": 1.0}, "not a coordinate"),
    ({"q": -1.0}, "positive period"),
    ({"q": (1.0, 1.0)}, "positive period"),
    ({"q": "x + 1"}, ""),
    (3.0, "angles must map"),
])
def test_bad_angle_declarations_are_model_errors(form, words):
    with pytest.raises(pl.PhaselabError) as err:
        pl.Hamiltonian("p**2/2 - cos(q)", ["q"], ["p"], angles=form)
    assert words in str(err.value)


def test_a_maps_modulus_and_angles_are_one_concept():
    sm = models.standard_map()
    assert sm.angles == {"q": pytest.approx(TWO_PI), "p": pytest.approx(TWO_PI)}
    assert sm.angle_intervals["q"] == (0.0, pytest.approx(TWO_PI))   # modulus keeps [0, P)
    rules = [("p", "p + K*sin(q)"), ("q", "q + p")]
    a = pl.AreaPreservingMap(rules, ["q"], ["p"], params={"K": 0.9}, angles={"q": 2 * sp.pi})
    b = pl.AreaPreservingMap(rules, ["q"], ["p"], params={"K": 0.9}, modulus=[(-sp.pi, sp.pi), None])
    assert a.angle_intervals == b.angle_intervals and a.modulus == b.modulus
    assert a.modulus_low[0] == pytest.approx(-math.pi) and a.modulus[1] is None
    with pytest.raises(ModelError, match="not both"):
        pl.AreaPreservingMap(rules, ["q"], ["p"], params={"K": 0.9}, modulus=TWO_PI, angles=["q"])


def test_the_catalogue_declares_its_angles():
    assert set(models.pendulum().angles) == {"q"}
    assert set(models.driven_pendulum().angles) == {"q"}
    assert set(models.double_pendulum().angles) == {"theta1", "theta2"}
    assert models.henon_heiles().angles == {}
    ext = models.driven_pendulum().extended()
    assert ext.angles == {"q": pytest.approx(TWO_PI)}            # tau is not an angle


def test_angles_and_units_survive_pickling():
    for system in (models.pendulum(), models.driven_pendulum(), models.standard_map()):
        back = pickle.loads(pickle.dumps(system))
        assert back.angle_intervals == system.angle_intervals
        assert back.units == system.units


# ----------------------------------------------------------------------------- sections
def test_stroboscopic_section_of_the_driven_pendulum_is_wrapped(strobe):
    wrapped, lifted = strobe
    q, ql = wrapped.points[..., 0], lifted.points[..., 0]
    ok = np.isfinite(q)
    assert ok.sum() > 400
    assert np.nanmax(np.abs(ql)) > 10 * math.pi      # the rotating orbits run far when lifted
    assert np.all((q[ok] >= -math.pi) & (q[ok] < math.pi))
    # numpy reference: the same angle modulo 2 pi, into [-pi, pi)
    ref = np.mod(ql + math.pi, TWO_PI) - math.pi
    np.testing.assert_allclose(q[ok], ref[ok], rtol=0, atol=1e-12)
    np.testing.assert_array_equal(wrapped.points[..., 1], lifted.points[..., 1])   # momenta untouched


def test_a_section_without_angles_is_bit_identical(hh):
    seeds = np.array([[0.0, 0.1, 0.35, 0.0], [0.0, -0.2, 0.3, 0.05]])
    a = pl.section(hh, seeds, plane={"x": 0.0}, crossings=40)
    b = pl.section(hh, seeds, plane={"x": 0.0}, crossings=40, lifted=True)
    assert a.points.tobytes() == b.points.tobytes()
    assert hh.wrap_angles(a.points).tobytes() == a.points.tobytes()


def test_trajectories_stay_lifted_and_are_drawn_wrapped(driven):
    tr = pl.trajectory(driven, [0.0, 2.5], np.linspace(0.0, 60.0, 3001))
    q = tr.states[0, :, 0]
    assert q.max() > 4 * math.pi                       # lifted: the orbit rotates
    t, shown = tr.wrapped_path(0)
    finite = np.isfinite(shown[:, 0])
    assert np.all((shown[finite, 0] >= -math.pi) & (shown[finite, 0] < math.pi))
    breaks = np.count_nonzero(~finite)
    assert breaks >= int((q.max() - q.min()) / TWO_PI) - 1   # one break per turn, about
    np.testing.assert_allclose(shown[finite, 0], np.mod(q + math.pi, TWO_PI) - math.pi, atol=1e-12)
    np.testing.assert_array_equal(t[finite], tr.t)


# ----------------------------------------------------------------------------- structures
def test_a_rotating_periodic_orbit_winds_by_its_angle_without_a_given_shift(driven):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        orbit = pl.periodic_orbit(driven, [0.0, 2.0], returns=1)
    assert orbit.shift[0] == pytest.approx(TWO_PI)
    assert -math.pi <= orbit.points[0, 0] < math.pi
    # its image one driving period later is the same point plus one turn (numpy reference)
    lifted = pl.section(driven, orbit.points[:1], plane="stroboscopic", crossings=1, lifted=True).points[0, 0]
    np.testing.assert_allclose(lifted - orbit.points[0], [TWO_PI, 0.0], atol=1e-8)


def test_manifold_of_the_inverted_state_lies_in_the_angle_interval(driven):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        orbit = pl.periodic_orbit(driven, [math.pi, 0.0], returns=1)
        man = pl.manifold(orbit, length=2.0)
    q = np.concatenate([b[:, 0] for b in man.branches])
    assert np.all((q >= -math.pi) & (q < math.pi))
    for b in man.branches:                               # no segment jumps across the interval
        assert np.all(np.abs(np.diff(b[:, 0])) < math.pi)


# ----------------------------------------------------------------------------- frequencies
def test_frequency_analysis_reads_the_models_angles_on_lifted_samples(driven):
    seeds = np.array([[0.1, 2.5], [0.5, 0.0]])
    own = pl.frequencies(driven, seeds, samples=256, plane="stroboscopic")
    given = pl.frequencies(driven, seeds, samples=256, plane="stroboscopic", angles={"q": TWO_PI})
    np.testing.assert_array_equal(own.nu, given.nu)
    # rotation numbers use the lift; numpy reference: the mean advance of the lifted angle
    # per driving period, in turns, over the same 255 periods
    rho = pl.rotation_number(driven, seeds[:1], samples=256)
    s = pl.section(driven, seeds[:1], plane="stroboscopic", crossings=255, lifted=True)
    mean_turns = (s.points[0, -1, 0] - seeds[0, 0]) / (TWO_PI * 255)
    assert abs(mean_turns) > 0.9                       # it winds about once per period
    assert rho.nu[0, 0] == pytest.approx(mean_turns, abs=2e-3)


# ----------------------------------------------------------------------------- units
@pytest.mark.parametrize("text, canonical", [
    ("m", "m"), ("kg m/s", "kg m s^-1"), ("kg*m^2/s", "kg m^2 s^-1"), ("m s^-1", "m s^-1"),
    ("kg m**2 s**-2", "kg m^2 s^-2"), ("1", "1"), ("1/s", "s^-1"), ("m m", "m^2"),
    ("m/m", "1"), ("Hz^(1/2)", "Hz^(1/2)"),
])
def test_unit_strings_have_one_canonical_form(text, canonical):
    assert parse_unit(text) == canonical


@pytest.mark.parametrize("text", ["kg/m/s", "m^", "3m", "", "m+s", "x^(1/0)", "m s)", 5])
def test_bad_unit_strings_are_model_errors(text):
    with pytest.raises(ModelError):
        parse_unit(text)


def test_units_are_checked_where_the_model_is_made():
    h = pl.Hamiltonian("px**2/(2*m) + k*x**2/2", ["x"], ["px"], params={"m": 1.0, "k": 1.0},
                       units={"x": "m", "px": "kg m/s", "t": "s", "m": "kg", "k": "kg/s^2"})
    assert h.units == {"x": "m", "px": "kg m s^-1", "t": "s", "m": "kg", "k": "kg s^-2"}
    assert h.unit("px") == "kg m s^-1" and h.unit("k") == "kg s^-2"
    with pytest.raises(ModelError, match="not a coordinate"):
        pl.Hamiltonian("px**2/2", ["x"], ["px"], units={"y": "m"})
    with pytest.raises(ModelError, match="units of 'x'"):
        pl.Hamiltonian("px**2/2", ["x"], ["px"], units={"x": "m/s/s"})


def test_units_reach_figure_labels_and_section_files(tmp_path):
    pytest.importorskip("xarray")
    import xarray as xr

    h = pl.Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)/2 + x**2*y - y**3/3", ["x", "y"], ["px", "py"],
                       units={"x": "m", "y": "m", "px": "kg m/s", "py": "kg m/s", "t": "s"})
    seeds = np.array([[0.0, 0.1, 0.35, 0.0]])
    sec = pl.section(h, seeds, plane={"x": 0.0}, crossings=20)
    from phaselab.export.figures import section_figure

    fig = section_figure(sec)
    assert fig.axes[0].get_xlabel().endswith("[m]")
    assert fig.axes[0].get_ylabel().endswith("[kg m s^-1]")
    path = sec.save(tmp_path / "s.nc")
    with xr.open_dataset(path) as ds:
        assert ds["times"].attrs["units"] == "s"
        assert ds["points"].attrs["component_units"] == "m, m, kg m s^-1, kg m s^-1"
        assert json.loads(ds.attrs["units"])["px"] == "kg m s^-1"


def test_angles_reach_files_and_figure_axes(driven, strobe, tmp_path):
    pytest.importorskip("xarray")
    import xarray as xr

    wrapped, _ = strobe
    path = wrapped.save(tmp_path / "strobe.nc")
    with xr.open_dataset(path) as ds:
        assert json.loads(ds.attrs["angles"]) == {"q": [-math.pi, math.pi]}
        q = ds["points"].values[..., 0]
        assert np.nanmax(np.abs(q)) <= math.pi
    from phaselab.export.figures import section_figure

    assert section_figure(wrapped).axes[0].get_xlim() == pytest.approx((-math.pi, math.pi))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        orbit = pl.periodic_orbit(driven, [0.0, 0.0], returns=1)
    attrs = orbit.to_xarray().attrs
    assert json.loads(attrs["angles"]) == {"q": [-math.pi, math.pi]}


def test_files_of_systems_without_angles_or_units_are_unchanged(hh):
    from phaselab.engine.provenance import provenance

    meta = provenance(hh)
    assert "angles" not in meta and "units" not in meta


def test_the_explorers_window_spans_the_angles_period(driven):
    from phaselab.widgets.views.strobe_view import StrobeView
    from phaselab.widgets.views.portrait_view import PortraitView

    view = StrobeView(driven)
    assert view.ranges[0] == pytest.approx((-math.pi, math.pi))
    fitted = view.fit_ranges(None, {})
    assert fitted[0] == pytest.approx((-math.pi, math.pi))
    h = pl.Hamiltonian("p**2/2 - cos(q)", ["q"], ["p"], angles={"q": (0, 4 * sp.pi)})
    assert PortraitView(h).ranges[0] == pytest.approx((0.0, 4 * math.pi))


def test_a_family_figure_labels_its_parameter_with_its_unit():
    d = pl.Hamiltonian("p**2/2 - g*cos(q) + eps*cos(t)*sin(q)", ["q"], ["p"],
                       params={"g": 9.81, "eps": 0.05}, time="t", period=2 * sp.pi,
                       units={"g": "m/s^2", "t": "s"}, angles=["q"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        orbit = pl.periodic_orbit(d, [0.0, 0.0], returns=1)
        fam = pl.continue_family(orbit, "g", (9.81, 9.0), steps=4)
    assert fam.plot().axes[0].get_xlabel() == "g [m s^-2]"
    q = fam.states[:, 0]
    assert len(q) >= 2 and np.all((q >= -math.pi) & (q < math.pi))
