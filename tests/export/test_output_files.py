"""Output files and the leftovers of killed processes: one message for a folder that cannot
be written (sections and scan results alike), NUL characters in file names refused, the
temporaries of a killed save, the job files of a killed background build and the private
fallback cache folder removed, and a closed pipe ending the console command quietly.

Running as root, a read-only folder cannot be made with permissions (root writes anyway):
the checks use a folder path whose parent is a regular file, and /sys, where the kernel
refuses new files even to root. As another user a folder with mode 0500 is used as well."""

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest

import phaselab
from phaselab.base.atomic import STALE_SECONDS, atomic_path
from phaselab.engine import inlined_build as background
from phaselab.errors import ParameterError, PhaselabError
from phaselab.export import load_section, save
from phaselab.scan import chaos_map, state_grid

from test_export import molecule_section

ROOT = Path(__file__).resolve().parents[2]
ENV = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))


@pytest.fixture(scope="module")
def section():
    return molecule_section(n_orbits=2, n_cross=5)[0]


@pytest.fixture(scope="module")
def scan_result():
    pytest.importorskip("xarray")
    rotor = phaselab.models.standard_map()
    grid = state_grid(rotor, {"q": (0.1, 6.0, 3), "p": (0.1, 6.0, 2)})
    return chaos_map(rotor, grid, 50, params={"K": 1.2}, progress=False)


def _dead_pid() -> int:
    """The number of a process that has ended (and been waited for)."""
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


def _age(path: Path, seconds: float):
    then = time.time() - seconds
    os.utime(path, (then, then), follow_symlinks=False)


def _unwritable_folders(tmp_path):
    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    folders = [blocker]  # a "folder" that is a regular file
    if Path("/sys/kernel").is_dir():
        folders.append(Path("/sys"))  # sysfs makes no new files, not even for root
    if os.geteuid() != 0:
        locked = tmp_path / "locked"
        locked.mkdir()
        locked.chmod(0o500)
        folders.append(locked)
    return folders


@pytest.mark.parametrize("suffix", [".nc", ".zarr"])
def test_scan_results_and_sections_refuse_an_unwritable_folder_alike(suffix, section, scan_result, tmp_path):
    pytest.importorskip("zarr")
    for folder in _unwritable_folders(tmp_path):
        with pytest.raises(PhaselabError) as from_section:
            save(section, folder / "s.nc")
        with pytest.raises(PhaselabError) as from_scan:
            scan_result.save(folder / f"s{suffix}")
        for caught in (from_section, from_scan):
            assert isinstance(caught.value, ParameterError), caught.value
        a, b = str(from_section.value), str(from_scan.value)
        if folder.is_file():  # the same sentence, naming the "folder"
            assert a == b == f"cannot write into {folder}: not a folder", (a, b)
        else:  # the same sentence, naming the file and the system's reason
            assert a.startswith(f"cannot write {folder / 's.nc'}: "), a
            assert b.startswith(f"cannot write {folder / ('s' + suffix)}: "), b
        assert not list(tmp_path.glob(".*.tmp")) and not list(tmp_path.glob(".*.partial"))


def test_a_nul_in_a_file_name_is_refused(section, scan_result, tmp_path):
    for call in (lambda: save(section, tmp_path / "a\0b.csv"),
                 lambda: scan_result.save(str(tmp_path / "a\0b.nc")),
                 lambda: load_section(str(tmp_path / "a\0b.csv")),
                 lambda: chaos_map(phaselab.models.standard_map(), np.zeros((1, 2)), 5,
                                   store=str(tmp_path / "a\0b.zarr"))):
        with pytest.raises(ParameterError, match="without NUL characters"):
            call()


KILLED_SAVE = """
import os, signal, sys
from phaselab.base.atomic import atomic_path
with atomic_path(sys.argv[1]) as tmp:
    tmp.write_text("half of a file")
    os.kill(os.getpid(), signal.SIGKILL)
"""


def test_the_temporary_of_a_killed_save_is_removed_by_the_next_save(section, tmp_path):
    target = tmp_path / "s.csv"
    proc = subprocess.run([sys.executable, "-c", KILLED_SAVE, str(target)], env=ENV)
    assert proc.returncode == -signal.SIGKILL
    (left,) = [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]
    assert not target.exists()
    # a temporary of a process that still runs, and a fresh one of a dead process, stay
    alive = tmp_path / f".other.csv.{os.getppid()}-0123abcd.tmp"
    alive.write_text("being written")
    fresh = tmp_path / f".fresh.csv.{_dead_pid()}-0123abcd.tmp"
    fresh.write_text("just killed")
    _age(left, 2 * STALE_SECONDS)
    _age(alive, 2 * STALE_SECONDS)
    save(section, target)
    names = sorted(p.name for p in tmp_path.iterdir())
    assert names == sorted([target.name, alive.name, fresh.name]), names
    np.testing.assert_array_equal(load_section(target).points, section.points)


def test_a_killed_zarr_save_leaves_nothing_after_the_next(scan_result, tmp_path):
    pytest.importorskip("zarr")
    partial = tmp_path / f".scan.zarr.{_dead_pid()}-89abcdef.partial"
    (partial / "values").mkdir(parents=True)
    (partial / "values" / "zarr.json").write_text("{}")
    _age(partial, 2 * STALE_SECONDS)
    scan_result.save(tmp_path / "other.zarr")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["other.zarr"]


def test_atomic_path_names_its_temporary_by_process(tmp_path):
    with atomic_path(tmp_path / "x.txt") as tmp:
        assert tmp.name.startswith(f".x.txt.{os.getpid()}-") and tmp.name.endswith(".tmp")
        tmp.write_text("done")
    assert (tmp_path / "x.txt").read_text() == "done"


def test_job_files_of_killed_builds_are_removed(tmp_path):
    dead = tmp_path / f".build-{_dead_pid()}-abc123.pickle"
    marker = tmp_path / f".ready-{_dead_pid()}-abc123.tmp"
    running = tmp_path / f".build-{os.getpid()}-def456.pickle"
    young = tmp_path / f".build-{_dead_pid()}-fff000.pickle"
    other = tmp_path / "kernel.py"
    for path in (dead, marker, running, young, other):
        path.write_bytes(b"x")
    for path in (dead, marker, running, other):
        _age(path, 2 * background.STALE_SECONDS)
    assert background.remove_stale_jobs(tmp_path) == 2
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([running.name, young.name, other.name])


def test_a_killed_build_child_leaves_a_job_the_next_request_removes(tmp_path):
    """A build child killed outright: its claimed job file stays, named by the dead child,
    and is removed by the next build request once old enough."""
    job = tmp_path / f".build-{os.getpid()}-0001.pickle"
    job.write_bytes(b"a job")
    code = textwrap.dedent(f"""
        import os, signal
        from phaselab.engine import inlined_build as background
        path = background._claim({str(job)!r})
        print(path.name, flush=True)
        os.kill(os.getpid(), signal.SIGKILL)
    """)
    proc = subprocess.run([sys.executable, "-c", code], env=ENV, capture_output=True, text=True)
    assert proc.returncode == -signal.SIGKILL
    claimed = tmp_path / proc.stdout.strip()
    assert claimed.exists() and not job.exists() and claimed.name != job.name
    _age(claimed, 2 * background.STALE_SECONDS)
    assert background.remove_stale_jobs(tmp_path) == 1 and not claimed.exists()


def test_the_fallback_cache_folder_is_removed_at_exit(tmp_path):
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("x")
    code = "from phaselab.codegen.cache import cache_dir; print(cache_dir(), flush=True)"
    env = dict(ENV, PHASELAB_CACHE_DIR=str(blocker / "cache"))
    proc = subprocess.run([sys.executable, "-W", "ignore", "-c", code], env=env, capture_output=True,
                          text=True, check=True)
    fallback = Path(proc.stdout.strip())
    assert fallback.name.startswith("phaselab-cache-") and fallback != blocker / "cache"
    assert not fallback.exists()


def test_a_closed_pipe_ends_the_console_command_quietly():
    """``phaselab equations molecule | head`` with the reader gone before anything is written."""
    proc = subprocess.Popen([sys.executable, "-m", "phaselab.cli", "equations", "molecule"], env=ENV,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()
    err = proc.stderr.read().decode()
    proc.wait(timeout=120)
    assert proc.returncode == 141 and "Traceback" not in err and "Error" not in err, err
