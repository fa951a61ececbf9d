"""The weekly HTML report: one self-contained file, checked as text and in a real
headless Chromium (Debian's ``chromium`` package, installed by .ci/run)."""

from __future__ import annotations

import base64
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest
import sqlalchemy as sa
from typer.testing import CliRunner

from planner.cli import app
from planner.errors import PlannerError
from planner.reports.html import render_week_report, write_week_report
from planner.reports.queries import week_report
from tests.test_views import solve_hand_network

CHROMIUM = Path("/usr/bin/chromium")
# Headless Chromium as root, on a machine without network access.
CHROMIUM_ARGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
]


@pytest.fixture
def week11_html(engine: sa.Engine, write_folder, tmp_path: Path) -> Path:
    """The report of W11 (price moves against W10, binding capacities, no shortage),
    written by the command line."""
    solve_hand_network(engine, write_folder)
    path = tmp_path / "week11.html"
    result = CliRunner().invoke(app, ["report", "--period", "2026-W11", "--html", str(path)])
    assert result.exit_code == 0, result.output
    assert f"weekly report of 2026-W11 written to {path}" in result.stderr
    return path


class _Page(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.images: list[dict[str, str]] = []
        self.tags: set[str] = set()
        self.links: list[str] = []
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.add(tag)
        values = {name: value or "" for name, value in attrs}
        if tag == "img":
            self.images.append(values)
        self.links += [values[name] for name in ("href", "src") if name in values and tag != "img"]

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def test_html_report_is_self_contained(week11_html: Path) -> None:
    html = week11_html.read_text(encoding="utf-8")
    page = _Page()
    page.feed(html)
    assert "script" not in page.tags and "link" not in page.tags and page.links == []
    # Network picture, and a price chart each for C1 and C2, the two sites that moved.
    assert len(page.images) == 3
    for image in page.images:
        prefix = "data:image/png;base64,"
        assert image["src"].startswith(prefix)
        assert base64.b64decode(image["src"][len(prefix):])[:8] == b"\x89PNG\r\n\x1a\n"
        assert image["alt"]
    text = re.sub(r"\s+", " ", " ".join(page.text))
    for expected in (
        "Weekly network plan: 2026-W11",
        "exact (primal cost = dual objective)",
        "460.00",  # hand computed cost of W11
        "Biggest price moves versus 2026-W10",
        "P2->C2 rail",
        "11.00",  # hand computed value of one more unit of rail capacity
        "No shortage",
    ):
        assert expected in text, expected


def test_write_week_report_writes_nothing_without_a_run(engine: sa.Engine, tmp_path: Path) -> None:
    path = tmp_path / "none.html"
    report = write_week_report(engine, "2026-W11", path)
    assert report.empty and "nothing is loaded yet, so there is no run of 2026-W11" in report.message
    assert not path.exists()
    with pytest.raises(PlannerError, match="nothing is loaded yet"):
        render_week_report(engine, report)


def test_html_report_shows_shortages(engine: sa.Engine, write_folder) -> None:
    solve_hand_network(engine, write_folder)
    html = render_week_report(engine, week_report(engine, "2026-W10"))
    page = _Page()
    page.feed(html)
    text = " ".join(page.text)
    assert "Harbour Shop" in text and "75.00" in text  # hand computed: 15 short x 5
    assert "no previous week to compare prices with: 2026-W09 was never loaded" in text
    assert "versus 2026-W09" not in text
    assert len(page.images) == 1  # no price moved: only the network picture


@pytest.mark.skipif(not CHROMIUM.exists(), reason="needs Debian's chromium at /usr/bin/chromium (.ci/run installs it)")
def test_html_report_renders_in_chromium(week11_html: Path, tmp_path: Path) -> None:
    sync_api = pytest.importorskip("playwright.sync_api", reason="needs playwright (pip install -e '.[dev]')")
    messages: list[str] = []
    with sync_api.sync_playwright() as playwright:
        browser = playwright.chromium.launch_persistent_context(
            str(tmp_path / "profile"), executable_path=str(CHROMIUM), args=CHROMIUM_ARGS, headless=True,
        )
        try:
            page = browser.new_page()
            page.on("console", lambda message: messages.append(f"{message.type}: {message.text}"))
            page.on("pageerror", lambda error: messages.append(f"page error: {error}"))
            page.goto(week11_html.as_uri())
            images = page.eval_on_selector_all(
                "img", "images => images.map(i => [i.complete, i.naturalWidth, i.naturalHeight])"
            )
            heading = page.inner_text("h1")
            page.screenshot(path=str(tmp_path / "week11.png"), full_page=True)
        finally:
            browser.close()
    errors = [m for m in messages if m.startswith(("error", "page error"))]
    assert errors == []
    assert heading == "Weekly network plan: 2026-W11"
    # The network picture (900 x 650) and two price charts (800 x 400), all decoded.
    assert images == [[True, 900, 650], [True, 800, 400], [True, 800, 400]]
