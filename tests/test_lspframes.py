# Tests of tripcount/lspframes.py: LSP frames read from a byte stream. Valid
# frames come out whole; a frame whose length is unusable or too large is
# skipped with a warning and reading resumes at the next valid frame.

from __future__ import annotations

import io

import pytest

from tripcount.lspframes import frames

GOOD = b'{"jsonrpc": "2.0", "id": 7, "method": "shutdown"}'


def frame(body: bytes, header: bytes = b"Content-Length: %d", end: bytes = b"\r\n") -> bytes:
    return (header % len(body) if b"%d" in header else header) + end + end + body


def read(data: bytes, max_bytes: int = 1 << 20) -> tuple[list[bytes], list[str]]:
    warnings: list[str] = []
    return list(frames(io.BufferedReader(io.BytesIO(data)), warnings.append, max_bytes)), warnings


def test_valid_frames_and_other_headers():
    data = frame(GOOD) + b"Content-Type: application/vscode-jsonrpc; charset=utf-8\r\n" + frame(b"[1]")
    assert read(data) == ([GOOD, b"[1]"], [])


@pytest.mark.parametrize("bad", [
    b"Content-Length: abc\r\n\r\n" + GOOD,                  # not a number
    b"Content-Length: 100000000000000000000\r\n\r\n" + GOOD,  # 10^20: used to overflow the read
    b"Content-Length: 9223372036854775807\r\n\r\n" + GOOD,    # 2^63-1
    b"Content-Length: 3000000000\r\n\r\n" + GOOD,           # above the cap
    frame(GOOD) + b"trailing junk",                          # bytes after the body
    b"Content-Length: \r\n\r\n",                            # empty
])
def test_a_bad_frame_is_skipped_and_the_next_one_read(bad):
    bodies, warnings = read(bad + frame(GOOD))
    assert bodies[-1] == GOOD
    assert len(bodies) <= 2 and warnings


@pytest.mark.parametrize("variant", [frame(GOOD, b"content-length: %d"), frame(GOOD, end=b"\n"),
                                     frame(GOOD, b"CONTENT-LENGTH:%d")])
def test_lenient_spellings_are_read(variant):
    assert read(variant + frame(GOOD)) == ([GOOD, GOOD], [])


def test_end_of_input_inside_a_body_ends_the_stream():
    bodies, warnings = read(b"Content-Length: 50\r\n\r\n{}")
    assert bodies == [] and warnings == ["input ended inside a message"]
