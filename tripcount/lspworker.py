# The language server's analysis process: documents are analysed in a child
# process, one at a time, so that an analysis can always be stopped.
#
# On a thread the per-nest hard stop (SIGALRM) cannot fire, so a hard nest
# ran far past its limit while every other document waited and `exit` waited
# for it. In the child the hard stop works (its main thread runs the
# analysis), and the server can kill the child: when a newer version of the
# document supersedes the analysis, at `exit`, or past a wall-clock backstop.
# The child is replaced after a number of analyses, which bounds what it can
# accumulate (memos, caches of the engine). Imports nothing of the server.

from __future__ import annotations

import multiprocessing
import threading
from collections.abc import Callable
from typing import Any

RECYCLE_AFTER = 200  # analyses per child before a fresh one
BACKSTOP_S = 900.0  # a file's own budget (30 x the per-nest limit) ends it sooner


def _serve_jobs(conn: Any, analyze: Callable[[str | None, str], Any]) -> None:
    """The child: analyse each (path, text) received, send the result back."""
    while True:
        try:
            path, text = conn.recv()
        except (EOFError, OSError):
            return
        conn.send(analyze(path, text))


class Worker:
    """One analysis child at a time; `run` blocks (call it off the event loop),
    `cancel` may be called from any thread and makes the running `run` return None."""

    def __init__(self, analyze: Callable[[str | None, str], Any], recycle_after: int = RECYCLE_AFTER) -> None:
        self.analyze = analyze
        self.recycle_after = recycle_after
        self.proc: Any = None
        self.conn: Any = None
        self.jobs = 0
        self.lock = threading.Lock()

    def _start(self) -> None:
        ctx = multiprocessing.get_context("spawn")  # no fork of a process with threads
        parent, child = ctx.Pipe()
        proc = ctx.Process(target=_serve_jobs, args=(child, self.analyze), name="tripcount-analysis")
        proc.start()
        child.close()
        with self.lock:
            self.proc, self.conn, self.jobs = proc, parent, 0

    def run(self, path: str | None, text: str, timeout: float = BACKSTOP_S) -> Any:
        """The analysis of `text`, or None when it was cancelled, timed out or the child died."""
        if self.proc is None or not self.proc.is_alive() or self.jobs >= self.recycle_after:
            self.stop()
            self._start()
        self.jobs += 1
        conn = self.conn
        try:
            conn.send((path, text))
            if conn.poll(timeout):
                return conn.recv()
        except (EOFError, OSError, BrokenPipeError):
            pass
        self.stop()  # cancelled, timed out or died: the next run starts a fresh child
        return None

    def cancel(self) -> None:
        """Kill the child (the running analysis, if any, ends with None)."""
        with self.lock:
            proc = self.proc
        if proc is not None and proc.is_alive():
            proc.kill()

    def stop(self) -> None:
        """Kill the child and release it."""
        with self.lock:
            proc, conn = self.proc, self.conn
            self.proc = self.conn = None
        if proc is not None:
            if proc.is_alive():
                proc.kill()
            proc.join(5)
        if conn is not None:
            conn.close()
