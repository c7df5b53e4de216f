"""phaselab.warm (engine/warm.py): every shared loop of the public calls compiled ahead of time,
on worker processes that share the kernel cache (and its file locks) with each other and with
this process."""

import pytest

import phaselab
from phaselab.engine import warm as warm_module
from phaselab.errors import ParameterError


def test_workers_load_what_the_session_compiled():
    """The session fixture compiled every path; worker processes started now find all of it in
    the shared cache: no path runs a single compiler pass (common practice: a cache hit compiles
    nothing), and every path is reported once."""
    report = warm_module.run_paths(warm_module.LONGEST_FIRST, workers=2)
    names = [n for group in warm_module.LONGEST_FIRST for n in group]
    assert sorted(report) == sorted(names) and len(set(names)) == len(names)
    assert {name: passes for name, (_, passes) in report.items() if passes} == {}


def test_warm_reports_every_path_in_one_process(capsys):
    """With one worker every path runs here; one line per path as it ends, seconds per path
    returned in the table's order of paths."""
    report = phaselab.warm(verbose=True, workers=1)
    assert list(report) == list(warm_module.paths())
    assert max(report.values()) < 30.0
    lines = capsys.readouterr().out.strip().splitlines()
    assert sorted(line.rsplit(None, 2)[0].strip() for line in lines) == sorted(report)


def test_every_path_is_in_the_order_of_the_workers():
    listed = [n for group in warm_module.LONGEST_FIRST for n in group]
    assert sorted(listed) == sorted(warm_module.paths())


@pytest.mark.parametrize("bad", [0, -1, 1.5, "2", True])
def test_bad_worker_counts_are_refused(bad):
    with pytest.raises(ParameterError, match="workers"):
        phaselab.warm(workers=bad)
