# %% tags=["parameters"]
# Every number this notebook uses. The invented planet Tessaly and its moon Brin: the moon
# carries mass_ratio of the pair's total mass. Units: the planet-moon distance, the total
# mass and the orbital rate of the pair are 1.
mass_ratio = 0.02
jacobi = 3.30            # Jacobi constant C of the sections (C is -2 H)
zv_levels = [3.10, 3.30, 3.50]   # Jacobi constants of the zero-velocity curves shown
n_seeds = 8              # orbits of the section, started on the x axis on the planet side of the moon
seed_distance = (0.085, 0.03)    # from this far to this near the moon's centre
crossings = 80           # section points per orbit
dt = 0.001               # step
escape_radius = 3.0      # orbits leaving |x|, |y|, |px|, |py| < this are stopped
resolution = 220         # grid of the zero-velocity curves
figure_dpi = 110         # resolution of the PNG figures
out_dir = "satellite_output"

# %% [markdown]
# # A satellite near the moon of an invented planet
#
# The planet Tessaly and its moon Brin circle their common centre of mass; a small satellite
# moves in their plane. In the frame rotating with the pair (the circular restricted
# three-body model), $H = \tfrac12(p_x^2+p_y^2) + y p_x - x p_y - (1-\mu)/r_1 - \mu/r_2$ is
# conserved; the Jacobi constant is $C = -2H$. For a given $C$ the satellite is confined to
# the region where the effective potential lies below $H$; its boundaries are the
# zero-velocity curves.
#
# *These are model results. Before they inform a design decision, confirm them with
# validated tools and the responsible engineers.*

# %%
import numpy as np
from matplotlib.figure import Figure

import gallery_tools as gt
import phaselab

gt.output_folder(out_dir)

# %%
pair = phaselab.models.restricted_three_body()
prm = {"mu": mass_ratio}
moon_x = 1 - mass_ratio
eqs = phaselab.equilibria(pair, params=prm,
                          ranges={"x": (-2, 2), "y": (-2, 2), "px": (-2, 2), "py": (-2, 2)})
points = sorted(eqs, key=lambda e: e.energy)
for e in points:
    print(f"rest point at x = {e.state[0]:+.4f}, y = {e.state[1]:+.4f}: C = {-2 * e.energy:.4f}, {e.stability}")
collinear = [e for e in points if abs(e.state[1]) < 1e-9]
L1 = min((e for e in collinear if 0 < e.state[0] < moon_x), key=lambda e: moon_x - e.state[0])
print(f"L1 (between planet and moon) at x = {L1.state[0]:.5f}, C = {-2 * L1.energy:.5f}")

# %%
zv = phaselab.level_set(pair, {"x": (-1.6, 1.6), "y": (-1.6, 1.6)}, [-c / 2 for c in zv_levels],
                        params=prm, resolution=int(resolution))
fig = Figure(figsize=(5, 5))
ax = fig.subplots()
colors = ["#2b5d7d", "#d2824b", "#5c8f4e", "#9e4a6e"]
for k, (c, pieces) in enumerate(zip(zv_levels, zv.lines)):
    for j, line in enumerate(pieces):
        ax.plot(line[:, 0], line[:, 1], color=colors[k % 4], lw=1, label=f"C = {c:g}" if j == 0 else None)
ax.plot([-mass_ratio, moon_x], [0, 0], "o", color="#26313b", ms=4)
ax.plot([e.state[0] for e in points], [e.state[1] for e in points], "x", color="#555555", ms=5)
ax.set_aspect("equal")
ax.set_xlabel("x")
ax.set_ylabel("y")
ax.legend(frameon=False, fontsize=8)
ax.set_title("Zero-velocity curves of Tessaly-Brin (rotating frame)", fontsize=9)
fig.tight_layout()
files = gt.save_and_show(fig, out_dir, "zero_velocity", dpi=figure_dpi)

# %% [markdown]
# ## Sections at fixed Jacobi constant
#
# Orbits start on $y = 0$ between the moon and L1 (for $C$ above L1's value they cannot leave
# the moon's neighbourhood), with $p_y$ solved from $H = -C/2$, and are
# recorded each time they cross $y = 0$ upwards.

# %%
H0 = -jacobi / 2
xs = np.linspace(moon_x - seed_distance[0], moon_x - seed_distance[1], int(n_seeds))
seeds = phaselab.shell_seeds(pair, {"x": xs, "px": np.zeros_like(xs)}, energy=H0, plane={"y": 0.0},
                             solve_for="py", params=prm)
near_moon = phaselab.section(pair, seeds, plane={"y": 0.0}, crossings=int(crossings), dt=dt,
                             params=prm, box=escape_radius)
near_moon

# %%
files += gt.save_and_show(near_moon, out_dir, "moon_section", (".png", ".svg", ".csv"), dpi=figure_dpi,
                          note=gt.MODEL_NOTE, title=f"Satellite near Brin, C = {jacobi:g}")
gt.write_summary(out_dir, mass_ratio=mass_ratio, jacobi=jacobi, L1_x=float(L1.state[0]),
                 L1_jacobi=float(-2 * L1.energy), points=int(near_moon.counts.sum()),
                 stopped=int(near_moon.escaped.sum()),
                 worst_energy_error=float(np.nanmax(np.abs(near_moon.energy_error))))
[f.name for f in files]
