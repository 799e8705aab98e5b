"""`sdeck lsp` in a real editor: Neovim from the distribution's package, headless, runs
neovim_session.lua (open, diagnostics, hover, quick fix, edit, format) and the test
checks what the editor ended with. Skipped where `nvim` is not installed (.ci/run
installs it)."""

from __future__ import annotations

import json
import pathlib
import shutil
import subprocess

import pytest

from conftest import SDECK

HERE = pathlib.Path(__file__).resolve().parent

# A square-root funding rate of the (fictional) Brackenfield Savings that breaks Feller.
MODEL = (
    "model brackenfield_rate\nclock year\nhorizon 1 year\n"
    "param kappa = 0.2 [1/year] > 0\nparam theta = 4%\nparam xi = 25% [1/sqrt(year)] > 0\n"
    "shock W\nfactor r = 3% >= 0\ndr = kappa * (theta - r) dt + xi * sqrt(r) dW\n"
)


@pytest.mark.skipif(shutil.which("nvim") is None, reason="Neovim is not installed")
def test_a_headless_neovim_session(tmp_path):
    model = tmp_path / "brackenfield.sde"
    model.write_text(MODEL)
    out = tmp_path / "session.json"
    setup = (
        f"lua SDECK_BIN={json.dumps(SDECK)} SDECK_MODEL={json.dumps(str(model))} "
        f"SDECK_OUT={json.dumps(str(out))}"
    )
    subprocess.run(
        ["nvim", "--headless", "--clean", "-n", "-c", setup, "-c", f"luafile {HERE / 'neovim_session.lua'}"],
        timeout=120,
        check=False,
        capture_output=True,
    )
    result = json.loads(out.read_text())
    assert "error" not in result, result
    assert "feller-condition" in result["opened"], result
    assert "square-root" in result["hover"], result["hover"]
    assert "| mean |" in result["hover"], result["hover"]
    # κ ≥ ξ²/(2θ) = 0.0625/0.08 = 0.78125 → 0.782 (Feller 1951; Cox, Ingersoll & Ross 1985).
    assert result["fix"].startswith("Raise `kappa` to 0.782"), result["fix"]
    assert "param kappa = 0.782 [1/year] > 0" in result["fixed_text"], result["fixed_text"]
    assert "unknown-name" in result["edited"], result["edited"]
    assert "dr = kappa * (theta - r) dt + xi * sqrt(r) dW" in result["formatted"], result["formatted"]
