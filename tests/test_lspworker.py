# Tests of tripcount/lspworker.py: the language server's analysis child returns
# results, is killed by cancel (the running call returns None at once, the
# next one gets a fresh child), and is replaced after a number of analyses.

from __future__ import annotations

import operator
import threading
import time

from tripcount.lspworker import Worker


def test_results_come_back_and_the_child_is_recycled():
    w = Worker(operator.concat, recycle_after=2)
    try:
        assert w.run("tide", "-gauge") == "tide-gauge"
        first = w.proc.pid
        assert w.run("a", "b") == "ab"
        assert w.proc.pid == first
        assert w.run("c", "d") == "cd"  # the third job: a fresh child
        assert w.proc.pid != first
    finally:
        w.stop()


def test_cancel_stops_a_running_analysis():
    w = Worker(operator.pow)
    try:
        assert w.run(2, 10) == 1024
        threading.Timer(0.5, w.cancel).start()
        start = time.monotonic()
        assert w.run(3, 10**9) is None  # minutes of work, killed
        assert time.monotonic() - start < 30
        assert w.run(2, 5) == 32  # a fresh child
    finally:
        w.stop()
    assert w.proc is None
