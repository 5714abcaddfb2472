# Tests of tripcount/report/progress.py: a status line on a terminal only.

from __future__ import annotations

import io

from tripcount.report.progress import MIN_FILES, Progress


class Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_drawn_on_a_terminal_and_erased():
    err = Terminal()
    p = Progress(err, MIN_FILES + 2)
    p.step(0, "harbour/quay.c")
    assert "0/10 harbour/quay.c" in err.getvalue()
    p.clear()
    assert err.getvalue().endswith("\r\x1b[K")


def test_silent_when_not_a_terminal_or_few_files():
    err = io.StringIO()
    p = Progress(err, 500)
    p.step(3, "tide.c")
    p.clear()
    assert err.getvalue() == ""
    tty = Terminal()
    few = Progress(tty, MIN_FILES - 1)
    few.step(0, "tide.c")
    few.clear()
    assert tty.getvalue() == ""
