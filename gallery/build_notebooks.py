"""Write the gallery notebooks (outputs stripped) from their percent-format scripts.

Each notebook's source is a Python script beside it in jupytext's percent format
(``gallery/<name>.py``: cells start at ``# %%`` lines, markdown cells at ``# %% [markdown]``,
and the first cell, tagged ``parameters``, holds every number the notebook depends on). The
scripts import what they share from ``gallery_tools.py``.

    python gallery/build_notebooks.py            # write every <name>.ipynb from <name>.py
    python gallery/build_notebooks.py --check    # exit 1 if a committed notebook differs
    python gallery/build_notebooks.py --images   # also rerun four notebooks at fuller sizes
                                                 # and refresh the README pictures in images/

The ``.ipynb`` files are committed and are what tests/test_gallery.py executes; that test
also checks that each equals what this script builds from its source.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent

#: the first line of a notebook source (a helper module starts otherwise)
FIRST_LINE = '# %% tags=["parameters"]'

KERNELSPEC = {"name": "python3", "display_name": "Python 3", "language": "python"}


def scripts(folder: Path = HERE) -> list[Path]:
    """The notebook sources in ``folder``: the .py files whose first line opens the
    parameters cell."""
    out = []
    for path in sorted(folder.glob("*.py")):
        with open(path, encoding="utf-8") as fh:
            if fh.readline().rstrip("\n") == FIRST_LINE:
                out.append(path)
    return out


def build(script: Path):
    """The notebook of one percent-format script: outputs stripped, fixed metadata and cell
    ids (so building twice gives the same file).

    Returns
    -------
    nbformat.NotebookNode
    """
    import jupytext

    script = Path(script)
    nb = jupytext.read(script, fmt="py:percent")
    nb.metadata = {"kernelspec": dict(KERNELSPEC), "language_info": {"name": "python"}}
    for i, cell in enumerate(nb.cells):
        cell["id"] = f"{script.stem[:20]}-{i}"
        if cell.cell_type == "code":
            cell.outputs = []
            cell.execution_count = None
    first = nb.cells[0] if nb.cells else None
    if first is None or first.cell_type != "code" or "parameters" not in first.metadata.get("tags", []):
        raise ValueError(f"{script.name}: the first cell must be a code cell tagged parameters ({FIRST_LINE})")
    return nb


def notebook_text(script: Path) -> str:
    """The .ipynb file content built from ``script``."""
    import nbformat

    return nbformat.writes(build(script), version=4) + "\n"


def _replace(path: Path, write) -> None:
    """Call ``write(temporary_path)`` beside ``path`` (same suffix), then rename it to ``path``."""
    tmp = path.with_name(f".{path.stem}.{os.getpid()}{path.suffix}")
    try:
        write(tmp)
        os.replace(tmp, path)
    finally:
        tmp.unlink(missing_ok=True)


def stale(folder: Path = HERE) -> list[str]:
    """Names of the notebooks whose committed .ipynb differs from what their script builds
    (or is missing), and of .ipynb files without a script."""
    out = []
    sources = scripts(folder)
    for script in sources:
        target = script.with_suffix(".ipynb")
        if not target.exists() or target.read_text(encoding="utf-8") != notebook_text(script):
            out.append(target.name)
    names = {s.stem for s in sources}
    out += [p.name + " (no script)" for p in sorted(folder.glob("*.ipynb")) if p.stem not in names]
    return out


#: README pictures: notebook, parameters for a fuller run, (file written, name in images/)
IMAGES = [
    ("two_mode_molecule", {"energies": [0.24], "n_seeds": 20, "crossings": 250},
     "molecule_E0p240.png", "molecule_section.png"),
    ("kicked_rotor", {"kicks": [1.2], "grid": 7, "iterates": 400}, "rotor_K1p20.png", "kicked_rotor.png"),
    ("bead_on_spinning_hoop", {"n_seeds": 14, "periods": 200, "spin_sweep": [0.0, 12.0, 9]},
     "ripple_section.png", "rippling_ring.png"),
    ("driven_oscillator", {"n_seeds": 18, "periods": 250, "max_angle": 2.5}, "driven_section.png",
     "driven_arm.png"),
    ("field_line_islands", {}, "tangle.png", "field_line_tangle.png"),
]


def render_images() -> None:
    """Run the notebooks at fuller sizes and copy the README pictures into images/."""
    import papermill
    from PIL import Image

    # the kernels import gallery_tools from this folder, wherever they run
    os.environ["PYTHONPATH"] = os.pathsep.join([str(HERE)] + [p for p in [os.environ.get("PYTHONPATH")] if p])
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
            with Image.open(work / "out" / produced) as img:
                small = img.convert("RGB").quantize(colors=64, method=Image.Quantize.MEDIANCUT)
            _replace(out / target, lambda tmp: small.save(tmp, format="PNG", optimize=True))
            print(f"wrote {out / target} ({(out / target).stat().st_size // 1024} KiB)")


def main(argv=None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    if "--check" in argv:
        drifted = stale()
        for name in drifted:
            print(f"out of date: {name} (run python gallery/build_notebooks.py)")
        return 1 if drifted else 0
    for script in scripts():
        target = script.with_suffix(".ipynb")
        text = notebook_text(script)
        _replace(target, lambda tmp: tmp.write_text(text, encoding="utf-8"))
        print(f"wrote {target}")
    if "--images" in argv:
        render_images()
    return 0


if __name__ == "__main__":
    sys.exit(main())
