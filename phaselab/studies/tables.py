"""The readers of a study file's tables ``[section]``, ``[states]``, ``[output]`` and
``[structure]`` (``[system]`` with ``[parameters]`` is read by :mod:`phaselab.studies.system_table`).

Each reader takes the :class:`~phaselab.studies.fields.Fields` context of the file and the
parsed TOML data, checks every key it owns (types, ranges, sizes, unknown keys) and returns
plain checked values or the records of :mod:`phaselab.studies.spec`. Expressions go only to
the safe parser (through the model constructors); every problem is a
:class:`~phaselab.errors.StudyFileError` naming the file, the dotted key and what is wrong.
"""

from __future__ import annotations

import math
from pathlib import PurePosixPath

import numpy as np

from phaselab.engine import inputs
from phaselab.errors import PhaselabError
from phaselab.export.figures import DPI_RANGE, MIN_FIGURE_SIZE
from phaselab.studies.fields import Fields
from phaselab.studies.paths import check_relative
from phaselab.studies.spec import (DATA_SUFFIXES, FIGURE_SUFFIXES, MAX_CROSSINGS, MAX_ORBITS,
                                   MAX_OUTPUTS, MAX_PIXELS, OutputSpec, SectionSpec, SeedSpec)

_SECTION_KEYS = ("plane", "direction", "energy", "crossings", "method", "dt", "axes", "box")
_SEED_FORMS = ("points", "line", "grid")
_SEED_KEYS = _SEED_FORMS + ("solve_for", "fixed")


# ====================================================================== [section]
def read_section(f: Fields, data: dict, system, params) -> SectionSpec:
    sec = f.table(data, "", "section", required=True)
    f.only_keys(sec, "section", _SECTION_KEYS)
    crossings = f.integer(sec, "section", "crossings", required=True, low=1, high=MAX_CROSSINGS)
    state = [s.name for s in system.state_symbols]
    show = None
    if "axes" in sec:
        show = tuple(f.names(sec, "section", "axes"))
        if len(show) != 2:
            raise f.error("section.axes", f"must name two state components, got {len(show)}")
        for i, name in enumerate(show):
            if name not in state:
                raise f.error(f"section.axes[{i}]", f"{name!r} is not a coordinate or momentum; the state is "
                                                   + ", ".join(state))
    box = f.get_number(sec, "section", "box", positive=True)
    is_map = system.kind == "map"
    if is_map:
        for key in ("plane", "direction", "energy", "method", "dt"):
            if key in sec:
                raise f.error(f"section.{key}", "not used for a map (its section is every iterate); "
                                                "give section.crossings (and optionally axes, box)")
        return SectionSpec("map", None, None, 1, None, crossings, "map", None, show, box)

    if "plane" not in sec:
        raise f.error("section.plane", "missing; this key is required")
    plane = sec["plane"]
    if isinstance(plane, str) and len(plane) > 200:
        raise f.error("section.plane", "longer than 200 characters")
    if plane == "stroboscopic" or (isinstance(plane, str) and plane.strip() == "stroboscopic"):
        if system.is_autonomous or getattr(system, "period", None) is None:
            raise f.error("section.plane", "a stroboscopic section needs a time-periodic system "
                                           "(system.time and system.period)")
        kind, coord, value = "stroboscopic", None, None
        for key in ("direction", "energy"):
            if key in sec:
                raise f.error(f"section.{key}", "not used for a stroboscopic section")
    else:
        if not system.is_autonomous:
            raise f.error("section.plane", "this system depends on time; use plane = \"stroboscopic\"")
        kind = "plane"
        coord, value = _plane(f, plane, system)
    direction = 1
    if "direction" in sec:
        d = sec["direction"]
        if d in ("up", 1) and not isinstance(d, bool):
            direction = 1
        elif d in ("down", -1) and not isinstance(d, bool):
            direction = -1
        else:
            raise f.error("section.direction", f"must be \"up\" (the coordinate increasing through the plane) "
                                               f"or \"down\", got {d!r}")
    energy = f.get_number(sec, "section", "energy")
    method = f.string(sec, "section", "method", default="auto", max_length=40)
    if method != "auto":
        from phaselab.engine.integrators import get_method

        try:
            get_method(method, system.extended() if kind == "stroboscopic" else system)
        except PhaselabError as exc:
            raise f.error("section.method", str(exc)) from None
    dt = f.get_number(sec, "section", "dt", positive=True)
    if dt is not None and dt < 1e-7:
        raise f.error("section.dt", f"{dt:g} is too small a step (the limit is 1e-7)")
    return SectionSpec(kind, coord, value, direction, energy, crossings, method, dt, show, box)


def _plane(f: Fields, plane, system) -> tuple[str, float]:
    """``section.plane`` of an autonomous flow: ``"x = 0"`` (text, the value a number or a
    constant expression) or a table ``{ x = 0.0 }`` (the API's mapping); any one state
    component, checked by the same parser as ``phaselab.section`` (engine/inputs.plane)."""
    example = f"\"{system.coords[0].name} = 0\""
    if isinstance(plane, str):
        if plane.count("=") != 1:
            raise f.error("section.plane", f"write the plane as \"<component> = <value>\" (for example "
                                           f"{example}), a table {{ {system.coords[0].name} = 0.0 }} "
                                           f"or \"stroboscopic\", got {plane!r}")
        left, right = (s.strip() for s in plane.split("="))
        mapping = {left: f.number(right, "section.plane")}
    elif isinstance(plane, dict):
        mapping = {key: f.number(v, f"section.plane.{key}") for key, v in plane.items()}
    else:
        raise f.error("section.plane", f"must be text such as {example}, a table or \"stroboscopic\"")
    try:
        where = inputs.plane(system, mapping, what="plane", stroboscopic=False)
        index, value = where.single("plane")
    except PhaselabError as exc:
        raise f.error("section.plane", str(exc)) from None
    return system.state_symbols[index].name, float(value)


# ====================================================================== [states]
def read_states(f: Fields, data: dict, system, section: SectionSpec) -> SeedSpec:
    sd = f.table(data, "", "states", required=True)
    f.only_keys(sd, "states", _SEED_KEYS)
    forms = [k for k in _SEED_FORMS if k in sd]
    if len(forms) != 1:
        got = ", ".join(f"states.{k}" for k in forms) or "none"
        raise f.error("states", f"give exactly one of states.points, states.line or states.grid (got {got})")
    form = forms[0]
    state = [s.name for s in system.state_symbols]

    solve_for = None
    if "solve_for" in sd:
        if section.kind != "plane":
            raise f.error("states.solve_for", "only a plane section puts states on an energy shell")
        solve_for = f.name(sd["solve_for"], "states.solve_for")
        if solve_for not in state:
            raise f.error("states.solve_for", f"{solve_for!r} is not a coordinate or momentum; the state is "
                                              + ", ".join(state))
        if solve_for == section.coordinate:
            raise f.error("states.solve_for", f"{solve_for!r} is fixed by the plane; solve another component")
        if section.energy is None:
            raise f.error("section.energy", "missing; states.solve_for needs the energy of the shell")
    elif section.energy is not None and section.kind == "plane":
        raise f.error("section.energy", "given but states.solve_for is not; name the momentum to solve "
                                        "from H = energy, or drop the energy")

    # components the file must give: all but the plane's coordinate and the solved momentum
    implied = {section.coordinate, solve_for} - {None}
    needed = [s for s in state if s not in implied]

    table = sd[form]
    full = f"states.{form}"
    if not isinstance(table, dict):
        raise f.error(full, f"must be a table of columns by component name, e.g. {{ {needed[0]} = [...] }}")
    fixed = f.table(sd, "states", "fixed")
    for name in list(table) + list(fixed):
        if name == "count" and form == "line":
            continue
        where = f"{full}.{name}" if name in table else f"states.fixed.{name}"
        if name not in state:
            raise f.error(where, f"{name!r} is not a coordinate or momentum; the state is " + ", ".join(state))
        if name in implied:
            what = "the plane sets it" if name == section.coordinate else "it is solved from the energy"
            raise f.error(where, f"{name!r} cannot be given: {what}")
    both = set(table) & set(fixed)
    if both:
        raise f.error(f"states.fixed.{sorted(both)[0]}", "given both here and in " + full)

    columns: dict[str, np.ndarray] = {}
    if form == "points":
        lengths = set()
        for name, col in table.items():
            vals = f.numbers(col, f"{full}.{name}")
            if len(vals) > MAX_ORBITS:
                raise f.error(f"{full}.{name}", f"{len(vals)} states; the limit is {MAX_ORBITS}")
            columns[name] = np.array(vals, dtype=float)
            lengths.add(len(vals))
        if len(lengths) > 1:
            raise f.error(full, f"columns have different lengths: {sorted(lengths)}")
        count = lengths.pop() if lengths else 0
    elif form == "line":
        count = f.integer(table, full, "count", required=True, low=1, high=MAX_ORBITS)
        for name, ends in table.items():
            if name == "count":
                continue
            a, b = f.numbers(ends, f"{full}.{name}", length=2)
            columns[name] = np.linspace(a, b, count)
    else:
        sizes = []
        axes = []
        for name, spec in table.items():
            where = f"{full}.{name}"
            if not isinstance(spec, list) or len(spec) != 3:
                raise f.error(where, "must be [low, high, count]")
            low, high = f.numbers(spec[:2], where)
            n = spec[2]
            if isinstance(n, bool) or not isinstance(n, int) or n < 1:
                raise f.error(f"{where}[2]", f"the count must be a whole number >= 1, got {n!r}")
            if n > MAX_ORBITS:
                raise f.error(f"{where}[2]", f"{n} states; the limit is {MAX_ORBITS}")
            sizes.append(n)
            axes.append((name, np.linspace(low, high, n)))
        count = math.prod(sizes) if sizes else 0
        if count > MAX_ORBITS:
            raise f.error(full, f"the grid has {' x '.join(map(str, sizes))} = {count} states; "
                                f"the limit is {MAX_ORBITS}")
        if axes:
            mesh = np.meshgrid(*[a for _, a in axes], indexing="ij")
            columns = {name: m.ravel() for (name, _), m in zip(axes, mesh)}
    if count < 1:
        raise f.error(full, "gives no states")
    for name, value in fixed.items():
        columns[name] = np.full(count, f.number(value, f"states.fixed.{name}"))
    missing = [s for s in needed if s not in columns]
    if missing:
        raise f.error(full, "missing value" + ("s" if len(missing) > 1 else "") + " for "
                      + ", ".join(missing) + " (give them as columns or in states.fixed)")
    order = tuple(s for s in state if s in columns)
    values = np.column_stack([columns[s] for s in order]).astype(float)
    return SeedSpec(form, order, values, solve_for)


# ====================================================================== [output]
def read_output(f: Fields, data: dict):
    out = f.table(data, "", "output")
    f.only_keys(out, "output", ("folder", "figure", "data", "orbits", "normal_form"))
    folder = ""
    if "folder" in out:
        folder = f.string(out, "output", "folder", max_length=200)
        check_relative(f, folder, "output.folder")
    specs: list[OutputSpec] = []
    for kind in ("figure", "data", "orbits", "normal_form"):
        items = out.get(kind, [])
        if isinstance(items, dict):
            items = [items]
        if not isinstance(items, list):
            raise f.error(f"output.{kind}", "must be a list of tables ([[output." + kind + "]])")
        for i, item in enumerate(items):
            full = f"output.{kind}[{i}]"
            if not isinstance(item, dict):
                raise f.error(full, "must be a table with at least a file key")
            if kind == "figure":
                f.only_keys(item, full, ("file", "size", "dpi", "title", "point_size"))
            elif kind == "normal_form":
                f.only_keys(item, full, ("file", "size", "dpi", "title", "j_max"))
            else:
                f.only_keys(item, full, ("file",))
            name = f.string(item, full, "file", required=True, max_length=300)
            check_relative(f, name, f"{full}.file")
            suffixes = {"figure": FIGURE_SUFFIXES, "data": DATA_SUFFIXES, "orbits": ORBIT_SUFFIXES,
                        "normal_form": NORMAL_FORM_SUFFIXES}[kind]
            suffix = PurePosixPath(name).suffix.lower()
            if suffix not in suffixes:
                raise f.error(f"{full}.file", f"a {kind} file ends in {', '.join(suffixes)}, got {name!r}")
            options = {}
            if kind == "normal_form":
                if suffix in FIGURE_SUFFIXES:
                    options = _figure_options(f, item, full)
                    j_max = f.get_number(item, full, "j_max", positive=True)
                    if j_max is not None:
                        options["j_max"] = j_max
                elif set(item) - {"file"}:
                    raise f.error(f"{full}.{sorted(set(item) - {'file'})[0]}", "only figures (.svg, .pdf, .png) take options")
            if kind == "figure":
                if "size" in item:
                    w, h = f.numbers(item["size"], f"{full}.size", length=2)
                    low_w, low_h = MIN_FIGURE_SIZE
                    if not (low_w <= w <= 40.0 and low_h <= h <= 40.0):
                        raise f.error(f"{full}.size", f"must be [width, height] in inches between {low_w:g} x "
                                                      f"{low_h:g} and 40 x 40, got [{w:g}, {h:g}]")
                    options["size"] = (w, h)
                dpi = f.get_number(item, full, "dpi", low=DPI_RANGE[0], high=DPI_RANGE[1])
                if dpi is not None:
                    options["dpi"] = dpi
                w, h = options.get("size", (6.0, 4.5))
                if max(w, h) * options.get("dpi", 150) > MAX_PIXELS:
                    raise f.error(f"{full}.dpi", f"the figure would be {w * options.get('dpi', 150):.0f} x "
                                                 f"{h * options.get('dpi', 150):.0f} pixels; the limit is "
                                                 f"{MAX_PIXELS} on a side")
                if "title" in item:
                    options["title"] = f.drawn_text(item, full, "title", max_length=200)
                ps = f.get_number(item, full, "point_size", positive=True, high=20)
                if ps is not None:
                    options["point_size"] = ps
            specs.append(OutputSpec(kind, name, options))
    if len(specs) > MAX_OUTPUTS:
        raise f.error("output", f"{len(specs)} files; the limit is {MAX_OUTPUTS}")
    targets = [PurePosixPath(s.file).as_posix() for s in specs]
    dupes = sorted({t for t in targets if targets.count(t) > 1})
    if dupes:
        raise f.error("output", f"file {dupes[0]!r} is named twice")
    return folder, specs


ORBIT_SUFFIXES = (".json", ".nc")
NORMAL_FORM_SUFFIXES = (".tex", ".json", ".nc") + FIGURE_SUFFIXES


def _figure_options(f: Fields, item: dict, full: str) -> dict:
    """size, dpi and title of a normal form's figure (checked like a section figure's)."""
    options = {}
    if "size" in item:
        w, h = f.numbers(item["size"], f"{full}.size", length=2)
        if not (2.0 <= w <= 40.0 and 1.5 <= h <= 40.0):
            raise f.error(f"{full}.size", f"must be [width, height] in inches between 2 x 1.5 and 40 x 40, "
                                          f"got [{w:g}, {h:g}]")
        options["size"] = (w, h)
    dpi = f.get_number(item, full, "dpi", low=20, high=600)
    if dpi is not None:
        options["dpi"] = dpi
    w, h = options.get("size", (5.5, 4.0))
    if max(w, h) * options.get("dpi", 150) > MAX_PIXELS:
        raise f.error(f"{full}.dpi", f"the figure would be more than {MAX_PIXELS} pixels on a side")
    if "title" in item:
        options["title"] = f.drawn_text(item, full, "title", max_length=200)
    return options


def read_structure(f: Fields, data: dict, system, section):
    """The optional ``[structure]`` table (see :class:`~phaselab.studies.spec.StructureSpec`)."""
    from phaselab.studies.spec import MAX_STARTS, StructureSpec

    if "structure" not in data:
        return None
    table = f.table(data, "", "structure")
    f.only_keys(table, "structure", ("returns", "ranges", "resolution", "manifolds", "manifold_length"))
    returns = f.integer(table, "structure", "returns", required=True, low=1, high=1000)
    region = table.get("ranges")
    if not isinstance(region, dict) or len(region) != 2:
        raise f.error("structure.ranges", "must name two state components with [low, high], "
                                          "e.g. { y = [-0.4, 0.6], py = [-0.3, 0.3] }")
    names = [s.name for s in system.state_symbols]
    checked = {}
    for key, rng in region.items():
        if key not in names:
            raise f.error(f"structure.ranges.{key}", f"is not a state component; the state is "
                                                     f"{', '.join(names)}")
        lo, hi = f.numbers(rng, f"structure.ranges.{key}", length=2)
        if not lo < hi:
            raise f.error(f"structure.ranges.{key}", f"needs low < high, got [{lo:g}, {hi:g}]")
        checked[key] = (lo, hi)
    resolution = f.integer(table, "structure", "resolution", default=8, low=1, high=100)
    if resolution ** 2 > MAX_STARTS:
        raise f.error("structure.resolution", f"{resolution} x {resolution} starts; the limit is {MAX_STARTS}")
    manifolds = table.get("manifolds", False)
    if not isinstance(manifolds, bool):
        raise f.error("structure.manifolds", f"must be true or false, got {manifolds!r}")
    length = f.get_number(table, "structure", "manifold_length", positive=True, high=100)
    return StructureSpec(returns=int(returns), ranges=checked, resolution=resolution, manifolds=manifolds,
                         manifold_length=2.0 if length is None else float(length))
