"""End-to-end tests of `sdeck fmt`, the command face of the formatter the server uses."""

from __future__ import annotations

import subprocess

from conftest import SDECK

MESSY = "param  k=2[1/year]>0 # speed\nshock W\nfactor x=0\ndx=-k*x dt+0.1 dW\n"
TIDY = "param k = 2 [1/year] > 0  # speed\nshock W\nfactor x = 0\ndx = -k * x dt + 0.1 dW\n"


def run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([SDECK, "fmt", *args], capture_output=True, text=True)


def test_check_reports_without_changing_then_fmt_rewrites(tmp_path):
    model = tmp_path / "ashby_spread.sde"
    model.write_text(MESSY)
    checked = run("--check", str(model))
    assert checked.returncode == 1
    assert "not formatted" in checked.stdout
    assert model.read_text() == MESSY
    assert run(str(model)).returncode == 0
    assert model.read_text() == TIDY
    assert run("--check", str(model)).returncode == 0


def test_a_file_with_syntax_errors_is_left_unchanged(tmp_path):
    broken = tmp_path / "broken.sde"
    broken.write_text("param k = = 2\n")
    result = run(str(broken))
    assert result.returncode == 2
    assert "syntax error" in result.stderr
    assert broken.read_text() == "param k = = 2\n"


def test_folders_are_searched_for_models(tmp_path):
    (tmp_path / "desk").mkdir()
    (tmp_path / "desk" / "a.sde").write_text(MESSY)
    (tmp_path / "desk" / "notes.txt").write_text("param  k=2\n")
    assert run(str(tmp_path)).returncode == 0
    assert (tmp_path / "desk" / "a.sde").read_text() == TIDY
    assert (tmp_path / "desk" / "notes.txt").read_text() == "param  k=2\n"
