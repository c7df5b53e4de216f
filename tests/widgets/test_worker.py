"""The explorer's worker (JobRunner) waited on from inside a running event loop, as a
notebook cell does with ``explorer.wait()``: the results addressed to the blocked loop are
delivered by the wait itself, not after its timeout."""

from __future__ import annotations

import asyncio
import time

from phaselab.widgets.worker import JobRunner


def test_wait_inside_a_running_loop_delivers_without_the_timeout():
    got = []

    async def cell():
        runner = JobRunner(background=True)
        try:
            for k in range(3):
                runner.submit(f"job-{k}", lambda k=k: k * k, lambda out: got.append(out.value))
            t0 = time.monotonic()
            done = runner.wait(20.0)      # blocks the loop, as a cell does
            return done, time.monotonic() - t0
        finally:
            runner.close()

    done, seconds = asyncio.run(cell())
    assert done and sorted(got) == [0, 1, 4]
    assert seconds < 10.0, seconds        # before: the full 20 s, the loop never ran the deliveries


def test_results_posted_to_the_loop_are_applied_once():
    got = []

    async def cell():
        runner = JobRunner(background=True)
        try:
            runner.submit("a", lambda: 1, lambda out: got.append(out.value))
            assert runner.wait(20.0)
            await asyncio.sleep(0.05)     # the loop runs its own copy of the delivery: skipped
            return runner.busy
        finally:
            runner.close()

    assert asyncio.run(cell()) is False
    assert got == [1]
