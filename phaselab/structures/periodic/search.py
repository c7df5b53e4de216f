"""Every distinct periodic orbit of a period in a region: :func:`find_periodic_orbits` and the
:class:`PeriodicOrbits` it returns (multi-start Newton, duplicates and shorter periods removed)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from phaselab.engine import inputs, limits
from phaselab.engine import status as codes
from phaselab.errors import ParameterError
from phaselab.structures.periodic.assembly import assemble_shooting, shooting_legs, wrapped_difference
from phaselab.structures.periodic.result import STABILITY, orbits_dataset
from phaselab.structures.periodic.shooting import explain, newton, report_guess, take_images
from phaselab.structures.periodic.symmetries import SectionSymmetry
from phaselab.structures.returns import return_map
from phaselab.engine.provenance import cf_dataset


@dataclass(repr=False)
class PeriodicOrbits:
    """The distinct periodic orbits found by :func:`find_periodic_orbits`.

    Attributes
    ----------
    orbits : list of PeriodicOrbit
        Sorted by stability, then by their first coordinate.
    tried : int
        Starting points.
    failed : dict of str to int
        Starting points that did not converge, by reason.
    """

    orbits: list
    tried: int
    failed: dict

    def __len__(self):
        return len(self.orbits)

    def __iter__(self):
        return iter(self.orbits)

    def __getitem__(self, i):
        return self.orbits[i]

    def by_stability(self, word: str) -> list:
        """The orbits whose stability is ``word``."""
        return [o for o in self.orbits if o.stability == word]

    def table(self) -> str:
        """A plain text table: stability, residue, period and first point of each orbit."""
        if not self.orbits:
            return "no orbits"
        names = [s.name for s in self.orbits[0].system.state_symbols]
        lines = [f"{'#':>3}  {'stability':17s} {'residue':>12s} {'period':>12s}  " + "  ".join(
            f"{n:>10s}" for n in names)]
        for i, o in enumerate(self.orbits):
            res = "" if o.residue is None else f"{o.residue:.6g}"
            lines.append(f"{i:3d}  {o.stability:17s} {res:>12s} {o.period:12.6g}  "
                         + "  ".join(f"{v:10.6g}" for v in o.points[0]))
        return "\n".join(lines)

    def to_xarray(self):
        """Every orbit in one ``xarray.Dataset`` (dimension ``orbit``)."""
        return cf_dataset(orbits_dataset(self.orbits))

    def save(self, path, **kwargs):
        """Write every orbit (``.nc``, ``.json`` or a figure)."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def plot(self, **kwargs):
        from phaselab.export.structures import structure_figure

        return structure_figure(self.orbits, about=self, **kwargs)

    def __repr__(self) -> str:
        failed = sum(self.failed.values())
        return (f"PeriodicOrbits({len(self.orbits)} distinct orbits from {self.tried} starts, "
                f"{failed} starts did not converge)\n" + self.table())


def find_periodic_orbits(system, returns, *, ranges=None, states=None, plane=None, energy=None,
                         params=None, resolution=8, direction=+1, solve_for=None, dt=None, method="auto",
                         shift=None, tol=1e-11, maxit=30, box=None, t_max=None, same=1e-7) -> PeriodicOrbits:
    """Every distinct periodic orbit of ``k`` returns found from many starting points.

    Newton's method (:func:`periodic_orbit`) runs from every point of a grid over ``ranges``
    (or from ``states``) at once, in one compiled call per iteration; orbits found twice (the
    same orbit from another start, or another point of the same orbit) are kept once, and
    orbits whose least period divides ``k`` (a fixed point in a period-2 search) are left
    out.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    returns : int
        ``k``: iterates of a map, drive periods, or crossings of the plane per period of the
        orbit (as in :func:`periodic_orbit`).
    ranges : mapping, optional
        Two coordinates with ranges, ``{"y": (-0.4, 0.6), "py": (-0.5, 0.5)}`` (the others 0
        or on the plane): a ``resolution x resolution`` grid of starts.
    states : array_like, shape (N, 2n), optional
        Starting states instead of a grid.
    same : float
        Two orbits are the same when a point of one is within ``same`` (1 + |z|) of a point
        of the other.
    Other parameters are those of :func:`periodic_orbit`.

    Returns
    -------
    PeriodicOrbits
    """
    inputs.system(system)
    names = [s.name for s in system.state_symbols]
    k = inputs.count(returns, "returns")
    tol, same = inputs.positive_number(tol, "tol"), inputs.positive_number(same, "same")
    maxit = inputs.count(maxit, "maxit", minimum=1, maximum=1000)
    if (ranges is None) == (states is None):
        raise ParameterError("give either ranges={name: (low, high), ...} or states=...")
    if states is None:
        starts = _grid(system, ranges, inputs.count(resolution, "resolution", 1, 1000), plane)
    else:
        starts = inputs.states(states, len(names), names, "states")
    limits.shooting_budget(system, plane, len(starts), k, maxit, "find_periodic_orbits")
    starts = starts[np.all(np.isfinite(starts), axis=1)]
    if not len(starts):
        raise ParameterError("no finite starting points")
    ret1 = return_map(system, 1, plane=plane, energy=energy, guess=starts[:1], direction=direction,
                      solve_for=solve_for, params=params, dt=dt, method=method, box=box, t_max=t_max)
    U0, shifts, status = shooting_legs(ret1, ret1.coordinates(starts), k, shift)
    failed: dict = {}
    for st in status[status != codes.OK]:
        key = explain(int(st))
        failed[key] = failed.get(key, 0) + 1
    run = np.flatnonzero(status == codes.OK)
    symmetry = SectionSymmetry(ret1, ret1.lift(U0[run[0], :1])[0][0]) if ret1.kind == "plane" and run.size else None
    sol = newton(ret1, U0[run], shifts[run], tol=tol, maxit=maxit, symmetry=symmetry) if run.size else None
    orbits: list = []
    for j in range(run.size):
        why = sol.reason[j]
        if why != "converged":
            key = explain(why)
            failed[key] = failed.get(key, 0) + 1
            continue
        cand = assemble_shooting(ret1, sol.U[j], take_images(sol.images, [j], k), shifts[run[j]],
                                  sol.residual[j], sol.iterations[j], symmetry=symmetry)
        report_guess(ret1, cand, U0[run[j], 0], sol, j)
        if _least_period(ret1, cand, same) < k:
            failed["least period smaller than asked"] = failed.get("least period smaller than asked", 0) + 1
            continue
        if any(_same_orbit(ret1, cand, o, same) for o in orbits):
            continue
        orbits.append(cand)
    orbits.sort(key=lambda o: (STABILITY.index(o.stability), tuple(np.round(o.points[0], 9))))
    return PeriodicOrbits(orbits, tried=len(starts), failed=failed)


def _grid(system, region, resolution, plane):
    if not isinstance(region, dict) or not region:
        raise ParameterError("ranges must map coordinate names to (low, high), e.g. {'y': (-0.5, 0.5)}")
    names = [s.name for s in system.state_symbols]
    limits.grid_budget(float(resolution) ** len(region), len(names), "find_periodic_orbits")
    axes = []
    for key, rng in region.items():
        j = inputs.state_index(system, key, "ranges coordinate")
        try:
            lo, hi = float(rng[0]), float(rng[1])
        except (TypeError, ValueError, IndexError):
            raise ParameterError(f"ranges entry of {key!r} must be (low, high), got {rng!r}") from None
        if not (np.isfinite(lo) and np.isfinite(hi) and lo < hi):
            raise ParameterError(f"ranges entry of {key!r} needs finite low < high, got ({lo}, {hi})")
        axes.append((j, np.linspace(lo, hi, resolution)))
    mesh = np.meshgrid(*[a for _, a in axes], indexing="ij")
    starts = np.zeros((mesh[0].size, len(names)))
    for (j, _), values in zip(axes, mesh):
        starts[:, j] = values.ravel()
    if isinstance(plane, dict):
        where = inputs.plane(system, plane)
        starts[:, list(where.indices)] = where.values
    return starts


def _least_period(ret, orbit, same):
    pts = orbit.points
    z0 = pts[0]
    tol = same * (1.0 + np.max(np.abs(z0)))
    k = len(pts)
    for j in range(1, k):
        if k % j == 0 and np.max(np.abs(wrapped_difference(ret, pts[j], z0))) <= tol:
            return j
    return k




def _same_orbit(ret, a, b, same):
    z = a.points[0]
    tol = same * (1.0 + np.max(np.abs(z)))
    return any(np.max(np.abs(wrapped_difference(ret, p, z))) <= tol for p in b.points)
