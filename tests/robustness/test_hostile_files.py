# Files that are not C sources to read: FIFOs, devices behind symlinks, huge
# files, and an output path that is one of the inputs. Each must end quickly
# with a diagnostic naming the file and the reason, never hang, never exhaust
# memory, never overwrite the user's file.

from __future__ import annotations

import os

import pytest
from conftest import INPUTS

from tripcount.sources import MAX_SOURCE_BYTES, output_clash, read_bytes

FLUSH = os.path.join(INPUTS, "cli", "harbour_flush.c")


def test_fifo_is_refused_without_blocking(tmp_path, run_cli):
    fifo = tmp_path / "gauge.c"
    os.mkfifo(fifo)
    with pytest.raises(OSError, match="not a regular file"):
        read_bytes(str(fifo))
    status, out, _ = run_cli("analyze", "--no-cache", str(fifo))
    assert status == 2
    assert f"{fifo}:1:1: error: cannot read file: not a regular file" in out
    assert "TC9" in out and "TC900" not in out  # an unreadable file, not an internal error


def test_symlink_to_a_device_is_refused(tmp_path, run_cli):
    link = tmp_path / "endless.c"
    os.symlink("/dev/zero", link)
    status, out, _ = run_cli("analyze", "--no-cache", str(link))
    assert status == 2
    assert "not a regular file" in out


def test_file_over_the_cap_is_refused(tmp_path):
    big = tmp_path / "big.c"
    big.write_bytes(b" " * (MAX_SOURCE_BYTES + 1))
    with pytest.raises(OSError, match="larger than"):
        read_bytes(str(big))
    assert read_bytes(FLUSH).startswith(b"/*")


def test_output_that_is_an_input_is_refused(tmp_path, run_cli):
    src = tmp_path / "k.c"
    src.write_bytes(open(FLUSH, "rb").read())
    before = src.read_bytes()
    link = tmp_path / "link.c"
    os.symlink(src, link)
    hard = tmp_path / "hard.c"
    os.link(src, hard)
    for target in (src, link, hard):
        status, _, err = run_cli("analyze", str(src), "-o", str(target))
        assert status == 2 and "would replace it" in err
        assert src.read_bytes() == before
    # a directory input covers the files under it
    assert output_clash(str(hard), [str(tmp_path)]) is not None
    # a new file is fine
    status, _, _ = run_cli("analyze", str(src), "-o", str(tmp_path / "report.txt"))
    assert status == 0 and src.read_bytes() == before
    # the gate refuses the same way (it used to empty the file)
    for target in (src, link, hard):
        status, _, err = run_cli("check", str(src), "-o", str(target))
        assert status == 2 and "would replace it" in err
        assert src.read_bytes() == before
    status, _, _ = run_cli("check", str(src), "-o", str(tmp_path / "gate.txt"))
    assert status == 0 and src.read_bytes() == before


@pytest.mark.parametrize("command", ["analyze", "check"])
def test_cache_directory_inside_the_analysed_tree_is_refused(tmp_path, monkeypatch, run_cli, command):
    tree = tmp_path / "harbour"
    tree.mkdir()
    (tree / ".git").mkdir()  # a checkout (its root found without running git)
    src = tree / "k.c"
    src.write_bytes(open(FLUSH, "rb").read())
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(tree / ".tc"))
    for target in (str(src), str(tree)):
        status, _, err = run_cli(command, "--format", "json", target)
        assert status == 2 and "inside the analysed tree" in err
    assert sorted(os.listdir(tree)) == [".git", "k.c"]  # nothing written into the tree
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(tmp_path / "elsewhere"))
    status, _, err = run_cli(command, "--format", "json", str(src))
    assert status == 0, err
    assert sorted(os.listdir(tree)) == [".git", "k.c"]
    # a lone file outside any project: its directory is no tree (a cache beside it is fine)
    lone = tmp_path / "lone"
    lone.mkdir()
    (lone / "k.c").write_bytes(src.read_bytes())
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(lone / "cache"))
    assert run_cli(command, "--format", "json", str(lone / "k.c"))[0] == 0


@pytest.mark.parametrize("kind", ["fifo", "device"])
def test_the_gate_refuses_what_is_not_a_regular_file(tmp_path, monkeypatch, run_cli, kind):
    monkeypatch.setenv("TRIPCOUNT_CACHE_DIR", str(tmp_path / "cache"))
    tree = tmp_path / "quay"
    tree.mkdir()
    bad = tree / "gauge.c"
    if kind == "fifo":
        os.mkfifo(bad)
    else:
        os.symlink("/dev/zero", bad)
    for target in (str(bad), str(tree)):  # given, or met in a directory walk
        status, out, err = run_cli("check", target)
        assert status == 2 and "not a regular file" in err
        assert "TC900" not in out + err and "internal error" not in err


def test_standard_input_is_read_up_to_the_cap(run_cli):
    endless = "\0" * (MAX_SOURCE_BYTES + 10)  # as from /dev/zero
    status, _, err = run_cli("analyze", "-", stdin=endless)
    assert status == 2 and "standard input is larger than" in err


def test_parse_file_reads_only_regular_files(tmp_path):
    from tripcount.frontend import parse_file

    fifo = tmp_path / "tide.c"
    os.mkfifo(fifo)
    with pytest.raises(OSError, match="not a regular file"):
        parse_file(str(fifo))


def _codes(out: str) -> list[str]:
    return [line.rsplit("[", 1)[1].rstrip("]") for line in out.splitlines() if line.endswith("]") and "[TC" in line]


def test_a_trigraph_file_is_named_not_silently_empty(run_cli):
    # C99 5.2.1.1 trigraphs; C23 removed them and gcc ignores them unless -trigraphs:
    # read as written, with an error naming the first one (the file gives no nest)
    path = os.path.join(INPUTS, "robustness", "trigraph_quay.c")
    for command in ("analyze", "check"):
        status, out, err = run_cli(command, "--no-cache", path)
        assert f"{path}:1:1: error: trigraph '??=' at 1:1" in out + err, out + err
        assert not any(c.startswith("TC9") for c in _codes(out + err))
    # trigraph spellings inside literals and comments are no trigraphs to warn about
    status, out, _ = run_cli("analyze", "--no-cache", "--code",
                             'void f(double *a) { const char *s = "??="; /* ??< */\n'
                             "  for (int i = 0; i < 4; i++) a[i] = 0; }")
    assert status == 0 and "TC122" not in out and "1 nest(s)" in out


def test_an_old_style_definition_is_named_not_silently_skipped(run_cli):
    path = os.path.join(INPUTS, "robustness", "old_style_tide.c")
    for command in ("analyze", "check"):
        status, out, err = run_cli(command, "--no-cache", path)
        text = out + err
        assert f"{path}:3:1: error: function 'tide_table' at 3:1 is skipped: an old-style (K&R) definition" in text
        assert not any(c.startswith("TC9") for c in _codes(text))
    status, out, _ = run_cli("analyze", "--no-cache", path)
    assert "nest in ebb()" in out and "1 nest(s)" in out  # the next function is read as usual
