"""Cutting one orbit out of a Section and joining per-orbit Sections back into one."""

from __future__ import annotations

from phaselab.orbits.section_result import Section


def one_orbit(sec, k: int):
    """Orbit ``k`` of ``sec`` as a one-orbit Section (arrays copied)."""
    return sec.take([k])


def merge_sections(parts):
    """One Section holding every orbit of ``parts`` (padded with NaN to the longest); None if empty.

    The metadata (plane, method, system, ...) are those of the first part; the energy is kept
    only when all parts share it.
    """
    parts = [p for p in parts if p is not None]
    return Section.concat(parts) if parts else None
