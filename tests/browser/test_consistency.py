"""One truth for every number: what a person reads on the dashboard equals what the command line says.

For each bundled sample case (with its bundled test points, where the README pairs them), the
regime, symmetric margin, limiting boundary, verdict words and agreement counts in the page's
visible text (``inner_text``: what is rendered, not hidden attributes) are compared with
``lowgmap margin CASE --json`` and ``lowgmap compare CASE POINTS --json``, run in this process, with
the numbers written by the same formatter (:mod:`lowgmap.app.formatting`).

Wiring checks, not physics. One dashboard server serves every case (``?sample=NAME``).
"""
from __future__ import annotations

import contextlib
import io
import json
import re

import pytest
from playwright.sync_api import expect

from lowgmap.app.cli import main as cli_main
from lowgmap.app.files.samples import sample_cases, sample_path
from lowgmap.app.formatting import format_percent, format_share

from .conftest import wait_ready

#: Test points the README pairs with each bundled case ("tube samples": drop_tower_points.csv; the
#: open-wedge separator: wedge_points.csv). A case not listed is checked without points.
POINTS = {"condensate_line": "drop_tower_points.csv", "drop_tower_silicone": "drop_tower_points.csv",
          "wedge_separator": "wedge_points.csv"}


def _cli(*argv) -> dict:
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        code = cli_main([*argv, "--json"])
    assert code == 0, out.getvalue()
    return json.loads(out.getvalue())


def _text(locator) -> str:
    """Rendered text of an element, with runs of white space made one space."""
    return re.sub(r"\s+", " ", locator.inner_text()).strip()


def _margin_words(d: dict) -> list[str]:
    """The sentences `lowgmap margin` writes, built from its JSON with the shared formatter."""
    v = d["verdict"]
    intended = f" ({v['regime_status']}: {v['intended_regime']})" if v["intended_regime"] else \
        f" ({v['regime_status']})"
    if d["limiting_boundary"] is None:
        margin = f"Symmetric margin: at least ±{format_percent(d['symmetric_margin'])} (no boundary comes closer)"
    else:
        margin = f"Symmetric margin: ±{format_percent(d['symmetric_margin'])}, limited by {v['limiting_label']}"
    return [f"Regime: {d['regime']}{intended}", margin,
            f"Required margin ±{format_percent(d['required_margin'])}: {v['margin_status']}"]


def _agreement_words(d: dict) -> list[str]:
    """The counts `lowgmap compare` reports, as the dashboard writes them (same formatter)."""
    cv, ca = d["confusion_valid"], d["confusion_all"]
    words = [f"Validity: {d['n_valid']} of {d['n_points']} valid",
             f"Agreement with the chart: {format_share(d['fraction_valid'])} of {d['compared_valid']} valid point(s) "
             f"({cv['agreeing']} agree); {format_share(d['fraction_all'])} of {d['compared_all']} point(s) in all "
             f"({ca['agreeing']} agree)."]
    words += [f"{label} ({n})" for label, n in d["unknown_labels"]]
    return words


def _open(browser, server, name: str):
    ctx = browser.new_context(viewport={"width": 1280, "height": 800})
    pg = ctx.new_page()
    pg.set_default_timeout(60_000)
    pg.goto(f"{server}?sample={name}")
    wait_ready(pg)
    return ctx, pg


def _upload(pg, points_file: str) -> None:
    pg.locator(".points-upload input[type=file]").first.set_input_files(str(sample_path(points_file)))
    pg.locator(".agreement").first.wait_for()


@pytest.mark.parametrize("name", sample_cases())
def test_dashboard_shows_the_numbers_and_words_of_margin_and_compare(browser, server, name):
    # Catches: the page formatting a margin its own way (±78.1 % vs ±78.13 %), a verdict decided in the view,
    # the dashboard counting labels that are not chart regimes as disagreements, or comparing with other
    # validity settings than `lowgmap compare` (the "10 of 15" vs "67 % of 15" of issue 15).
    case = str(sample_path(name))
    margin = _cli("margin", case, "--nominal-only")   # the dashboard's margins are the nominal lines
    ctx, pg = _open(browser, server, name)
    try:
        verdict = pg.locator(".point-verdict").first
        for words in _margin_words(margin):
            expect(verdict).to_contain_text(words)          # rendered text, white space as rendered
        shown = _text(verdict)
        for words in _margin_words(margin):
            assert words in shown, (words, shown)
        if margin["verdict"]["margin_status"] == "NOT MET":  # a failing verdict is in red
            colour = verdict.locator(".status.fail").first.evaluate("e => getComputedStyle(e).color")
            assert colour == "rgb(176, 0, 0)"
        points = POINTS.get(name)
        if points is None:
            return
        compare = _cli("compare", case, str(sample_path(points)))
        _upload(pg, points)
        agreement = pg.locator(".agreement").first
        shown = _text(agreement)
        for words in _agreement_words(compare):
            assert words in shown, (words, shown)
    finally:
        ctx.close()


def test_label_mapping_and_observation_length_give_the_numbers_of_compare_map_and_length(browser, server):
    # Catches: the dashboard's mapping or observation length not reaching the agreement module (the page
    # would keep showing the unmapped counts), or reaching it differently from `compare --map --length`.
    case, points = str(sample_path("condensate_line")), str(sample_path("drop_tower_points.csv"))
    plain = _cli("compare", case, points)
    # relabel the points observed as annular (any file label may be mapped onto a chart regime)
    label, target = "annular (gas core)", "elongated bubbles / slugs"
    mapped = _cli("compare", case, points, "--map", f"{label}={target}", "--length", "0.1 m")
    assert mapped["confusion_all"]["agreeing"] != plain["confusion_all"]["agreeing"]   # the map matters
    assert mapped["n_valid"] != plain["n_valid"]                                      # the length matters
    ctx, pg = _open(browser, server, "condensate_line")
    try:
        _upload(pg, "drop_tower_points.csv")
        pg.locator(".label-map textarea").first.fill(f"{label} = {target}")
        pg.locator(".observation-length input").first.fill("0.1 m")
        pg.locator(".compare-run button").first.click()
        agreement = pg.locator(".agreement").first
        for words in _agreement_words(mapped):
            expect(agreement).to_contain_text(words)
    finally:
        ctx.close()
