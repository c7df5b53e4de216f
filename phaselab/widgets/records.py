"""Cutting one orbit out of a Section and joining per-orbit Sections back into one."""

from __future__ import annotations

import dataclasses

import numpy as np


def one_orbit(sec, k: int):
    """Orbit ``k`` of ``sec`` as a one-orbit Section (arrays copied)."""
    sl = slice(k, k + 1)
    return dataclasses.replace(sec, points=sec.points[sl].copy(), counts=sec.counts[sl].copy(),
                               times=sec.times[sl].copy(), energy_error=np.asarray(sec.energy_error)[sl].copy(),
                               escaped=sec.escaped[sl].copy(), seeds=sec.seeds[sl].copy(),
                               params=dict(sec.params))


def merge_sections(parts):
    """One Section holding every orbit of ``parts`` (padded with NaN to the longest); None if empty.

    The metadata (plane, method, system, ...) are those of the first part; the energy is kept
    only when all parts share it.
    """
    parts = [p for p in parts if p is not None]
    if not parts:
        return None
    m = max(p.points.shape[1] for p in parts)
    width = parts[0].points.shape[2]

    def pad(a, fill_shape):
        out = np.full(fill_shape, np.nan)
        out[:, : a.shape[1]] = a
        return out

    points = np.concatenate([pad(p.points, (p.n_orbits, m, width)) for p in parts])
    times = np.concatenate([pad(p.times, (p.n_orbits, m)) for p in parts])
    energies = {p.energy for p in parts}
    first = parts[0]
    return dataclasses.replace(
        first, points=points, counts=np.concatenate([p.counts for p in parts]), times=times,
        energy_error=np.concatenate([np.asarray(p.energy_error) for p in parts]),
        escaped=np.concatenate([p.escaped for p in parts]),
        seeds=np.concatenate([p.seeds for p in parts]),
        energy=first.energy if len(energies) == 1 else None, params=dict(first.params))
