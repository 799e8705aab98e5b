"""Opens the review document of every demo model in headless Chromium.

For each model: the page logs no error, a screenshot is not blank, every MathML box has
a non-zero size, every figure in the page equals `sdeck moments --format json` of the
same file (and the grid's other times equal `--at` of each), and the charts are there.

Set SDECK to the binary (default target/debug/sdeck). The browser is Debian's
/usr/bin/chromium; playwright only drives it.
"""

import io
import json
import math
import os
import pathlib
import subprocess
import tempfile

import pytest
from PIL import Image
from playwright.sync_api import sync_playwright

ROOT = pathlib.Path(__file__).resolve().parents[2]
MODELS = sorted((ROOT / "demo-models").glob("*.sde"))
CHROMIUM = "/usr/bin/chromium"
FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


def sdeck(*args):
    binary = os.environ.get("SDECK", str(ROOT / "target" / "debug" / "sdeck"))
    done = subprocess.run([binary, *args], cwd=ROOT, capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    return done.stdout


@pytest.fixture(scope="module")
def browser():
    with sync_playwright() as p, tempfile.TemporaryDirectory() as profile:
        context = p.chromium.launch_persistent_context(
            profile,
            executable_path=CHROMIUM,
            args=FLAGS,
            headless=True,
            viewport={"width": 1100, "height": 900},
        )
        yield context
        context.close()


def moments(model, at=None):
    args = ["moments", str(model), "--format", "json"]
    if at is not None:
        args += ["--at", repr(at)]
    data = json.loads(sdeck(*args))
    return data, data["factors"]


@pytest.mark.parametrize("model", MODELS, ids=[m.stem for m in MODELS])
def test_report_renders_and_agrees_with_moments(browser, model, tmp_path):
    html = tmp_path / "report.html"
    sdeck("report", str(model), "--simulate", "2000", "--output", str(html))
    text = html.read_text(encoding="utf-8")
    # Self-contained: nothing is fetched.
    for needle in ("src=", "<link", "@import", "url(http"):
        assert needle not in text, needle

    page = browser.new_page()
    errors = []
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("request", lambda r: r.url.startswith("file://") or errors.append("fetched " + r.url))
    page.goto(html.as_uri())
    page.wait_for_load_state("load")

    shot = Image.open(io.BytesIO(page.screenshot(full_page=True))).convert("L")
    low, high = shot.getextrema()
    assert high - low > 100, "the screenshot is blank"
    histogram = shot.histogram()
    assert sum(histogram[:200]) > 0.005 * sum(histogram), "almost no ink on the page"

    boxes = page.eval_on_selector_all(
        "math", "els => els.map(e => { const r = e.getBoundingClientRect(); return [r.width, r.height]; })"
    )
    assert boxes, "no formula"
    assert all(w > 0 and h > 0 for w, h in boxes), boxes
    # MathML is laid out as math (not as unknown inline text): a fraction-free formula
    # with a superscript puts the exponent above the baseline.
    sup = page.eval_on_selector_all(
        "msup",
        "els => els.slice(0, 5).map(e => { const b = e.firstElementChild.getBoundingClientRect();"
        " const x = e.lastElementChild.getBoundingClientRect(); return x.top < b.top; })",
    )
    assert all(sup), sup

    data, factors = moments(model)
    cells = page.eval_on_selector_all(
        "[data-factor][data-figure]",
        "els => els.map(e => [e.dataset.factor, e.dataset.figure, e.dataset.t || null,"
        " e.dataset.value, e.textContent])",
    )
    by_key = {
        (f, fig, None if t is None else float(t)): (float(v), shown) for f, fig, t, v, shown in cells
    }
    horizon = data["at"]
    for f in factors:
        for figure in ("mean", "variance"):
            expected = f[figure]
            key = (f["name"], "mean" if figure == "mean" else "sd", float(horizon))
            if expected is None:
                assert key not in by_key
                continue
            value, _ = by_key[key]
            # Exact: the page shows the sd, the square root (correctly rounded in both
            # languages) of the same variance.
            want = expected if figure == "mean" else math.sqrt(max(expected, 0.0))
            assert value == want, (key, value, want)
        # The shown text is the value to six significant digits.
        for (name, figure, t), (value, shown) in by_key.items():
            if name == f["name"] and value != 0:
                assert math.isclose(float(shown), value, rel_tol=5e-6), (name, figure, shown, value)

    # Every other time of the grid equals `sdeck moments --at` at that time.
    times = sorted({t for (_, fig, t) in by_key if fig == "mean" and t is not None})
    assert len(times) == 5, times
    for t in times[:-1]:
        _, at_t = moments(model, t)
        for f in at_t:
            if f["mean"] is not None:
                assert by_key[(f["name"], "mean", t)][0] == f["mean"]

    n = len(factors)
    cov = page.eval_on_selector_all(
        "[data-matrix=covariance]", "els => els.map(e => [+e.dataset.i, +e.dataset.j, +e.dataset.value])"
    )
    for i, j, v in cov:
        assert v == data["covariance"][i][j]
    if n > 1:
        assert len(cov) == sum(x is not None for row in data["covariance"] for x in row)
    if n >= 3:
        assert page.locator("svg.heat").count() == 1
    assert page.locator("svg.fan").count() == n
    assert errors == []
    page.close()
