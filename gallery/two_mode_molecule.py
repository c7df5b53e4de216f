# %% tags=["parameters"]
# Every number this notebook uses: a made-up two-mode molecule (stretch x, bend y).
w_stretch = 1.0          # stretch frequency
w_bend = 1.2             # bend frequency
kappa = 0.9              # cubic stretch-bend coupling
energies = [0.08, 0.16, 0.24]   # shell energies (the escape saddle is at 0.2737 for these constants)
n_seeds = 10             # orbits per energy, started along the y axis of the section plane x: 0
crossings = 120          # section points per orbit
dt = 0.05                # step
chaos_grid = 20          # seeds per axis of the MEGNO map on the section plane
chaos_time = 1000.0      # integration time of the MEGNO map
megno_threshold = 3.0    # orbits with a MEGNO above this are counted as chaotic
figure_dpi = 110         # resolution of the PNG figures
out_dir = "molecule_output"

# %% [markdown]
# # A two-mode molecule: from order to chaos
#
# A toy molecule of our own: two harmonic modes of unequal stiffness and a cubic coupling,
#
# $$H = \tfrac12(p_x^2+p_y^2) + \tfrac12(\omega_x^2 x^2 + \omega_y^2 y^2) + \kappa\,(x^2 y - y^3/3).$$
#
# Sections at $x = 0$ (crossed upwards) at several energies show invariant curves breaking up
# into a chaotic sea as the energy approaches the saddle.

# %%
import numpy as np

import gallery_tools as gt
import phaselab

gt.output_folder(out_dir)

# %%
molecule = phaselab.Hamiltonian(
    "(px**2 + py**2)/2 + (wx**2*x**2 + wy**2*y**2)/2 + kappa*(x**2*y - y**3/3)",
    ["x", "y"], ["px", "py"], params={"wx": w_stretch, "wy": w_bend, "kappa": kappa},
    name="two-mode molecule")
saddles = [e for e in phaselab.equilibria(molecule) if e.stability != "elliptic"]
escape = min(e.energy for e in saddles)
print(f"lowest saddle (escape) energy: {escape:.4f}")

# %%
sections = {}
boundaries = {}
files = []
for E in energies:
    # the boundary of the allowed region on the plane x = 0 (px eliminated)
    edge = phaselab.level_set(molecule, {"y": (-1.0, 1.2), "py": (-1.0, 1.0)}, [E], plane={"x": 0.0},
                              resolution=200)
    boundaries[E] = edge.lines[0]
    ys = np.concatenate([line[:, 0] for line in edge.lines[0]])
    line = np.linspace(ys.min(), ys.max(), int(n_seeds) + 2)[1:-1]
    seeds = phaselab.shell_seeds(molecule, {"y": line, "py": np.zeros_like(line)}, energy=E,
                                 plane={"x": 0.0}, solve_for="px")
    sections[E] = phaselab.section(molecule, seeds, plane={"x": 0.0}, crossings=int(crossings), dt=dt,
                                   method="yoshida4")
    print(sections[E])
    tag = f"{E:.3f}".replace(".", "p")
    files += gt.save_and_show(sections[E], out_dir, f"molecule_E{tag}", (".png", ".svg", ".csv"), dpi=figure_dpi,
                              overlays=boundaries[E], title=f"Two-mode molecule, E = {E:g}",
                              note="Model results with made-up constants.")

# %% [markdown]
# ## How much of the section is chaotic
#
# The MEGNO of an orbit (Cincotta & Simo 2000) tends to 2 on an invariant torus and grows
# like $\lambda t / 2$ on a chaotic orbit with Lyapunov exponent $\lambda$. Seeds on a grid
# of the section plane inside the allowed region, each integrated with its tangent dynamics,
# give the share of the section that is chaotic: the fraction of seeds whose MEGNO exceeds
# the threshold.

# %%
chaos_maps = {}
chaotic = {}
for E in energies:
    ys = np.concatenate([line[:, 0] for line in boundaries[E]])
    ps = np.concatenate([line[:, 1] for line in boundaries[E]])
    ranges = {"y": (ys.min(), ys.max(), int(chaos_grid)), "py": (ps.min(), ps.max(), int(chaos_grid))}
    grid = phaselab.shell_grid(molecule, ranges, energy=E, plane={"x": 0.0}, solve_for="px")
    chaos_maps[E] = phaselab.chaos_map(molecule, grid, chaos_time, indicator="megno", dt=dt, method="yoshida4")
    chaotic[E] = gt.chaotic_fraction(chaos_maps[E].values, megno_threshold)
    print(f"E = {E:g}: {int(grid.valid.sum())} seeds, chaotic fraction {chaotic[E]:.1%}")

fig = gt.megno_panels([chaos_maps[E] for E in energies], [f"E = {E:g}: {chaotic[E]:.1%} chaotic" for E in energies],
                      "y", "p_y", threshold=megno_threshold)
files += gt.save_and_show(fig, out_dir, "molecule_megno", (".png", ".svg"), dpi=figure_dpi)

# %%
gt.write_summary(out_dir, escape_energy=escape, energies=list(map(float, energies)),
                 chaotic_fraction=[chaotic[E] for E in energies], chaos_time=float(chaos_time),
                 megno_threshold=float(megno_threshold),
                 chaos_seeds=[chaos_maps[E].grid.states[chaos_maps[E].grid.valid] for E in energies],
                 chaos_megno=[chaos_maps[E].values[chaos_maps[E].grid.valid] for E in energies],
                 points=[int(sections[E].counts.sum()) for E in energies],
                 worst_energy_error=max(float(np.nanmax(np.abs(s.energy_error))) for s in sections.values()))
[f.name for f in files]
