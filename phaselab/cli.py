"""The ``phaselab`` console command.

::

    phaselab demo [--out DIR]              render the built-in two-mode molecule study
    phaselab render STUDY [--out DIR] [--set KEY=VALUE ...]
                                           compute a study file's section and write its files
    phaselab check STUDY [--set KEY=VALUE ...]  read and check a study file, compute nothing
    phaselab equations STUDY|MODEL [--latex]  print the equations of motion (as LaTeX with --latex)
    phaselab normal-form STUDY|MODEL [--order N] [--at Q,P] [--resonance K] [--latex]
                                           compute and print a normal form (the study's [normal_form])
    phaselab examples                      list the built-in studies and catalogue models
    phaselab keys                          print the reference of study-file tables and keys

``STUDY`` is a path to a study file (TOML, see ``phaselab/studies/README.md``) or the name
of a built-in example. ``--set section.crossings=100`` (repeatable) changes one value of the
file for this run (:mod:`phaselab.studies.overrides`); the changed file is checked as a whole.
Exit status: 0 on success, 2 for a bad study file or bad command line (the message goes to
stderr, without a traceback), 1 for any other refused input,
141 (quietly) when the reader of the output closed the pipe early (``... | head``).
"""

from __future__ import annotations

import argparse
import io
import os
import sys
import time
from pathlib import Path

from phaselab.errors import ModelError, PhaselabError, StudyFileError

OK, FAILED, BAD_INPUT = 0, 1, 2
CLOSED_PIPE = 141


# ----------------------------------------------------------------------------- helpers
def _study_path(text: str) -> Path:
    """A study file path, or the path of the built-in example of that name."""
    from phaselab.studies import example_names, example_path

    path = Path(text)
    if path.suffix.lower() == ".toml" or path.exists() or "/" in text:
        return path
    if text in example_names():
        return example_path(text)
    from phaselab.model.catalogue import MODELS

    raise StudyFileError(f"{text}: no such study file, and no built-in example of that name "
                         f"(examples: {', '.join(example_names())}; catalogue models, for "
                         f"phaselab equations: {', '.join(MODELS)})")


def _read(text: str, overrides=None):
    from phaselab.studies import read_study

    return read_study(_study_path(text), overrides=overrides)


def _unicode_ok(stream) -> bool:
    enc = (getattr(stream, "encoding", None) or "").lower().replace("-", "")
    return enc in ("utf8", "utf_8")


def _print_files(files, out=sys.stdout):
    for path in files:
        print(f"wrote {path}", file=out)


# ----------------------------------------------------------------------------- commands
def cmd_render(args, demo: bool = False) -> int:
    from phaselab.studies import DEMO, example_path, read_study, render_study

    study = read_study(example_path(DEMO)) if demo else _read(args.study, args.set)
    out_dir = Path(args.out)
    n = study.states.count
    bar = None
    progress = None
    if not args.quiet:
        from tqdm import tqdm

        bar = tqdm(total=n, unit="orbit", desc=study.title or study.source, file=sys.stderr,
                   leave=False, dynamic_ncols=True)
        progress = bar.update
    try:
        result = render_study(study, out_dir, progress=progress)
    finally:
        if bar is not None:
            bar.close()
    for index, reason in result.left_out[:10]:
        print(f"note: seed {index} left out: {reason}", file=sys.stderr)
    if len(result.left_out) > 10:
        print(f"note: ... and {len(result.left_out) - 10} more seeds left out", file=sys.stderr)
    for text in result.messages:
        print(f"note: {text}", file=sys.stderr)
    _print_files(result.files)
    print(result.summary())
    if demo:
        print("next: edit a copy of the study file and run `phaselab render <file> --out <folder>`; "
              f"the demo's study file is {example_path(DEMO)}")
    return OK


def cmd_check(args) -> int:
    study = _read(args.study, args.set)
    sec = study.section
    if sec.kind == "plane":
        what = f"plane {sec.coordinate} = {sec.value:g}"
    elif sec.kind == "stroboscopic":
        what = "once per driving period"
    else:
        what = "every iterate"
    print(f"ok: {study.source}: {study.system.name} ({study.system_form}), {study.states.count} starting states, "
          f"{sec.crossings} crossings, section {what}")
    if study.structure is not None:
        st = study.structure
        region = ", ".join(f"{k} in [{lo:g}, {hi:g}]" for k, (lo, hi) in st.ranges.items())
        print(f"  finds {st.returns}-return periodic orbits from {st.resolution} x {st.resolution} "
              f"starts ({region})"
              + (", with the manifolds of the unstable ones" if st.manifolds else ""))
    if study.normal_form is not None:
        from phaselab.studies.normal_form_table import describe

        print(f"  {describe(study.normal_form)}")
    for spec in study.outputs:
        print(f"  writes {study.folder + '/' if study.folder else ''}{spec.file}")
    return OK


def cmd_normal_form(args) -> int:
    """Compute a normal form and print it: of the study's ``[normal_form]`` table, or of a
    catalogue model (or a study without one) at ``--at`` (default: its elliptic equilibrium
    or fixed point of lowest energy found by phaselab.equilibria), to ``--order``."""
    from phaselab.model.catalogue import MODELS
    from phaselab.structures.normal_forms.compute import normal_form
    from phaselab.studies.fields import Fields

    target = args.study
    if target in MODELS and not Path(target).exists():
        system, params, spec = MODELS[target](), None, None
    else:
        study = _read(target)
        system, params, spec = study.system, study.params, study.normal_form
    names = [s.name for s in system.state_symbols]
    f = Fields("command line")
    if args.at is not None:
        at = f.numbers(args.at.split(","), "--at", length=len(names))
    elif spec is not None:
        at = list(spec.at)
    else:
        at = _elliptic_point(system, params)
    order = args.order or (spec.order if spec is not None else 4)
    resonances = args.resonance or (list(spec.resonances) if spec is not None else None) or None
    arithmetic = spec.arithmetic if spec is not None else "auto"
    try:
        nf = normal_form(system, at, order, resonances=resonances, params=params, arithmetic=arithmetic)
    except ModelError as exc:
        if "resonances=" not in str(exc):
            raise
        raise ModelError(f"{exc}; on the command line give each vector as --resonance, e.g. --resonance 1,-1") from None
    if args.latex:
        print(nf.latex())
        return OK
    import sympy as sp

    print(f"{system.name}: {nf!r}")
    print("at " + ", ".join(f"{n} = {v:.10g}" for n, v in zip(names, nf.equilibrium)))
    print(f"arithmetic: {nf.arithmetic} ({nf.arithmetic_note})")
    divisors = ", ".join(f"degree {k}: {v:.4g}" for k, v in sorted(nf.small_divisors.items()))
    print(f"smallest |k.omega| removed: {divisors or 'none'}")
    print()
    print(sp.pretty(sp.Eq(sp.Symbol("H"), nf.hamiltonian, evaluate=False), use_unicode=_unicode_ok(sys.stdout)))
    print()
    print(f"{'degree':>6}  {'powers of J':<16}{'harmonic k':<14}{'cos':>22}  {'sin':>22}")
    for row in nf.table():
        powers = "(" + ", ".join(row["powers"] if isinstance(row["powers"][0], str)
                                 else map(str, row["powers"])) + ")"
        harmonic = "(" + ", ".join(map(str, row["harmonic"])) + ")"
        print(f"{row['degree']:>6}  {powers:<16}{harmonic:<14}{row['cos_value']:>22.15g}  {row['sin_value']:>22.15g}")
    return OK


def _elliptic_point(system, params) -> list:
    """The elliptic equilibrium (or fixed point) of lowest energy, for ``normal-form``."""
    from phaselab.structures.equilibria import equilibria

    found = [e for e in equilibria(system, params=params) if e.stability == "elliptic"]
    if not found:
        raise ModelError(f"{system.name} has no elliptic equilibrium that phaselab.equilibria finds; "
                         "give one with --at")
    found.sort(key=lambda e: float(getattr(e, "energy", 0.0) or 0.0))
    return list(found[0].state)


def cmd_equations(args) -> int:
    import sympy as sp

    from phaselab.model.catalogue import MODELS

    target = args.study
    if target in MODELS and not Path(target).exists():
        system = MODELS[target]()
    else:
        system = _read(target).system
    if args.latex:
        return _print_latex(system)
    uni = _unicode_ok(sys.stdout)
    print(f"{system.name}")
    params = ", ".join(f"{k} = {v:g}" for k, v in system.params.items())
    if params:
        print(f"parameters: {params}")
    print()
    if system.kind == "map":
        print("update (new values in terms of the old):")
        for sym, expr in zip(system.state_symbols, system.update):
            print(sp.pretty(sp.Eq(sp.Symbol(sym.name + "'"), expr, evaluate=False), use_unicode=uni))
        return OK
    print(sp.pretty(sp.Eq(sp.Symbol("H"), system.expr, evaluate=False), use_unicode=uni))
    print()
    print("Hamilton's equations:")
    for eq in system.equations():
        print(sp.pretty(eq, use_unicode=uni))
        print()
    return OK


def _print_latex(system) -> int:
    """The system's defining equations as LaTeX lines (sympy's printer), one per line, for a
    report: H and Hamilton's equations, or a map's update rules."""
    import sympy as sp

    if system.kind == "map":
        for sym, expr in zip(system.state_symbols, system.update):
            print(f"{sp.latex(sp.Symbol(sym.name))}' = {sp.latex(expr)}")
        return OK
    print(f"H = {sp.latex(system.expr)}")
    for eq in system.equations():
        print(sp.latex(eq))
    return OK


def cmd_examples(args) -> int:
    from phaselab.model.catalogue import MODELS
    from phaselab.studies import example_names, example_path, read_study

    print("built-in studies (phaselab render NAME, or copy the file and edit it):")
    for name in example_names():
        study = read_study(example_path(name))
        print(f"  {name:14s} {study.title}")
        print(f"  {'':14s} {example_path(name)}")
    print("catalogue models (phaselab equations NAME; system.model in a study file):")
    print("  " + ", ".join(MODELS))
    return OK


def cmd_keys(args) -> int:
    """Print the study-file reference installed with the package."""
    from importlib import resources

    print(resources.files("phaselab.studies").joinpath("README.md").read_text(encoding="utf-8"))
    return OK


def cmd_warm(args) -> int:
    """Compile the generic loops once for this machine (or find them in the kernel cache)."""
    from phaselab.codegen.cache import cache_dir
    from phaselab.engine import inputs
    from phaselab.engine.warm import warm

    workers = inputs.workers(args.workers)
    print(f"preparing phaselab's shared loops in {cache_dir()}: compiled once per machine (about half "
          f"a minute on two cores; {workers} worker{'s' if workers > 1 else ''}), loaded from there afterwards")
    t0 = time.perf_counter()
    report = warm(verbose=True, workers=workers)
    print(f"done: {len(report)} paths in {time.perf_counter() - t0:.1f} s")
    return OK


# ----------------------------------------------------------------------------- parser
def _order(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a whole number, got {text!r}") from None
    if not 2 <= value <= 16:
        raise argparse.ArgumentTypeError(f"must be between 2 and 16, got {value}")
    return value


def _workers(text: str) -> int:
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a whole number, got {text!r}") from None


def _vector(text: str) -> tuple:
    try:
        return tuple(int(x) for x in text.split(","))
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be whole numbers separated by commas, e.g. 2,-1; got {text!r}") from None


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="phaselab",
        description="Phase-space sections of Hamiltonian systems from study files.")
    from phaselab import __version__

    parser.add_argument("--version", action="version", version=f"phaselab {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    p = sub.add_parser("demo", help="render the built-in two-mode molecule study to a PNG and a CSV")
    p.add_argument("--out", default="phaselab-demo", metavar="DIR",
                   help="folder to write into (default: ./phaselab-demo)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")

    p = sub.add_parser("render", help="compute a study's section and write its figure and data files")
    p.add_argument("study", metavar="STUDY", help="a study file (.toml) or a built-in example name")
    p.add_argument("--out", default=".", metavar="DIR",
                   help="folder the study's files are written into (default: the current folder)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    _add_set(p)

    p = sub.add_parser("check", help="read and check a study file without computing")
    p.add_argument("study", metavar="STUDY", help="a study file (.toml) or a built-in example name")
    _add_set(p)

    p = sub.add_parser("equations", help="print the equations of motion of a study's system or a model")
    p.add_argument("study", metavar="STUDY|MODEL", help="a study file, an example name or a catalogue model")
    p.add_argument("--latex", action="store_true", help="print LaTeX (one equation per line) for a report")

    p = sub.add_parser("normal-form", help="compute and print a normal form at an elliptic equilibrium")
    p.add_argument("study", metavar="STUDY|MODEL", help="a study file (its [normal_form] table), an example name "
                                                        "or a catalogue model")
    p.add_argument("--order", type=_order, default=None, metavar="N",
                   help="highest degree in the distance from the equilibrium (default: the study's, else 4)")
    p.add_argument("--at", default=None, metavar="Q,P",
                   help="the equilibrium, comma-separated in state order (default: the study's, else the "
                        "elliptic one of lowest energy)")
    p.add_argument("--resonance", type=_vector, action="append", default=None, metavar="K",
                   help="a resonance vector to keep, e.g. 2,-1 (repeat for several)")
    p.add_argument("--latex", action="store_true", help="print the normal form as one LaTeX equation")

    sub.add_parser("examples", help="list the built-in studies and catalogue models")
    sub.add_parser("keys", help="print the reference of study-file tables and keys")
    p = sub.add_parser("warm", help="compile the loops every system shares, once per machine (for images "
                                    "and shared installs)")
    p.add_argument("--workers", type=_workers, default=None, metavar="N",
                   help="worker processes compiling side by side (default: one per core)")
    return parser


def _add_set(p) -> None:
    p.add_argument("--set", action="append", default=[], metavar="KEY=VALUE",
                   help="change one value of the study file for this run, e.g. section.crossings=100 or "
                        "params.eps=0.2 (repeatable; checked like the file)")


COMMANDS = {
    "demo": lambda a: cmd_render(a, demo=True),
    "render": cmd_render,
    "check": cmd_check,
    "equations": cmd_equations,
    "normal-form": cmd_normal_form,
    "examples": cmd_examples,
    "keys": cmd_keys,
    "warm": cmd_warm,
}


def main(argv=None) -> int:
    """Run the command line; returns the exit status (also when called from Python)."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse: --help (0) or a usage error (2)
        return int(exc.code or 0)
    except BrokenPipeError:   # --help into a closed pipe
        return _closed_pipe()
    if not args.command:
        try:
            parser.print_help(sys.stderr)
        except BrokenPipeError:
            pass
        return BAD_INPUT
    try:
        status = COMMANDS[args.command](args)
        sys.stdout.flush()  # a closed pipe shows here, not in the interpreter's shutdown
        return status
    except BrokenPipeError:
        return _closed_pipe()
    except StudyFileError as exc:
        print(f"phaselab {args.command}: {exc}", file=sys.stderr)
        return BAD_INPUT
    except PhaselabError as exc:
        print(f"phaselab {args.command}: {exc}", file=sys.stderr)
        return FAILED
    except KeyboardInterrupt:
        print("phaselab: interrupted", file=sys.stderr)
        return 130


def _closed_pipe() -> int:
    """The reader of our output went away (``phaselab equations x | head``): stop quietly,
    as command-line tools do, with the status of a process ended by SIGPIPE (128 + 13).
    Standard output is pointed at the null device, so that the interpreter's last flush at
    exit finds nothing to complain about."""
    try:
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, sys.stdout.fileno())
        os.close(null)
    except (OSError, ValueError, AttributeError, io.UnsupportedOperation):
        pass
    return CLOSED_PIPE


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
