"""Study files: a small TOML description of one section computation and its output files.

``read_study(path)`` checks a file and returns a :class:`Study`; ``render_study(study,
out_dir)`` computes the section and writes the files it names. Built-in examples ship with
the package (``example_names()``, ``example_path(name)``); ``phaselab demo`` renders one.
See ``phaselab/studies/README.md`` for the format.
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

from phaselab.errors import StudyFileError
from phaselab.studies.reader import (MAX_CROSSINGS, MAX_ORBITS, MAX_POINTS, OutputSpec,
                                     SectionSpec, SeedSpec, Study, parse_study, read_study)

#: the example the ``phaselab demo`` command renders
DEMO = "molecule"

__all__ = ["read_study", "parse_study", "render_study", "Study", "SectionSpec", "SeedSpec",
           "OutputSpec", "example_names", "example_path", "DEMO", "MAX_ORBITS",
           "MAX_CROSSINGS", "MAX_POINTS"]


def example_names() -> list[str]:
    """Names of the built-in example studies (file names without ``.toml``)."""
    folder = resources.files(__name__)
    return sorted(p.name[:-5] for p in folder.iterdir() if p.name.endswith(".toml"))


def example_path(name: str) -> Path:
    """The path of the built-in example study ``name``."""
    names = example_names()
    if name not in names:
        raise StudyFileError(f"{name}: no built-in example study of that name; examples: "
                             + ", ".join(names))
    return Path(str(resources.files(__name__) / f"{name}.toml"))


def render_study(study, out_dir, progress=None):
    """Compute the section of ``study`` and write its outputs; see :mod:`.render`."""
    from phaselab.studies.render import render_study as _render

    return _render(study, out_dir, progress=progress)
