# --plot: a PNG of each loop level's working set against one size, or a usage
# error saying why there is nothing to plot.

from __future__ import annotations

CODE = "void f(int N, double A[N][N], double *x) { for (int i = 0; i < N; i++) for (int j = 0; j < N; j++) x[i] += A[i][j]; }"


def test_plot_is_written(tmp_path, run_cli):
    out = tmp_path / "ws.png"
    status, _, err = run_cli("analyze", "--code", CODE, "--at", "N=64", "--plot", str(out))
    assert status == 0, err
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_nothing_to_plot_is_a_usage_error(tmp_path, run_cli):
    out = tmp_path / "ws.png"
    status, _, err = run_cli("analyze", "--code", "for (int i = 0; i < 8; i++) x[i] = 0;", "--plot", str(out))
    assert status == 2 and "nothing to plot" in err
    assert not out.exists()


def test_roofline_panel_with_a_machine(tmp_path, run_cli):
    from pathlib import Path

    box = Path(__file__).parent / "inputs" / "roofline" / "box.toml"
    out = tmp_path / "roof.png"
    status, _, err = run_cli("analyze", "--code", CODE, "--at", "N=64", "--machine", str(box), "--plot", str(out))
    assert status == 0, err
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
