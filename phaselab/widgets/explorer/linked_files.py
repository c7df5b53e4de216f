"""The linked explorer's files: the session JSON file (the format of the plane explorer, kind
``"section4"``, each orbit's seed in all section coordinates), Export (data of the
section; figures of the projection grid, or of the slice while a slab is on) and the
picture kept for a notebook opened without a kernel (the figure Export writes, at a low
resolution; kept by :mod:`~phaselab.widgets.explorer.picture_keeping`)."""

from __future__ import annotations

import numpy as np

from phaselab.errors import ParameterError
from phaselab.orbits.slices import projection_grid, section_slice
from phaselab.widgets import computations, scales
from phaselab.widgets.explorer.files import safe_stem
from phaselab.widgets.explorer.picture_keeping import PICTURE_DPI
from phaselab.widgets.orbit_sections import merge_sections
from phaselab.widgets.session import read_session, write_session
from phaselab.widgets.explorer.session_buttons import SessionButtons
from phaselab.widgets.worker import Outcome


def slice_of(section, coordinates, slab):
    """The :class:`~phaselab.orbits.slices.SectionSlice` the projections show: the slice of
    ``slab`` (a :class:`~phaselab.widgets.linked_points.Slab`) when given, else the grid of
    every pairwise projection of ``coordinates``."""
    if slab is None:
        return projection_grid(section, coordinates=list(coordinates))
    return section_slice(section, slab.name, slab.center, slab.half_width)


class LinkedFiles(SessionButtons):
    """section(), export, save_session and load_session (mixed into the linked explorer)."""

    def section(self):
        """Every shown orbit's crossings as one Section (None when there are none)."""
        return merge_sections([r.section for r in self.session.shown() if r.section is not None])

    def sliced(self):
        """What the projections show as a :class:`~phaselab.orbits.slices.SectionSlice`: the
        slice while the slab is on, else the grid of every pairwise projection."""
        sec = self.section()
        if sec is None:
            raise ParameterError("there are no orbits to export yet")
        return slice_of(sec, self.view.coordinates, self.slab)

    # ------------------------------------------------------------------ the kept picture
    def _picture_job(self):
        """What the picture kept for a notebook without kernel shows now (see
        :mod:`~phaselab.widgets.explorer.picture_keeping`): the figure Export writes, drawn
        in the worker from the shown orbits' sections; its state; a caption note."""
        sections = [r.section for r in self.session.shown() if r.section is not None]
        coords, slab, title = list(self.view.coordinates), self.slab, self.name
        state = self._picture_state()

        def compute():
            if not sections:
                return b""
            return computations.slice_png(slice_of(merge_sections(sections), coords, slab), dpi=PICTURE_DPI,
                                          title=title)

        return compute, state, self._picture_note(state)

    def _picture_state(self) -> dict:
        """What the picture shows, in numbers to compare with the page: orbits and points
        shown (inside the slab while it is on), the colouring, the slab, the seeding
        projection's window (x0, x1, y0, y1)."""
        main = self.figures.main
        window = [main.x_range.start, main.x_range.end, main.y_range.start, main.y_range.end]
        shown = self.session.shown()
        return {"orbits": len(shown), "points": int(len(self.shown_rows())) if shown else 0,
                "colour": self.color_by or "own",
                "slab": None if self.slab is None else self.slab.record(),
                "window": [float(f"{v:.6g}") for v in window]}

    def _picture_note(self, state) -> str:
        """The caption's words on what the picture shows beyond the plain grid."""
        if not state["orbits"]:
            return " (no orbits shown)"
        words = ""
        if self.slab is not None:
            label = self._labels[self.view.coordinates.index(self.slab.name)]   # as the axes write it
            words += f", the slice |{label} - {self.slab.center:.4g}| < {self.slab.half_width:.3g}"
        if self.color_by is not None:
            by = (self.view.label_of(self.color_by) if self.color_by in self.view.coordinates
                  else scales.MENU_WORDS.get(self.color_by, self.color_by))
            words += f"; points coloured by orbit (the live explorer colours them by {by})"
        return words

    def export(self, stem=None, formats=None):
        """Save figures (.png .svg .pdf: the grid, or the slice) and data (.csv .nc of the
        section) into ``export_dir``; returns the paths."""
        from phaselab.export import save

        sec = self.section()
        if sec is None:
            raise ParameterError("there are no orbits to export yet")
        stem = (stem or self.controls.stem.value or "section").strip()
        if not stem or any(ch in stem for ch in "/\\") or stem.startswith("."):
            raise ParameterError(f"file name {stem!r} must be a plain name without folders")
        stem = safe_stem(stem)
        picture = self.sliced()
        paths = []
        for suffix in formats or self.export_formats:
            path = self.export_dir / f"{stem}{suffix}"
            if suffix in (".png", ".svg", ".pdf"):
                paths.append(save(picture, path, title=self.name))
            elif suffix in (".csv", ".nc"):
                paths.append(save(sec, path))
            else:
                raise ParameterError(f"the linked explorer exports .png .svg .pdf .csv .nc, not {suffix}")
        return paths

    def save_session(self, path):
        """Write seeds (in all section coordinates), energy, parameters, view, slab and colour
        to a JSON file; returns the path."""
        v = self.view
        (name, value), = v.plane.items()
        view = {"plane": {name: value}, "solve_for": v.solve_for, "direction": v.sign,
                "axes": list(v.axis_names), "ranges": None, "equal_aspect": False, "crossings": self.crossings,
                "coordinates": list(v.coordinates), "held": dict(self.held),
                "slab": None if self.slab is None else self.slab.record()}
        color = {"by": self.color_by}
        data = self.session.to_dict(self.name, v.kind, view, color)
        for o, rec in zip(data["orbits"], self.session.orbits):
            o["seed"] = [float(x) for x in self._seed_of[rec.id]]
        return write_session(path, data)

    def load_session(self, path):
        """Restore a session file of this explorer; the file is read and checked whole, and
        nothing changes when it cannot be restored."""
        data = read_session(path)
        v = data["view"]
        if data["kind"] != self.view.kind:
            raise ParameterError(f"{path}: kind: the file holds a {data['kind']} view, this explorer shows "
                                 f"a {self.view.kind}")
        coords = list(self.view.coordinates)
        if v.get("coordinates") not in (None, coords):
            raise ParameterError(f"{path}: view.coordinates: {v['coordinates']} are not this section's {coords}")
        if (v["plane"] and v["plane"] != self.view.plane) or (v["axes"] and list(v["axes"]) != list(self.view.axis_names)):
            raise ParameterError(f"{path}: view: the file's plane {v['plane']} and axes {v['axes']} differ from this "
                                 f"explorer's {self.view.plane} and {list(self.view.axis_names)}; make the explorer "
                                 "with them")
        unknown = [k for k in data["params"] if k not in self.session.params]
        if unknown:
            raise ParameterError(f"{path}: params: {', '.join(unknown)} not parameters of this system")
        bad = [k for k, o in enumerate(data["orbits"]) if len(o["seed"]) != len(coords)]
        if bad:
            raise ParameterError(f"{path}: orbits[{bad[0]}].seed: needs {len(coords)} numbers ({', '.join(coords)})")
        by = data["color"]["by"]
        if by is not None and by not in coords and by not in ("megno", "lyapunov", "fli", "sali"):
            raise ParameterError(f"{path}: color.by: {by!r} is not a colouring of this explorer")
        self.session.clear()
        self.session.history.clear()
        self._seed_of.clear()
        self.session.params.update(data["params"])
        if data.get("energy") is not None:
            self.session.energy = data["energy"]
        self._sync(self.controls.sliders, {"energy": self.session.energy, **self.session.params})
        held = v.get("held") or {}
        self.set_held(**{k: x for k, x in held.items() if k in self.view.held})
        slab = v.get("slab")
        if slab:
            self.set_slab(slab["name"], slab["center"], slab["half_width"])
        else:
            self.clear_slab()
        self.set_color(by)
        self._redraw()
        seeds = [np.asarray(o["seed"], float) for o in data["orbits"]]
        a, b = self._pair
        for cross in sorted({o["crossings"] for o in data["orbits"]}):
            rows = [k for k, o in enumerate(data["orbits"]) if o["crossings"] == cross]
            self.add_seeds([(seeds[k][a], seeds[k][b]) for k in rows], crossings=cross,
                           held=[{c: float(seeds[k][coords.index(c)]) for c in self.view.held} for k in rows])
        n = len(data["orbits"])
        if not n:
            self._say(f"Restored the settings from {path}; the file holds no orbits.")
        elif not self.jobs.background:
            self._say(f"Restored {len(self.session.orbits)} of {n} orbits from {path}.",
                      refused=len(self.session.orbits) != n)
        else:
            self._say(f"Restoring {n} orbits from {path} ...")

    # ------------------------------------------------------------------ buttons
    def _export_clicked(self):
        stem, formats = self.controls.stem.value, self.export_formats

        def compute():
            return self.export(stem, formats)

        def deliver(out: Outcome):
            if out.error is not None:
                self._report(out, what="export")
                return
            self._say("Saved " + ", ".join(str(p) for p in out.value))

        self.jobs.submit("export", compute, deliver)

