"""`lowgmap chart`: static chart export (PNG/SVG/PDF) and unit invariance of the chart."""
import json

import numpy as np
import pytest

from lowgmap.app.files.casefile import load_case, loads_case, sample_case_path
from lowgmap.app.cli import main
from lowgmap.app.outputs.exports import chart_bytes
from lowgmap.app.outputs.render import typeset
from lowgmap.physics.chart.composition import Chart


@pytest.fixture(scope="module")
def tube_doc():
    return load_case(sample_case_path("condensate_line"))


def test_svg_contains_every_boundary_and_regime_label(tmp_path, capsys):
    out = tmp_path / "chart.svg"
    assert main(["chart", str(sample_case_path("condensate_line")), "-o", str(out), "--json"]) == 0
    info = json.loads(capsys.readouterr().out)
    svg = out.read_text()
    assert svg.startswith("<?xml") and "<svg" in svg
    chart = Chart.build(load_case(sample_case_path("condensate_line")).case)
    for name in chart.regime_names:
        assert name in svg, name
    for b in chart.boundaries:
        # symbols are typeset (We_SG -> mathtext); the SVG keeps each text's source, so look for either form
        forms = (b.label, b.label.split(" (")[0], typeset(b.label), typeset(b.label.split(" (")[0]))
        assert any(f.replace("&", "&amp;") in svg for f in forms), b.label
    assert "CAUTION" in svg and "qualification testing" in svg
    assert {b["name"] for b in info["boundaries"]} == {b.name for b in chart.boundaries}


def test_png_and_pdf_are_valid_files(tmp_path, capsys):
    png = tmp_path / "c.png"
    pdf = tmp_path / "c.pdf"
    assert main(["chart", str(sample_case_path("condensate_line")), "-o", str(png)]) == 0
    assert main(["chart", str(sample_case_path("drop_tower_silicone")), "-o", str(pdf), "--axes",
                 "superficial_velocity"]) == 0
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)
    assert png.stat().st_size > 50_000
    assert pdf.read_bytes()[:5] == b"%PDF-"
    capsys.readouterr()


def test_bad_output_suffix_is_rejected(tmp_path, capsys):
    code = main(["chart", str(sample_case_path("condensate_line")), "-o", str(tmp_path / "c.gif")])
    assert code == 2
    assert ".png, .svg or .pdf" in capsys.readouterr().err


def test_export_is_deterministic(tube_doc, tmp_path):
    a = chart_bytes(tube_doc, "svg")
    b = chart_bytes(tube_doc, "svg")
    assert a == b


def test_same_case_in_other_units_gives_the_same_chart(tube_doc):
    # unit invariance: the condensate case rewritten in other units (inch, K, rad, m^3/s, m/s^2)
    text = sample_case_path("condensate_line").read_text()
    other = (text.replace('diameter = "12.7 mm"', 'diameter = "0.5 in"')
                 .replace('temperature = "22 degC"', 'temperature = "295.15 K"')
                 .replace('pressure = "101.3 kPa"', 'pressure = "1.013 bar"')
                 .replace('length = "1.5 m"', 'length = "150 cm"')
                 .replace('residual_acceleration = "1e-6 g0"', 'residual_acceleration = "9.80665e-6 m/s^2"')
                 .replace('contact_angle = "40 deg"', 'contact_angle = "0.6981317007977318 rad"')
                 .replace('liquid_flow = ["20 mL/min", "40 L/min"]',
                          'liquid_flow = ["3.3333333333333335e-07 m^3/s", "6.666666666666667e-4 m^3/s"]')
                 .replace('gas_flow = ["5 mL/min", "100 L/min"]', 'gas_flow = ["0.3 L/h", "6 m^3/h"]'))
    assert other != text
    a = Chart.build(tube_doc.case)
    b = Chart.build(loads_case(other).case)
    assert a.regime_names == b.regime_names
    for ca, cb in zip(a.boundaries, b.boundaries):
        assert ca.name == cb.name
        ok = np.isfinite(ca.ql)
        np.testing.assert_allclose(cb.qg[np.isfinite(cb.ql)][[0, -1]], ca.qg[ok][[0, -1]], rtol=1e-9)
    pts_ql = np.logspace(-6, -3, 50)
    pts_qg = np.logspace(-7, -2, 50)
    assert (a.classify(pts_ql, pts_qg) == b.classify(pts_ql, pts_qg)).all()


def test_chart_prints_the_hand_over_note_of_a_closed_conduit(tmp_path, capsys):
    # catches the hand-over sentence (which family of lines defines the regions at this gravity level) left
    # out of the chart command's notes, or printed for an open channel whose lines are the corner family
    out = tmp_path / "lunar.svg"
    assert main(["chart", str(sample_case_path("lunar_separator")), "-o", str(out), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    note, = d["notes"]
    assert note.startswith("Hand-over: Eötvös number") and "0.165 g0 (horizontal flow)" in note
    assert d["residual_acceleration_m_s2"] == 1.62 and d["orientation"] == "horizontal flow"
    from lowgmap.app.cli.chart import chart_notes

    assert chart_notes(load_case(sample_case_path("wedge_separator")).case) == []     # open channel: no note


def test_compare_level_is_checked_before_anything_is_drawn(tmp_path, capsys):
    code = main(["chart", str(sample_case_path("condensate_line")), "--compare", "orbit", "-o", str(tmp_path / "p.png")])
    err = capsys.readouterr().err
    assert code == 2 and "--compare: 'orbit' is neither" in err and not (tmp_path / "p.png").exists()


def test_bands_flag_draws_or_drops_the_uncertainty_bands(tmp_path):
    """`--bands` / `--no-bands` reach the drawing: the band key entry is in the SVG only with bands.
    Bug caught: the flag parsed but not passed on (bands always drawn, or never)."""
    from lowgmap.app.outputs.chartview import BAND_KEY_TEXT

    case = str(sample_case_path("condensate_line"))     # its drift-flux lines carry banded constants
    with_bands, without = tmp_path / "b.svg", tmp_path / "n.svg"
    assert main(["chart", case, "-o", str(with_bands), "--bands"]) == 0
    assert main(["chart", case, "-o", str(without), "--no-bands"]) == 0
    assert BAND_KEY_TEXT in with_bands.read_text()
    assert BAND_KEY_TEXT not in without.read_text()
