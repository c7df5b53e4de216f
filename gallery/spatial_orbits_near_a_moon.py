# %% tags=["parameters"]
# Every number this notebook uses. The invented planet Caldor and its moon Ysel: the moon
# carries mass_ratio of the pair's total mass. Units: the planet-moon distance, the total
# mass and the orbital rate of the pair are 1 (time 2 pi is one month of Ysel).
mass_ratio = 0.015
planar_amplitude = 0.004      # x half-width of the first planar orbit about L2 (from the linearisation)
planar_reach = 0.014          # follow the planar family this far in energy above L2's energy
planar_steps = 60             # most members of the planar family
spatial_reach = 0.002         # follow the spatial family this far in energy from its birth
spatial_steps = 14            # most members of the spatial family
section_energy = -1.62        # energy of the 4-D section around Ysel (below L1's: the orbits stay near the moon)
n_orbits = 10                 # orbits of the 4-D section
seed_distance = (0.07, 0.03)  # started from this far to this near the moon's centre, towards the planet
seed_height = (0.002, 0.02)   # and this high out of the plane
crossings = 300               # section points per orbit
dt = 0.002                    # step of the section's orbits
slab = 0.002                  # half-width of the slab |z| < slab of the 3-D slice
figure_dpi = 110              # resolution of the PNG figures
out_dir = "spatial_moon_output"

# %% [markdown]
# # Out of the plane near an invented moon
#
# The planet Caldor and its moon Ysel circle their common centre of mass; a spacecraft moves
# near them, in three dimensions. In the frame rotating with the pair (the spatial circular
# restricted three-body model),
# $H = \tfrac12(p_x^2+p_y^2+p_z^2) + y p_x - x p_y - (1-\mu)/r_1 - \mu/r_2$ is conserved
# (the Jacobi constant is $C = -2H$). The plane of the pair, $z = p_z = 0$, is invariant.
#
# This notebook follows the planar family of periodic orbits about the collinear point L2
# beyond the moon, finds where one of its multiplier pairs, the one out of the plane, passes
# +1 (the *vertical bifurcation*), starts the spatial family born there and follows it, and
# looks at a four-dimensional surface of section of three-degree-of-freedom orbits around the
# moon through slices.
#
# *These are model results of an idealised model (point masses on circular orbits, no other
# bodies, no radiation pressure). Before they inform a spacecraft design, confirm them with
# validated tools and the responsible engineers.*

# %%
import numpy as np
from matplotlib.figure import Figure

import gallery_tools as gt
import phaselab

gt.output_folder(out_dir)
pair = phaselab.models.spatial_restricted_three_body()
prm = {"mu": mass_ratio}
moon_x = 1 - mass_ratio

# %% [markdown]
# ## The libration points
#
# The rest points of the rotating frame: three on the line of the planet and the moon (L1
# between them, L2 beyond the moon, L3 beyond the planet), two at the corners of equilateral
# triangles. All lie in the plane.

# %%
box = {"x": (-1.5, 1.5), "y": (-1.0, 1.0), "z": (-0.1, 0.1), "px": (-1.0, 1.0), "py": (-1.5, 1.5),
       "pz": (-0.1, 0.1)}
eqs = phaselab.equilibria(pair, params=prm, ranges=box, starts=400)
for e in eqs:
    print(f"rest point at x = {e.state[0]:+.5f}, y = {e.state[1]:+.5f}, z = {e.state[2]:+.1e}: "
          f"C = {-2 * e.energy:.5f}, {e.stability}")
collinear = [e for e in eqs if abs(e.state[1]) < 1e-9]
L1 = min((e for e in collinear if 0 < e.state[0] < moon_x), key=lambda e: moon_x - e.state[0])
L2 = min((e for e in collinear if e.state[0] > moon_x), key=lambda e: e.state[0] - moon_x)
print(f"L1 at x = {L1.state[0]:.6f} (C = {-2 * L1.energy:.5f}); L2 at x = {L2.state[0]:.6f} "
      f"(C = {-2 * L2.energy:.5f})")

# %% [markdown]
# ## The planar family about L2
#
# The linearisation at L2 has one oscillating mode in the plane; a small orbit along it is
# corrected by Newton's method on the section $y = 0$ (its points there: $x, z, p_x, p_z$,
# with $p_y$ solved from the energy) and continued in the energy. Each member's monodromy has
# two multiplier pairs; Broucke's stability index $b = \lambda + 1/\lambda$ of the pair out of
# the plane crosses 2 where a multiplier passes +1.

# %%
def planar_start(equilibrium, amplitude):
    """A state on y = 0 near the small planar orbit about a collinear point, from the
    oscillating eigenvector of the in-plane linearisation, and its crossing direction."""
    xl = equilibrium.state[0]
    c2 = (1 - mass_ratio) / abs(xl + mass_ratio) ** 3 + mass_ratio / abs(xl - moon_x) ** 3
    A = np.array([[0, 0, 1, 0], [0, 0, 0, 1], [1 + 2 * c2, 0, 0, 2], [0, 1 - c2, -2, 0]])
    w, V = np.linalg.eig(A)
    v = V[:, np.argmax(np.abs(w.imag))]
    v = (v * 1j * abs(v[1]) / v[1]).real                 # the phase where y = 0
    dx, _, dvx, dvy = amplitude * v / abs(v[0])
    state = np.array([xl + dx, 0.0, 0.0, dvx, xl + dx + dvy, 0.0])   # px = vx - y, py = vy + x
    return state, (1 if dvy > 0 else -1)


start, direction = planar_start(L2, planar_amplitude)
small = phaselab.periodic_orbit(pair, start, plane={"y": 0.0}, params=prm, direction=direction)
planar = phaselab.continue_family(small, "energy", (small.energy, L2.energy + planar_reach),
                                  steps=planar_steps)
planar

# %%
vertical = [b for b in planar.bifurcations
            if b["kind"] == "tangent (multiplier +1)" and set(b["coordinates"]) == {"z", "pz"}][0]
E_bif = vertical["parameter"]
print(f"vertical bifurcation at E = {E_bif:.7f} (C = {-2 * E_bif:.6f}), pair in {vertical['coordinates']}")
files = gt.save_and_show(planar.plot(y="index", title="Planar family about L2 of Caldor-Ysel"), out_dir,
                         "planar_family_indices", dpi=figure_dpi)

# %% [markdown]
# ## The spatial family born at the vertical bifurcation
#
# At the crossing, the eigenvector of the multiplier +1 points out of the plane. A first
# member is corrected a small step along it, off the planar family, and the new family is
# continued in the energy. Its orbits rise out of the plane as the energy grows.

# %%
spatial = phaselab.branch_family(planar, vertical, (E_bif - 1e-3, E_bif + spatial_reach),
                                 steps=spatial_steps, ds_max=0.01)
spatial

# %%
fig = Figure(figsize=(8.4, 3.6))
ax_xz, ax_yz = fig.subplots(1, 2)
heights = []
for i in range(len(spatial)):
    path = spatial.orbit(i).orbit.states[0]
    heights.append(float(np.max(np.abs(path[:, 2]))))
    color = (0.15 + 0.7 * i / max(1, len(spatial) - 1), 0.35, 0.55)
    ax_xz.plot(path[:, 0], path[:, 2], color=color, lw=0.8)
    ax_yz.plot(path[:, 1], path[:, 2], color=color, lw=0.8)
plane_orbit = planar.orbit(vertical["between"][0]).orbit.states[0]
for ax, k, name in ((ax_xz, 0, "x"), (ax_yz, 1, "y")):
    ax.plot(plane_orbit[:, k], plane_orbit[:, 2], color="#888888", lw=1.2, ls="--")
    ax.set_xlabel(name)
    ax.set_ylabel("z")
ax_xz.plot([L2.state[0]], [0.0], "x", color="#26313b")
ax_xz.set_title("spatial family (planar orbit at the bifurcation dashed)", fontsize=8)
ax_yz.set_title("seen along the planet-moon line", fontsize=8)
fig.tight_layout()
files += gt.save_and_show(fig, out_dir, "spatial_family", dpi=figure_dpi)
print("largest height out of the plane per member:", np.round(heights, 4))

# %% [markdown]
# ## A four-dimensional section around the moon
#
# Below L1's energy a spacecraft near Ysel cannot leave it. Orbits started on $y = 0$ between
# the moon and L1 with some height out of the plane are recorded each time they cross
# $y = 0$ upwards: their section points lie in the four dimensions $(x, z, p_x, p_z)$. A
# projection coloured by a third coordinate (Froeschlé's method), and a 3-D slice (the points
# in a thin slab of $z$ about the plane; Richter, Lange, Bäcker and Ketzmerick 2014) show
# their structure: a regular orbit's points on a 2-torus cut by the slab show as
# closed curves, chaotic orbits fill volumes.

# %%
xs = np.linspace(moon_x - seed_distance[0], moon_x - seed_distance[1], int(n_orbits))
zs = np.linspace(seed_height[0], seed_height[1], int(n_orbits))
seeds = phaselab.shell_seeds(pair, {"x": xs, "z": zs, "px": np.zeros_like(xs), "pz": np.zeros_like(xs)},
                             energy=section_energy, plane={"y": 0.0}, solve_for="py", params=prm)
around = phaselab.section(pair, seeds, plane={"y": 0.0}, crossings=int(crossings), dt=dt, params=prm, box=3.0)
around

# %%
projection = phaselab.section_projection(around, ("x", "px"), color="z")
files += gt.save_and_show(projection.plot(title="Around Ysel: (x, px) coloured by z"), out_dir,
                          "section_projection", dpi=figure_dpi)
sliced = phaselab.section_slice(around, "z", 0.0, slab, axes=("x", "px", "pz"))
files += gt.save_and_show(sliced, out_dir, "section_slice", (".png", ".nc"), dpi=figure_dpi,
                          title=f"Around Ysel: the slice |z| < {slab:g}")

# %%
first, last = spatial.orbit(0), spatial.orbit(len(spatial) - 1)
gt.write_summary(out_dir, mass_ratio=mass_ratio, L1_x=float(L1.state[0]), L2_x=float(L2.state[0]),
                 L2_energy=float(L2.energy), bifurcation_energy=float(E_bif),
                 planar_members=len(planar), spatial_members=len(spatial),
                 spatial_energies=[float(v) for v in spatial.values],
                 spatial_states=[[float(c) for c in s] for s in spatial.states],
                 spatial_periods=[float(t) for t in spatial.period], heights=heights,
                 section_points=int(around.counts.sum()), slice_points=int(len(sliced.points)),
                 stopped=int(around.escaped.sum()),
                 worst_energy_error=float(np.nanmax(np.abs(around.energy_error))), note=gt.MODEL_NOTE)
[f.name for f in files]
