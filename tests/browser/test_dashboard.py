"""The dashboard in real Chromium: wiring of chart, point, margins, test points, exports, sessions.

These tests check wiring, not physics: after each interaction the numbers on the page must equal
what the margin module computes for the same case and point.
"""
from __future__ import annotations

import io
import math

import pytest
from playwright.sync_api import expect

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.chart.margins import point_margins

from .conftest import ARTIFACTS, ROOT, wait_ready

# JavaScript: screen position of the operating point and the data->screen mapping of the visible figure.
_POINT_JS = """
() => {
  const found = [];
  const seen = new Set();
  function walk(v) {
    if (!v || seen.has(v)) return;
    seen.add(v);
    if (v.frame && v.frame.x_scale && v.canvas_view && v.model && v.model.visible !== false) {
      const r = v.canvas_view.el.getBoundingClientRect();
      if (r.width > 0) {
        const ren = v.model.renderers.find(x => x.name === 'operating-point');
        const src = ren.data_source.data;
        const x = src.x[0], y = src.y[0];
        found.push({left: r.left, top: r.top, sx: v.frame.x_scale.compute(x), sy: v.frame.y_scale.compute(y),
                    x: x, y: y, fx0: v.frame.bbox.left, fx1: v.frame.bbox.right,
                    fy0: v.frame.bbox.top, fy1: v.frame.bbox.bottom});
      }
    }
    let kids = [];
    try { kids = Array.from(v.child_views || []); } catch (e) {}
    for (const c of kids) walk(c);
  }
  for (const v of Object.values(Bokeh.index)) walk(v);
  return found[0] || null;
}
"""


@pytest.fixture(scope="module")
def chart():
    return Chart.build(load_case(sample_case_path("condensate_line")).case)


def _summary(pg):
    el = pg.locator(".margin-summary").first
    return {k: el.get_attribute(f"data-{k}") for k in ("margin", "regime", "ql", "qg", "limiting")}


def _rows(pg):
    out = {}
    for row in pg.locator("tr.margin-row").all():
        name = row.get_attribute("data-name")
        out[name] = {k: row.get_attribute(f"data-{k}") for k in ("ql-up", "ql-down", "qg-up", "qg-down")}
    return out


def _assert_table_matches(pg, chart):
    s = _summary(pg)
    ql, qg = float(s["ql"]), float(s["qg"])
    m = point_margins(chart, ql, qg)
    assert s["regime"] == m.regime
    assert float(s["margin"]) == pytest.approx(m.symmetric_margin, rel=1e-6, abs=1e-9)
    rows = _rows(pg)
    assert set(rows) == {b.name for b in m.boundaries}
    for b in m.boundaries:
        for key, val in (("ql-up", b.ql_factor_up), ("ql-down", b.ql_factor_down), ("qg-up", b.qg_factor_up),
                         ("qg-down", b.qg_factor_down)):
            shown = rows[b.name][key]
            if val is None or not math.isfinite(val):
                assert shown == "", (b.name, key, shown)
            else:
                assert float(shown) == pytest.approx(val, rel=1e-6), (b.name, key)
    return ql, qg


def test_page_loads_with_chart_and_margins(page, chart):
    doc = load_case(sample_case_path("condensate_line"))
    op = doc.case.operating_point
    s = _summary(page)
    assert float(s["ql"]) == pytest.approx(op.ql, rel=1e-9)
    assert float(s["qg"]) == pytest.approx(op.qg, rel=1e-9)
    _assert_table_matches(page, chart)
    assert page.get_by_text("not a substitute for qualification testing").count() >= 1
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "dashboard.png"), full_page=True)


def test_dragging_the_point_updates_the_margin_table(page, chart):
    before = _summary(page)
    info = page.evaluate(_POINT_JS)
    assert info is not None
    x0, y0 = info["left"] + info["sx"], info["top"] + info["sy"]
    # drag up and to the left: less liquid, more gas
    page.mouse.move(x0, y0)
    page.mouse.down()
    for k in range(1, 13):
        page.mouse.move(x0 - 6 * k, y0 - 9 * k)
    page.locator(".point-readout").get_by_text("moving").wait_for()  # live feedback during the drag
    page.mouse.up()
    expect(page.locator(".margin-summary").first).not_to_have_attribute("data-ql", before["ql"])
    ql, qg = _assert_table_matches(page, chart)
    assert ql < float(before["ql"]) and qg > float(before["qg"])


def test_typed_flow_moves_point_and_bad_value_keeps_it(page, chart):
    field = page.locator(".ql-input input").first
    field.fill("5 L/min")
    field.press("Enter")
    page.locator(".margin-summary[data-ql^='8.333333']").wait_for()  # 5 L/min = 8.3333e-5 m^3/s
    _assert_table_matches(page, chart)
    before = _summary(page)
    field.fill("five litres")
    field.press("Enter")
    page.locator(".point-problem").get_by_text("cannot read").wait_for()
    assert _summary(page) == before


def test_uploading_test_points_draws_them_and_shows_agreement(page):
    upload = page.locator(".points-upload input[type=file]").first
    upload.set_input_files(str(ROOT / "sample_cases" / "drop_tower_points.csv"))
    agreement = page.locator(".agreement").first
    agreement.wait_for()
    assert int(agreement.get_attribute("data-total")) > 0
    upload.set_input_files(str(ROOT / "sample_cases" / "malformed_points.csv"))
    bad = page.locator("table.bad-rows").first
    bad.wait_for()
    text = bad.inner_text()
    assert "row" in text.lower()
    rows = bad.locator("tr").count()
    assert rows >= 3  # header + at least two bad rows


@pytest.mark.parametrize("fmt", ["png", "svg", "pdf"])
def test_chart_exports_download_valid_files(page, fmt, chart):
    with page.expect_download() as info:
        page.locator(f".export-{fmt} a, .export-{fmt} button").first.click()
    data = open(info.value.path(), "rb").read()
    if fmt == "png":
        assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 50_000
    elif fmt == "svg":
        text = data.decode()
        for name in chart.regime_names:
            assert name in text
        assert "CAUTION" in text
    else:
        from pypdf import PdfReader

        text = PdfReader(io.BytesIO(data)).pages[0].extract_text()
        title = load_case(sample_case_path("condensate_line")).case.title
        for needle in (title.split(",")[0], "revision", "fluid", "CAUTION"):
            assert needle in text, needle


def test_report_and_case_downloads(page):
    with page.expect_download() as info:
        page.locator(".export-report a, .export-report button").first.click()
    html = open(info.value.path(), encoding="utf-8").read()
    # the review report embeds the chart as a PNG data URI (self-contained HTML, same template as `lowgmap report`)
    assert 'src="data:image/png;base64,' in html and "margin-table" in html and "qualification testing" in html
    with page.expect_download() as info:
        page.locator(".export-case a, .export-case button").first.click()
    text = open(info.value.path(), encoding="utf-8").read()
    assert "schema_version = 1" in text


def test_two_sessions_do_not_share_state(browser, server):
    a_ctx = browser.new_context(viewport={"width": 1600, "height": 1100})
    b_ctx = browser.new_context(viewport={"width": 1600, "height": 1100})
    try:
        a, b = a_ctx.new_page(), b_ctx.new_page()
        a.goto(server)
        b.goto(server)
        wait_ready(a)
        wait_ready(b)
        a_before, b_before = _summary(a), _summary(b)
        assert a_before == b_before
        # A moves its operating point
        field = a.locator(".ql-input input").first
        field.fill("7 L/min")
        field.press("Enter")
        a.locator(".margin-summary[data-ql^='0.000116666']").wait_for()  # 7 L/min = 1.16667e-4 m^3/s
        # B changes a case input: the contact angle
        b_angle = b.locator(".group-wetting input").first
        b_angle.fill("60 deg")
        b_angle.press("Enter")
        expect(b.locator(".group-wetting input").first).to_have_value("60 deg")
        b_ql = b.locator(".ql-input input").first
        b_ql.fill("1 L/min")
        b_ql.press("Enter")
        b.locator(".margin-summary[data-ql^='1.66666']").wait_for()  # 1 L/min = 1.6667e-5 m^3/s
        # neither sees the other's change
        assert float(_summary(a)["ql"]) == pytest.approx(7e-3 / 60)
        expect(a.locator(".group-wetting input").first).to_have_value("40 deg")
        assert float(_summary(b)["ql"]) == pytest.approx(1e-3 / 60)
    finally:
        a_ctx.close()
        b_ctx.close()


def test_calibration_from_uploaded_points_becomes_next_revision(page, chart):
    from lowgmap.app.files.testpoints import read_test_points
    from lowgmap.physics.studies.calibration import calibrate

    page.locator(".points-upload input[type=file]").first.set_input_files(
        str(ROOT / "sample_cases" / "drop_tower_points.csv"))
    page.locator(".agreement").first.wait_for()
    page.locator(".fit-all input").first.check()
    choice = page.locator(".fit-choice input").first
    choice.click()
    choice.fill("bubble_slug_dukler_1988.alpha_c")
    choice.press("Enter")
    page.locator(".fit-run button").first.click()
    row = page.locator(".calibration tr[data-key='bubble_slug_dukler_1988.alpha_c']").first
    row.wait_for(timeout=60_000)
    expected = calibrate(chart, read_test_points(ROOT / "sample_cases" / "drop_tower_points.csv"),
                         ["bubble_slug_dukler_1988.alpha_c"], use="all")
    assert float(row.get_attribute("data-value")) == pytest.approx(expected.constants[0].value, rel=1e-6)
    page.locator(".fit-apply button").first.click()
    page.get_by_text("the case is now revision B").wait_for()
    with page.expect_download() as info:
        page.locator(".export-case a, .export-case button").first.click()
    text = open(info.value.path(), encoding="utf-8").read()
    assert 'revision = "B"' in text and "[[history]]" in text


def test_design_tab_runs_a_map_that_states_the_margin_tables_value_at_the_current_design(page):
    # Catches: a map run that never finishes or shows no image, and a map whose value at the current design is
    # not the one the verdict beside the chart states (an 8 x 8 grid interpolated it between nodes).
    verdict = page.locator(".verdict-margin").first.inner_text()          # e.g. "±61.8 %"
    page.locator(".bk-tab", has_text="Design map").first.click()
    page.locator(".design-budget").first.wait_for()
    page.locator(".design-run button").first.click()
    summary = page.locator(".design-summary").first
    summary.wait_for(timeout=90_000)
    assert int(summary.get_attribute("data-designs")) >= 81                # at least the 9 x 9 starting grid
    assert page.locator(".design-map img").count() >= 1
    current = page.locator(".design-current").first.inner_text()           # e.g. "+61.8 %"
    assert current.lstrip("+") == verdict.lstrip("±"), (current, verdict)


def test_non_standard_headers_are_mapped_to_columns_and_units(page, tmp_path):
    # invented rows, only to exercise the mapping form
    f = tmp_path / "rig_log.csv"
    f.write_text("colA,colB,colC\n1000,50,dispersed bubbles\n2000,80,dispersed bubbles\n", encoding="utf-8")
    page.locator(".points-upload input[type=file]").first.set_input_files(str(f))
    page.locator(".map-liquid_flow select").first.wait_for()
    page.locator(".map-liquid_flow select").first.select_option("colA")
    page.locator(".map-gas_flow select").first.select_option("colB")
    page.locator(".map-observed_regime select").first.select_option("colC")
    unit = page.locator(".map-liquid_flow-unit input").first
    unit.fill("mL/min")
    unit.press("Enter")
    page.locator(".map-apply button").first.click()
    agreement = page.locator(".agreement").first
    agreement.wait_for()
    assert int(agreement.get_attribute("data-total")) == 2
    assert int(agreement.get_attribute("data-agree")) == 2  # 1-2 L/min water with 50-80 mL/min air: bubbly


def test_uncertainty_box_is_drawn_around_the_point(page):
    page.locator(".uncertainty-toggle input").first.check()
    page.wait_for_function("""() => {
        for (const doc of Bokeh.documents) {
            for (const m of doc._all_models.values()) {
                if (m.type === 'ColumnDataSource' && m.data && m.data.left !== undefined && m.data.left.length === 1)
                    return true;
            }
        }
        return false; }""")


def _visible_text(locator) -> str:
    """Rendered text of an element, white space made single (what a person reads)."""
    import re

    return re.sub(r"\s+", " ", locator.inner_text()).strip()


def _grab(page, slider_css: str) -> tuple[float, float]:
    """Press the mouse button on a slider's handle; returns where (the drag moves from there)."""
    handle = page.locator(f".{slider_css} .noUi-handle").first
    handle.scroll_into_view_if_needed()
    box = handle.bounding_box()
    x0, y0 = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
    page.mouse.move(x0, y0)
    page.mouse.down()
    return x0, y0


def test_geometry_slider_and_typed_value_show_the_same_case_and_numbers(page):
    # Catches (issue 17): a slider whose released value is not applied as the typed value would be (another text,
    # rounding, a preview's numbers left on screen as if in effect), a chart that does not follow the drag, and a
    # field that does not show the slider's value. The comparison lines of the tube depend on the bore, so the
    # margin table's visible rows change with the diameter.
    margins = page.locator(".margin-pane .margin-table").first   # the rows (the worst case below comes later)
    margins.wait_for()
    field = page.locator(".field-section-diameter input").first
    before, before_raw = _visible_text(margins), margins.text_content()   # raw: for waiting on a change
    assert "We_SG = 1" in before
    x0, y0 = _grab(page, "slider-section-diameter")
    for k in range(1, 16):
        page.mouse.move(x0 - 4 * k, y0)            # smaller bore (log scale)
    status = page.locator(".live-status-pane").first
    expect(status).to_contain_text("Preview while Diameter is dragged")    # the chart follows the drag
    page.mouse.up()
    expect(status).to_be_hidden()                  # the released value is in effect
    released = field.input_value()
    assert released.endswith(" mm") and float(released.split()[0]) < 12.7
    expect(margins).not_to_have_text(before_raw)
    by_slider = _visible_text(margins)
    verdict = _visible_text(page.locator(".point-verdict").first)
    field.fill("12.7 mm")                         # back to the case value, typed
    field.press("Enter")
    expect(margins).to_have_text(before_raw)
    assert _visible_text(margins) == before
    field.fill(released)                          # the slider's value, typed
    field.press("Enter")
    expect(margins).not_to_have_text(before_raw)
    assert _visible_text(margins) == by_slider
    assert _visible_text(page.locator(".point-verdict").first) == verdict


def test_a_paused_drag_shows_the_sliders_value_in_the_typed_field(page):
    # Catches (issue 17): the typed field left on an older value than the slider while the drag pauses (it follows
    # at most every 0.4 s to spare the page a layout per mouse event; the last value of a burst of moves was
    # then shown only on release), so the field, the slider and the label in the plot named three values.
    field = page.locator(".field-section-diameter input").first
    field.wait_for()
    x0, y0 = _grab(page, "slider-section-diameter")
    for k in range(1, 13):                         # a burst of moves, well within 0.4 s, then the hand stops
        page.mouse.move(x0 - 3 * k, y0)
    readout = page.locator(".slider-section-diameter .noUi-tooltip").first
    shown = readout.inner_text().strip()
    assert shown.endswith(" mm") and float(shown.split()[0]) < 12.7
    expect(field).to_have_value(shown)             # while the button is still down
    label = page.locator(".live-status-pane").first
    expect(label).to_contain_text("Preview while Diameter is dragged")
    page.mouse.up()
    expect(label).to_be_hidden()
    assert field.input_value() == shown


def _on_visible_plot(body: str) -> str:
    """JavaScript giving ``body(v, r)`` for the figure shown on the page: ``v`` its plot view, ``r`` its canvas's
    rectangle in the page (``body`` is a JavaScript function)."""
    return """
() => {
  const seen = new Set();
  let found = null;
  function walk(v) {
    if (!v || seen.has(v) || found) return;
    seen.add(v);
    if (v.frame && v.canvas_view && v.model && v.model.visible !== false) {
      const r = v.canvas_view.el.getBoundingClientRect();
      if (r.width > 0) found = (BODY)(v, r);
    }
    let kids = [];
    try { kids = Array.from(v.child_views || []); } catch (e) {}
    for (const c of kids) walk(c);
  }
  for (const v of Object.values(Bokeh.index)) walk(v);
  return found;
}
""".replace("BODY", body)


# JavaScript: the strips of the visible figure's canvas above its plot frame (the title) and left of it (the tick
# labels and the axis label), in page coordinates.
_STRIPS_JS = _on_visible_plot("""(v, r) => {
  const f = v.frame.bbox;
  return {title: {x: r.left + f.left, y: r.top + 2, width: f.width, height: Math.max(f.top - 30, 8)},
          axis: {x: r.left + 2, y: r.top + f.top, width: f.left - 4, height: f.height}};
}""")


def _dark_pixels(pg, clip) -> int:
    """Pixels of the screenshot within ``clip`` darker than mid-grey (text)."""
    from matplotlib import image

    rgb = image.imread(io.BytesIO(pg.screenshot(clip=clip)), format="png")[..., :3]
    return int((rgb.mean(axis=-1) < 0.4).sum())


def test_a_drag_and_its_release_raise_no_script_error_and_leave_the_plot_drawn_where_it_was(page):
    # Catches: a chart update that makes bokeh fail while painting (an emptied hatched glyph did: "Out of bounds:
    # 0 <= 0 < 0"), which leaves the plot's title and tick labels unpainted for the rest of the drag and after
    # the release, with no message on the page; and a status line that pushes the plot down while it is shown
    # (the preview status during the drag, the "working" line after the release): the plot jumped under the eye
    # at the start and at the end of every drag.
    errors: list[str] = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    tops: list[float] = []

    def painted() -> tuple[int, int]:
        page.evaluate(_TWO_FRAMES)
        strips = page.evaluate(_STRIPS_JS)
        tops.append(strips["axis"]["y"])                   # the plot frame's top edge on the page
        return _dark_pixels(page, strips["title"]), _dark_pixels(page, strips["axis"])

    before = painted()
    assert min(before) > 30, before                # the title and the tick labels are drawn at the start
    x0, y0 = _grab(page, "slider-section-diameter")
    label = page.locator(".live-status-pane").first
    for k in range(1, 9):
        page.mouse.move(x0 - 4 * k, y0)
    expect(label).to_contain_text("Preview while Diameter is dragged")
    during = painted()
    page.mouse.up()
    expect(label).to_be_hidden()
    after = painted()
    assert not errors, errors
    assert min(during) > 0.5 * min(before) and min(after) > 0.5 * min(before), (before, during, after)
    assert max(tops) - min(tops) < 1, tops                # the plot stayed where it was


# JavaScript: the plot frame of the visible figure on the page, the first line's colour and its key entry text.
_FRAME_JS = _on_visible_plot("""(v, r) => {
  const lines = v.model.renderers.find(x => x.name === 'boundaries');
  const legend = [...v.model.below, ...v.model.center].find(l => l.items !== undefined);
  const item = legend.items.find(i => i.visible && i.renderers[0].name === 'key: boundaries');
  return {x: r.left + v.frame.bbox.left + 2, y: r.top + v.frame.bbox.top + 2,
          width: v.frame.bbox.width - 4, height: v.frame.bbox.height - 4,
          colour: lines.data_source.data.colour[0], label: item.label.value};
}""")


_TWO_FRAMES = "() => new Promise(r => requestAnimationFrame(() => requestAnimationFrame(r)))"


def _pixels_of(pg, clip, colour: str) -> int:
    """Pixels of the screenshot within ``clip`` that have ``colour`` (#rrggbb) to within 3 per channel."""
    import numpy as np
    from matplotlib import image

    rgb = image.imread(io.BytesIO(pg.screenshot(clip=clip)), format="png")[..., :3] * 255.0
    want = np.array([int(colour[i:i + 2], 16) for i in (1, 3, 5)], dtype=float)
    return int(np.all(np.abs(rgb - want) <= 3, axis=-1).sum())


def test_clicking_a_line_in_the_key_hides_the_drawn_lines_and_a_second_click_shows_them(page):
    # Catches: key entries drawn from stand-in glyphs (they keep the key from being rebuilt on every frame of a
    # drag) whose clicks no longer reach the lines drawn in the plot.
    f = page.evaluate(_FRAME_JS)
    clip = {k: f[k] for k in ("x", "y", "width", "height")}
    shown = _pixels_of(page, clip, f["colour"])
    assert shown > 50, shown                       # the line is drawn in its colour
    entry = next(e for e in page.get_by_text(f["label"], exact=True).all() if e.is_visible())  # the shown figure's
    entry.click()
    page.evaluate(_TWO_FRAMES)                     # the plot is repainted on the page's next animation frame
    expect(entry).to_be_visible()
    hidden = _pixels_of(page, clip, f["colour"])
    assert hidden < 0.05 * shown, (shown, hidden)
    entry.click()
    page.evaluate(_TWO_FRAMES)
    again = _pixels_of(page, clip, f["colour"])
    assert again > 0.8 * shown, (shown, again)


def test_switching_to_linear_axes_draws_the_lines_on_the_figure_shown(page):
    # Catches: the figure of the other axes scale left on its empty stand-in sources when it is shown (the
    # hidden figure draws from stand-ins so that the page does not lay it out again on every frame of a drag):
    # the switch would show empty axes.
    before = page.evaluate(_FRAME_JS)
    assert _pixels_of(page, {k: before[k] for k in ("x", "y", "width", "height")}, before["colour"]) > 50
    page.get_by_role("button", name="Chart ranges, axes and units").first.click()   # a group shown collapsed
    box = page.locator(".field-chart-log-axes input").first
    box.scroll_into_view_if_needed()
    box.uncheck()
    page.wait_for_function("""() => {
      for (const doc of Bokeh.documents) for (const m of doc._all_models.values()) {
        if (m.type === 'Figure' && m.name === 'regime-chart-linear' && m.visible) {
          const r = m.renderers.find(x => x.name === 'boundaries');
          return r.data_source.data.xs.length > 0;
        }
      }
      return false; }""")
    page.evaluate(_TWO_FRAMES)
    after = page.evaluate(_FRAME_JS)
    assert after["colour"] == before["colour"]
    drawn = _pixels_of(page, {k: after[k] for k in ("x", "y", "width", "height")}, after["colour"])
    assert drawn > 50, drawn                           # the first line is drawn on the linear axes
