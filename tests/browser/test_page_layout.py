"""The dashboard page in real Chromium: it fits the window, the chart gets the largest share, every control
has an accessible name, messages name their field, the uncertainty box is visible, exports use the CLI path.

Wiring and layout checks, not physics. Sizes are read from the rendered page (bounding boxes), never
timed.
"""
from __future__ import annotations

import pytest
from playwright.sync_api import expect

from lowgmap.app.files.samples import sample_path

from .conftest import ARTIFACTS, wait_ready

# JavaScript: everything that sticks out on the right, every inner horizontal scroll bar and every box that cuts
# its content off on the right (shadow roots included).
_OVERFLOW_JS = """
() => {
  const vw = document.documentElement.clientWidth;
  const wide = [], scrollers = [];
  const walk = (root) => root.querySelectorAll('*').forEach(e => {
    const r = e.getBoundingClientRect();
    const cs = getComputedStyle(e);
    if (r.width > 0 && r.height > 0 && cs.visibility !== 'hidden' && r.right > vw + 1)
      wide.push(`${e.tagName}.${String(e.className).slice(0, 50)} right=${Math.round(r.right)}`);
    if ((cs.overflowX === 'auto' || cs.overflowX === 'scroll') && e.scrollWidth > e.clientWidth + 1 && r.width > 0)
      scrollers.push(`${e.tagName}.${String(e.className).slice(0, 50)} ${e.scrollWidth}>${e.clientWidth}`);
    // content cut off on the right by a box too narrow for it (bokeh's plot frame clips glyphs by design)
    if ((cs.overflowX === 'hidden' || cs.overflowX === 'clip') && e.scrollWidth > e.clientWidth + 1 && r.width > 0
        && r.width > 2 && r.height > 2 && !String(e.className).includes('bk-CartesianFrame'))  // not 1 px screen-reader text
      scrollers.push(`clipped ${e.tagName}.${String(e.className).slice(0, 50)} ${e.scrollWidth}>${e.clientWidth}`);
    if (e.shadowRoot) walk(e.shadowRoot);
  });
  walk(document);
  const se = document.scrollingElement;
  return {scrollWidth: se.scrollWidth, clientWidth: se.clientWidth, viewport: vw, wide, scrollers};
}
"""

# Components a person sees besides the chart (their boxes are compared with the chart's).
_COMPONENTS = ("#sidebar", ".point-column", ".margin-pane", ".points-upload", ".compare-card", ".export-png",
               ".caution", ".chart-warnings")


def _visible_area(box, width, height) -> float:
    """Area [px^2] of a bounding box inside the window (the share a person sees without scrolling)."""
    if box is None:
        return 0.0
    w = min(box["x"] + box["width"], width) - max(box["x"], 0)
    h = min(box["y"] + box["height"], height) - max(box["y"], 0)
    return max(w, 0) * max(h, 0)


def _chart_box(pg):
    """Bounding box of the visible chart canvas (the largest drawn canvas of the page)."""
    boxes = [b for b in (c.bounding_box() for c in pg.locator(".bk-Canvas").all()) if b and b["width"] > 100]
    assert boxes, "no chart canvas on the page"
    return max(boxes, key=lambda b: b["width"] * b["height"])


@pytest.fixture()
def sized(browser, server, request):
    width, height = request.param
    ctx = browser.new_context(viewport={"width": width, "height": height}, accept_downloads=True)
    pg = ctx.new_page()
    pg.set_default_timeout(60_000)
    pg.goto(server)
    wait_ready(pg)
    yield pg, width, height
    ctx.close()


@pytest.mark.parametrize("sized", [(1280, 800), (1600, 1000)], indirect=True, ids=["1280x800", "1600x1000"])
def test_page_fits_the_window_and_the_chart_has_the_largest_share(sized):
    # Catches: a fixed-width column or a wide table pushing the page past the window (issue 15: the margin
    # table and the end of the caution line off-screen at 1280x800), and a chart squeezed by the side columns.
    pg, width, height = sized
    ARTIFACTS.mkdir(exist_ok=True)
    pg.screenshot(path=str(ARTIFACTS / f"dashboard_{width}x{height}.png"))
    m = pg.evaluate(_OVERFLOW_JS)
    assert m["scrollWidth"] <= m["clientWidth"], m
    assert m["wide"] == [], m["wide"]            # nothing sticks out on the right
    assert m["scrollers"] == [], m["scrollers"]  # and no inner horizontal scroll bar hides it
    for sel in (".margin-pane table", ".caution div"):   # the two parts issue 15 found off-screen
        box = pg.locator(sel).first.bounding_box()
        assert box is not None and box["x"] + box["width"] <= width, (sel, box)
    chart = _chart_box(pg)
    chart_area = _visible_area(chart, width, height)
    for sel in _COMPONENTS:
        loc = pg.locator(sel).first
        if loc.count() == 0 or not loc.is_visible():
            continue
        area = _visible_area(loc.bounding_box(), width, height)
        assert chart_area > area, (sel, area, chart_area)
    if (width, height) == (1600, 1000):
        assert chart["width"] * chart["height"] > 1.5 * 625 * 410   # issue 15: 625 x 410 px before
    else:   # with test points: the key, the file preview and the agreement summary fit too
        pg.locator(".points-upload input[type=file]").first.set_input_files(str(sample_path("drop_tower_points.csv")))
        pg.locator(".agreement").first.wait_for()
        m = pg.evaluate(_OVERFLOW_JS)
        assert (m["scrollWidth"] <= m["clientWidth"], m["wide"], m["scrollers"]) == (True, [], []), m


def _ax_controls(pg):
    """(role, name) of every control in Chromium's accessibility tree (the names a screen reader reads)."""
    cdp = pg.context.new_cdp_session(pg)
    try:
        nodes = cdp.send("Accessibility.getFullAXTree")["nodes"]
    finally:
        cdp.detach()
    roles = {"textbox", "combobox", "button", "checkbox", "slider", "spinbutton", "listbox", "searchbox",
             "radio", "switch", "link", "tab"}
    out = []
    for n in nodes:
        role = (n.get("role") or {}).get("value")
        if role in roles and not n.get("ignored"):
            out.append((role, ((n.get("name") or {}).get("value") or "").strip()))
    return out


def _unnamed(pg):
    return [(r, nm) for r, nm in _ax_controls(pg) if nm.lower() in ("", "null", "undefined")]


@pytest.mark.parametrize("sized", [(1280, 800)], indirect=True, ids=["1280x800"])
def test_every_control_has_an_accessible_name(sized):
    # Catches: bokeh's checkbox, slider handle and spinner buttons and the multiple-choice search box, which draw
    # no label of their own ("" or "null" to a screen reader), in the page as opened and in the parts opened later.
    pg, _, _ = sized
    for card in ("Most robust point", "Boundary models and constants", "Chart ranges, axes and units"):
        pg.get_by_role("button", name=card).first.click()           # open the collapsed groups too
    _wait_named(pg)
    controls = _ax_controls(pg)
    assert len(controls) > 30                       # the tree was read (inputs, selects, buttons, links)
    assert _unnamed(pg) == []
    pg.locator(".bk-tab", has_text="Design map").first.click()    # the other tab's controls too
    pg.locator(".design-budget").first.wait_for()
    _wait_named(pg)
    assert _unnamed(pg) == []


def _wait_named(pg):
    """Wait until the page has named the controls bokeh leaves unnamed (a condition on the page, no timer)."""
    pg.wait_for_function("""() => {
        let bad = 0;
        const walk = (root) => root.querySelectorAll('*').forEach(e => {
            const named = (e.labels && e.labels.length) || !['', 'null'].includes(String(e.getAttribute('aria-label')
                || '').trim());
            if (e.matches('input[type=checkbox], [role=slider], .bk-spin-btn, input.choices__input--cloned')
                && e.getClientRects().length && !named) bad++;
            if (e.shadowRoot) walk(e.shadowRoot); });
        walk(document);
        return bad === 0; }""")


def test_a_bad_value_is_named_by_its_field_and_raises_no_second_message(page):
    # Catches: a message that quotes a line of the hidden case text, and a knock-on problem of another field
    # (a temperature out of range leaving "400 sccm" unconvertible) shown as if that field were wrong.
    angle = page.locator(".field-wetting-contact-angle input").first
    angle.fill("210 deg")
    angle.press("Enter")
    message = page.locator(".message-wetting-contact-angle").first
    expect(message).to_contain_text("Contact angle: must be within [0, 180] deg, got 210 deg")
    temp = page.locator(".field-fluid-temperature input").first
    temp.fill("500 degC")
    temp.press("Enter")
    t_message = page.locator(".message-fluid-temperature").first
    expect(t_message).to_contain_text("Temperature: must be within")
    assert "line" not in t_message.inner_text().lower()
    assert "gas flow" not in t_message.inner_text().lower()      # the knock-on problem is not shown
    shown = [m.inner_text() for m in page.locator(".field-message").all() if m.is_visible()]
    assert len(shown) == 2, shown                                 # one message per bad field, no others


def test_uncertainty_box_is_drawn_at_least_as_large_as_the_point_marker(page):
    # Catches: the box drawn at its true size only (about 8 x 7 px under a 24 px star in the sample case),
    # which nobody sees; the drawn frame must be larger than the star and both must be in the key.
    page.locator(".uncertainty-toggle input").first.check()
    size = page.wait_for_function("""() => {
        for (const v of Object.values(Bokeh.index)) {
          const stack = [v];
          while (stack.length) {
            const x = stack.pop();
            let kids = []; try { kids = Array.from(x.child_views || []); } catch (e) {}
            stack.push(...kids);
            if (!x.model || x.model.type !== 'Figure' || !x.model.visible) continue;
            const frame = x.model.renderers.find(r => r.name === 'uncertainty-frame');
            const box = x.model.renderers.find(r => r.name === 'uncertainty-box');
            const star = x.model.renderers.find(r => r.name === 'operating-point');
            const legend = [...x.model.below, ...x.model.center].find(l => l.items !== undefined);
            const items = legend.items.map(i => i.label.value || i.label);
            if (box.data_source.data.left.length !== 1) continue;
            const shown = frame.data_source.data.x.length ? frame.glyph.width.value : 0;
            const sx = x.frame.x_scale, sy = x.frame.y_scale, d = box.data_source.data;
            const w = Math.abs(sx.compute(d.right[0]) - sx.compute(d.left[0]));
            const h = Math.abs(sy.compute(d.top[0]) - sy.compute(d.bottom[0]));
            return {frame: shown, w, h, star: star.glyph.size.value, items};
          }
        }
        return null; }""").json_value()
    drawn = max(size["frame"], min(size["w"], size["h"]))
    assert drawn > size["star"], size
    assert any("flow-rate uncertainty" in i for i in size["items"]), size["items"]
    if size["frame"]:
        assert any("frame" in i for i in size["items"]), size["items"]


def test_intended_regime_and_search_range_are_settable_and_the_verdict_says_so_in_red(page):
    # Catches: an intended regime that does not reach the verdict (it would stay "no intended regime stated"),
    # failing words not in red, and a robust-point search that ignores the range typed.
    intended = page.locator(".intended-regime select").first
    verdict = page.locator(".point-verdict").first
    expect(intended).to_have_value("dispersed bubbles")                  # the sample file's intended regime
    expect(verdict).to_contain_text("dispersed bubbles")
    expect(verdict).not_to_contain_text("no intended regime stated")
    intended.select_option("annular (gas core)")
    expect(verdict).to_contain_text("NOT IN THE INTENDED REGIME: annular (gas core)")
    expect(verdict).to_contain_text("NOT MET")
    red = verdict.locator(".status.fail").first.evaluate("e => getComputedStyle(e).color")
    assert red == "rgb(176, 0, 0)"
    intended.select_option("none")
    expect(verdict).to_contain_text("no intended regime stated")
    page.get_by_role("button", name="Most robust point").first.click()
    page.locator(".robust-regime select").first.select_option("dispersed bubbles")
    lo, hi = page.locator(".robust-ql-lo input").first, page.locator(".robust-ql-hi input").first
    lo.fill("2 L/min")
    hi.fill("4 L/min")
    page.locator(".robust-run button").first.click()
    note = page.locator(".robust-note").first
    expect(note).to_contain_text("Moved to the most robust point")
    ql = float(page.locator(".margin-summary").first.get_attribute("data-ql"))
    assert 2e-3 / 60 * (1 - 1e-9) <= ql <= 4e-3 / 60 * (1 + 1e-9)       # inside the typed liquid range


def test_report_download_is_the_cli_review_page_with_the_uploaded_points(page, tmp_path):
    # Catches: a dashboard report built another way than `lowgmap report -o x.html` (the "10 of 25" vs "10 of 15"
    # of issue 15), and a report that forgets the uploaded points or the case file's history.
    from lowgmap.app.files.casefile import load_case
    from lowgmap.app.files.testpoints import read_test_points
    from lowgmap.app.outputs.exports import report_html
    from lowgmap.physics.studies.study import run_study

    page.locator(".points-upload input[type=file]").first.set_input_files(str(sample_path("drop_tower_points.csv")))
    page.locator(".agreement").first.wait_for()
    with page.expect_download() as info:
        page.locator(".export-report a, .export-report button").first.click()
    got = open(info.value.path(), encoding="utf-8").read()
    doc = load_case(sample_path("condensate_line"))
    f = doc.case.fluid
    tps = read_test_points(sample_path("drop_tower_points.csv"), name="drop_tower_points.csv",
                           pressure=f.pressure, temperature=f.temperature)
    want = report_html(run_study(doc.case, points=tps), settings=doc.settings, invented=doc.invented, document=doc,
                       point_file=tps, date=_report_date(got))
    assert _body(got) == _body(want)


def _report_date(page_text: str):
    import re

    m = re.search(r"\d{4}-\d{2}-\d{2}", page_text)
    return m.group(0) if m else None


def _body(page_text: str) -> str:
    """The report without the embedded chart image (PNG bytes may differ in metadata only)."""
    import re

    return re.sub(r'src="data:image/png;base64,[^"]*"', 'src=""', page_text)
