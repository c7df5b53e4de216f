"""What the explorer holds: orbits, undo history, selection, energy and parameters.

:class:`Session` has no widget, plotting or compute imports. Every method that changes
something returns a :class:`Change` saying what changed; the explorer decides what to
redraw and what to compute. Sessions are saved to and read from a small JSON file of our
own (see :data:`FILE_FORMAT`), so a notebook can re-create the same picture:

.. code-block:: json

    {"format": "phaselab-explorer-session", "version": 1,
     "system": "two-mode molecule", "kind": "section",
     "energy": 0.9, "params": {"w_s": 1.0},
     "view": {"plane": {"s": 0.0}, "solve_for": "p_s", "direction": 1,
              "axes": ["b", "p_b"], "ranges": [[-1, 1], [-1, 1]], "equal_aspect": false,
              "crossings": 300},
     "color": {"by": "megno", "low": 0.0, "anchor": 2.0, "high": 8.0},
     "orbits": [{"seed": [0.3, 0.0], "crossings": 300}],
     "selected": 1}

``seed`` is the clicked point in the shown pair of axes; the rest of the state follows
from the energy (sections) or is zero-free (maps, portraits, driven systems: the seed is
the state). ``selected`` is an orbit's place in ``orbits`` counted from 1, or null.

Files of the linked explorer (three or more degrees of freedom) have kind ``"section4"``:
each ``seed`` holds every section coordinate (clicked pair and held values, in
``view.coordinates`` order), and ``view`` adds ``coordinates``, ``held`` (the sliders) and
``slab`` (``{"name", "center", "half_width"}`` or null).

Reading a file (bounded, every value checked before the explorer changes anything) is in
:mod:`phaselab.widgets.session_file`.
"""

from __future__ import annotations

import json
import os
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from phaselab.errors import ParameterError
from phaselab.model.params import finite_number
from phaselab.widgets.session_file import FILE_FORMAT, FILE_VERSION, read_session


@dataclass
class OrbitRecord:
    """One orbit on the plot.

    Attributes
    ----------
    id : int
        Stable identifier (1, 2, ... in order of creation).
    seed : tuple of float
        The clicked point in the shown plane ``(x, y)``.
    state : ndarray, shape (2n,), or None
        The full initial state at the current energy and parameters (None when the seed is
        outside the allowed region there).
    crossings : int
        Crossings (iterates, samples) asked for this orbit.
    points : ndarray, shape (m, 2)
        The shown coordinates of its crossings.
    section : Section or None
        The one-orbit result the points came from.
    color : str
        Its own colour (from the orbit palette).
    scalar : float
        The value it is coloured by (NaN when not coloured by a value).
    nu : tuple of float
        Its frequencies, when computed.
    note : str
        Why the orbit stopped early or is hidden ("" when it ran as asked).
    stop : tuple of float or None
        Where it stopped, in the shown plane, when it stopped early.
    revision : int
        Increases whenever the orbit's seed or setting changes (stale results are dropped).
    """

    id: int
    seed: tuple
    state: np.ndarray | None = None
    crossings: int = 300
    points: np.ndarray = field(default_factory=lambda: np.empty((0, 2)))
    section: object = None
    color: str = "#2b5d7d"
    scalar: float = float("nan")
    nu: tuple = ()
    note: str = ""
    stop: tuple | None = None
    revision: int = 0

    @property
    def shown(self) -> bool:
        return self.state is not None


@dataclass
class Change:
    """What a session operation changed.

    Attributes
    ----------
    added, removed : list of int
        Orbit ids that appeared or went away.
    recompute : list of int
        Orbit ids whose points must be computed again (all of them after an energy or
        parameter change).
    setting : bool
        The energy or a parameter changed (the frame must be recomputed).
    selection : bool
        The selected orbit changed.
    message : str
        A line for the status (empty for none).
    refused : bool
        The operation was refused (the message says why).
    """

    added: list = field(default_factory=list)
    removed: list = field(default_factory=list)
    recompute: list = field(default_factory=list)
    setting: bool = False
    selection: bool = False
    message: str = ""
    refused: bool = False

    @property
    def anything(self) -> bool:
        return bool(self.added or self.removed or self.recompute or self.setting or self.selection)



class Session:
    """Orbits, history, selection, energy and parameters of one explorer.

    Parameters
    ----------
    energy : float or None
    params : dict of str to float
    colors : sequence of str
        The orbit palette (cycled by id).
    """

    def __init__(self, energy, params, colors):
        self.energy = energy
        self.params = dict(params)
        self.colors = tuple(colors)
        self.orbits: list[OrbitRecord] = []
        self.history: list[tuple] = []
        self.selected: int | None = None
        self._next_id = 1

    # ------------------------------------------------------------------ reading
    def get(self, orbit_id) -> OrbitRecord | None:
        return next((o for o in self.orbits if o.id == orbit_id), None)

    @property
    def newest(self) -> OrbitRecord | None:
        return self.orbits[-1] if self.orbits else None

    @property
    def current(self) -> OrbitRecord | None:
        """The selected orbit, else the newest."""
        rec = self.get(self.selected) if self.selected is not None else None
        return rec or self.newest

    def shown(self) -> list[OrbitRecord]:
        return [o for o in self.orbits if o.shown]

    def ids(self) -> list[int]:
        return [o.id for o in self.orbits]

    # ------------------------------------------------------------------ orbits
    def new_record(self, seed, state, crossings) -> OrbitRecord:
        """A record with the next id (not yet part of the session: see :meth:`add`)."""
        rec = OrbitRecord(id=self._next_id, seed=(float(seed[0]), float(seed[1])),
                          state=None if state is None else np.asarray(state, float).copy(),
                          crossings=int(crossings), color=self.colors[(self._next_id - 1) % len(self.colors)])
        self._next_id += 1
        return rec

    def add(self, records) -> Change:
        records = list(records)
        if not records:
            return Change()
        self.orbits.extend(records)
        self.history.append(("add", [r.id for r in records]))
        self.selected = None
        return Change(added=[r.id for r in records], selection=True)

    def remove(self, orbit_id) -> Change:
        """Delete one orbit (undoable)."""
        rec = self.get(orbit_id)
        if rec is None:
            return Change(message=f"There is no orbit {orbit_id}.", refused=True)
        place = self.orbits.index(rec)
        self.orbits.remove(rec)
        self.history.append(("remove", (place, rec)))
        if self.selected == orbit_id:
            self.selected = None
        return Change(removed=[orbit_id], selection=True, message=f"Deleted orbit {orbit_id}.")

    def clear(self) -> Change:
        if not self.orbits:
            return Change(message="Cleared.")
        removed = self.ids()
        self.history.append(("clear", list(self.orbits)))
        self.orbits = []
        self.selected = None
        return Change(removed=removed, selection=True, message="Cleared.")

    def undo(self) -> Change:
        """Take back the last add, delete or clear."""
        if not self.history:
            return Change(message="Nothing to undo.")
        kind, payload = self.history.pop()
        if kind == "add":
            ids = set(payload)
            self.orbits = [o for o in self.orbits if o.id not in ids]
            if self.selected in ids:
                self.selected = None
            n = len(ids)
            return Change(removed=sorted(ids), selection=True,
                          message=f"Removed {n} orbit{'s' if n > 1 else ''}.")
        if kind == "remove":
            place, rec = payload
            self.orbits.insert(min(place, len(self.orbits)), rec)
            return Change(added=[rec.id], recompute=[rec.id], message=f"Restored orbit {rec.id}.")
        self.orbits = payload + self.orbits
        ids = [o.id for o in payload]
        return Change(added=ids, recompute=ids, message=f"Restored {len(payload)} orbits.")

    def move(self, orbit_id, seed, state) -> Change:
        rec = self.get(orbit_id)
        if rec is None:
            return Change()
        rec.seed = (float(seed[0]), float(seed[1]))
        rec.state = np.asarray(state, float).copy()
        rec.revision += 1
        return Change(recompute=[orbit_id])

    def select(self, orbit_id) -> Change:
        if orbit_id is not None and self.get(orbit_id) is None:
            return Change(message=f"There is no orbit {orbit_id}.", refused=True)
        self.selected = orbit_id
        return Change(selection=True)

    def more_crossings(self, orbit_id, factor=2, cap=100_000) -> Change:
        rec = self.get(orbit_id)
        if rec is None:
            return Change(message="No orbit selected.", refused=True)
        new = min(int(rec.crossings * factor), cap)
        if new == rec.crossings:
            return Change(message=f"Orbit {orbit_id} already has the most crossings allowed ({cap}).",
                          refused=True)
        rec.crossings = new
        rec.revision += 1
        return Change(recompute=[orbit_id], message=f"Orbit {orbit_id}: computing {new} crossings.")

    # ------------------------------------------------------------------ settings
    def set_energy(self, value) -> Change:
        v = finite_number(value, "energy")
        if self.energy is not None and v == self.energy:
            return Change()
        self.energy = v
        for o in self.orbits:
            o.revision += 1
        return Change(setting=True, recompute=self.ids())

    def set_params(self, values: dict) -> Change:
        new = {k: finite_number(v, f"parameter {k!r}") for k, v in values.items()}
        unknown = [k for k in new if k not in self.params]
        if unknown:
            raise ParameterError(f"unknown parameters {', '.join(unknown)}; this system has "
                                 + (", ".join(self.params) or "none"))
        if all(self.params[k] == v for k, v in new.items()):
            return Change()
        self.params.update(new)
        for o in self.orbits:
            o.revision += 1
        return Change(setting=True, recompute=self.ids())

    def invalidate(self) -> Change:
        """Every orbit must be computed again (the view changed)."""
        for o in self.orbits:
            o.revision += 1
        return Change(setting=True, recompute=self.ids())

    # ------------------------------------------------------------------ file
    def to_dict(self, system_name, kind, view, color) -> dict:
        """The session as plain JSON data (see the module docstring)."""
        shown_ids = self.ids()
        return {
            "format": FILE_FORMAT, "version": FILE_VERSION,
            "system": str(system_name), "kind": str(kind),
            "energy": self.energy, "params": {k: float(v) for k, v in self.params.items()},
            "view": view, "color": color,
            "orbits": [{"seed": [float(o.seed[0]), float(o.seed[1])], "crossings": int(o.crossings)}
                       for o in self.orbits],
            "selected": (shown_ids.index(self.selected) + 1) if self.selected in shown_ids else None,
        }


def write_session(path, data: dict) -> Path:
    """Write ``data`` as JSON to ``path`` atomically (temporary file in the same folder)."""
    path = Path(path)
    if path.suffix.lower() != ".json":
        raise ParameterError(f"a session file ends in .json, got {path.name!r}")
    if not path.parent.exists():
        raise ParameterError(f"cannot save the session to {path}: folder {path.parent} does not exist")
    text = json.dumps(data, indent=1, allow_nan=False)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=".json", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text + "\n")
        os.chmod(tmp, 0o644)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path


__all__ = ["OrbitRecord", "Change", "Session", "write_session", "read_session", "FILE_FORMAT",
           "FILE_VERSION"]
