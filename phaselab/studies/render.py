"""Rendering a checked study: seeds -> section (in orbit batches) -> figure and data files.

Everything here goes through the public calls a script would make
(:func:`phaselab.shell_seeds`, :func:`phaselab.section`, :func:`phaselab.export.save`), so a
study file and the equivalent Python give the same section points, bit for bit, for the
same method and step. Orbits are integrated independently of each other, so computing them
in batches (for a progress bar) does not change any number.
"""

from __future__ import annotations

import math
import os
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from phaselab.errors import PhaselabError, StudyFileError
from phaselab.studies.fields import Fields
from phaselab.studies.normal_form_table import compute_normal_form
from phaselab.studies.paths import confined_path, open_output_folder
from phaselab.studies.spec import Study
from phaselab.studies.seeding import seed_states
from phaselab.studies.trial import guarded

#: batches per render, for progress reporting (each batch keeps at least MIN_BATCH orbits so
#: both cores stay busy)
N_BATCHES = 10
MIN_BATCH = 4


@dataclass
class Rendered:
    """What a render produced.

    Attributes
    ----------
    section : phaselab.orbits.section_result.Section
    files : list of pathlib.Path
        The files written, in the order of the study's outputs.
    left_out : list of (int, str)
        Seeds without a state on the energy shell (index in the file's seed list, reason).
    messages : list of str
        Warnings raised while computing (orbits that never crossed, stopped orbits, ...).
    orbits : PeriodicOrbits or None
        The periodic orbits of the study's ``[structure]`` table.
    manifolds : list of Manifold
        Their manifolds, when asked for.
    normal_form : NormalForm or None
        The normal form of the study's ``[normal_form]`` table.
    """

    section: object
    files: list
    left_out: list = field(default_factory=list)
    messages: list = field(default_factory=list)
    orbits: object = None
    manifolds: list = field(default_factory=list)
    normal_form: object = None

    @property
    def n_orbits(self) -> int:
        return int(self.section.n_orbits)

    @property
    def n_points(self) -> int:
        return int(np.sum(self.section.counts))

    @property
    def worst_energy_error(self) -> float:
        """Largest |relative energy error| over all orbits (0 for maps; NaN if none finite)."""
        err = np.abs(np.asarray(self.section.energy_error, dtype=float))
        err = err[np.isfinite(err)]
        return float(err.max()) if err.size else float("nan")

    def summary(self) -> str:
        """One line: orbits, points, worst energy error."""
        sec = self.section
        text = f"{self.n_orbits} orbits, {self.n_points} section points"
        if sec.system.kind == "map":
            text += ", a map (no energy to conserve)"
        else:
            text += f", worst relative energy error {self.worst_energy_error:.2e}"
        text += f", method {sec.method}"
        if np.isfinite(sec.dt):
            text += f", dt {sec.dt:g}"
        escaped = int(np.sum(sec.escaped))
        if escaped:
            text += f", {escaped} stopped early"
        if self.left_out:
            text += f", {len(self.left_out)} seeds off the energy shell left out"
        if self.orbits is not None:
            words = [o.stability for o in self.orbits]
            text += (f"; {len(words)} periodic orbits ({words.count('stable')} stable, "
                     f"{len(words) - words.count('stable')} not)")
            if self.manifolds:
                text += f" and {len(self.manifolds)} manifold branches"
        if self.normal_form is not None:
            text += f"; {self.normal_form!r}"
        return text


def plane_of(study: Study):
    """The ``plane`` argument of :func:`phaselab.section` for this study."""
    spec = study.section
    if spec.kind == "plane":
        return {spec.coordinate: spec.value}
    if spec.kind == "stroboscopic":
        return "stroboscopic"
    return None



def section_options(study: Study) -> dict:
    """Keyword arguments of :func:`phaselab.section` (besides system and seeds)."""
    spec = study.section
    opts = {"plane": plane_of(study), "crossings": spec.crossings, "params": study.params}
    if spec.kind == "plane":
        opts["direction"] = spec.direction
    if spec.kind != "map":
        opts["method"] = spec.method
        opts["dt"] = spec.dt
    if spec.axes is not None:
        opts["axes"] = spec.axes
    if spec.box is not None:
        opts["box"] = spec.box
    return opts


def compute_section(study: Study, progress=None):
    """Compute the study's section in orbit batches.

    Parameters
    ----------
    study : Study
    progress : callable, optional
        Called with the number of orbits finished after each batch (e.g. ``tqdm.update``).

    Returns
    -------
    section : Section
    left_out : list of (int, str)
    messages : list of str
    """
    from phaselab.orbits.section import section
    from phaselab.orbits.seeds import ShellSeeds

    seeds = guarded(Fields(study.source), f"system.{study.system_form}", lambda: seed_states(study))
    energy = None
    left_out = []
    if isinstance(seeds, ShellSeeds):
        left_out = seeds.invalid()
        energy = seeds.energy
        states = seeds.valid_states()
        if states.shape[0] == 0:
            first = left_out[0][1] if left_out else "no seeds"
            raise StudyFileError(f"{study.source}: states: none of the {seeds.n_points} starting points has a state on "
                                 f"the energy shell E = {seeds.energy:g} (first: {first})")
    else:
        states = seeds
    n = states.shape[0]
    size = max(MIN_BATCH, math.ceil(n / N_BATCHES))
    opts = section_options(study)
    parts = []
    messages = []
    for start in range(0, n, size):
        batch = states[start:start + size]
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", RuntimeWarning)
            try:
                parts.append(section(study.system, batch, energy=energy, **opts))
            except StudyFileError:
                raise
            except PhaselabError as exc:
                raise StudyFileError(f"{study.source}: section: {exc}") from None
            except (ArithmeticError, RecursionError, NotImplementedError, TypeError, ValueError) as exc:
                # the system's numbers are bounded when it is read; this is a last line so a
                # study file never ends in a traceback
                raise StudyFileError(f"{study.source}: section: cannot compute ({type(exc).__name__}: "
                                     f"{exc})") from None
        for w in caught:
            text = str(w.message)
            if start:
                text = f"(orbits from {start}) {text}"
            messages.append(text)
        if progress is not None:
            progress(batch.shape[0])
    sec = join_sections(parts)
    _require_points(study, sec)
    return sec, left_out, messages


def _require_points(study: Study, sec) -> None:
    """Refuse a section without a single point, naming the key that caused it."""
    from phaselab.engine import status as codes

    if int(np.sum(sec.counts)) > 0:
        return
    status = np.asarray(sec.status)
    words = sorted({codes.STATUS.get(int(s), str(int(s))) for s in status})
    if study.section.box is not None and np.all(status == codes.LEFT_BOX):
        raise StudyFileError(f"{study.source}: section.box: every orbit left the box |component| <= "
                             f"{study.section.box:g} before its first crossing; give a larger box")
    step_trouble = np.isin(status, (codes.NO_CROSSING, codes.NOT_FINITE, codes.STEP_TOO_LARGE))
    key = "section.dt" if study.section.dt is not None and np.all(step_trouble) else "section"
    raise StudyFileError(f"{study.source}: {key}: no orbit gave a single section point (status: "
                         f"{', '.join(words)}); check the plane, the energy and the step")


def compute_structure(study: Study, sec):
    """The periodic orbits (and manifolds) of the study's ``[structure]`` table, on the
    section's plane, energy, step and method. Model results: figures carry the note."""
    from phaselab.structures.manifolds import manifold
    from phaselab.structures.periodic import find_periodic_orbits

    spec = study.structure
    opts = {"params": study.params, "ranges": spec.ranges, "resolution": spec.resolution}
    kind = study.section.kind
    if kind == "plane":
        opts.update(plane=plane_of(study), energy=sec.energy, direction=study.section.direction,
                    dt=sec.dt, method=sec.method)
    elif kind == "stroboscopic":
        opts.update(dt=sec.dt, method=sec.method)
    try:
        found = find_periodic_orbits(study.system, spec.returns, **opts)
        branches = []
        if spec.manifolds:
            for orbit in found:
                if orbit.stability in ("unstable", "inverse-unstable") and orbit.monodromy.shape == (2, 2):
                    for branch in ("unstable", "stable"):
                        for side in (+1, -1):
                            branches.append(manifold(orbit, branch=branch, side=side,
                                                     length=spec.manifold_length))
    except StudyFileError:
        raise
    except PhaselabError as exc:
        raise StudyFileError(f"{study.source}: structure: {exc}") from None
    except (ArithmeticError, RecursionError, NotImplementedError, TypeError, ValueError) as exc:
        raise StudyFileError(f"{study.source}: structure: cannot compute ({type(exc).__name__}: {exc})") from None
    return found, branches


def join_sections(parts):
    """One :class:`Section` from sections of consecutive orbit batches."""
    from phaselab.orbits.section_result import Section

    return Section.concat(parts)


def write_outputs(study: Study, sec, out_dir, orbits=None, manifolds=(), normal_form=None) -> list[Path]:
    """Write every output the study names, under ``out_dir`` (folders made as needed).

    Each path is checked to resolve inside ``out_dir``; the file is then written through a
    handle on its folder, opened part by part without following links
    (:func:`~phaselab.studies.paths.open_output_folder`), as a temporary file renamed into
    place (:func:`~phaselab.base.atomic.atomic_path`). A link swapped in after the check
    cannot redirect the write, and an interrupted write leaves the previous file intact.

    Returns
    -------
    list of pathlib.Path
        The files written (their resolved paths under ``out_dir``).
    """
    from phaselab.export import save
    from phaselab.base.atomic import folder_path

    files = []
    f = Fields(study.source)
    for spec in study.outputs:
        key = f"output.{spec.kind}"
        path = confined_path(Path(out_dir), study.folder, spec.file, study.source)
        options = dict(spec.options)
        if spec.kind == "normal_form" and Path(spec.file).suffix.lower() in (".svg", ".pdf", ".png"):
            options.setdefault("title", study.title or None)
        if spec.kind == "figure":
            options.setdefault("title", study.title or None)
            if study.note:
                options.setdefault("note", study.note)
        what = sec
        if spec.kind == "orbits":
            what = orbits
        elif spec.kind == "normal_form":
            what = normal_form
        elif spec.kind == "figure" and orbits is not None:
            # the structure over the section (the figure says these are model results)
            from phaselab.export.structures import MODEL_NOTE, structure_figure

            options.pop("point_size", None)
            if "model result" not in (options.get("note") or "").lower():
                options["note"] = " ".join(t for t in (options.get("note"), MODEL_NOTE) if t)
            what = _StructureFigure(structure_figure(list(manifolds) + [orbits], section=sec,
                                                     **{k: v for k, v in options.items() if k != "dpi"}),
                                    options.get("dpi", 150))
            options = {}
        fd = open_output_folder(Path(out_dir), study.folder, spec.file, study.source)
        try:
            target = folder_path(fd, path.parent) / path.name
            # without /proc the write goes by path: re-check that it still names the same folder
            if target.parent == path.parent and not os.path.samestat(os.fstat(fd), os.stat(path.parent)):
                raise f.error(key, f"folder {path.parent} changed while it was being written to")
            if isinstance(what, _StructureFigure):
                what.save(target)
            else:
                save(what, target, **options)
        except StudyFileError:
            raise
        except PhaselabError as exc:
            raise f.error(f"{key} ({spec.file})", str(exc)) from None
        except OSError as exc:
            raise f.error(f"{key} ({spec.file})", f"cannot write {path}: {exc.strerror or exc}") from None
        finally:
            os.close(fd)
        files.append(path)
    return files


def render_study(study: Study, out_dir, progress=None) -> Rendered:
    """Compute the study's section and write its output files under ``out_dir``.

    Parameters
    ----------
    study : Study
        From :func:`phaselab.studies.read_study`.
    out_dir : str or pathlib.Path
        The output folder (made if missing); every file is confined to it.
    progress : callable, optional
        Called with the number of orbits finished after each batch.

    Returns
    -------
    Rendered
    """
    out_dir = Path(out_dir)
    sec, left_out, messages = compute_section(study, progress=progress)
    orbits, branches = (None, [])
    if study.structure is not None:
        orbits, branches = compute_structure(study, sec)
    nf = compute_normal_form(study) if study.normal_form is not None else None
    files = write_outputs(study, sec, out_dir, orbits, branches, normal_form=nf)
    return Rendered(sec, files, left_out, messages, orbits, branches, nf)


@dataclass
class _StructureFigure:
    """A finished matplotlib figure of the structure, written atomically by suffix."""

    figure: object
    dpi: float

    def save(self, path):
        import matplotlib

        from phaselab.export.figures import REPORT_RC
        from phaselab.base.atomic import atomic_path

        with matplotlib.rc_context(REPORT_RC), atomic_path(path) as tmp:
            self.figure.savefig(tmp, format=Path(path).suffix[1:].lower(), dpi=self.dpi, facecolor="white")
