"""Write every chart and the HTML report of the demo into one folder, to be looked at as pictures.

Usage::

    python tools/review_pictures.py OUT_DIR [--database-url URL]

Loads and solves the demo network (a fresh database is best: the demo adds a
load batch), solves its last two weeks as a linked horizon too, and writes
into ``OUT_DIR``: the network picture and the HTML report of a week and of a
horizon week, the price chart of a site in both, a headless Chromium
screenshot of each HTML report (Debian's ``/usr/bin/chromium`` through
Playwright, when both are installed) and ``index.html`` showing them all.
Assertions on the figures live in tests/test_charts.py and
tests/test_html_report.py; this is for the eye: overlapping labels, parallel
modes, shortage marks, legends and titles.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
from pathlib import Path

CHROMIUM = Path("/usr/bin/chromium")
PLANNER = [sys.executable, "-m", "planner.cli"]
WEEK, HORIZON, SITE = "2026-W52", "2026-W51..2026-W52", "C54"


def planner(*args: str, url: str | None) -> str:
    extra = ["--database-url", url] if url else []
    done = subprocess.run([*PLANNER, *args, *extra], capture_output=True, text=True, check=False)
    if done.returncode != 0:
        raise SystemExit(f"planner {' '.join(args)} failed ({done.returncode}): {done.stderr}")
    return done.stdout


def screenshot(html: Path, png: Path) -> bool:
    """A full-page screenshot of ``html``; False when Chromium or Playwright is missing."""
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        return False
    if not CHROMIUM.exists():
        return False
    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=str(CHROMIUM), args=["--no-sandbox"], headless=True)
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 900})
            page.goto(html.resolve().as_uri())
            page.screenshot(path=str(png), full_page=True)
        finally:
            browser.close()
    return True


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path)
    parser.add_argument("--database-url")
    options = parser.parse_args()
    out, url = options.out, options.database_url
    out.mkdir(parents=True, exist_ok=True)
    planner("demo", "--folder", str(out / "demo"), url=url)
    planner("solve", "--horizon", HORIZON, url=url)
    horizon_run = planner("runs", "--kind", "horizon", "--last", "1", "--format", "csv", url=url).splitlines()[1].split(",")[0]
    pictures = []
    for name, run in (("week", []), ("horizon", ["--run", horizon_run])):
        html, chart, prices = out / f"{name}.html", out / f"{name}_network.png", out / f"{name}_{SITE}.png"
        planner("report", "-p", WEEK, *run, "--html", str(html), "--chart", str(chart), url=url)
        planner("prices", SITE, *run, "--chart", str(prices), url=url)
        pictures += [chart, prices]
        if screenshot(html, out / f"{name}_report.png"):
            pictures.append(out / f"{name}_report.png")
    index = "".join(f"<h2>{p.name}</h2><img src='{p.name}' style='max-width:100%'>" for p in pictures)
    (out / "index.html").write_text(f"<!doctype html><meta charset='utf-8'><title>pictures</title>{index}")
    print(f"{len(pictures)} pictures in {out / 'index.html'}")


if __name__ == "__main__":
    main()
