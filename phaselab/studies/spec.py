"""What a checked study file describes: its limits and the plain records the reader builds.

:class:`Study` holds the system, the section, the starting states and the outputs of one study file, as
checked Python values; the table readers (:mod:`phaselab.studies.tables`) fill it and the
renderer (:mod:`phaselab.studies.render`) consumes it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from phaselab.studies.paths import confined_path

#: most orbits (seeds) one study may ask for
MAX_ORBITS = 5_000
#: most crossings (or map iterates) per orbit
MAX_CROSSINGS = 100_000
#: most section points in total (orbits x crossings)
MAX_POINTS = 5_000_000
#: most output files
MAX_OUTPUTS = 20
#: largest figure side in pixels (size x dpi)
MAX_PIXELS = 6_000

FIGURE_SUFFIXES = (".svg", ".pdf", ".png")
DATA_SUFFIXES = (".csv", ".nc")


@dataclass
class SectionSpec:
    """What to section.

    Attributes
    ----------
    kind : str
        ``"plane"`` (a coordinate equal to a value), ``"stroboscopic"`` (once per driving
        period of a time-periodic H) or ``"map"`` (every iterate of a map).
    coordinate : str or None
        The state component the plane fixes (a coordinate or a momentum).
    value : float or None
        Its value on the plane.
    direction : int
        +1 for crossings with the coordinate increasing, -1 for decreasing.
    energy : float or None
        The energy shell the starting states are put on (with ``states.solve_for``).
    crossings : int
        Crossings (or iterates) recorded per orbit.
    method : str
        Integrator name, or ``"auto"``.
    dt : float or None
        Step size (model time units); None lets the library choose.
    axes : tuple of str or None
        The two state components to plot (None: the library's default for the plane).
    box : float or None
        Escape radius: an orbit with any |component| above it is stopped and flagged.
    """

    kind: str
    coordinate: str | None
    value: float | None
    direction: int
    energy: float | None
    crossings: int
    method: str
    dt: float | None
    axes: tuple | None = None
    box: float | None = None


@dataclass
class SeedSpec:
    """Initial conditions.

    Attributes
    ----------
    form : str
        ``"points"``, ``"line"`` or ``"grid"`` (how the file gave them).
    columns : tuple of str
        The state components given, in state order.
    values : ndarray, shape (n_orbits, len(columns))
        Their values, one row per orbit.
    solve_for : str or None
        The component solved from H = energy (None: the states are given whole).
    """

    form: str
    columns: tuple
    values: np.ndarray
    solve_for: str | None

    @property
    def count(self) -> int:
        return int(self.values.shape[0])


@dataclass
class StructureSpec:
    """The ``[structure]`` table: periodic orbits to find (and the manifolds of the unstable
    ones to grow), drawn over the section's figures and written by ``[[output.orbits]]``.

    Attributes
    ----------
    returns : int
        Returns per period of the orbit (iterates, drive periods or crossings of the plane).
    ranges : dict of str to (float, float)
        Two state components and the ranges a grid of starts covers.
    resolution : int
        Starts per axis of that grid.
    manifolds : bool
        Grow both branches of the stable and unstable manifolds of every unstable orbit.
    manifold_length : float
        Arclength of each branch from each orbit point (reduced coordinates).
    """

    returns: int
    ranges: dict
    resolution: int = 8
    manifolds: bool = False
    manifold_length: float = 2.0


MAX_STARTS = 400
"""Most starting points of a study's periodic-orbit search (resolution squared)."""


@dataclass
class OutputSpec:
    """One file to write: a figure (.svg/.pdf/.png), a section data file (.csv/.nc), the
    periodic orbits of ``[structure]`` (.json/.nc), or the normal form of ``[normal_form]``
    (.tex/.json/.nc, or its detuning figure as .svg/.pdf/.png).

    Attributes
    ----------
    kind : str
        ``"figure"``, ``"data"``, ``"orbits"`` or ``"normal_form"``.
    file : str
        Path relative to the output folder (checked not to leave it).
    options : dict
        Figure options (size in inches, dpi, title, point_size); empty for data files.
    """

    kind: str
    file: str
    options: dict = field(default_factory=dict)


@dataclass
class Study:
    """A checked study file.

    Attributes
    ----------
    source : str
        The file name (or ``"<text>"``), used in messages.
    title, about, note : str
        Free text: a title for figures, a description, and a note printed under figures.
    system : Hamiltonian or AreaPreservingMap
        The system, built through the safe parser or taken from the catalogue.
    system_form : str
        ``"hamiltonian"``, ``"lagrangian"``, ``"map"`` or ``"model"``.
    params : dict of str to float
        The parameter values used (defaults of the file's own parameters, or the overrides
        given for a catalogue model).
    section : SectionSpec
    states : SeedSpec
        The starting states (``[states]``).
    folder : str
        Sub-folder of the output folder the files go in ("" for the output folder itself).
    outputs : list of OutputSpec
    structure : StructureSpec or None
        Periodic orbits (and manifolds) to find, from ``[structure]``.
    normal_form : NormalFormSpec or None
        The normal form to compute, from ``[normal_form]``
        (:mod:`phaselab.studies.normal_form_table`).
    """

    source: str
    title: str
    about: str
    note: str
    system: object
    system_form: str
    params: dict
    section: SectionSpec
    states: SeedSpec
    folder: str
    outputs: list
    structure: StructureSpec | None = None
    normal_form: object = None

    def output_paths(self, out_dir) -> list[Path]:
        """The paths the outputs are written to under ``out_dir`` (confined to it)."""
        base = Path(out_dir)
        return [confined_path(base, self.folder, spec.file, self.source) for spec in self.outputs]

