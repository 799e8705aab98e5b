"""Every command ends quietly when the reader of its standard output has gone.

The pipe's read end is closed before the command starts, so every write fails with a
broken pipe, deterministically (a real `| head` closes it at a random moment). The
binary is target/debug/sdeck unless SDECK names another.
"""

import os
import pathlib
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[2]
MODEL = str(ROOT / "demo-models" / "cir_funding_rate.sde")
KESTREL = str(ROOT / "demo-models" / "kestrel_bank_short_rate.sde")


def sdeck_binary():
    return os.environ.get("SDECK", str(ROOT / "target" / "debug" / "sdeck"))


def run_into_closed_pipe(args):
    read_end, write_end = os.pipe()
    os.close(read_end)
    try:
        done = subprocess.run(
            [sdeck_binary(), *args],
            cwd=ROOT,
            stdout=write_end,
            stderr=subprocess.PIPE,
            timeout=120,
        )
    finally:
        os.close(write_end)
    return done.returncode, done.stderr.decode("utf-8", "replace")


@pytest.mark.parametrize(
    "args, status",
    [
        (["check", MODEL], 0),
        (["moments", MODEL], 0),
        (["moments", "--format", "json", MODEL], 0),
        (["simulate", "--paths", "200", "--steps", "2", MODEL], 0),
        (["simulate", "--paths", "200", "--steps", "2", "--format", "json", MODEL], 0),
        (["fmt", "--check", str(ROOT / "tests" / "cli" / "unformatted")], 1),
        (["explain"], 0),
        (["explain", "feller-condition"], 0),
        (["explain", "--markdown"], 0),
        (["curve", KESTREL], 0),
        (["curve", "--format", "json", KESTREL], 0),
        (["curve", "--format", "svg", KESTREL], 0),
        (["diff", MODEL, KESTREL], 0),
        (["report", MODEL], 0),
        (["fit", MODEL, str(ROOT / "demo-models" / "data" / "cir_funding_rate.csv")], 0),
        (["fit", "--format", "json", MODEL, str(ROOT / "demo-models" / "data" / "cir_funding_rate.csv")], 0),
    ],
)
def test_a_closed_stdout_ends_quietly_with_the_commands_status(args, status):
    code, stderr = run_into_closed_pipe(args)
    assert "panicked" not in stderr, stderr
    assert "Broken pipe" not in stderr, stderr
    assert code == status, stderr
