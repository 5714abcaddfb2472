# A minimal client of `python -m tripcount serve` over pipes, with raw framing:
# for messages no real client would send (the robustness tests) and for plain
# request/response timing (bench/bench_check.py). The end-to-end editor tests
# use pytest-lsp; this is the wire underneath, shared by tests/test_lsp.py,
# tests/robustness/test_lsp_fuzz.py and the benchmark.

from __future__ import annotations

import json
import queue
import subprocess
import sys
import threading
import time
from collections.abc import Callable, Mapping
from typing import IO, Any

SERVER = [sys.executable, "-m", "tripcount", "serve"]


def frame(body: bytes) -> bytes:
    """One LSP message: Content-Length header, blank line, body."""
    return b"Content-Length: %d\r\n\r\n" % len(body) + body


def message(obj: Any) -> bytes:
    """A JSON value, framed."""
    return frame(json.dumps(obj).encode())


def _is_response(m: dict[str, Any]) -> bool:
    return "id" in m and "method" not in m


class WireClient:
    """The server process (its stderr to the file `log`, else discarded), a reader
    thread that splits its output into messages (all of them kept in `received`),
    replies kept by id, and an optional kill switch after `kill_after` seconds."""

    def __init__(self, env: Mapping[str, str], cwd: str | None = None, log: str | None = None,
                 kill_after: float | None = None) -> None:
        self.log: IO[bytes] | None = open(log, "wb") if log else None  # noqa: SIM115 - closed in close()
        self.proc = subprocess.Popen(SERVER, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                     stderr=self.log if self.log is not None else subprocess.DEVNULL,
                                     cwd=cwd, env=dict(env))
        self.inbox: queue.Queue[dict[str, Any]] = queue.Queue()
        self.received: list[dict[str, Any]] = []  # every message, in order (the inbox is consumed)
        self.replies: dict[Any, dict[str, Any]] = {}
        self.next_id = 0
        threading.Thread(target=self._read, daemon=True).start()
        self.watchdog = threading.Timer(kill_after, self.proc.kill) if kill_after else None
        if self.watchdog is not None:
            self.watchdog.start()

    def _read(self) -> None:
        out = self.proc.stdout
        assert out is not None
        while True:
            length = None
            while True:
                line = out.readline()
                if not line:
                    return
                line = line.strip()
                if not line:
                    break
                if line.lower().startswith(b"content-length:"):
                    length = int(line.split(b":", 1)[1])
            if length is None:
                continue
            body = out.read(length)
            try:
                m = json.loads(body)
            except ValueError:
                m = {"unparsable": body[:200].decode(errors="replace")}
            m = m if isinstance(m, dict) else {"not_an_object": m}
            self.received.append(m)
            self.inbox.put(m)

    def send(self, data: bytes) -> None:
        """Raw bytes to the server."""
        assert self.proc.stdin is not None
        self.proc.stdin.write(data)
        self.proc.stdin.flush()

    def notify(self, method: str, params: Any) -> None:
        """A notification."""
        self.send(message({"jsonrpc": "2.0", "method": method, "params": params}))

    def request(self, method: str, params: Any, timeout: float = 120.0, rid: Any = None) -> dict[str, Any]:
        """Send a request (id `rid`, else the next free one) and wait for its response."""
        if rid is None:
            self.next_id += 1
            rid = self.next_id
        self.send(message({"jsonrpc": "2.0", "id": rid, "method": method, "params": params}))
        return self.reply(rid, timeout)

    def _next(self, deadline: float, what: str) -> dict[str, Any]:
        try:
            m = self.inbox.get(timeout=max(deadline - time.monotonic(), 0.01))
        except queue.Empty:
            raise AssertionError(f"nothing from the server: {what}") from None
        rid = m.get("id")
        if _is_response(m) and isinstance(rid, (int, str)):
            self.replies[rid] = m
        return m

    def reply(self, rid: Any, timeout: float = 120.0) -> dict[str, Any]:
        """The response with id `rid` (responses to other ids are kept for later)."""
        deadline = time.monotonic() + timeout
        while rid not in self.replies:
            if time.monotonic() > deadline:
                raise AssertionError(f"no response to request {rid!r} within {timeout} s")
            self._next(deadline, f"no response to request {rid!r} within {timeout} s")
        return self.replies.pop(rid)

    def wait(self, pred: Callable[[dict[str, Any]], bool], timeout: float = 600.0) -> dict[str, Any]:
        """The next message satisfying `pred` (others are dropped; responses are kept)."""
        deadline = time.monotonic() + timeout
        while True:
            m = self._next(deadline, f"no awaited message within {timeout} s")
            if pred(m):
                return m

    def close(self) -> int | None:
        """shutdown and exit; the exit status, or None when the server had to be killed."""
        try:
            self.send(message({"jsonrpc": "2.0", "id": "close", "method": "shutdown", "params": None}))
            self.send(message({"jsonrpc": "2.0", "method": "exit", "params": None}))
            assert self.proc.stdin is not None
            self.proc.stdin.close()
        except OSError:
            pass
        try:
            return self.proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait(timeout=5)
            return None
        finally:
            if self.watchdog is not None:
                self.watchdog.cancel()
            if self.log is not None:
                self.log.close()
