"""What a section is, in words: metadata, labels and footers shared by every export format.

A section's system is duck-typed: a :class:`phaselab.Hamiltonian`, a map with the same
attributes (``name``, ``expr``, ``params``, ``state_symbols``), any simple object, or None.
"""

from __future__ import annotations

import math

import numpy as np

from phaselab.engine.provenance import expression_text, model_labels, plain  # noqa: F401  (expression_text re-exported)
from phaselab.model.units import with_unit

from phaselab.errors import ParameterError

#: Greek letter names that get a Unicode glyph in plain-text labels (bokeh, CSV readers).
GREEK = {
    "alpha": "α", "beta": "β", "gamma": "γ", "delta": "δ", "epsilon": "ε", "zeta": "ζ",
    "eta": "η", "theta": "θ", "iota": "ι", "kappa": "κ", "lambda": "λ", "lamda": "λ", "mu": "μ",
    "nu": "ν", "xi": "ξ", "omicron": "ο", "pi": "π", "rho": "ρ", "sigma": "σ", "tau": "τ",
    "upsilon": "υ", "phi": "φ", "chi": "χ", "psi": "ψ", "omega": "ω",
    "Gamma": "Γ", "Delta": "Δ", "Theta": "Θ", "Lambda": "Λ", "Xi": "Ξ", "Pi": "Π",
    "Sigma": "Σ", "Phi": "Φ", "Psi": "Ψ", "Omega": "Ω",
}


#: Between the items of a footer line.
FOOTER_SEPARATOR = "  ·  "


def check_section(section) -> None:
    """Refuse an object that is not a section, or a section with nothing to show.

    Raises
    ------
    ParameterError
        If ``section`` lacks the fields of :class:`phaselab.orbits.section_result.Section`, or
        has no finite point on the shown axes.
    """
    for name in ("points", "counts", "times", "axes"):
        if not hasattr(section, name):
            raise ParameterError(
                f"export expects a Section (with .points, .counts, .times, .axes); "
                f"got {type(section).__name__} without .{name}")
    pts = np.asarray(section.points)
    if pts.ndim != 3:
        raise ParameterError(
            f"section.points must have shape (n_orbits, max_crossings, 2n), got {pts.shape}")
    i, j = section.axes
    if pts.size == 0 or not np.any(np.isfinite(pts[..., i]) & np.isfinite(pts[..., j])):
        raise ParameterError(
            "the section has no points to export (no orbit crossed the surface); "
            "seed more orbits, integrate longer or check the plane")


def state_symbols(section) -> tuple:
    """The sympy symbols (or names) of every state component, in state order.

    Taken from the system when it knows them; otherwise the two shown axes keep their
    symbols from ``section.axis_symbols`` and the other components are named ``z<k>``.
    """
    ncomp = np.asarray(section.points).shape[-1]
    system = getattr(section, "system", None)
    syms = getattr(system, "state_symbols", None)
    if syms is None and system is not None and hasattr(system, "coords") and hasattr(system, "momenta"):
        syms = tuple(system.coords) + tuple(system.momenta)
    if syms is not None and len(syms) == ncomp:
        return tuple(syms)
    out = [f"z{k}" for k in range(ncomp)]
    axis_syms = tuple(getattr(section, "axis_symbols", ()) or ())
    for idx, sym in zip(section.axes, axis_syms):
        if 0 <= idx < ncomp and sym is not None:
            out[idx] = sym
    return tuple(out)


def state_names(section) -> list[str]:
    """Plain names of the state components (``str`` of each symbol), in state order."""
    return [getattr(s, "name", str(s)) for s in state_symbols(section)]


def axis_symbols(section) -> tuple:
    """The symbols (or names) of the horizontal and vertical axes."""
    syms = tuple(getattr(section, "axis_symbols", ()) or ())
    if len(syms) == 2 and all(s is not None for s in syms):
        return syms
    allsyms = state_symbols(section)
    return tuple(allsyms[k] for k in section.axes)


def momentum_subscript(name: str) -> str:
    """Momenta written run together (``px``, ``pr``, ``ptheta``) as ``p_x``, ``p_r``,
    ``p_theta``, so labels typeset as a subscript; Greek names (``phi``, ``psi``, ``pi``)
    and everything else are left alone."""
    rest = name[1:]
    if (name.startswith("p") and name not in GREEK and rest
            and ((len(rest) == 1 and rest.isalpha()) or rest in GREEK)):
        return f"p_{rest}"
    return name


def mathtext_label(symbol) -> str:
    """A matplotlib mathtext label for a sympy symbol, e.g. ``p_theta`` -> ``$p_{\\theta}$``.

    Falls back to the plain name when matplotlib's mathtext cannot typeset sympy's LaTeX.
    """
    name = getattr(symbol, "name", str(symbol))
    try:
        import sympy as sp

        symbol = sp.Symbol(momentum_subscript(name)) if momentum_subscript(name) != name else symbol
        name = getattr(symbol, "name", name)
        tex = sp.latex(symbol) if isinstance(symbol, sp.Basic) else sp.latex(sp.Symbol(name))
    except Exception:  # any symbol sympy cannot print: keep the plain name
        return name
    label = f"${tex}$"
    try:
        from matplotlib.mathtext import MathTextParser

        MathTextParser("path").parse(label)
    except Exception:  # mathtext lacks some LaTeX macros; a plain name is still readable
        return name
    return label


def unit_of(system, symbol) -> str | None:
    """The unit the model declares for a state component, the time or a parameter (None)."""
    units = getattr(system, "units", None) or {}
    return units.get(getattr(symbol, "name", str(symbol)))


def axis_label(system, symbol) -> str:
    """A figure's axis label: the typeset symbol with its unit, ``"$x$ [m]"``."""
    return with_unit(mathtext_label(symbol), unit_of(system, symbol))


def angle_limits(system, symbol):
    """The interval ``(low, high)`` of a component that is one of the model's angles, else None."""
    intervals = getattr(system, "angle_intervals", None) or {}
    return intervals.get(getattr(symbol, "name", str(symbol)))


def time_name(system) -> str:
    """The name the model's units use for the time (``"t"`` unless the model names it)."""
    time = getattr(system, "time", None)
    return getattr(time, "name", None) or "t"


def label_units(ds, meta: dict) -> None:
    """CF ``units`` attributes on a section dataset's variables, from ``meta["units"]``:
    ``times`` gets the time's unit, ``points`` and ``seeds`` the common unit of their
    components when they share one, else ``component_units`` (one entry per component,
    ``""`` where none is declared)."""
    units = meta.get("units") or {}
    if not units:
        return
    named = set(meta.get("state", [])) | set(meta.get("params", {}))
    time = next((u for k, u in units.items() if k not in named), None)   # the one other name
    if time:
        ds["times"].attrs["units"] = time
    per = [units.get(name, "") for name in meta.get("state", [])]
    for var in ("points", "seeds"):
        if per and all(u == per[0] and u for u in per):
            ds[var].attrs["units"] = per[0]
        elif any(per):
            ds[var].attrs["component_units"] = ", ".join(u or "-" for u in per)


#: deepest nesting of braces accepted in mathtext (titles and notes of figures)
MAX_BRACE_DEPTH = 10


def _has_math(text: str) -> bool:
    """Whether matplotlib typesets ``text`` as mathtext: an even, nonzero number of dollar
    signs that are not escaped as ``\\$`` (matplotlib's own rule)."""
    dollars = text.count("$") - text.count(r"\$")
    return dollars > 0 and dollars % 2 == 0


def text_problem(text: str) -> str | None:
    """Why matplotlib could not draw ``text`` (a title or a note), or None when it can.

    Text without paired dollar signs is drawn as it is. Text with them is mathtext: its
    braces may nest at most :data:`MAX_BRACE_DEPTH` deep and matplotlib's mathtext parser
    must accept it (unknown macros, unclosed groups and the like are refused here, before a
    figure is drawn, instead of failing inside matplotlib).
    """
    if not isinstance(text, str):
        return f"must be text, got {type(text).__name__}"
    if not _has_math(text):
        return None
    depth = deepest = 0
    for ch in text:
        depth += (ch == "{") - (ch == "}")
        deepest = max(deepest, depth)
    if deepest > MAX_BRACE_DEPTH:
        return f"its math ($...$) nests braces {deepest} deep; the limit is {MAX_BRACE_DEPTH}"
    try:
        from matplotlib.mathtext import MathTextParser

        MathTextParser("path").parse(text)
    except RecursionError:
        return "its math ($...$) is nested too deeply to typeset"
    except Exception as exc:  # matplotlib reports every mathtext problem as some exception
        first = str(exc).strip().splitlines()
        why = first[-1].strip() if first else type(exc).__name__
        if len(why) > 120:
            why = why[:117] + "..."
        return (f"its math ($...$) cannot be typeset: {why} (write \\$ for a dollar sign, or "
                "remove the $...$)")
    return None


def plain_label(symbol) -> str:
    """A one-line Unicode label for a symbol: ``p_theta`` -> ``p_θ``, ``omega`` -> ``ω``."""
    name = momentum_subscript(getattr(symbol, "name", str(symbol)))
    parts = name.split("_")
    parts = [GREEK.get(part, part) for part in parts]
    return "_".join(parts)


def used_params(section) -> dict:
    """Parameter values in force: the system's defaults overridden by ``section.params``."""
    system = getattr(section, "system", None)
    params = {}
    defaults = getattr(system, "params", None)
    if isinstance(defaults, dict):
        params.update(defaults)
    params.update(getattr(section, "params", None) or {})
    return {str(k): plain(v) for k, v in params.items()}


def section_metadata(section) -> dict:
    """Everything recorded beside the numbers in a data file.

    Returns
    -------
    dict
        ``system`` (name), ``kind`` ("flow", "map" or ""), ``expression`` (str),
        ``state`` (component names), ``axes``, ``params``, ``energy`` (float or None),
        ``plane``, ``method``, ``dt``, ``phaselab_version``.
    """
    from phaselab import __version__

    system = getattr(section, "system", None)
    energy = getattr(section, "energy", None)
    return {
        "system": str(getattr(system, "name", "") or "") if system is not None else "",
        "kind": str(getattr(system, "kind", "") or ""),
        "expression": expression_text(system),
        "state": state_names(section),
        "axes": [int(a) for a in section.axes],
        "params": used_params(section),
        "energy": None if energy is None else float(energy),
        "plane": plain(dict(getattr(section, "plane", None) or {})),
        "method": str(getattr(section, "method", "") or ""),
        "dt": float(getattr(section, "dt", math.nan)),
        "phaselab_version": __version__,
        **model_labels(system),
    }
