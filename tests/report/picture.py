"""Renders the picture of a review document shown in the README (docs/report-example.png).

    python3 tests/report/picture.py [MODEL] [OUT.png]

It runs `sdeck report` on the model (default: the demo funding-rate model), opens the page
in Debian's headless Chromium, and keeps the part from the first factor to the first fan
chart. Set SDECK to the binary (default target/debug/sdeck).
"""

import os
import pathlib
import subprocess
import sys
import tempfile

from playwright.sync_api import sync_playwright

from test_report_browser import CHROMIUM, FLAGS, ROOT


def main():
    model = sys.argv[1] if len(sys.argv) > 1 else "demo-models/cir_funding_rate.sde"
    out = sys.argv[2] if len(sys.argv) > 2 else str(ROOT / "docs" / "report-example.png")
    binary = os.environ.get("SDECK", str(ROOT / "target" / "debug" / "sdeck"))
    with tempfile.TemporaryDirectory() as work:
        html = pathlib.Path(work) / "report.html"
        subprocess.run([binary, "report", model, "--output", str(html)], cwd=ROOT, check=True)
        with sync_playwright() as p:
            context = p.chromium.launch_persistent_context(
                str(pathlib.Path(work) / "profile"),
                executable_path=CHROMIUM,
                args=FLAGS,
                headless=True,
                viewport={"width": 1000, "height": 800},
            )
            page = context.new_page()
            page.goto(html.as_uri())
            top = page.eval_on_selector("section.factor", "e => e.getBoundingClientRect().top + scrollY")
            bottom = page.eval_on_selector("svg.fan", "e => e.getBoundingClientRect().bottom + scrollY")
            page.screenshot(
                path=out,
                full_page=True,
                clip={"x": 0, "y": top - 12, "width": 1000, "height": bottom - top + 24},
            )
            context.close()
    print(out)


if __name__ == "__main__":
    main()
