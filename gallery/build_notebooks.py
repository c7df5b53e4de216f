"""Write the gallery notebooks (outputs stripped) from the cell texts below.

Run ``python gallery/build_notebooks.py`` after editing a notebook's cells here; the
``.ipynb`` files are what is committed and what tests/test_gallery.py executes. Each
notebook starts with one code cell tagged ``parameters`` that holds every number it
depends on (small by default, so the whole gallery runs in CI in well under a minute each),
and ends by writing its figures and a ``summary.json`` into ``out_dir``.

``python gallery/build_notebooks.py --images`` additionally executes the notebooks at
larger sizes and copies a few figures into gallery/images/ for the README.
"""

from __future__ import annotations

import sys
from pathlib import Path

import nbformat
from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

HERE = Path(__file__).resolve().parent

MODEL_NOTE = ("*These are model results. Before they inform a design decision, confirm them "
              "with validated tools and the responsible engineers.*")

SUMMARY = '''
import json
from pathlib import Path

def write_summary(**values):
    """Record the numbers this run produced (read back by the gallery tests)."""
    path = Path(out_dir) / "summary.json"
    path.write_text(json.dumps(values, indent=1, default=float))
    return path
'''.strip()

NOTEBOOKS = {}

# ----------------------------------------------------------------------------- (a) bead
NOTEBOOKS["bead_on_spinning_hoop"] = [
    ("parameters", '''
# Every number this notebook uses. A lab rig of our own: a slider of mass m runs without
# friction on a vertical ring of radius R that a motor spins about its vertical diameter.
g = 9.81                 # m/s^2
R = 0.25                 # ring radius, m
m = 0.05                 # slider mass, kg
spin_sweep = (0.0, 12.0, 25)        # spin rates for the equilibrium sweep: low, high, count (rad/s)
portrait_spins = [4.0, 7.0, 10.0]   # spin rates of the phase portraits (rad/s)
portrait_levels = 9                 # contour levels per portrait
resolution = 160                    # grid points per axis of the level sets
ripple = 0.04            # relative ripple of the motor speed, for the stroboscopic section
ripple_spin = 10.0       # mean spin rate of the rippling motor (rad/s)
ripple_rate = 2.3        # ripple frequency over the small-oscillation frequency of the tilted slider
n_seeds = 10             # orbits of the stroboscopic section
periods = 120            # ripple periods recorded per orbit
dt = 0.004               # step, s
figure_dpi = 110         # resolution of the PNG figures
out_dir = "bead_output"  # where figures and data go
'''),
    ("md", '''
# A slider on a spinning ring

A slider moves on a ring of radius $R$ spinning at rate $\\omega$ about its vertical
diameter. With $\\theta$ the angle from the bottom, the Lagrangian is

$$L = \\tfrac12 m R^2 (\\dot\\theta^2 + \\omega^2 \\sin^2\\theta) + m g R \\cos\\theta .$$

phaselab builds the Hamiltonian by the Legendre transform. Below the critical rate
$\\omega_c = \\sqrt{g/R}$ the bottom is the only stable rest point; above it the bottom turns
hyperbolic and two tilted rest points at $\\cos\\theta^* = g/(R\\omega^2)$ take over.
'''),
    ("code", '''
import numpy as np
import matplotlib.pyplot as plt
import phaselab
from phaselab.export import save

from pathlib import Path
Path(out_dir).mkdir(parents=True, exist_ok=True)
''' + SUMMARY),
    ("code", '''
hoop = phaselab.Hamiltonian.from_lagrangian(
    "m*R**2*(thd**2 + w**2*sin(th)**2)/2 + m*g*R*cos(th)", ["th"], ["thd"],
    params={"m": m, "R": R, "g": g, "w": portrait_spins[0]}, momenta=["p"], name="slider on a spinning ring")
hoop
'''),
    ("code", '''
for eq in hoop.equations():
    display(eq)
'''),
    ("md", "## Rest points as the spin rate grows"),
    ("code", '''
critical = np.sqrt(g / R)
spins = np.linspace(*spin_sweep[:2], int(spin_sweep[2]))
tilted_angle = []
stable_count = []
for w in spins:
    eqs = phaselab.equilibria(hoop, params={"w": w}, bounds={"th": (-np.pi, np.pi), "p": (-1, 1)})
    stable = [e for e in eqs if e.stability == "elliptic"]
    stable_count.append(len(stable))
    tilted = [abs(e.state[0]) for e in stable if abs(e.state[0]) > 1e-6]
    tilted_angle.append(max(tilted) if tilted else 0.0)
tilted_angle = np.array(tilted_angle)
# the closed form cos(theta*) = g / (R w^2) above the critical rate, for comparison
theory = np.where(spins > critical, np.arccos(np.minimum(1.0, g / (R * np.maximum(spins, 1e-9)**2))), 0.0)
print(f"critical spin rate sqrt(g/R) = {critical:.4f} rad/s")
print(f"largest gap to the closed form: {np.max(np.abs(tilted_angle - theory)):.2e} rad")

fig, ax = plt.subplots(figsize=(5.5, 3.4))
ax.plot(spins, np.degrees(tilted_angle), "o", ms=4, color="#2b5d7d", label="phaselab.equilibria")
ax.plot(spins, np.degrees(theory), "-", lw=1, color="#d2824b", label="arccos(g / R w^2)")
ax.axvline(critical, color="#888888", lw=0.8, ls=":")
ax.set_xlabel("spin rate w (rad/s)")
ax.set_ylabel("stable tilt angle (deg)")
ax.legend(frameon=False)
fig.tight_layout()
fig.savefig(Path(out_dir) / "rest_points.png", dpi=110)
'''),
    ("md", "## Phase portraits from level sets of H"),
    ("code", '''
fig, axes = plt.subplots(1, len(portrait_spins), figsize=(4.0 * len(portrait_spins), 3.4), squeeze=False)
pmax = m * R**2 * max(portrait_spins) * 1.6
separatrix_energy = {}
for ax, w in zip(axes[0], portrait_spins):
    bottom = hoop.energy([0.0, 0.0], params={"w": w})
    levels = np.linspace(bottom, bottom + 2.5 * m * g * R, int(portrait_levels))[1:]
    ls = phaselab.level_set(hoop, {"th": (-np.pi, np.pi), "p": (-pmax, pmax)}, levels,
                            params={"w": w}, resolution=int(resolution), separatrices=True)
    for pieces in ls.lines:
        for line in pieces:
            ax.plot(line[:, 0], line[:, 1], lw=0.8, color="#2b5d7d")
    for sep in ls.separatrices:
        separatrix_energy.setdefault(float(w), []).append(sep.energy)
        for line in sep.lines:
            ax.plot(line[:, 0], line[:, 1], lw=1.4, color="#d2824b")
    ax.set_title(f"w = {w:g} rad/s ({'above' if w > critical else 'below'} critical)", fontsize=9)
    ax.set_xlabel("theta (rad)")
axes[0][0].set_ylabel("p (kg m^2/s)")
fig.tight_layout()
fig.savefig(Path(out_dir) / "portraits.png", dpi=110)
'''),
    ("md", '''
## A rippling motor: once per ripple period

A real motor's speed ripples. With $\\omega(t) = \\bar\\omega (1 + \\epsilon \\cos \\nu t)$ the
slider is driven near the tilted rest point; sampled once per ripple period, orbits near it
draw closed curves and resonance chains.
'''),
    ("code", '''
wt = np.sqrt(ripple_spin**2 - g**2 / (R**2 * ripple_spin**2))   # small-oscillation rate at the tilt
nu = ripple_rate * wt
rippling = phaselab.Hamiltonian.from_lagrangian(
    "m*R**2*(thd**2 + (w*(1 + eps*cos(nu*t)))**2*sin(th)**2)/2 + m*g*R*cos(th)",
    ["th"], ["thd"], params={"m": m, "R": R, "g": g, "w": ripple_spin, "eps": ripple, "nu": nu},
    time="t", period="2*pi/nu", momenta=["p"], name="slider on a rippling ring")
tilt = np.arccos(g / (R * ripple_spin**2))
seeds = np.column_stack([np.linspace(tilt - 0.9, tilt + 0.9, int(n_seeds)), np.zeros(int(n_seeds))])
strobe = phaselab.section(rippling, seeds, plane="stroboscopic", crossings=int(periods), dt=dt)
strobe
'''),
    ("code", '''
files = [save(strobe, Path(out_dir) / name, title=f"Slider on a rippling ring, {ripple:.0%} ripple", dpi=figure_dpi)
         for name in ("ripple_section.png", "ripple_section.svg")]
files.append(save(strobe, Path(out_dir) / "ripple_section.csv"))
write_summary(critical_spin=critical, spins=spins.tolist(), tilted_angle=tilted_angle.tolist(),
              stable_count=stable_count, separatrix_energy=separatrix_energy,
              section_points=int(strobe.counts.sum()),
              worst_energy_error=float(np.nanmax(np.abs(strobe.energy_error))))
files
'''),
]

# ----------------------------------------------------------------------------- (b) molecule
NOTEBOOKS["two_mode_molecule"] = [
    ("parameters", '''
# Every number this notebook uses: a made-up two-mode molecule (stretch x, bend y).
w_stretch = 1.0          # stretch frequency
w_bend = 1.2             # bend frequency
kappa = 0.9              # cubic stretch-bend coupling
energies = [0.08, 0.16, 0.24]   # shell energies (the escape saddle is at 0.2737 for these constants)
n_seeds = 10             # orbits per energy, along py = 0 in the plane x = 0
crossings = 120          # section points per orbit
dt = 0.05                # step
coverage_bins = 40       # grid for the area an orbit covers on the section
figure_dpi = 110         # resolution of the PNG figures
out_dir = "molecule_output"
'''),
    ("md", '''
# A two-mode molecule: from order to chaos

A toy molecule of our own: two harmonic modes of unequal stiffness and a cubic coupling,

$$H = \\tfrac12(p_x^2+p_y^2) + \\tfrac12(\\omega_x^2 x^2 + \\omega_y^2 y^2) + \\kappa\\,(x^2 y - y^3/3).$$

Sections at $x = 0$ (crossed upwards) at several energies show invariant curves breaking up
into a chaotic sea as the energy approaches the saddle.
'''),
    ("code", '''
import numpy as np
import phaselab
from phaselab.export import save
from pathlib import Path

Path(out_dir).mkdir(parents=True, exist_ok=True)
''' + SUMMARY),
    ("code", '''
molecule = phaselab.Hamiltonian(
    "(px**2 + py**2)/2 + (wx**2*x**2 + wy**2*y**2)/2 + kappa*(x**2*y - y**3/3)",
    ["x", "y"], ["px", "py"], params={"wx": w_stretch, "wy": w_bend, "kappa": kappa},
    name="two-mode molecule")
saddles = [e for e in phaselab.equilibria(molecule) if e.stability != "elliptic"]
escape = min(e.energy for e in saddles)
print(f"lowest saddle (escape) energy: {escape:.4f}")
'''),
    ("code", '''
sections = {}
boundaries = {}
for E in energies:
    # the boundary of the allowed region on the plane x = 0 (px eliminated)
    edge = phaselab.level_set(molecule, {"y": (-1.0, 1.2), "py": (-1.0, 1.0)}, [E], plane={"x": 0.0},
                              resolution=200)
    boundaries[E] = edge.lines[0]
    ys = np.concatenate([line[:, 0] for line in edge.lines[0]])
    line = np.linspace(ys.min(), ys.max(), int(n_seeds) + 2)[1:-1]
    seeds = phaselab.shell_seeds(molecule, E, {"x": 0.0}, "px", {"y": line, "py": np.zeros_like(line)})
    sections[E] = phaselab.section(molecule, seeds, plane={"x": 0.0}, crossings=int(crossings), dt=dt,
                                   method="yoshida4")
    print(sections[E])
'''),
    ("md", '''
How much of the section one orbit covers is a rough measure of chaos: a regular orbit stays
on a curve, a chaotic one spreads over an area.
'''),
    ("code", '''
def coverage(sec, bins=int(coverage_bins)):
    """Largest fraction of grid cells (inside the visited box) that one orbit visits."""
    x, y = sec.xy()
    hx = np.linspace(x.min(), x.max(), bins + 1)
    hy = np.linspace(y.min(), y.max(), bins + 1)
    whole = np.histogram2d(x, y, [hx, hy])[0] > 0
    best = 0.0
    for k in range(sec.n_orbits):
        xk, yk = sec.xy(k)
        if xk.size:
            best = max(best, (np.histogram2d(xk, yk, [hx, hy])[0] > 0).sum() / whole.sum())
    return best

cover = {E: coverage(s) for E, s in sections.items()}
for E, c in cover.items():
    print(f"E = {E:g}: the widest orbit covers {c:.1%} of the visited cells")
'''),
    ("code", '''
files = []
for E, sec in sections.items():
    tag = f"{E:.3f}".replace(".", "p")
    for suffix in (".png", ".svg"):
        files.append(save(sec, Path(out_dir) / f"molecule_E{tag}{suffix}", overlays=boundaries[E], dpi=figure_dpi,
                          title=f"Two-mode molecule, E = {E:g}", note="Model results with made-up constants."))
    files.append(save(sec, Path(out_dir) / f"molecule_E{tag}.csv"))
write_summary(escape_energy=escape, energies=list(map(float, energies)),
              coverage=[cover[E] for E in energies],
              points=[int(sections[E].counts.sum()) for E in energies],
              worst_energy_error=max(float(np.nanmax(np.abs(s.energy_error))) for s in sections.values()))
[f.name for f in files]
'''),
]

# ----------------------------------------------------------------------------- (c) satellite
NOTEBOOKS["satellite_near_a_moon"] = [
    ("parameters", '''
# Every number this notebook uses. The invented planet Tessaly and its moon Brin: the moon
# carries mass_ratio of the pair's total mass. Units: the planet-moon distance, the total
# mass and the orbital rate of the pair are 1.
mass_ratio = 0.02
jacobi = 3.30            # Jacobi constant C = -2 H of the sections (H = -C/2)
zv_levels = [3.10, 3.30, 3.50]   # Jacobi constants of the zero-velocity curves shown
n_seeds = 8              # orbits of the section, started on y = 0 on the planet side of the moon
seed_distance = (0.085, 0.03)    # from this far to this near the moon's centre
crossings = 80           # section points per orbit
dt = 0.001               # step
escape_radius = 3.0      # orbits leaving |x|, |y|, |px|, |py| < this are stopped
resolution = 220         # grid of the zero-velocity curves
out_dir = "satellite_output"
'''),
    ("md", '''
# A satellite near the moon of an invented planet

The planet Tessaly and its moon Brin circle their common centre of mass; a small satellite
moves in their plane. In the frame rotating with the pair (the circular restricted
three-body model), $H = \\tfrac12(p_x^2+p_y^2) + y p_x - x p_y - (1-\\mu)/r_1 - \\mu/r_2$ is
conserved; the Jacobi constant is $C = -2H$. For a given $C$ the satellite is confined to
the region where the effective potential lies below $H$; its boundaries are the
zero-velocity curves.

''' + MODEL_NOTE),
    ("code", '''
import numpy as np
import matplotlib.pyplot as plt
import phaselab
from phaselab.export import save
from pathlib import Path

Path(out_dir).mkdir(parents=True, exist_ok=True)
''' + SUMMARY),
    ("code", '''
pair = phaselab.models.restricted_three_body()
prm = {"mu": mass_ratio}
moon_x = 1 - mass_ratio
eqs = phaselab.equilibria(pair, params=prm, bounds={"x": (-2, 2), "y": (-2, 2), "px": (-2, 2), "py": (-2, 2)})
points = sorted(eqs, key=lambda e: e.energy)
for e in points:
    print(f"rest point at x = {e.state[0]:+.4f}, y = {e.state[1]:+.4f}: C = {-2 * e.energy:.4f}, {e.stability}")
collinear = [e for e in points if abs(e.state[1]) < 1e-9]
L1 = min((e for e in collinear if 0 < e.state[0] < moon_x), key=lambda e: moon_x - e.state[0])
print(f"L1 (between planet and moon) at x = {L1.state[0]:.5f}, C = {-2 * L1.energy:.5f}")
'''),
    ("code", '''
zv = phaselab.level_set(pair, {"x": (-1.6, 1.6), "y": (-1.6, 1.6)}, [-c / 2 for c in zv_levels],
                        params=prm, resolution=int(resolution))
fig, ax = plt.subplots(figsize=(5, 5))
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
fig.savefig(Path(out_dir) / "zero_velocity.png", dpi=110)
'''),
    ("md", '''
## Sections at fixed Jacobi constant

Orbits start on $y = 0$ between the moon and L1 (for $C$ above L1's value they cannot leave
the moon's neighbourhood), with $p_y$ solved from $H = -C/2$, and are
recorded each time they cross $y = 0$ upwards.
'''),
    ("code", '''
H0 = -jacobi / 2
xs = np.linspace(moon_x - seed_distance[0], moon_x - seed_distance[1], int(n_seeds))
seeds = phaselab.shell_seeds(pair, H0, {"y": 0.0}, "py", {"x": xs, "px": np.zeros_like(xs)}, params=prm)
near_moon = phaselab.section(pair, seeds, plane={"y": 0.0}, crossings=int(crossings), dt=dt,
                             params=prm, box=escape_radius)
near_moon
'''),
    ("code", '''
note = "Model results: confirm with validated tools and the responsible engineers."
files = [save(near_moon, Path(out_dir) / f"moon_section{s}", note=note,
              title=f"Satellite near Brin, C = {jacobi:g}") for s in (".png", ".svg")]
files.append(save(near_moon, Path(out_dir) / "moon_section.csv"))
write_summary(mass_ratio=mass_ratio, jacobi=jacobi, L1_x=float(L1.state[0]), L1_jacobi=float(-2 * L1.energy),
              points=int(near_moon.counts.sum()), stopped=int(near_moon.escaped.sum()),
              worst_energy_error=float(np.nanmax(np.abs(near_moon.energy_error))))
[f.name for f in files]
'''),
]

# ----------------------------------------------------------------------------- (d) driven
NOTEBOOKS["driven_oscillator"] = [
    ("parameters", '''
# Every number this notebook uses. A torsion arm in a teaching lab, restored by gravity on
# an off-centre weight and driven by an alternating coil torque.
w0 = 1.0                 # small-swing frequency of the arm (rad/s)
torque = 0.12            # coil torque amplitude over the arm's inertia
drive = 1.7              # coil frequency (rad/s)
n_seeds = 12             # orbits, started at rest along the angle axis
periods = 150            # drive periods recorded per orbit
max_angle = 2.6          # seeds from -max_angle to +max_angle (rad)
dt = 0.03                # step (shortened to divide the drive period)
method = "yoshida4"
out_dir = "driven_output"
'''),
    ("md", '''
# A driven torsion arm: stroboscopic section and resonance islands

$H = \\tfrac12 p^2 - \\omega_0^2 \\cos x - f\\, x \\cos(\\Omega t)$. Sampled once per drive
period $2\\pi/\\Omega$, orbits lie on closed curves around the driven periodic motion;
where a swing's frequency is in resonance with the drive, chains of islands appear.
'''),
    ("code", '''
import numpy as np
import phaselab
from phaselab.export import save
from pathlib import Path

Path(out_dir).mkdir(parents=True, exist_ok=True)
''' + SUMMARY),
    ("code", '''
arm = phaselab.Hamiltonian("p**2/2 - w0**2*cos(x) - f*x*cos(W*t)", ["x"], ["p"],
                           params={"w0": w0, "f": torque, "W": drive}, time="t", period="2*pi/W",
                           name="driven torsion arm")
for eq in arm.equations():
    display(eq)
'''),
    ("code", '''
seeds = np.column_stack([np.linspace(-max_angle, max_angle, int(n_seeds)), np.zeros(int(n_seeds))])
strobe = phaselab.section(arm, seeds, plane="stroboscopic", crossings=int(periods), dt=dt, method=method)
strobe
'''),
    ("md", '''
Each orbit's mean angle advance per drive period, divided by $2\\pi$, is its rotation
number around the driven motion; orbits with the same rational value belong to one island chain.
'''),
    ("code", '''
centre = np.nanmean(strobe.points[0, :, :], axis=0)   # the innermost orbit circles the driven motion
rotation = []
for k in range(strobe.n_orbits):
    z = strobe.points[k, :strobe.counts[k]]
    ang = np.unwrap(np.arctan2(z[:, 1] - centre[1], z[:, 0] - centre[0]))
    rotation.append(abs(ang[-1] - ang[0]) / (2 * np.pi * max(len(ang) - 1, 1)))
for x0, r in zip(seeds[:, 0], rotation):
    print(f"x0 = {x0:+.2f}: rotation number {r:.4f}")
'''),
    ("code", '''
files = [save(strobe, Path(out_dir) / f"driven_section{s}", title=f"Driven torsion arm, drive {drive:g} rad/s")
         for s in (".png", ".svg", ".pdf")]
files.append(save(strobe, Path(out_dir) / "driven_section.csv"))
write_summary(rotation=rotation, points=int(strobe.counts.sum()), dt_used=strobe.dt,
              mean_square_angle=float(np.nanmean(strobe.points[..., 0] ** 2)),
              worst_energy_error=float(np.nanmax(np.abs(strobe.energy_error))))
[f.name for f in files]
'''),
]

# ----------------------------------------------------------------------------- (e) kicked rotor
NOTEBOOKS["kicked_rotor"] = [
    ("parameters", '''
# Every number this notebook uses. A rotor on a test stand gets a short hammer blow once per
# turn; between blows it spins freely. Angle and momentum are taken modulo 2 pi.
kicks = [0.4, 0.9, 1.6, 3.0]     # kick strengths
grid = 6                 # seeds per axis (grid x grid orbits)
iterates = 300           # kicks recorded per orbit
coverage_bins = 60       # cells per axis for the chaotic-area estimate
figure_dpi = 110         # resolution of the PNG figures
out_dir = "rotor_output"
'''),
    ("md", '''
# A kicked rotor: islands and a chaotic sea

The kick-then-drift map $p' = p + K \\sin q$, $q' = q + p'$ (both mod $2\\pi$) is
area-preserving. For small $K$ most orbits lie on invariant curves spanning the cylinder;
as $K$ grows they break, and islands are left in a chaotic sea.
'''),
    ("code", '''
import numpy as np
import phaselab
from phaselab.export import save
from pathlib import Path

Path(out_dir).mkdir(parents=True, exist_ok=True)
''' + SUMMARY),
    ("code", '''
rotor = phaselab.AreaPreservingMap([("p", "p + K*sin(q)"), ("q", "q + p")], ["q"], ["p"],
                                   params={"K": kicks[0]}, modulus="2*pi", name="kicked rotor")
print(rotor.area_check, "check: Jacobian determinant", rotor.determinant)
qq, pp = np.meshgrid(np.linspace(0.1, 2 * np.pi - 0.1, int(grid)), np.linspace(0.1, 2 * np.pi - 0.1, int(grid)),
                     indexing="ij")
seeds = np.column_stack([qq.ravel(), pp.ravel()])
sections = {K: phaselab.section(rotor, seeds, crossings=int(iterates), params={"K": K}) for K in kicks}
'''),
    ("md", '''
Fixed points: $(q, p) = (\\pi, 0)$ is elliptic while the trace of the Jacobian,
$2 - K$, lies in $(-2, 2)$, i.e. for $0 < K < 4$; $(0, 0)$ is always hyperbolic.
'''),
    ("code", '''
fixed = {}
for K in kicks:
    pts = phaselab.equilibria(rotor, params={"K": K})
    fixed[K] = [(round(float(e.state[0]), 6), round(float(e.state[1]), 6), e.stability) for e in pts]
    print(f"K = {K:g}:", fixed[K])

def chaotic_fraction(sec, bins=int(coverage_bins)):
    """Fraction of the torus covered by the orbit that covers most of it."""
    edges = np.linspace(0, 2 * np.pi, bins + 1)
    best = 0
    for k in range(sec.n_orbits):
        x, y = sec.xy(k)
        best = max(best, int((np.histogram2d(x, y, [edges, edges])[0] > 0).sum()))
    return best / bins**2

sea = {K: chaotic_fraction(s) for K, s in sections.items()}
for K, f in sea.items():
    print(f"K = {K:g}: the widest orbit covers {f:.1%} of the cylinder")
'''),
    ("code", '''
files = []
for K, sec in sections.items():
    tag = f"{K:.2f}".replace(".", "p")
    files.append(save(sec, Path(out_dir) / f"rotor_K{tag}.png", point_size=0.9, size=(5.5, 4.6),
                      dpi=figure_dpi, title=f"Kicked rotor, K = {K:g}"))
    files.append(save(sec, Path(out_dir) / f"rotor_K{tag}.csv"))
files.append(save(sections[kicks[-1]], Path(out_dir) / "rotor_strongest.svg", point_size=0.9))
write_summary(kicks=list(map(float, kicks)), widest_orbit_cover=[sea[K] for K in kicks],
              fixed_points={str(K): v for K, v in fixed.items()},
              points=[int(sections[K].counts.sum()) for K in kicks])
[f.name for f in files]
'''),
]

# ----------------------------------------------------------------------------- (f) chain
NOTEBOOKS["oscillator_chain"] = [
    ("parameters", '''
# Every number this notebook uses. A bench model of a string of equal masses joined by
# slightly nonlinear springs, both ends clamped.
n_masses = 8             # moving masses
alpha = 0.25             # quadratic spring nonlinearity
mode = 1                 # the normal mode that gets all the energy at t = 0
amplitude = 1.0          # its initial amplitude (mode coordinate)
t_end = 1500.0           # run time (units of 1 / spring frequency)
samples = 600            # samples kept along the run
dt = 0.05                # step
shown_modes = 4          # mode energies plotted
out_dir = "chain_output"
'''),
    ("md", '''
# A chain of coupled oscillators: energy sharing among modes

$n$ unit masses on springs with a cubic term in the potential,
$H = \\sum p_i^2/2 + \\sum_{i=0}^{n} [(q_{i+1}-q_i)^2/2 + \\alpha (q_{i+1}-q_i)^3/3]$, ends fixed.
All energy starts in one normal mode; the nonlinearity passes it to the others, and for
small amplitudes it comes back almost completely after a while.
'''),
    ("code", '''
import numpy as np
import matplotlib.pyplot as plt
import phaselab
from phaselab.export import save
from pathlib import Path

Path(out_dir).mkdir(parents=True, exist_ok=True)
''' + SUMMARY),
    ("code", '''
chain = phaselab.models.fput_chain(n=int(n_masses))
N = int(n_masses)
j = np.arange(1, N + 1)
k = np.arange(1, N + 1)
modes = np.sqrt(2 / (N + 1)) * np.sin(np.outer(j, k) * np.pi / (N + 1))   # orthogonal, symmetric
omega = 2 * np.sin(k * np.pi / (2 * (N + 1)))
state0 = np.zeros(2 * N)
state0[:N] = amplitude * modes[:, mode - 1]
run = phaselab.trajectory(chain, state0, t_end, dt=dt, params={"alpha": alpha},
                          save_every=max(1, int(round(t_end / dt / samples))))
run
'''),
    ("code", '''
q = run.states[0, :, :N]
p = run.states[0, :, N:]
Q = q @ modes
P = p @ modes
mode_energy = 0.5 * (P**2 + (omega * Q)**2)       # harmonic energy of each normal mode
share = mode_energy / mode_energy.sum(axis=1, keepdims=True)
print(f"largest energy error along the run: {np.nanmax(np.abs(run.energy_error)):.2e}")
print(f"lowest share left in mode {mode}: {share[:, mode - 1].min():.3f}")

fig, ax = plt.subplots(figsize=(6.5, 3.4))
palette = ["#2b5d7d", "#d2824b", "#5c8f4e", "#9e4a6e", "#e0b64a", "#3f9a96"]
for m_ in range(min(int(shown_modes), N)):
    ax.plot(run.t, mode_energy[:, m_], lw=1, color=palette[m_ % len(palette)], label=f"mode {m_ + 1}")
ax.set_xlabel("t")
ax.set_ylabel("mode energy")
ax.legend(frameon=False, fontsize=8, ncol=2)
ax.set_title(f"{N} masses, alpha = {alpha:g}: energy among the normal modes", fontsize=9)
fig.tight_layout()
for suffix in (".png", ".svg"):
    fig.savefig(Path(out_dir) / f"mode_energies{suffix}", dpi=110)
np.savetxt(Path(out_dir) / "mode_energies.csv", np.column_stack([run.t, mode_energy]), delimiter=",",
           header="t," + ",".join(f"mode{m_ + 1}" for m_ in range(N)), comments="")
'''),
    ("md", '''
A surface of section of the same run's neighbourhood: orbits started with the energy in the
chosen mode at a few amplitudes, recorded when the first mass passes its rest position
moving right, shown in the middle mass's coordinates.
'''),
    ("code", '''
amps = amplitude * np.linspace(0.4, 1.0, 4)
starts = np.zeros((len(amps), 2 * N))
starts[:, :N] = amps[:, None] * modes[:, mode - 1][None, :]
starts[:, N] = 1e-3       # a small push so the first mass crosses q1 = 0 moving right
sec = phaselab.section(chain, starts, plane={"q1": 0.0}, crossings=60, dt=dt, params={"alpha": alpha},
                       axes=(f"q{N // 2}", f"p{N // 2}"))
files = [save(sec, Path(out_dir) / f"chain_section{s}", title="Oscillator chain, section q1 = 0")
         for s in (".png", ".svg")]
files.append(save(sec, Path(out_dir) / "chain_section.csv"))
write_summary(lowest_share=float(share[:, mode - 1].min()), final_share=share[-1].tolist(),
              worst_energy_error=float(np.nanmax(np.abs(run.energy_error))), section_points=int(sec.counts.sum()))
[f.name for f in files]
'''),
]


def build(name: str, cells) -> nbformat.NotebookNode:
    nb = new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.metadata["language_info"] = {"name": "python"}
    for kind, text in cells:
        text = text.strip("\n")
        if kind == "parameters":
            cell = new_code_cell(text)
            cell.metadata["tags"] = ["parameters"]
        elif kind == "md":
            cell = new_markdown_cell(text)
        else:
            cell = new_code_cell(text)
        nb.cells.append(cell)
    for i, cell in enumerate(nb.cells):
        cell["id"] = f"{name[:20]}-{i}"
    return nb


#: README pictures: notebook, parameters for a fuller run, (file written, name in images/)
IMAGES = [
    ("two_mode_molecule", {"energies": [0.24], "n_seeds": 20, "crossings": 250},
     "molecule_E0p240.png", "molecule_section.png"),
    ("kicked_rotor", {"kicks": [1.2], "grid": 7, "iterates": 400}, "rotor_K1p20.png", "kicked_rotor.png"),
    ("bead_on_spinning_hoop", {"n_seeds": 14, "periods": 200, "spin_sweep": [0.0, 12.0, 9]},
     "ripple_section.png", "rippling_ring.png"),
    ("driven_oscillator", {"n_seeds": 18, "periods": 250, "max_angle": 2.5}, "driven_section.png",
     "driven_arm.png"),
]


def render_images() -> None:
    """Run the notebooks at fuller sizes and copy the README pictures into images/."""
    import tempfile

    import papermill

    out = HERE / "images"
    out.mkdir(exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        for name, params, produced, target in IMAGES:
            work = Path(tmp) / name
            work.mkdir()
            papermill.execute_notebook(str(HERE / f"{name}.ipynb"), str(work / "run.ipynb"),
                                       parameters={**params, "out_dir": str(work / "out")},
                                       kernel_name="python3", cwd=str(work), progress_bar=False)
            # an adaptive 64-colour palette keeps the scatter plots near 100 KB
            from PIL import Image

            with Image.open(work / "out" / produced) as img:
                img.convert("RGB").quantize(colors=64, method=Image.Quantize.MEDIANCUT).save(
                    out / target, optimize=True)
            print(f"wrote {out / target} ({(out / target).stat().st_size // 1024} KiB)")


def main(argv=None) -> int:
    for name, cells in NOTEBOOKS.items():
        path = HERE / f"{name}.ipynb"
        nbformat.write(build(name, cells), path)
        print(f"wrote {path}")
    if argv and "--images" in argv:
        render_images()
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
