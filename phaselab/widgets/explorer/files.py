"""The explorer's files: the session JSON file (save and restore) and Export (figures, data,
an interactive page), with their buttons."""

from __future__ import annotations

import re

from phaselab.errors import ParameterError, PhaselabError
from phaselab.widgets import scales
from phaselab.widgets.session import read_session, write_session
from phaselab.widgets.views import make_view
from phaselab.widgets.explorer.session_buttons import SessionButtons
from phaselab.widgets.worker import Outcome

EXPORT_FORMATS = (".png", ".svg", ".pdf", ".csv", ".nc", ".html")


def safe_stem(text) -> str:
    """``text`` as a file name stem: runs of characters other than letters, digits, ``.``,
    ``_`` and ``-`` become ``-`` (``"explorer"`` if nothing is left)."""
    s = re.sub(r"[^A-Za-z0-9._-]+", "-", str(text)).strip("-.")
    return s or "explorer"


class SessionFiles(SessionButtons):
    """Export, save_session and load_session, and the buttons that call them (mixed into
    :class:`Explorer`)."""

    def export(self, stem=None, formats=None):
        """Save what the plot shows: figures (.png .svg .pdf) of the current window with
        everything drawn, data (.csv .nc) and an interactive page (.html) of the orbits.
        Runs in the calling thread; returns the paths."""
        from phaselab.export import save
        from phaselab.widgets.snapshot import write_figure

        sec = self.section()
        if sec is None:
            raise ParameterError("there are no orbits to export yet")
        stem = (stem or self.controls.stem.value or "section").strip()
        if not stem or any(c in stem for c in "/\\") or stem.startswith("."):
            raise ParameterError(f"file name {stem!r} must be a plain name without folders")
        stem = safe_stem(stem)
        snap = self.snapshot()
        paths = []
        for suffix in formats or self.export_formats:
            path = self.export_dir / f"{stem}{suffix}"
            if suffix in (".png", ".svg", ".pdf"):
                paths.append(write_figure(snap, path))
            elif suffix == ".html":
                paths.append(save(sec, path, title=self.name, overlays=[c for c in snap.accents]))
            else:
                paths.append(save(sec, path))
        return paths

    def save_session(self, path):
        """Write seeds, energy, parameters, view and colouring to a JSON file (see
        :mod:`phaselab.widgets.session`); returns the path."""
        return write_session(path, self.session.to_dict(self.name, self.view.kind, self._view_dict(),
                                                         self._color_dict()))

    def load_session(self, path):
        """Restore a session file: energy, parameters, view, colouring and orbits.

        The whole file is read and checked, and the view and colour scale it asks for are
        built, before the explorer changes anything: a file that cannot be restored leaves
        the explorer as it was."""
        data = read_session(path)
        view = self._session_view(path, data)
        color = self._session_color(path, data)
        v = data["view"]
        if view is not self.view:
            self.view = view
            self.figures.set_axis_labels(view.axis_labels)
            self.controls.set_title(self.name, view.describe())
            self._fill_view_controls()
        self.session.clear()
        self.session.history.clear()
        self.session.params.update(data["params"])
        if data.get("energy") is not None and self.view.uses_energy:
            self.session.energy = data["energy"]
        self._sync_sliders()
        if color is not None:
            self.color_by, self.scale = color
            self._scale_fixed = self.scale is not None  # the scale as it was saved
        self.figures.color_by_value(self.scale)
        self._show_scale()
        rng = v["ranges"]
        if not rng or not self.jobs.background:
            self.view.fit_ranges(self.session.energy, self.session.params)
        self._fitted = self.view.ranges
        self._equal = v["equal_aspect"]
        self.figures.set_ranges(tuple(tuple(r) for r in rng) if rng else self._fitted)
        self._draw_all()
        self._recompute_all(frame=True, keep_ranges=True)
        self._restore_orbits(path, data["orbits"])

    def _session_view(self, path, data):
        """The view a checked session file asks for (the current one when it names none)."""
        if data["kind"] != self.view.kind:
            raise ParameterError(f"{path}: kind: the file holds a {data['kind']} view, this explorer shows "
                                 f"a {self.view.kind}")
        unknown = [k for k in data["params"] if k not in self.session.params]
        if unknown:
            raise ParameterError(f"{path}: params: {', '.join(unknown)} not parameters of this system")
        v = data["view"]
        if self.view.kind != "section" or not (v["plane"] or v["solve_for"] or v["direction"]):
            return self.view
        try:
            return make_view(self.system, plane=v["plane"] or dict(self.view.plane),
                             solve_for=v["solve_for"] or self.view.solve_for,
                             sign=v["direction"] or self.view.sign, **self._view_options)
        except PhaselabError as exc:
            raise ParameterError(f"{path}: view: {exc}") from None

    def _session_color(self, path, data):
        """``(color_by, scale)`` from a checked session file; None keeps the current colouring
        (a colouring the explorer cannot restore, such as a custom function)."""
        col = data["color"]
        by = col["by"]
        if by is None:
            return None, None
        if by not in scales.DEFAULT_SCALES:
            return None
        try:
            return by, self._make_scale(by).with_limits(col["low"], col["anchor"], col["high"])
        except ParameterError as exc:
            raise ParameterError(f"{path}: color: {exc}") from None

    def _restore_orbits(self, path, orbits):
        """Start the orbits of a session file and say how many were restored."""
        by_crossings = {}
        for o in orbits:
            by_crossings.setdefault(o["crossings"], []).append(o["seed"])
        restored = sum(len(self.add_seeds(seeds, crossings=c)) for c, seeds in by_crossings.items())
        n = len(orbits)
        if not n:
            self._say(f"Restored the settings from {path}; the file holds no orbits.")
        elif self.jobs.background:
            self._say(f"Restoring {n} orbits from {path} ...")
        elif restored == n:
            self._say(f"Restored {n} orbits from {path}.")
        else:
            self._say(f"Restored {restored} of {n} orbits from {path}. {self._message}", refused=True)

    def _export_clicked(self):
        if self.section() is None:
            self._say("Export: there are no orbits to export yet.", refused=True)
            return
        stem, formats = self.controls.stem.value, self.export_formats
        try:
            snap_check = safe_stem((stem or "section").strip())
        except Exception:
            snap_check = "section"
        if not stem.strip() or any(c in stem for c in "/\\") or stem.strip().startswith("."):
            self._say(f"Export: file name {stem!r} must be a plain name without folders.", refused=True)
            return

        def compute():
            return self.export(snap_check, formats)

        def deliver(out: Outcome):
            if out.error is not None:
                self._report(out, what="export")
                return
            self._say("Saved " + ", ".join(str(p) for p in out.value))

        self._submit("export", "saving files", compute, deliver)

    def _view_dict(self):
        v = self.view
        out = {"axes": list(v.axis_names), "ranges": [list(r) for r in self.figures.view_ranges],
               "equal_aspect": bool(getattr(self, "_equal", False)), "crossings": self.crossings}
        if v.kind == "section":
            out.update(plane=dict(v.plane), solve_for=v.solve_for, direction=v.sign)
        return out

    def _color_dict(self):
        if self.scale is None or not isinstance(self.color_by, str):
            return {"by": None}
        return {"by": self.color_by, "low": self.scale.low, "anchor": self.scale.anchor, "high": self.scale.high}
