"""Bands in every output (issue 16, item 1): the study carries them, the exports draw them, the CLI reports them.

Wiring tests. Each check value is what the physics objects give for the same chart
(:func:`lowgmap.physics.chart.bands.chart_bands`, :func:`~lowgmap.physics.chart.bands.worst_case_margins`,
:func:`lowgmap.physics.studies.uncertainty.monte_carlo`), what another output of lowgmap prints, or what
the figure itself holds (artist colours, outlines). No physical number of our own is checked here: the
bands and the worst case have their own tests (tests/test_bands.py).
"""
import contextlib
import io
import json

import numpy as np
import pytest
import shapely
from matplotlib.colors import to_hex
from matplotlib.legend import Legend

from lowgmap.app.cli import main
from lowgmap.app.files.casefile import load_case
from lowgmap.app.files.samples import sample_path
from lowgmap.app.formatting import format_percent
from lowgmap.app.outputs import styles
from lowgmap.app.outputs.chartview import BAND_KEY_TEXT, chart_view
from lowgmap.app.outputs.exports import chart_bytes, chart_figure
from lowgmap.app.outputs.report import document_study
from lowgmap.physics.chart import bands as _bands
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.examples import example_case
from lowgmap.physics.models.boundary import PowerLawBoundary
from lowgmap.physics.studies.study import run_study
from lowgmap.physics.studies.uncertainty import monte_carlo

CASE = sample_path("condensate_line")          # closed-tube lines: bands in well under a second
POINTS = sample_path("drop_tower_points.csv")


def run(*argv):
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def doc():
    return load_case(CASE)


@pytest.fixture(scope="module")
def study(doc):
    return document_study(doc)


def _band_patches(fig) -> dict:
    """band name -> list of the fills drawn for it (gid "band:<name>")."""
    out: dict = {}
    for p in fig.axes[0].patches:
        gid = p.get_gid() or ""
        if gid.startswith("band:"):
            out.setdefault(gid.split(":", 1)[1], []).append(p)
    return out


def _line_colours(fig) -> dict:
    return {ln.get_gid().split(":", 1)[1]: to_hex(ln.get_color()) for ln in fig.axes[0].lines
            if (ln.get_gid() or "").startswith(("boundary:", "boundary-outside-validity:"))}


def _key_texts(fig) -> list[str]:
    return [t.get_text().replace("\n", " ") for lg in fig.findobj(Legend) for t in lg.texts]


# =============================================================================================
# the study: one source

def test_study_computes_the_bands_once_and_the_exports_read_them(study, doc, monkeypatch):
    # catches a view that computes its own bands (a second path that can disagree with the margin table)
    # and a study that recomputes them on every access
    got = study.bands
    assert got is study.bands                                             # cached on the study
    assert [b.name for b in got] == [b.name for b in _bands.chart_bands(study.chart)]
    wc = study.worst_case
    assert wc is study.worst_case and wc.nominal == study.margins.symmetric_margin

    def refuse(*args, **kwargs):
        raise AssertionError("a view computed the bands again instead of reading the study's")
    monkeypatch.setattr(_bands, "chart_bands", refuse)
    monkeypatch.setattr(_bands, "boundary_band", refuse)
    monkeypatch.setattr(_bands, "worst_case_margins", refuse)
    fig = chart_figure(study, settings=doc.settings, document=doc)
    assert set(_band_patches(fig)) == {b.name for b in got if not b.known_exactly}


def test_a_chart_without_banded_constants_has_no_bands():
    # catches a band drawn (or a worst case reported) for lines whose constants are known exactly: the line
    # given here has no uncertain constant, so its band is the line itself
    case = example_case(point=(1e-5, 0.5e-5))
    study = run_study(case, chart=Chart.build(case, [PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")]))
    assert study.has_bands is False and study.bands is None and study.worst_case is None
    fig = chart_figure(study)
    assert _band_patches(fig) == {} and BAND_KEY_TEXT not in _key_texts(fig)


# =============================================================================================
# exported charts

def test_each_band_is_drawn_in_its_lines_colour_under_the_line_with_a_key_entry(study, doc):
    # catches bands drawn in one colour for every line (or in a colour by position), a band drawn over its
    # line, an outline that is not the band the physics computed, and a fill without a key entry
    fig = chart_figure(study, settings=doc.settings, document=doc)
    patches, colours = _band_patches(fig), _line_colours(fig)
    lines = {ln.get_gid().split(":", 1)[1]: ln for ln in fig.axes[0].lines
             if (ln.get_gid() or "").startswith("boundary:")}
    view = chart_view(study.chart, ql_unit=doc.settings.liquid_flow_unit, qg_unit=doc.settings.gas_flow_unit)
    fr = study.chart.case.flow_range
    assert len(patches) >= 4
    for band in study.bands:
        drawn = patches[band.name]
        for p in drawn:
            assert to_hex(p.get_facecolor()) == colours[band.name] == styles.boundary_style(band.name).colour.lower()
            assert p.get_alpha() < 0.5                                    # translucent: the regions show through
            assert p.get_zorder() < lines[band.name].get_zorder()
        # the outline drawn is the band's own outline (Band.outline) in display units
        (ql, qg), = band.outline((fr.qg_min, fr.qg_max))
        x, y = view.to_display(ql, qg)
        xy = drawn[0].get_xy()
        assert np.allclose(xy[:len(x)], np.column_stack([x, y]), rtol=1e-12)
    assert BAND_KEY_TEXT in _key_texts(fig)


def test_bands_option_turns_them_off(study, doc):
    # catches an option that is accepted but ignored (bands drawn anyway) or that drops the lines with the bands
    fig = chart_figure(study, settings=doc.settings, document=doc, bands=False)
    assert _band_patches(fig) == {} and BAND_KEY_TEXT not in _key_texts(fig)
    assert set(_line_colours(fig)) >= {b.name for b in study.bands}
    svg = chart_bytes(study, "svg", settings=doc.settings, bands=True).decode("utf-8")
    assert 'id="band:bubble_slug_dukler_1988"' in svg
    assert 'id="band:' not in chart_bytes(study, "svg", settings=doc.settings, bands=False).decode("utf-8")


def test_calibrated_revision_keeps_each_look_and_draws_narrower_bands(tmp_path):
    # catches colours and dashes that follow the line order between a case and its calibrated revision, and a
    # calibrated interval that does not replace the prior band on the chart (the band drawn as wide as before)
    new = tmp_path / "b.toml"
    code, _, err = run("calibrate", CASE, POINTS, "--all-points", "--fit", "bubble_slug_dukler_1988.c0", "-o", new)
    assert code == 0, err
    figs = {}
    for rev, path in (("A", CASE), ("B", new)):
        d = load_case(path)
        assert d.case.revision == rev
        s = document_study(d)
        figs[rev] = (s, chart_figure(s, settings=d.settings, document=d))
    (_, fa), (sb, fb) = figs["A"], figs["B"]
    la, lb = _line_colours(fa), _line_colours(fb)
    assert la and la == lb                                                # the same colour per line
    dash = {rev: {ln.get_gid(): ln.get_linestyle() for ln in f.axes[0].lines
                  if (ln.get_gid() or "").startswith("boundary:")} for rev, (_, f) in figs.items()}
    assert dash["A"] == dash["B"]                                        # and the same dash pattern
    pa, pb = _band_patches(fa), _band_patches(fb)
    assert {n: {to_hex(p.get_facecolor()) for p in v} for n, v in pa.items()} == \
        {n: {to_hex(p.get_facecolor()) for p in v} for n, v in pb.items()}

    def width_at(fig, patches, y):
        """Width in decades of Q_L of the band's drawn fill along the horizontal line Q_G = y (display units)."""
        ax = fig.axes[0]
        poly = shapely.Polygon(np.log10(patches[0].get_xy()))
        x0, x1 = np.log10(ax.get_xlim())
        cut = poly.intersection(shapely.LineString([(x0, np.log10(y)), (x1, np.log10(y))]))
        return cut.length
    name = "bubble_slug_dukler_1988"
    y = float(np.sqrt(np.prod(fa.axes[0].get_ylim())))                   # mid-height of the chart (log axes)
    wa, wb = width_at(fa, pa[name], y), width_at(fb, pb[name], y)
    band_b = next(b for b in sb.bands if b.name == name)
    c0 = next(c for c in band_b.constants if c.name == "c0")
    assert c0.origin == "case" and c0.reason.startswith("calibrated")      # the calibrated interval is in use
    assert 0 < wb < wa
    # the other line's band is untouched by a fit of this one
    other = "slug_annular_dukler_1988"
    assert width_at(fb, pb[other], y) == pytest.approx(width_at(fa, pa[other], y), rel=1e-9)


# =============================================================================================
# margin, report and uncertainty: the same worst case

def test_margin_json_and_text_give_the_worst_case_beside_the_nominal_margin(doc):
    # catches a worst case computed on another chart or point than the nominal margin, a JSON without it, and a
    # text that writes its own rounding instead of the shared formatter
    code, out, err = run("margin", CASE, "--json")
    assert code == 0, err
    data = json.loads(out)
    chart = Chart.build(doc.case)
    ql, qg = doc.case.operating_point.ql, doc.case.operating_point.qg
    expected = _bands.worst_case_margins(chart, ql, qg).to_dict()
    wc = data["worst_case"]
    assert wc["worst_case_margin"] == pytest.approx(expected["worst_case_margin"], rel=1e-9)
    assert wc["limiting_constant"] == expected["limiting_constant"] and wc["limiting_boundary"]
    assert wc["nominal_margin"] == pytest.approx(data["symmetric_margin"], rel=1e-12)
    assert wc["worst_case_margin"] <= wc["nominal_margin"]
    code, text, _ = run("margin", CASE)
    assert f"Worst-case margin: ±{format_percent(wc['worst_case_margin'])}" in text
    assert f"Limiting constant: {wc['limiting_constant']} of " in text
    code, out, _ = run("margin", CASE, "--json", "--nominal-only")
    assert code == 0 and json.loads(out)["worst_case"] is None


def test_report_lists_each_constants_band_and_reason(tmp_path, doc):
    # catches a constants table without the band each constant is uncertain over, or without its reason
    page = tmp_path / "r.html"
    code, _, err = run("report", CASE, "-o", page, "--nominal-only")
    assert code == 0, err
    html = page.read_text(encoding="utf-8")
    assert "<th>band</th><th>why this band</th>" in html
    for line, bands in _bands.chart_constant_bands(Chart.build(doc.case)).items():
        for b in bands:
            if b.high > b.low:
                assert f"<td>[{b.low:.6g}, {b.high:.6g}]</td>" in html, (line, b.name)


def test_report_refuses_to_overwrite_and_its_own_case(tmp_path):
    # catches `lowgmap report` writing over an earlier pack without --force, or over its input file
    out = tmp_path / "r.html"
    out.write_text("earlier pack", encoding="utf-8")
    code, _, err = run("report", CASE, "-o", out, "--nominal-only")
    assert code == 2 and "--force" in err and out.read_text(encoding="utf-8") == "earlier pack"
    case = tmp_path / "case.html"                          # an input given as the output (suffix allowed)
    case.write_text("x", encoding="utf-8")
    code, _, err = run("report", CASE, "--points", case, "-o", case, "--force")
    assert code == 2 and "input" in err and case.read_text(encoding="utf-8") == "x"


def test_uncertainty_reports_model_uncertainty_apart_from_the_inputs(doc):
    # catches model uncertainty mixed into the input-only result (it must stay the same with or without the
    # option), numbers that are not monte_carlo's for the same chart, and an option that ignores its list
    code, out, err = run("uncertainty", CASE, "--samples", "400", "--quiet", "--json")
    assert code == 0, err
    plain = json.loads(out)
    code, out, err = run("uncertainty", CASE, "--samples", "400", "--quiet", "--json", "--model-constants", "all")
    assert code == 0, err
    both = json.loads(out)
    for k in ("probability", "margin_quantiles", "sensitivity", "n_invalid"):
        assert both[k] == plain[k], k
    chart = Chart.build(doc.case)
    op = doc.case.operating_point
    res = monte_carlo(doc.case, doc.uncertainties, n=400, seed=0, chart=chart, point=(op.ql, op.qg),
                      intended_regime=both["intended_regime"], required_margin=doc.settings.required_margin,
                      model_uncertainty=True)
    mu = both["model_uncertainty"]
    assert mu["model_only"]["probability"] == pytest.approx(res.model.probability_model, abs=1e-12)
    assert mu["model_only"]["margin_quantiles"] == pytest.approx(
        {f"{q:g}": v for q, v in res.model.margin_quantiles_model}, abs=1e-12)
    assert mu["inputs_and_model"]["probability"] == pytest.approx(res.model.probability_both, abs=1e-12)
    assert {(c["constant"], tuple(c["lines"])) for c in mu["constants"]} == \
        {(v.name, v.lines) for v in res.model.variables}
    code, out, _ = run("uncertainty", CASE, "--samples", "200", "--quiet", "--json", "--model-constants",
                       "bubble_slug_dukler_1988.c0")
    assert [c["constant"] for c in json.loads(out)["model_uncertainty"]["constants"]] == ["c0"]
    code, text, _ = run("uncertainty", CASE, "--samples", "200", "--quiet", "--model-constants", "all")
    assert "Input uncertainty" in text and "Model uncertainty" in text and "Constants alone" in text


@pytest.mark.parametrize("argv, needle", [
    (["--model-constants", "no_such_line.c0"], "no_such_line.c0"),
    (["--model-constants", ","], "--model-constants"),
    (["--model-draws", "5"], "--model-constants"),
])
def test_uncertainty_model_options_are_checked(argv, needle):
    # catches an unknown constant silently dropped (a model study of nothing) and options that do nothing
    code, _, err = run("uncertainty", CASE, "--samples", "50", "--quiet", *argv)
    assert code == 2 and needle in err


def test_sweep_plot_is_300_dpi_with_caution_and_version(tmp_path):
    # catches the sweep's --plot written at screen resolution (110 dpi before) and without the caution line
    # and the version (issue 15: every export, the sweep maps included)
    from lowgmap.app import __version__

    sweep_file = tmp_path / "sweep.toml"
    sweep_file.write_text('[sweep]\nrequired_margin = "30 %"\n[[variables]]\nname = "size"\nfrom = "6 mm"\n'
                          'to = "30 mm"\nsteps = 3\n[[variables]]\nname = "length"\nvalues = ["0.5 m", "3 m"]\n',
                          encoding="utf-8")
    svg, png = tmp_path / "m.svg", tmp_path / "m.png"
    for plot in (svg, png):
        code, _, err = run("sweep", CASE, sweep_file, "--plot", plot, "--quiet")
        assert code == 0, err
    text = svg.read_text(encoding="utf-8")
    assert "CAUTION" in text and f"lowgmap {__version__}" in text
    data = png.read_bytes()
    i = data.index(b"pHYs")                   # PNG specification, 11.3.5.3: pixels per unit x, y; unit 1 = metre
    ppm = int.from_bytes(data[i + 4:i + 8], "big")
    assert data[i + 12] == 1 and ppm * 0.0254 == pytest.approx(300, abs=0.5)


def test_margin_table_can_show_the_worst_case_under_the_nominal_table(study):
    # catches a dashboard margin pane whose worst case is worded or rounded apart from the review pack's rows
    from lowgmap.app.outputs.report import worst_case_rows
    from lowgmap.app.outputs.tables import margin_table_html

    wc = study.worst_case
    plain = margin_table_html(study.margins, 0.3)
    both = margin_table_html(study.margins, 0.3, wc)
    assert both.startswith(plain) and plain == margin_table_html(study.margins, 0.3, None)
    assert f"data-worst-margin='{wc.worst_case:.9g}'" in both
    for k, v in worst_case_rows(wc, study.chart):           # the same words as the review pack and `margin`
        assert f"<th>{k}</th><td>{v}</td>" in both
