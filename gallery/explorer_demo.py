# %% tags=["parameters"]
# Every number of this demo lives here (papermill can override them).
# A made-up two-mode molecule: a stretch s and a bend b with a cubic coupling, in reduced units.
omega_stretch = 1.0     # stretch frequency
omega_bend = 1.3        # bend frequency
coupling = 0.6          # kappa: the stretch shifts the bend's stiffness
anharmonicity = 0.25    # g: softening of the stretch
energy = 0.9            # shell energy (the lowest saddle lies near 1.22)
energy_low = 0.05       # lowest energy of the energy slider
energy_high = 1.2       # highest energy of the energy slider
crossings = 300
seed_points = [(0.3, 0.0), (0.9, 0.2), (-0.6, 0.45)]   # (b, p_b) on the section plane s: 0

# %% [markdown]
# # A two-mode molecule on its energy shell
#
# A toy molecule of our own making: a stretch `s` and a bend `b`, coupled because stretching
# the bond softens the bend. The surface of section is the plane `s = 0` crossed with growing
# `s`; a click on the plot picks `(b, p_b)`, the stretch momentum follows from the energy.
# Regular orbits draw closed curves, chaotic ones scatter. Drag the ringed seed and its orbit
# follows; move the sliders; hover a point to read its orbit and coordinates. Below the plot:
# pick, delete or extend an orbit, change the plane, colour orbits by a chaos indicator (the
# scale is split where the indicator's meaning changes) or a frequency, let a click find a
# periodic orbit, and save what you see with **Export** or the whole session with
# **Save session**. The status line says what is running. These are model results, not a
# validated molecular potential.

# %%
import phaselab

molecule = phaselab.Hamiltonian(
    "(p_s**2 + p_b**2)/2 + w_s**2*s**2/2 + w_b**2*b**2/2 + kappa*s*b**2 - g*s**3/3",
    ["s", "b"], ["p_s", "p_b"],
    params={"w_s": (omega_stretch, (0.6, 1.6)), "w_b": (omega_bend, (0.6, 2.0)),
            "kappa": (coupling, (0.0, 1.2)), "g": (anharmonicity, (0.0, 0.6))},
    name="two-mode molecule")
molecule

# %%
explorer = phaselab.explore(molecule, energy=energy, plane={"s": 0.0}, solve_for="p_s",
                            crossings=crossings, energy_range=(energy_low, energy_high))
explorer.add_seeds(seed_points)
explorer

# %%
# what the plot holds, read from Python
print(f"{len(explorer.orbits)} orbits at E = {explorer.energy:g}, parameters {explorer.params}")
