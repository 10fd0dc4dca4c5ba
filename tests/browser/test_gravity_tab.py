"""The "Two gravity levels" tab: a ground test beside the flight prediction, as a person sees it.

The tab draws the session's case at its own gravity level and at a second one, and writes the operating
point's regime and symmetric margin for each; those words must equal ``lowgmap margin CASE --gravity G
--json`` at each level (one source for every number). Bugs caught: the tab not wired into the page, the
second level ignored (both panels the same), or margins that differ from the command line's.
"""
from __future__ import annotations

import contextlib
import io
import json
import re

from playwright.sync_api import expect

from lowgmap.app.cli import main as cli_main
from lowgmap.app.files.samples import sample_path
from lowgmap.app.formatting import format_percent

from .conftest import wait_ready


def _margin(level: str) -> dict:
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        code = cli_main(["margin", str(sample_path("ground_test_loop.toml")), "--gravity", level, "--nominal-only",
                         "--json"])
    assert code == 0, out.getvalue()
    return json.loads(out.getvalue())


def test_two_gravity_levels_tab_shows_the_command_lines_margins(browser, server):
    ctx = browser.new_context(viewport={"width": 1280, "height": 800})
    try:
        pg = ctx.new_page()
        pg.set_default_timeout(90_000)
        pg.goto(f"{server}?sample=ground_test_loop")      # invented sample: 1 g, vertical upward flow
        wait_ready(pg)
        pg.locator(".bk-tab", has_text="Two gravity levels").first.click()
        level = pg.get_by_role("textbox", name="second gravity level")
        expect(level).to_have_value("1e-6 g0", timeout=30_000)   # default second level for a case at 1 g
        pg.get_by_role("button", name="Draw both levels").click()
        panels = pg.locator(".gravity-panel")
        expect(panels).to_have_count(2, timeout=120_000)      # two charts built and drawn off the event loop
        expect(pg.get_by_role("img").first).to_be_visible()
        texts = [re.sub(r"\s+", " ", panels.nth(i).inner_text()) for i in range(2)]
        for text, g in zip(texts, ("ground", "1e-6 g0")):
            d = _margin(g)
            assert f"Operating point: {d['regime']}" in text, text
            assert f"±{format_percent(d['symmetric_margin'])}" in text, text
        assert texts[0] != texts[1]                        # the second level really changed the chart
    finally:
        ctx.close()
