# The language server's input: LSP frames (`Content-Length: n`, blank line, n
# bytes of JSON) read from a byte stream, robust to whatever a broken or
# hostile client sends.
#
# pygls' own reader wants exactly `Content-Length: <digits>\r\n`: a length
# of 10^20 overflowed a read and killed the server, and a frame it could not
# read (`Content-Length: abc`, bytes after the body, a lower-case header,
# LF-only line ends) left it reading the next frames as headers, alive but
# never answering again. Here header names are case-insensitive, lines may
# end in LF alone, a frame whose length is unusable or above the message cap
# is skipped with a warning, and reading resumes at the next Content-Length
# header, wherever in a line it starts. Imports nothing of the server.

from __future__ import annotations

from collections.abc import Callable, Iterator
from typing import BinaryIO

MAX_MESSAGE_BYTES = 32 << 20  # a 4 MiB source (the cap of sources.py) escaped in JSON, with room
MAX_HEADER_LINE = 1 << 16
_NAME = b"content-length:"


def frames(stream: BinaryIO, warn: Callable[[str], None],
           max_bytes: int = MAX_MESSAGE_BYTES) -> Iterator[bytes]:
    """The bodies of the LSP frames on `stream`, until end of input.

    A frame that cannot be read is reported through `warn` and skipped; the
    body of a skipped frame is not read (its length cannot be trusted), so
    reading picks up at the next `Content-Length` header.
    """
    while True:
        length: int | None = None
        problem: str | None = None
        seen = False
        while True:
            line = stream.readline(MAX_HEADER_LINE)
            if not line:
                return
            text = line.rstrip(b"\r\n")
            if not text:
                if seen:
                    break
                continue  # blank lines between frames
            at = text.lower().find(_NAME)
            if at < 0:
                continue  # another header (Content-Type) or junk before the next frame
            if at > 0:
                warn(f"skipped {at} byte(s) of input before a Content-Length header")
            seen = True
            value = text[at + len(_NAME):].strip()
            if value.isdigit() and len(value) <= 12:
                length, problem = int(value), None
            else:
                length, problem = None, f"Content-Length {value[:40].decode('ascii', 'replace')!r} is not a number"
        if length is None:
            warn(f"frame skipped: {problem or 'no Content-Length header'}")
            continue
        if length > max_bytes:
            warn(f"frame skipped: Content-Length {length} is above the message cap of {max_bytes} bytes")
            continue
        body = stream.read(length)
        if len(body) < length:
            warn("input ended inside a message")
            return
        yield body
