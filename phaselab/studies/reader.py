"""Reading and checking study files: TOML text -> a :class:`Study` of plain, checked values.

A study file describes one surface-of-section computation and the files to write from it.
Its tables are ``[study]``, ``[system]``, ``[parameters]``, ``[section]``, ``[states]``,
the optional ``[structure]`` and ``[normal_form]``, and ``[output]`` (see ``phaselab/studies/README.md`` for the full key list and examples). Reading
a file never executes anything from it: expressions are strings for the safe parser, a
catalogue model is looked up by name in a fixed table, every value is type- and
range-checked, unknown keys are refused, sizes are capped, and output paths are confined to
the output folder. Every problem raises :class:`~phaselab.errors.StudyFileError` naming the
file, the dotted key and what is wrong.

This module holds the entry points; the records are in :mod:`.spec`, the table readers in
:mod:`.tables` and the output path checks in :mod:`.paths`.
"""

from __future__ import annotations

import sys
from pathlib import Path

from phaselab.errors import PhaselabError, StudyFileError
from phaselab.studies.fields import Fields
from phaselab.studies.overrides import apply_overrides
from phaselab.studies.normal_form_table import read_normal_form
from phaselab.studies.paths import check_relative, confined_path
from phaselab.studies.spec import (DATA_SUFFIXES, FIGURE_SUFFIXES, MAX_CROSSINGS, MAX_ORBITS,
                                   MAX_OUTPUTS, MAX_PIXELS, MAX_POINTS, OutputSpec, SectionSpec,
                                   SeedSpec, Study)
from phaselab.studies.system_table import read_system
from phaselab.studies.tables import read_output, read_section, read_states, read_structure
from phaselab.studies.trial import try_study

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as tomllib

__all__ = ["read_study", "parse_study", "Study", "SectionSpec", "SeedSpec", "OutputSpec",
           "check_relative", "confined_path", "MAX_FILE_BYTES", "MAX_ORBITS", "MAX_CROSSINGS",
           "MAX_POINTS", "MAX_OUTPUTS", "MAX_PIXELS", "FIGURE_SUFFIXES", "DATA_SUFFIXES"]

#: largest study file read, in bytes
MAX_FILE_BYTES = 256 * 1024

_TOP_KEYS = ("study", "system", "parameters", "section", "states", "structure", "normal_form", "output")


def read_study(path, overrides=None) -> Study:
    """Read and check the study file at ``path``, with ``overrides`` (``"key=value"``
    strings, see :mod:`phaselab.studies.overrides`) applied before the checks.

    Raises
    ------
    StudyFileError
        For a missing or unreadable file, bad TOML, or any problem with its content; the
        message names the file, the key and the problem.
    """
    path = Path(path)
    source = path.name or str(path)
    try:
        size = path.stat().st_size
    except OSError as exc:
        raise StudyFileError(f"{source}: cannot read the study file: {exc.strerror or exc}") from None
    if not path.is_file():
        raise StudyFileError(f"{source}: not a file")
    if size > MAX_FILE_BYTES:
        raise StudyFileError(f"{source}: the file is {size} bytes; study files are limited to "
                             f"{MAX_FILE_BYTES} bytes")
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise StudyFileError(f"{source}: cannot read the study file: {exc.strerror or exc}") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise StudyFileError(f"{source}: the file is not UTF-8 text") from None
    return parse_study(text, source=source, overrides=overrides)


def parse_study(text: str, source: str = "<text>", overrides=None) -> Study:
    """Check study-file ``text`` (TOML), with ``overrides`` applied, and build the
    :class:`Study` it describes."""
    f = Fields(source)
    if not isinstance(text, str):
        raise f.error("", f"study text must be a string, got {type(text).__name__}")
    if len(text.encode("utf-8", "replace")) > MAX_FILE_BYTES:
        raise f.error("", f"the text is longer than {MAX_FILE_BYTES} bytes")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise f.error("", f"not valid TOML: {exc}") from None
    except RecursionError:
        raise f.error("", "nested too deeply to read") from None
    apply_overrides(f, data, overrides)
    f.check_nesting(data)
    f.only_keys(data, "", _TOP_KEYS)

    try:
        return _build(f, data)
    except StudyFileError:
        raise
    except PhaselabError as exc:  # pragma: no cover - the table readers name the key first
        raise f.error("", str(exc)) from None
    except RecursionError:
        raise f.error("", "nested too deeply to read") from None
    except MemoryError:  # pragma: no cover - the size limits keep this away
        raise f.error("", "too large to read") from None


def _build(f: Fields, data: dict) -> Study:
    info = f.table(data, "", "study")
    f.only_keys(info, "study", ("title", "about", "note"))
    title = f.drawn_text(info, "study", "title", default="", max_length=200)
    about = f.string(info, "study", "about", default="", max_length=5000)
    note = f.drawn_text(info, "study", "note", default="", max_length=300)

    system, form, params = read_system(f, data)
    section = read_section(f, data, system, params)
    states = read_states(f, data, system, section)
    total = states.count * section.crossings
    if total > MAX_POINTS:
        raise f.error("section.crossings", f"{states.count} orbits x {section.crossings} crossings "
                                           f"= {total} points; the limit is {MAX_POINTS}")
    structure = read_structure(f, data, system, section)
    normal_form = read_normal_form(f, data, system)
    folder, outputs = read_output(f, data)
    if structure is None and any(spec.kind == "orbits" for spec in outputs):
        raise f.error("output.orbits", "writes the periodic orbits of a [structure] table, and the file has none")
    if normal_form is None and any(spec.kind == "normal_form" for spec in outputs):
        raise f.error("output.normal_form", "writes the normal form of a [normal_form] table, and the file has none")
    study = Study(f.source, title, about, note, system, form, params, section, states, folder, outputs,
                  structure, normal_form)
    try_study(study)   # what render would fail on, found now
    return study
