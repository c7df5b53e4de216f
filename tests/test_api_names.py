"""One name per concept, keyword-only options (issue 19, item 2).

Walks every public function and class of ``phaselab.__all__`` (and the public methods of the
result classes) with ``inspect.signature``: only the essentials listed below may be passed
by position (the system or the result worked on, the starting states, the length of the run);
every other parameter is keyword-only, and no retired name is a parameter anywhere. The
table of names is in DEVELOPERS.md ("Names of arguments").
"""

import inspect

import pytest

import phaselab

# the parameters each public callable may take by position, in order (nothing else)
POSITIONAL = {
    "Hamiltonian": ("expr", "coords", "momenta"),
    "AreaPreservingMap": ("update", "coords", "momenta"),
    "SymplecticMap": ("update", "coords", "momenta"),
    "compose_map": ("elements", "coords", "momenta"),
    "Drift": ("length", "coords"),
    "ThinKick": ("potential",),
    "LinearElement": ("matrix",),
    "trajectory": ("system", "states", "t"),
    "shell_seeds": ("system", "points"),
    "section": ("system", "states", "crossings"),
    "section_projection": ("section", "axes"),
    "section_slice": ("section", "name", "center", "half_width"),
    "projection_grid": ("section",),
    "level_set": ("system", "ranges", "levels"),
    "equilibria": ("system",),
    "lyapunov": ("system", "states", "t"),
    "chaos_indicators": ("system", "states", "t"),
    "chaos_map": ("system", "states", "t"),
    "escape_map": ("system", "states", "t"),
    "parameter_scan": ("function", "grid"),
    "shell_grid": ("system", "ranges"),
    "state_grid": ("system", "ranges"),
    "frequencies": ("system", "states", "t"),
    "rotation_number": ("system", "states", "t"),
    "frequency_map": ("system", "states", "t"),
    "explore": ("system",),
    "periodic_orbit": ("system", "states", "returns"),
    "find_periodic_orbits": ("system", "returns"),
    "continue_family": ("orbit", "parameter", "span"),
    "manifold": ("orbit",),
    "torus_breakup": ("system", "rotation_number", "parameter", "span"),
    "normal_form": ("system", "at", "order"),
    "normal_form_check": ("system", "nf", "actions", "t"),
    "branch_family": ("family", "bifurcation", "span"),
    "warm": (),
    "set_limits": (),
}

# public methods of the public classes that take more than their essentials
METHOD_POSITIONAL = {
    ("Hamiltonian", "from_lagrangian"): ("L", "coords", "velocities"),
    ("Trajectory", "wrapped_path"): ("orbit",),
    ("EscapeMap", "aperture"): (),
    ("FrequencyMap", "image"): ("what",),
    ("Family", "plot"): (),
    ("Manifold", "plot"): (),
}

RETIRED = {"seeds", "state0", "guess", "region", "bracket", "record_every", "max_period", "centre",
           "bounds", "n"}
"""Names no public parameter may have any more (the table in DEVELOPERS.md says what replaced
each); ``period`` is checked separately, since it remains the name of a time."""

# where `period` is a parameter it is a time (the driving period of a Hamiltonian)
PERIOD_IS_A_TIME = {"Hamiltonian", "from_lagrangian"}

ERRORS = {"PhaselabError", "ExpressionError", "ModelError", "ParameterError", "IntegrationError",
          "StudyFileError", "DataFileError", "MissingExtraError", "PhaselabWarning"}


def _public_callables():
    for name in phaselab.__all__:
        if name.startswith("__") or name in ERRORS:
            continue
        obj = getattr(phaselab, name)
        if inspect.ismodule(obj):
            continue
        yield name, obj


def _parameters(obj):
    params = list(inspect.signature(obj).parameters.values())
    return [p for p in params if p.name != "self"]


def _check(label, params, essentials):
    positional = [p.name for p in params
                  if p.kind in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD, p.VAR_POSITIONAL)]
    assert tuple(positional) == tuple(essentials), (
        f"{label}: positional parameters {positional}, expected only the essentials {list(essentials)}")
    for p in params:
        if p.name not in essentials:
            assert p.kind in (p.KEYWORD_ONLY, p.VAR_KEYWORD), f"{label}: {p.name} must be keyword-only"
        assert p.name not in RETIRED, f"{label}: retired parameter name {p.name!r}"


def test_every_public_callable_is_in_the_table():
    # a new public function must state its essentials here (and follow the names)
    names = {name for name, obj in _public_callables() if callable(obj)}
    functions = {n for n in names if not inspect.isclass(getattr(phaselab, n))}
    assert functions <= set(POSITIONAL), f"not in the table: {sorted(functions - set(POSITIONAL))}"


@pytest.mark.parametrize("name", sorted(POSITIONAL))
def test_only_the_essentials_are_positional(name):
    obj = getattr(phaselab, name)
    _check(name, _parameters(obj), POSITIONAL[name])


@pytest.mark.parametrize("cls, method", sorted(METHOD_POSITIONAL))
def test_methods_of_results_take_options_by_keyword(cls, method):
    fn = getattr(getattr(phaselab, cls), method)
    _check(f"{cls}.{method}", _parameters(fn), METHOD_POSITIONAL[(cls, method)])


def test_no_retired_name_anywhere_in_the_public_surface():
    """No public function, class or public method takes a retired name; `period` is only ever
    a time (the count of returns is `returns`)."""
    seen = 0
    for name, obj in _public_callables():
        # result classes are records built by phaselab (their fields are not arguments a user
        # passes); their public methods are checked
        targets = [(name, obj)] if name in POSITIONAL else []
        if inspect.isclass(obj):
            targets += [(f"{name}.{m}", f) for m, f in inspect.getmembers(obj, inspect.isfunction)
                        if not m.startswith("_")]
            targets += [(f"{name}.{m}", f.__func__) for m, f in vars(obj).items()
                        if isinstance(f, classmethod)]
        for label, fn in targets:
            try:
                params = _parameters(fn)
            except (TypeError, ValueError):
                continue
            seen += 1
            for p in params:
                assert p.name not in RETIRED, f"{label}: retired parameter name {p.name!r}"
                if p.name == "period":
                    assert label.split(".")[-1] in PERIOD_IS_A_TIME, (
                        f"{label}: `period` must be a time; a count of returns is `returns`")
    assert seen > 60


def test_periodic_orbit_counts_returns_and_reports_a_time():
    """`returns` is the count given; `period` on the result is the return time. The standard
    map's fixed point at the origin is a one-iterate orbit (its period, for a map, one iterate)."""
    orbit = phaselab.periodic_orbit(phaselab.models.standard_map(), [0.01, 0.0], 1, params={"K": 1.2})
    assert orbit.crossings == 1
    # the fixed point at the origin of the standard map is exact (p' = p + K sin q, q' = q + p'):
    # common practice
    assert abs(orbit.points[0][0]) < 1e-9 and abs(orbit.points[0][1]) < 1e-9


def test_options_passed_by_position_are_refused():
    H = phaselab.Hamiltonian("p**2/2 + q**2/2", ["q"], ["p"])
    with pytest.raises(TypeError):
        phaselab.trajectory(H, [0.1, 0.0], 1.0, 0.1)   # dt by position
    with pytest.raises(TypeError):
        phaselab.section(H, [[0.1, 0.0]], 5, {"q": 0.0})   # plane by position


def test_the_public_names_are_listed_once_and_all_resolve():
    # each public name once in __all__ (and so in dir(phaselab)), each one importable
    assert len(phaselab.__all__) == len(set(phaselab.__all__))
    assert dir(phaselab) == sorted(set(dir(phaselab)))
    assert all(getattr(phaselab, name, None) is not None for name in phaselab.__all__)
