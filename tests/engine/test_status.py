"""The status table: one code per reason an orbit stops, each with its words, handed whole to
the compiled loops (DEVELOPERS.md, "Status codes")."""

import numpy as np

from phaselab.engine import status


def _codes():
    return {name: value for name, value in vars(status).items()
            if name.isupper() and isinstance(value, int) and value in status.STATUS
            and name not in ("COMPOSITION", "GAUSS", "RK4") and not name.startswith(("SECTION", "IMPLICIT", "PERIODIC"))}


def test_every_code_is_distinct_and_has_words():
    codes = _codes()
    assert status.OK == 0
    assert len(set(status.STATUS)) == len(status.STATUS)
    for code, words in status.STATUS.items():
        assert isinstance(code, int) and (code >= 0 or code == status.NOT_RUN)
        assert isinstance(words, str) and words.strip() and words == words.strip()
    assert set(codes.values()) <= set(status.STATUS)
    # the codes set outside the loops live in the same table
    for code in (status.STILL, status.OFF_SHELL, status.NOT_RUN):
        assert code in status.STATUS


def test_the_loops_get_the_same_numbers():
    for name, value in status.LOOP_CONSTANTS.items():
        assert getattr(status, name) == value, name
    # every code a loop can set is in the table
    for name in ("OK", "LEFT_BOX", "NOT_FINITE", "NOT_CONVERGED", "TIME_LIMIT", "NO_CROSSING"):
        assert status.LOOP_CONSTANTS[name] in status.STATUS


def test_words_and_stopped_orbits_of_a_batch():
    codes = np.array([status.OK, status.LEFT_BOX, status.NOT_FINITE, status.TIME_LIMIT, 99])
    words = status.status_words(codes)
    assert words[:4] == [status.STATUS[c] for c in codes[:4]]
    assert words[4] == "status 99"  # an unknown code is named, never dropped
    assert status.stopped(codes).tolist() == [False, True, True, False, False]
    assert status.status_words(status.OK) == ["ok"]


def test_the_mixin_reads_the_table():
    class Result(status.StatusReport):
        def __init__(self, codes):
            self.status = np.asarray(codes)

    r = Result([status.OK, status.NOT_CONVERGED])
    assert r.status_text == ["ok", status.STATUS[status.NOT_CONVERGED]]
    assert r.escaped.tolist() == [False, True]
