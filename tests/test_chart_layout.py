"""Exported charts read cleanly: no text on text, a fixed look per boundary, test points in the key.

Wiring and layout tests of the matplotlib export (lowgmap.app.outputs.render, .exports, .maps). The
figures are built from the bundled sample cases and test points; the check values are what the
figure itself reports (text extents measured with its renderer, artist styles), what the agreement
module decided per point, or file-format facts (PNG pHYs chunk). No physical number is checked here.
"""
import dataclasses
import re
import struct
import zlib
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
from matplotlib.legend import Legend
from matplotlib.lines import Line2D
from matplotlib.patches import FancyArrowPatch
from matplotlib.text import Text

from lowgmap.app import __version__
from lowgmap.app.files.casefile import load_case
from lowgmap.app.files.samples import sample_cases, sample_path
from lowgmap.app.files.testpoints import read_test_points
from lowgmap.app.outputs import styles
from lowgmap.app.outputs.chartview import BAND_KEY_TEXT, chart_view
from lowgmap.app.outputs.exports import chart_bytes, chart_figure
from lowgmap.app.outputs.maps import design_chart_bytes, margin_map_figure, margin_map_png
from lowgmap.app.outputs.render import Candidate, LabelRequest, figure_bytes, place_labels, typeset
from lowgmap.app.outputs.report import document_study
from lowgmap.physics.models.boundary import PowerLawBoundary
from lowgmap.physics.studies.calibration import chart_with_boundary, empirical_name
from lowgmap.physics.studies.study import run_study

#: sample cases drawn with the bundled test points on them (their labels name these charts' regimes)
WITH_POINTS = ("condensate_line", "drop_tower_silicone")
#: sample cases drawn here without the bands of their lines: the corner family's bands take tens of seconds,
#: and a band adds no text to the chart (its one key entry is the same on every chart, checked on the others)
SLOW_BANDS = ("wedge_separator", "cryogenic_groove")


def _points(doc):
    f = doc.case.fluid
    return read_test_points(sample_path("drop_tower_points.csv"), pressure=f.pressure,
                            temperature=f.temperature).points


@pytest.fixture(scope="module")
def studies():
    out = {}
    for name in sample_cases():
        doc = load_case(sample_path(name))
        out[name] = (doc, document_study(doc, test_points=_points(doc) if name in WITH_POINTS else None))
    return out


@pytest.fixture(scope="module")
def figure(studies):
    """The exported chart of a sample case as a Figure, drawn once per module: figure(name, log_axes)."""
    cache = {}

    def get(name, log_axes=True):
        if (name, log_axes) not in cache:
            doc, study = studies[name]
            cache[name, log_axes] = chart_figure(study, settings=doc.settings, log_axes=log_axes, document=doc,
                                                 bands=name not in SLOW_BANDS)
        return cache[name, log_axes]
    return get


def _drawn_texts(fig):
    """(text, box) of every text the figure draws: tick labels only for ticks inside the view."""
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    hidden = set()
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            lo, hi = sorted(axis.get_view_interval())
            for tick in axis.get_major_ticks() + axis.get_minor_ticks():
                if not lo - 1e-9 * abs(hi) <= tick.get_loc() <= hi + 1e-9 * abs(hi):
                    hidden.update({id(tick.label1), id(tick.label2)})
    out = []
    for t in fig.findobj(Text):
        if id(t) in hidden or not t.get_visible() or not t.get_text().strip():
            continue
        box = Text.get_window_extent(t, r)  # the text itself (an annotation's leader line is not a text box)
        if box.width > 0 and box.height > 0:
            out.append((t, box))
    return out


def _point_centre(fig):
    ax = fig.axes[0]
    star = [c for c in ax.collections if c.get_gid() == "operating-point"]
    assert len(star) == 1
    return ax.transData.transform(star[0].get_offsets()[0])


@pytest.mark.parametrize("log_axes", [True, False], ids=["log", "linear"])
@pytest.mark.parametrize("name", sample_cases())
def test_no_text_box_overlaps_another_or_the_operating_point(figure, studies, name, log_axes):
    # catches the operating-point callout covering a regime label (every sample chart, review of issue 15),
    # line labels written over region labels, the key or the title block running into the chart or off the
    # page, and any label drawn on the operating point
    fig = figure(name, log_axes)
    texts = _drawn_texts(fig)
    legends = [lg for lg in fig.findobj(Legend)]
    if name not in SLOW_BANDS and studies[name][1].has_bands:   # the key entry of the bands is among the texts
        assert any(t.get_text().replace("\n", " ") == BAND_KEY_TEXT for t, _ in texts)
    assert legends and any(t.get_gid() == "label:callout" for t, _ in texts)
    assert sum(1 for t, _ in texts if (t.get_gid() or "").startswith("label:region:")) >= 2
    width, height = fig.bbox.width, fig.bbox.height
    centre = _point_centre(fig)
    problems = []
    for i, (t, box) in enumerate(texts):
        if box.x0 < 0 or box.y0 < 0 or box.x1 > width or box.y1 > height:
            problems.append(f"off the page: {t.get_text()!r}")
        if box.contains(*centre):
            problems.append(f"covers the operating point: {t.get_text()!r}")
        for u, other in texts[i + 1:]:
            if box.overlaps(other):
                problems.append(f"{t.get_text()!r} overlaps {u.get_text()!r}")
    # the key as a whole against every text that is not part of it
    r = fig.canvas.get_renderer()
    for lg in legends:
        own = {id(x) for x in lg.texts} | {id(lg.get_title())}
        kb = lg.get_window_extent(r)
        problems += [f"key overlaps {t.get_text()!r}" for t, box in texts if id(t) not in own and kb.overlaps(box)]
    assert problems == []


def _svg_line_styles(svg: str) -> dict:
    """boundary name -> set of (stroke colour, dash array) of its paths in an exported SVG (halo left out);
    the parts outside a source's validity range are listed under "<name> (outside validity)"."""
    out: dict = {}
    for m in re.finditer(r'<g id="boundary(?:-outside-validity)?:([^"]+)">(.*?)</g>', svg, re.S):
        name = m.group(1) + (" (outside validity)" if "outside" in m.group(0)[:40] else "")
        for style in re.findall(r'style="([^"]*)"', m.group(2)):
            colour = re.search(r"stroke: (#[0-9a-fA-F]{6})", style)
            if colour is None or colour.group(1).lower() == "#ffffff":
                continue
            dash = re.search(r"stroke-dasharray: ([0-9.,\s]+);", style)
            out.setdefault(name, set()).add((colour.group(1).lower(), dash.group(1).strip() if dash else "solid"))
    return out


def test_boundary_colours_stay_the_same_in_a_calibrated_revision(studies, figure):
    # catches colours that follow line order: `lowgmap calibrate --empirical` adds the fitted line first
    # (chart_with_boundary), and every other boundary used to change colour between revision A and B
    doc, study = studies["condensate_line"]
    name = empirical_name("dispersed bubbles", "elongated bubbles / slugs")
    line = PowerLawBoundary(name, 0.3, 1.0, "dispersed bubbles", "elongated bubbles / slugs",
                            label="dispersed bubbles | elongated bubbles / slugs (fitted from test points)")
    chart_b = chart_with_boundary(study.chart, line)     # the line is an input here, not a check value
    study_b = run_study(chart_b.case, chart=chart_b)
    assert chart_b.boundaries[0].name == name  # the order of the lines did change
    a = _svg_line_styles(figure_bytes(figure("condensate_line"), "svg").decode("utf-8"))
    fig_b = chart_figure(study_b, settings=doc.settings, document=doc)
    b = _svg_line_styles(figure_bytes(fig_b, "svg").decode("utf-8"))
    assert len(a) >= 4 and all(len(v) == 1 for v in list(a.values()) + list(b.values()))
    assert {n: b[n] for n in a} == a
    assert b[name] not in a.values()  # the new line has a look of its own
    # the key shows each line in the colour it has on the chart
    key = {t.get_text().replace("\n", " "): h.get_color() for lg in fig_b.findobj(Legend)
           for h, t in zip(lg.legend_handles, lg.texts) if isinstance(h, Line2D)}
    for c in chart_b.boundaries:
        drawn = b.get(c.name) or b[f"{c.name} (outside validity)"]
        assert key[typeset(c.label)].lower() == next(iter(drawn))[0], c.name


def test_every_boundary_has_its_own_colour_and_dash(studies):
    # catches five corner boundaries sharing one black solid line style in the key
    for name in ("wedge_separator", "condensate_line"):
        doc, study = studies[name]
        view = chart_view(study.chart)
        looks = [(c.colour, c.dash) for c in view.curves]
        assert len(view.curves) >= 5 and len(set(looks)) == len(looks), name
        for c in view.curves:  # fixed per model name, whatever the case
            s = styles.boundary_style(c.name)
            assert (c.colour, c.dash) == (s.colour, styles.bokeh_dash(s.dash))


def test_styles_are_fixed_per_name_not_per_position():
    # catches a style table keyed by position: the same names in another order give the same styles
    names = ["corner_confinement", "corner_separation", "fitted_wet_dry", "my_rig_line", "other_rig_line"]
    fwd, rev = styles.boundary_styles(names), styles.boundary_styles(names[::-1])
    assert fwd == rev and len(set(fwd.values())) == len(names)
    regimes = ["a", "b", "dispersed bubbles"]
    assert styles.regime_styles(regimes) == styles.regime_styles(regimes[::-1])
    assert styles.platform_marker("parabolic aircraft") == styles.PLATFORM_MARKERS["parabolic flight"]


def test_points_beyond_the_chart_are_counted_and_drawn_at_the_edge(studies, figure):
    # catches test points outside the chart range vanishing silently
    doc, study = studies["condensate_line"]
    view = chart_view(study.chart, ql_unit=doc.settings.liquid_flow_unit, qg_unit=doc.settings.gas_flow_unit)
    pts = study.agreement.points
    x, y = view.to_display(np.array([p.ql for p in pts]), np.array([p.qg for p in pts]))
    in_x = (x >= view.x_range[0]) & (x <= view.x_range[1])
    in_y = (y >= view.y_range[0]) & (y <= view.y_range[1])
    left, below = (x < view.x_range[0]) & in_y, (y < view.y_range[0]) & in_x   # beyond one edge, not a corner
    outside = ~(in_x & in_y)
    assert left.sum() >= 2 and below.sum() >= 2  # the bundled points do reach beyond the chart
    fig = figure("condensate_line")
    words = " ".join(t.get_text() for t, _ in _drawn_texts(fig))
    assert f"{int(left.sum())} test points beyond the left edge" in words
    assert f"{int(below.sum())} test points beyond the bottom edge" in words
    arrows = [p for p in fig.axes[0].patches if isinstance(p, FancyArrowPatch) and p.get_gid() == "edge-arrow"]
    assert len(arrows) == int(outside.sum())


def test_test_points_have_a_key_for_platform_fill_and_disagreement(studies, figure):
    # catches test-point markers without a key, markers not telling platforms apart, and disagreeing
    # points drawn like the others
    doc, study = studies["drop_tower_silicone"]
    fig = figure("drop_tower_silicone")
    key = " ".join(t.get_text() for lg in fig.findobj(Legend) for t in lg.texts + [lg.get_title()])
    res = study.agreement
    for p in res.points:
        assert styles.platform_marker(p.platform).label in key
        if p.comparable:
            assert p.observed in key
    assert "ring: the chart predicts another regime" in key
    ax = fig.axes[0]
    view = chart_view(study.chart, ql_unit=doc.settings.liquid_flow_unit, qg_unit=doc.settings.gas_flow_unit)
    x, y = view.to_display(np.array([p.ql for p in res.points]), np.array([p.qg for p in res.points]))
    inside = (x >= view.x_range[0]) & (x <= view.x_range[1]) & (y >= view.y_range[0]) & (y <= view.y_range[1])
    rings = [c for c in ax.collections if c.get_gid() == "disagree-ring"]
    expected = sum(1 for p, ok in zip(res.points, inside) if ok and p.agrees is False)
    assert expected > 0 and len(rings) == expected  # one source: the agreement's per-point result
    marks = [c for c in ax.collections if c.get_gid() == "test-point"]
    assert len(marks) == int(inside.sum())
    shapes = {tuple(np.round(c.get_paths()[0].vertices, 3).ravel()) for c in marks}
    assert len(shapes) >= 3  # the bundled points come from several platform classes


def test_symbols_typeset_and_names_for_people(studies, figure):
    # catches Q_L shown as plain text, identifiers ("circle", model names) where a person reads, and
    # flows shown only converted instead of as the engineer typed them
    doc, study = studies["condensate_line"]
    fig = figure("condensate_line")
    ax = fig.axes[0]
    assert r"$Q_\mathrm{L}$" in ax.get_xlabel() and r"$Q_\mathrm{G}$" in ax.get_ylabel()
    words = " ".join(t.get_text() for t, _ in _drawn_texts(fig))
    assert "400 sccm (0.4323 L/min)" in words       # typed in the case file: gas_flow = "400 sccm"
    assert "circular tube: diameter 12.7 mm" in words and "circle:" not in words
    assert not re.search(r"\bQ_[LG]\b", words.replace(r"$Q_\mathrm", ""))
    assert all(c.name not in words for c in study.chart.boundaries)


def test_callout_says_whether_the_required_margin_is_met():
    # catches an exported chart that never says whether the required margin is met
    doc = load_case(sample_path("cryogenic_groove"))
    study = document_study(doc)
    tight = dataclasses.replace(doc.settings, required_margin=0.95)
    fig = chart_figure(study, settings=tight, document=doc, bands=False)
    callout = next(t for t in fig.axes[0].texts if t.get_gid() == "label:callout")
    assert "NOT MET" in callout.get_text() and "required ±95 %" in callout.get_text()
    assert callout.get_bbox_patch().get_edgecolor()[:3] == pytest.approx((0.69, 0.0, 0.0), abs=0.01)


def _png_dpi(data: bytes) -> float:
    """Resolution from the PNG pHYs chunk (ISO/IEC 15948, 11.3.5.3: pixels per metre, unit byte 1)."""
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    pos = 8
    while pos < len(data):
        length, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + length]
        assert zlib.crc32(kind + body) == struct.unpack(">I", data[pos + 8 + length:pos + 12 + length])[0]
        if kind == b"pHYs":
            ppm_x, ppm_y, unit = struct.unpack(">IIB", body)
            assert unit == 1 and ppm_x == ppm_y
            return ppm_x * 0.0254
        pos += 12 + length
    raise AssertionError("no pHYs chunk")


def test_png_exports_are_300_dpi(studies):
    # catches a chart or a margin map exported at screen resolution (150 and 110 dpi before)
    doc, study = studies["wedge_separator"]
    assert _png_dpi(chart_bytes(study, "png", settings=doc.settings, bands=False)) == pytest.approx(300, abs=0.5)
    df = pd.DataFrame({"contact_angle": np.radians([10, 10, 40, 40]), "gas_flow": [1e-6, 1e-5, 1e-6, 1e-5],
                       "margin": [0.1, 0.3, -0.2, 0.4]})   # layout input only, not a physical result
    png = margin_map_png(df, "contact_angle", "gas_flow", kinds={"contact_angle": "angle", "gas_flow": "flow"},
                         units={"contact_angle": "deg", "gas_flow": "L/min"})
    assert _png_dpi(png) == pytest.approx(300, abs=0.5)


def test_maps_carry_the_caution_and_the_version(studies):
    # catches sweep and design maps exported without the caution line or the version, and a limiting
    # boundary named by its identifier instead of its label
    df = pd.DataFrame({"contact_angle": np.radians([10, 10, 40, 40]), "gas_flow": [1e-6, 1e-5, 1e-6, 1e-5],
                       "margin": [0.1, 0.3, -0.2, 0.4]})   # layout input only, not a physical result
    fig = margin_map_figure(df, "contact_angle", "gas_flow", required=0.2,
                            kinds={"contact_angle": "angle", "gas_flow": "flow"},
                            units={"contact_angle": "deg", "gas_flow": "L/min"})
    words = " ".join(t.get_text() for t in fig.findobj(Text))
    assert "CAUTION" in words and f"lowgmap {__version__}" in words
    doc, study = studies["condensate_line"]
    result = SimpleNamespace(case=doc.case, margin=0.25, regime="dispersed bubbles",
                             limiting=("bubble_slug_dukler_1988",), required_margin=0.3)
    goal = SimpleNamespace(ql_range=(2e-5, 6e-5), qg_range=(5e-6, 9e-6))
    svg = design_chart_bytes(doc, result, goal, "svg").decode("utf-8")
    assert "CAUTION" in svg and f"version {__version__}" in svg
    assert "limited by bubble–slug, void fraction (Dukler et al. 1988)" in svg
    assert "bubble_slug_dukler_1988" not in re.sub(r'id="[^"]*"', "", svg)  # ids are for programs only


def test_a_label_without_room_is_left_off_not_overlapped():
    # catches the placement step writing a label over another when every position is taken
    a = LabelRequest("a", "first", [Candidate((0, 0, 10, 10), 0.0)])
    b = LabelRequest("b", "second", [Candidate((5, 5, 15, 15), 0.0)])
    c = LabelRequest("c", "third", [Candidate((50, 50, 60, 60), 0.0)])
    got = place_labels([a, b, c], obstacles=[(52, 52, 54, 54)])
    assert got["a"] is not None and got["b"] is None and got["c"] is None
