# %% tags=["parameters"]
# Every number this notebook uses. The "bench ring" is an invented small ring-shaped
# laboratory device; a magnetic field line, followed once around the ring, comes back to the
# same cross-section at a new angle and radius: a map.
iota_axis = 0.3          # rotational transform (turns of the angle per transit) on the axis
shear = 0.3              # growth of iota with the flux label psi (linear)
coil = 0.012             # strength of the five-fold helical perturbation coil
harmonic = 5             # poloidal mode of the coil (islands where iota is 2/5)
seeds = 25               # field lines followed for the picture
transits = 600           # transits recorded per field line
manifold_length = 4.0    # arclength of each manifold branch grown from each X-point
coil_range = [-0.004, 0.05]  # coil strengths of the family followed from the O-point
breakup_range = [0.01, 0.05]  # coil strengths where the surface below is sought to break
breakup_period = 89      # longest periodic orbit used by Greene's criterion
figure_dpi = 110
out_dir = "field_line_output"

# %% [markdown]
# # Field lines of the bench ring: islands, X-point tangles and a breaking surface
#
# In the bench ring the field lines wind around the minor axis, one turn of the angle
# $\theta$ per $1/\iota$ transits of the ring, with a rotational transform $\iota(\psi)$ that
# grows with the flux label $\psi$. Following a line once around the ring is the
# area-preserving map
#
# $$\psi' = \psi - \varepsilon \sin(m\theta), \qquad \theta' = \theta + 2\pi\,\iota(\psi'),$$
#
# where the helical coil of mode $m = 5$ and strength $\varepsilon$ kicks the lines once per
# transit. Where $\iota = 2/5$ the coil opens a chain of five islands. This notebook finds
# its O-points (island centres) and X-points, their residues, the tangle the X-points'
# manifolds make, how the O-points change with the coil current, and where a surface of
# nested field lines between the $1/3$ and $2/5$ resonances breaks.
#
# *These are model results; a real device's field must be computed with validated field
# codes and confirmed by its engineers before it informs any design.*

# %%
import numpy as np

import gallery_tools as gt
import phaselab

gt.output_folder(out_dir)
m = int(harmonic)
ring = phaselab.AreaPreservingMap(
    [("psi", f"psi - eps*sin({m}*theta)"), ("theta", "theta + 2*pi*(i0 + s*psi)")], ["theta"], ["psi"],
    params={"eps": coil, "i0": iota_axis, "s": shear}, modulus=["2*pi", None],
    reversor=["-theta", f"psi - eps*sin({m}*theta)"], name="bench ring field lines")
print(ring.area_check, "check of area preservation; the reversor is an involution that reverses the map")
resonant_psi = (2 / 5 - iota_axis) / shear
print(f"iota = 2/5 at psi = {resonant_psi:.4f}")

# %% [markdown]
# ## The puncture plot
#
# Each field line's punctures through the cross-section, transit after transit.

# %%
start = np.column_stack([np.zeros(int(seeds)), np.linspace(0.05, 0.65, int(seeds))])
punctures = phaselab.section(ring, start, crossings=int(transits))
files = gt.save_and_show(punctures, out_dir, "punctures", (".png",), dpi=figure_dpi, point_size=0.6,
                         size=(6.0, 4.2), title=f"Bench ring, coil strength {coil:g}")

# %% [markdown]
# ## O-points and X-points of the island chain
#
# A period-5 orbit of the map is a field line that closes after five transits. Newton's
# method from a grid of starts around the resonant surface finds every such line there; each
# is classified by Greene's residue $R = (2 - \mathrm{tr}\,M)/4$ of its monodromy $M$:
# $0 < R < 1$ for an O-point (stable), $R < 0$ for an X-point.

# %%
chain = phaselab.find_periodic_orbits(ring, 5, ranges={"theta": (0.05, 2 * np.pi - 0.05),
                                                       "psi": (resonant_psi - 0.08, resonant_psi + 0.08)},
                                      resolution=8)
print(chain.table())
o_point = chain.by_stability("stable")[0]
x_point = chain.by_stability("unstable")[0]
print(f"O-point residue {o_point.residue:.6f}, linear rotation number around it {o_point.rotation_number:.6f}")
print(f"X-point residue {x_point.residue:.6f}")

# %% [markdown]
# ## The X-points' tangle
#
# The stable and unstable manifolds of the X-points are grown from their eigenvectors with
# adaptive refinement; where they cross, field lines wander between the islands' edges.

# %%
branches = [phaselab.manifold(x_point, branch=b, side=side, length=float(manifold_length), max_segment=2e-3)
            for b in ("unstable", "stable") for side in (+1, -1)]
for man in branches:
    print(man)
from phaselab.export.structures import structure_figure  # noqa: E402

fig = structure_figure(branches + [chain], section=punctures, title="Island chain at iota = 2/5 and the "
                       "X-points' manifolds", size=(6.4, 4.6))
files += gt.save_and_show(fig, out_dir, "tangle", (".png", ".svg"), dpi=figure_dpi)
# closer to one X-point, where the branches cross again and again
x0, y0 = x_point.points[0]
zoom = structure_figure(branches + [chain], section=punctures, title="One X-point, closer",
                        xlim=(x0 - 0.5, x0 + 0.5), ylim=(y0 - 0.06, y0 + 0.06), size=(6.4, 4.6))
files += gt.save_and_show(zoom, out_dir, "tangle_zoom", (".png",), dpi=figure_dpi)

# %% [markdown]
# ## The O-point as the coil current grows
#
# The family of the O-point is followed in the coil strength by pseudo-arclength
# continuation. At $\varepsilon = 0$ every line on the resonant surface closes after five
# transits and the residue is 0; the continuation passes through it onto the X-point's side
# (negative $\varepsilon$), a tangent crossing it flags. With growing $\varepsilon$ the
# residue rises towards 1, where the island centre would turn inverse-unstable and a
# period-10 chain be born; whether it gets there is what the diagram shows.

# %%
family = phaselab.continue_family(o_point, "eps", tuple(coil_range), steps=80)
print(family)
print(f"largest residue of the O-point: {np.nanmax(family.residue):.4f}")
files += gt.save_and_show(family.plot(title="Residue of the O-point against the coil strength"), out_dir,
                          "o_point_family", (".png",), dpi=figure_dpi)

# %% [markdown]
# ## Where a surface of nested field lines breaks
#
# Between the $1/3$ and $2/5$ resonances lies a surface whose rotational transform is the
# noble number $1/(2 + g)$, $g$ the golden mean. Greene's criterion follows the symmetric
# periodic orbits whose rotation numbers are its continued-fraction convergents; the coil
# strength where their residues reach $1/4$ in size estimates where the surface breaks.

# %%
noble = 1 / (2 + (np.sqrt(5) - 1) / 2)
breakup = phaselab.torus_breakup(ring, noble, "eps", tuple(breakup_range),
                                 max_returns=int(breakup_period), steps=16,
                                 action_of=lambda nu: (nu - iota_axis) / shear)
print(breakup)

# %%
gt.write_summary(out_dir, resonant_psi=resonant_psi, orbits=[
    {"stability": o.stability, "residue": o.residue, "theta": o.points[:, 0], "psi": o.points[:, 1]}
    for o in chain], o_point_residue=o_point.residue, x_point_residue=x_point.residue,
    manifold_points=[man.n_points for man in branches], family_values=family.values,
    family_residues=family.residue, bifurcations=family.bifurcations,
    breakup_estimate=breakup.estimate, breakup_critical=breakup.critical,
    convergents=[str(c) for c in breakup.convergents], coil=coil, iota_axis=iota_axis, shear=shear)
[f.name for f in files]
