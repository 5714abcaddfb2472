# Robustness of the language server: `python -m tripcount serve` as a
# subprocess, spoken to over pipes with raw framing (tests/lspwire.py).
# 1,000 malformed or random messages (bad headers, bad JSON, wrong methods,
# wrong params, out-of-order requests, didChange before didOpen, huge
# documents), then a valid hover must still be answered. Everything is
# bounded by timeouts; the server is killed if it does not exit.

from __future__ import annotations

import json
import os
import random
import time
from typing import Any

from internal import is_internal
from lspwire import WireClient, frame
from lspwire import message as msg

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
N_MESSAGES = 1000
TEST_TIMEOUT_S = 170.0

VALID = ("void tide(int N, double *A)\n{\n  for (int i = 0; i < N; i++)\n"
         "    for (int j = 0; j <= i; j++)\n      A[i] += 1.0;\n}\n")


def _uri(k: int) -> str:
    return f"file:///tmp/tripcount-lsp-fuzz/doc{k}.c"


def random_message(rng: random.Random, k: int) -> bytes:
    """One malformed, random or out-of-order message (never `exit` or `shutdown`)."""
    kind = rng.randrange(12)
    uri = _uri(rng.randrange(5))
    if kind == 0:  # bad headers
        return rng.choice([b"Content-Length: abc\r\n\r\n{}", b"Content-Type: x\r\n\r\n",
                           b"content-length: 2\r\nX: y\r\n\r\n{}", b"\r\n\r\n", b"garbage\r\n\r\n",
                           b"Content-Length: -5\r\n\r\n", b"Content-Length: 3\r\n\r\n{}}"])
    if kind == 1:  # bad JSON, correctly framed
        return frame(rng.choice([b"{", b"{\"jsonrpc\": \"2.0\", \"id\": ", b"\xff\xfe\x00", b"nul", b"[1,2",
                                 b"{\"id\": 1, \"method\": }", "\u00f1\U0001f30a".encode()]))
    if kind == 2:  # JSON that is not JSON-RPC
        return msg(rng.choice([[], 5, "text", None, {"jsonrpc": "1.0"}, {"id": k}, {"method": 7, "id": k},
                               {"jsonrpc": "2.0", "id": [1], "method": "textDocument/hover"}]))
    if kind == 3:  # wrong methods
        return msg({"jsonrpc": "2.0", "id": 10_000 + k, "method": rng.choice(["foo", "textDocument/nothing", "$/x",
                    "workspace/executeCommand", ""]), "params": {}})
    if kind == 4:  # wrong params for real methods
        return msg({"jsonrpc": "2.0", "id": 10_000 + k, "method": rng.choice(
            ["textDocument/hover", "textDocument/inlayHint"]), "params": rng.choice(
            [None, [], {"textDocument": {}}, {"textDocument": {"uri": uri}, "position": {"line": "x"}},
             {"textDocument": {"uri": uri}, "position": {"line": -1, "character": -7}},
             {"textDocument": {"uri": uri}, "position": {"line": 10**9, "character": 10**9}},
             {"textDocument": {"uri": uri}, "range": {"start": {"line": 5, "character": 0},
                                                      "end": {"line": 0, "character": 0}}}])})
    if kind == 5:  # didChange before (or without) didOpen, with nonsense ranges
        return msg({"jsonrpc": "2.0", "method": "textDocument/didChange", "params": {
            "textDocument": {"uri": _uri(100 + rng.randrange(50)), "version": rng.randrange(-3, 9)},
            "contentChanges": [rng.choice([{"text": "for (;;)"}, {"range": {"start": {"line": 7, "character": 99},
                                           "end": {"line": 0, "character": 0}}, "text": "}{"}])]}})
    if kind == 6:  # open / change / close in random order on a few documents
        text = rng.choice([VALID, "{{{", "for (int i = 0; i < N; i++) A[i] = 1;", "\x00\u00f1\r\n\t", ""])
        method = rng.choice(["textDocument/didOpen", "textDocument/didClose", "textDocument/didSave",
                             "textDocument/didChange"])
        params: dict[str, Any] = {"textDocument": {"uri": uri, "languageId": "c", "version": k, "text": text}}
        if method == "textDocument/didChange":
            params = {"textDocument": {"uri": uri, "version": k}, "contentChanges": [{"text": text}]}
        return msg({"jsonrpc": "2.0", "method": method, "params": params})
    if kind == 7:  # out-of-order requests: hover on unopened documents, a second initialize, cancels
        return msg(rng.choice([
            {"jsonrpc": "2.0", "id": 10_000 + k, "method": "textDocument/hover",
             "params": {"textDocument": {"uri": _uri(200 + k)}, "position": {"line": 0, "character": 0}}},
            {"jsonrpc": "2.0", "id": 10_000 + k, "method": "initialize", "params": {"capabilities": {}}},
            {"jsonrpc": "2.0", "method": "$/cancelRequest", "params": {"id": rng.randrange(10_000, 11_000)}},
            {"jsonrpc": "2.0", "method": "initialized", "params": {}},
        ]))
    if kind == 8 and rng.randrange(60) == 0:  # huge documents (rare: each costs seconds)
        size = rng.choice([3 * 1024 * 1024, 1024 * 1024])
        text = ("/* " + "x" * 70 + " */\n") * (size // 75)
        return msg({"jsonrpc": "2.0", "method": "textDocument/didOpen",
                    "params": {"textDocument": {"uri": _uri(300 + k), "languageId": "c", "version": 1,
                                                "text": text}}})
    if kind == 9:  # random bytes, framed
        return frame(bytes(rng.randrange(256) for _ in range(rng.randrange(40))))
    if kind == 10:  # a response from the client nobody asked for
        return msg({"jsonrpc": "2.0", "id": rng.randrange(100), "result": None})
    return msg({"jsonrpc": "2.0", "id": 10_000 + k, "method": "textDocument/hover",
                "params": {"textDocument": {"uri": uri}, "position": {"line": rng.randrange(8),
                                                                      "character": rng.randrange(40)}}})


def _assert_no_internal_errors(client: WireClient, log_path: str) -> None:
    """No published diagnostic reports an internal error, and the server logged no failure of
    its own (a failed analysis is contained as a TC900 diagnostic and a log line: both fail the
    test; pygls logs a traceback for each message it cannot read, which is not one)."""
    internal = [(m["params"].get("uri"), d.get("code"), d.get("message"))
                for m in list(client.received) if m.get("method") == "textDocument/publishDiagnostics"
                for d in (m.get("params") or {}).get("diagnostics") or []
                if isinstance(d.get("code"), str) and is_internal(d["code"])]
    assert not internal, internal[:5]
    with open(log_path, errors="replace") as f:
        log = f.read()
    own = [line for line in log.splitlines()
           if "analysis failed" in line or "reading the client's messages failed" in line]
    assert not own, own[:5]


def _client(tmp: str) -> WireClient:
    env = dict(os.environ, TRIPCOUNT_CACHE_DIR=os.path.join(tmp, "cache"),
               PYTHONPATH=ROOT + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return WireClient(env, cwd=tmp, log=os.path.join(tmp, "server.log"), kill_after=TEST_TIMEOUT_S)


def test_server_survives_malformed_messages_then_answers_a_hover(tmp_path):
    client = _client(str(tmp_path))
    try:
        init = client.request("initialize", {"processId": None, "rootUri": None, "capabilities": {}}, rid=1)
        assert "result" in init
        client.send(msg({"jsonrpc": "2.0", "method": "initialized", "params": {}}))
        rng = random.Random(20240517)
        for k in range(N_MESSAGES):
            client.send(random_message(rng, k))
        assert client.proc.poll() is None, "the server exited during the malformed messages"
        uri = "file:///tmp/tripcount-lsp-fuzz/final.c"
        client.send(msg({"jsonrpc": "2.0", "method": "textDocument/didOpen", "params": {
            "textDocument": {"uri": uri, "languageId": "c", "version": 1, "text": VALID}}}))
        hover = None
        end = time.monotonic() + 120
        rid = 50_000
        while time.monotonic() < end:
            rid += 1
            r = client.request("textDocument/hover", {"textDocument": {"uri": uri},
                                                      "position": {"line": 3, "character": 6}},
                               timeout=max(1.0, end - time.monotonic()), rid=rid)
            if r.get("result"):
                hover = r["result"]
                break
            time.sleep(0.5)
        assert hover is not None, "no hover answer after the malformed messages"
        text = json.dumps(hover)
        assert "i + 1" in text or "N" in text, text[:500]  # the inner loop runs i + 1 times per entry
    finally:
        status = client.close()
    assert status is not None, "the server did not exit after shutdown/exit"
    _assert_no_internal_errors(client, str(tmp_path / "server.log"))


BAD_FRAMES = {
    "length 10^20": b"Content-Length: 100000000000000000000\r\n\r\n{}",
    "length 2^63-1": b"Content-Length: 9223372036854775807\r\n\r\n{}",
    "length 3,000,000,000": b"Content-Length: 3000000000\r\n\r\n{}",
    "length not a number": b"Content-Length: abc\r\n\r\n{}",
    "extra body bytes": frame(b"{}") + b"xyz",
    "lower-case header": b"content-length: 2\r\n\r\n{}",
    "LF-only line ends": b"Content-Length: 2\n\n{}",
}


def test_server_answers_after_each_malformed_frame(tmp_path):
    # each used to kill the server (OverflowError) or leave it alive but deaf
    client = _client(str(tmp_path))
    try:
        assert "result" in client.request("initialize", {"processId": None, "rootUri": None, "capabilities": {}},
                                          rid=1, timeout=60)
        for k, (name, data) in enumerate(sorted(BAD_FRAMES.items())):
            client.send(data)
            reply = client.request("tripcount/unknown", {}, rid=100 + k, timeout=30)
            assert "error" in reply, name  # answered: method not found
            assert client.proc.poll() is None, name
    finally:
        status = client.close()
    assert status == 0
    log = (tmp_path / "server.log").read_text(errors="replace")
    assert "frame skipped" in log and "Traceback" not in log
    _assert_no_internal_errors(client, str(tmp_path / "server.log"))
