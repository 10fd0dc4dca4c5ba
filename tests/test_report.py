"""`lowgmap report`: the review pack (PDF and HTML) and its agreement with the other outputs.

Wiring tests: every check value is what another output of lowgmap prints for the same case
(`margin --json`, `compare --json`), what the physics objects hold (Verdict, Agreement, the boundary
models' Constant entries), or a text the test wrote into its own input file. No physical number is
checked here (the physics has its own tests). PDFs are read back with pypdf, HTML with the standard
library's parser: the tests read the text a person reads.
"""
import contextlib
import io
import json
import re
import sys
import tomllib
from html.parser import HTMLParser
from pathlib import Path

import pytest
from pypdf import PdfReader

from lowgmap.app import CAUTION, __version__
from lowgmap.app.cli import main
from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.app.files.testpoints import read_test_points
from lowgmap.app.formatting import format_percent
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.studies.study import run_study

ROOT = Path(__file__).resolve().parents[1]
POINTS = str(ROOT / "sample_cases" / "drop_tower_points.csv")
SAMPLES = ("condensate_line", "drop_tower_silicone", "wedge_separator", "cryogenic_groove")
#: samples whose worst case over the constants' bands is compared across the outputs; the corner family's takes
#: about a minute per command (the same wiring), so its outputs here are made with --nominal-only --no-bands
WORST_CASE_SAMPLES = ("condensate_line", "drop_tower_silicone")
#: the bundled points' label for the annular regime, as the tube charts name it (see `lowgmap compare`)
TUBE_MAP = ["--map", "annular=annular (gas core)"]
RED = (0.752941, 0.0, 0.0)          # "#C00000", the colour of a failing verdict, as PDF rgb fractions


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def flat(text: str) -> str:
    """Whitespace collapsed: line breaks of the layout do not split a phrase."""
    return " ".join(text.split())


def pdf_text(path) -> str:
    return flat("\n".join(p.extract_text() for p in PdfReader(str(path)).pages))


def pdf_coloured(path) -> list[tuple[str, tuple]]:
    """(text, fill colour) of every piece of text in the PDF, from its content streams."""
    out = []
    for page in PdfReader(str(path)).pages:
        colour = [(0.0, 0.0, 0.0)]

        def before(op, args, cm, tm):
            if op == b"rg":
                colour[0] = tuple(round(float(a), 6) for a in args)
            elif op == b"g":                                            # a grey level (black is "0 g")
                colour[0] = (round(float(args[0]), 6),) * 3

        def text(t, cm, tm, font, size):
            if t.strip():
                out.append((t.strip(), colour[0]))
        page.extract_text(visitor_operand_before=before, visitor_text=text)
    return out


class _Text(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.parts, self._skip = [], 0

    def handle_starttag(self, tag, attrs):
        self._skip += tag in ("style", "script")

    def handle_endtag(self, tag):
        self._skip -= tag in ("style", "script") and self._skip > 0

    def handle_data(self, data):
        if not self._skip:
            self.parts.append(data)


def html_text(page: str) -> str:
    p = _Text()
    p.feed(page)
    return flat(" ".join(p.parts))


@pytest.fixture
def no_chart_drawing(monkeypatch):
    """A 1-pixel PNG instead of the drawn chart, for tests about the text only (drawing takes seconds)."""
    _stub_chart_drawing(monkeypatch)


def _stub_chart_drawing(mp) -> None:
    import lowgmap.app.outputs.exports as exports

    png = _one_pixel_png()
    mp.setattr(exports, "_chart_bytes", lambda *args, **kwargs: png)
    mp.setattr(exports, "chart_bytes", lambda *args, **kwargs: png)


def _one_pixel_png() -> bytes:
    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    plt.imsave(buf, [[[1.0, 1.0, 1.0]]], format="png")
    return buf.getvalue()


def case_copy(tmp_path, name, *replace, title=None) -> Path:
    """A sample case written to ``tmp_path`` with text replacements (each must apply)."""
    text = Path(sample_case_path(name)).read_text(encoding="utf-8")
    for old, new in replace:
        assert old in text, f"{old!r} not in the sample {name}"
        text = text.replace(old, new)
    if title is not None:
        text = re.sub(r'(?m)^title = ".*"$', lambda m: f"title = {json.dumps(title)}", text, count=1)
    out = tmp_path / f"{name}.toml"
    out.write_text(text, encoding="utf-8")
    return out


# =============================================================================================
# one source per number: the same regime, margin, line, verdicts and counts in every output

def _worst_case_chart() -> bool:
    """True when Chart.build is called by the worst-case search of the bands (``chart_with_constants``): a chart
    with the worst constants, built to confirm the worst-case margin, is not a rebuild of the case's chart."""
    f = sys._getframe(1)
    while f is not None:
        if f.f_code.co_name == "chart_with_constants" and f.f_globals.get("__name__", "").endswith("chart.bands"):
            return True
        f = f.f_back
    return False


@pytest.fixture(scope="module")
def sample_outputs(tmp_path_factory):
    """For each sample case with the sample points: `margin --json`, `compare --json`, the PDF and the HTML
    pack (each written by `lowgmap report`), and the number of chart builds each report made."""
    out = {}
    folder = tmp_path_factory.mktemp("packs")
    with pytest.MonkeyPatch.context() as mp:
        calls = []
        build = Chart.build

        def counting(*args, **kwargs):
            if not _worst_case_chart():
                calls.append(1)
            return build(*args, **kwargs)
        mp.setattr(Chart, "build", counting)
        for name in SAMPLES:
            case = sample_case_path(name)
            got = {}
            if name != "wedge_separator":          # one pack with the chart drawn; the text is what is compared
                _stub_chart_drawing(mp)
            quick = [] if name in WORST_CASE_SAMPLES else ["--nominal-only"]
            for key, argv in (("margin", ["margin", case, "--json", *quick]),
                              ("compare", ["compare", case, POINTS, *TUBE_MAP, "--json"])):
                text = io.StringIO()
                with contextlib.redirect_stdout(text):
                    assert main([str(a) for a in argv]) == 0
                got[key] = json.loads(text.getvalue())
            builds = []
            for suffix in ("pdf", "html"):
                target = folder / f"{name}.{suffix}"
                calls.clear()
                assert main(["report", str(case), "--points", POINTS, *TUBE_MAP, "-o", str(target), *quick,
                             *(["--no-bands"] if quick else [])]) == 0
                builds.append(len(calls))
                got[suffix] = target
            got["builds"] = builds
            out[name] = got
    return out


@pytest.mark.parametrize("name", SAMPLES)
def test_every_output_reads_the_same_numbers(name, sample_outputs):
    # catches the bug of issue 15: the same points giving "10 of 25" in the report, "10 of 15" on screen and
    # "67 % of 15" in `compare`; and a report whose margin, limiting line or verdict words are computed or
    # rounded on their own instead of read from the one study
    got = sample_outputs[name]
    m, c = got["margin"], got["compare"]
    texts = {"PDF": pdf_text(got["pdf"]), "HTML": html_text(got["html"].read_text(encoding="utf-8"))}

    assert "verdict" in m, "`margin --json` gives no verdict in words (issue 15, item 2)"
    verdict = m["verdict"]
    sym = ("at least ±" if m["limiting_boundary"] is None else "±") + format_percent(m["symmetric_margin"])
    required = f"±{format_percent(m['required_margin'])}"
    expected = [
        f"regime at the point {m['regime']}",
        f"symmetric margin {sym}",
        (f"limiting boundary {m['limiting_label']} ({m['limiting_boundary']})" if m["limiting_boundary"]
         else "limiting boundary none within the ±99.9 % box"),
        f"Intended regime {verdict['regime_status']}",
        f"Required margin {required} {verdict['margin_status']}",
        f"Required margin {required}: {verdict['margin_status']} (symmetric margin {sym}); {verdict['regime_status']}",
        f"{c['n_points']} test point(s), {c['n_valid']} valid for a low-gravity conclusion",
        f"{c['confusion_valid']['agreeing']} of {c['compared_valid']} valid point(s)",
        f"{c['confusion_all']['agreeing']} of {c['compared_all']} point(s) in all",
    ]
    # the worst case over the constants' bands (issue 16): the margin, its regime when negative, the constant
    wc = m["worst_case"]
    if name in WORST_CASE_SAMPLES:
        assert wc is not None, f"{name}: `margin --json` gives no worst-case margin"
        w = wc["worst_case_margin"]
        shown = f"±{format_percent(w)}" if w >= 0 else f"{format_percent(w)}, in {wc['worst_case_regime']}"
        expected.append(f"worst-case margin {shown} (constants of the lines bounding the regime")
        expected.append(f"limiting constant {wc['limiting_constant']} of" if wc["limiting_constant"] else
                        "limiting constant none")
    else:
        assert wc is None                                          # --nominal-only: left out, and said so
    for where, text in texts.items():
        missing = [e for e in expected if e not in text]
        assert not missing, f"{name}: {where} lacks {missing}"
    # every label that is not a chart regime is reported as such, never counted as a disagreement
    for u in c["unknown_labels"]:
        for where, text in texts.items():
            assert f'observed label "{u["label"]}" ({u["count"]} point(s)) is not a regime of this chart' in text, where


def test_failing_verdicts_are_in_words_and_red(tmp_path, capsys, no_chart_drawing):
    # catches a report that says "met" (or nothing) while the point sits in a regime the designer wanted to
    # avoid, and failing words printed like passing ones
    case = case_copy(tmp_path, "wedge_separator", ('intended_regime = "isolated bubbles separated"',
                                                   'intended_regime = "merging bubbles separated"'))
    pdf, page = tmp_path / "fail.pdf", tmp_path / "fail.html"
    for target in (pdf, page):
        code, _, err = run(capsys, "report", case, "-o", target, "--nominal-only")   # (the worst case: not here)
        assert code == 0, err
    text = pdf_text(pdf)
    assert "Intended regime NOT IN THE INTENDED REGIME" in text
    assert "Required margin ±25 % NOT MET" in text
    red = {t for t, col in pdf_coloured(pdf) if col == RED}
    assert "NOT IN THE INTENDED REGIME" in red and "NOT MET" in red
    assert not any("met" == t for t in red)
    html = page.read_text(encoding="utf-8")
    assert re.search(r'class="status fail" data-status="NOT IN THE INTENDED REGIME"', html)
    assert re.search(r'class="status fail" data-status="NOT MET"', html)


# =============================================================================================
# the PDF

def test_pdf_metadata_and_every_section(sample_outputs):
    # catches a PDF a document system cannot file (no title, case or revision in its metadata) and a pack
    # that leaves out a part the review needs
    out = sample_outputs["wedge_separator"]["pdf"]
    reader = PdfReader(str(out))
    doc = load_case(sample_case_path("wedge_separator"))
    meta = reader.metadata
    assert meta.subject == doc.case.title
    assert doc.case.title in meta.title and "revision A" in meta.title
    assert meta["/Keywords"] == "revision A"
    assert meta.creator == f"lowgmap {__version__}"
    assert len(reader.pages) >= 4                                       # text pages and the chart page
    text = pdf_text(out)
    for heading in ("Verdicts", "Operating point and margins", "Case inputs", "Fluid properties used",
                    "Boundary models", "Constants: value used, default, allowed range, uncertainty band and source",
                    "Validity ranges of the sources", "Validity warnings", "Test points", "Assumptions",
                    "Revision history", "Regime chart"):
        assert heading in text, heading
    assert flat(f"CAUTION: {CAUTION}") in text
    assert f"lowgmap {__version__}" in text
    assert "0.3 mL/s = 3e-07 m³/s" in text                              # the flow as written, then in SI
    chart = Chart.build(doc.case)
    for model, consts in chart.region_models:
        assert f"({model.name})" in text
        for c in model.constants:                                      # each constant with its range and source
            assert f"[{c.low:.6g}, {c.high:.6g}]" in text and flat(c.source)[:40] in text


def test_report_builds_the_chart_once(sample_outputs):
    # catches the export rebuilding the chart (a second chart can differ from the one the tables were made from)
    assert {name: got["builds"] for name, got in sample_outputs.items()} == {name: [1, 1] for name in SAMPLES}


# =============================================================================================
# test points: rows and points left out, with reasons

def test_set_aside_rows_and_reasons_and_an_unestablished_margin(tmp_path, capsys, no_chart_drawing):
    # catches a report that drops unreadable rows, invalid points and unknown labels without saying so; and
    # "met" printed for a margin capped because no boundary was found near the point (the Verdict says "not
    # established": the margin is unknown, not large), or that word printed like a passing one
    points = tmp_path / "points.csv"
    lines = Path(POINTS).read_text(encoding="utf-8").splitlines()
    # the sample now names its annular points as the chart does; the old label "annular" is put back
    # here so that the report has a label to set aside with the --map that fixes it
    lines = [ln.replace(",annular (gas core),", ",annular,") for ln in lines]
    # and one point labelled with a phrase no chart regime matches by its words (the sample's points were
    # relabelled to chart regimes)
    assert any(ln.startswith("DT-06,") for ln in lines)
    lines = [ln.replace(",elongated bubbles / slugs,", ",slug-annular transition,") if ln.startswith("DT-06,") else ln
             for ln in lines]
    lines.append("BAD-1,not a number,2.0,dispersed bubbles,short drop tower,1e-3,2.2,")
    points.write_text("\n".join(lines) + "\n", encoding="utf-8")
    bad_row = len(lines)                                                # file line number of the row added
    case = case_copy(tmp_path, "condensate_line", ('liquid_flow = "3 L/min"', 'liquid_flow = "1.8 L/min"'),
                     ('gas_flow = "400 sccm"', 'gas_flow = "0.06 mL/min"'))
    study = run_study(load_case(case).case, points=read_test_points(points))
    invalid = [p for p in study.agreement.points if not p.valid]
    assert invalid and study.agreement.unknown_labels                  # the situation the test needs
    assert study.verdict(0.3).margin_status == "not established"
    pdf, page = tmp_path / "r.pdf", tmp_path / "r.html"
    for target in (pdf, page):
        code, _, err = run(capsys, "report", case, "--points", points, "-o", target)
        assert code == 0, err
    for where, text in (("PDF", pdf_text(pdf)), ("HTML", html_text(page.read_text(encoding="utf-8")))):
        assert f"file row {bad_row} row not read" in text, where
        assert "not valid for the platform" in text and flat(invalid[0].reasons[0]) in text, where
        assert 'observed label "annular" (6 point(s)) is not a regime of this chart' in text, where
        assert 'Fix: --map "annular=annular (gas core)"' in text, where      # the mapping that would fix it
        assert "slug-annular transition=REGIME" in text, where               # no regime matches by name
        assert "Required margin ±30 % not established" in text, where
    assert ("not established", RED) in pdf_coloured(pdf)
    assert 'class="status fail" data-status="not established"' in page.read_text(encoding="utf-8")


def test_regime_map_is_applied_and_shown(sample_outputs):
    # catches --map reaching `compare` but not the report
    text = html_text(sample_outputs["condensate_line"]["html"].read_text(encoding="utf-8"))
    assert 'Labels mapped to chart regimes: "annular" → "annular (gas core)"' in text
    assert 'observed label "annular"' not in text


# =============================================================================================
# HTML: escaping, one path with the dashboard

def test_html_escapes_a_hostile_case_title(tmp_path, capsys, no_chart_drawing):
    # catches hand-built HTML (or autoescaping off): a case title becomes live markup in the review page
    title = "Pump loop <script>alert('x')</script> & <b>bold</b>"
    case = case_copy(tmp_path, "condensate_line", title=title)
    out = tmp_path / "r.html"
    code, _, err = run(capsys, "report", case, "-o", out)
    assert code == 0, err
    page = out.read_text(encoding="utf-8")
    assert "<script" not in page and "<b>bold</b>" not in page
    assert "&lt;script&gt;" in page
    assert title in html_text(page)                                     # a person still reads the title


def test_dashboard_download_is_the_cli_page(tmp_path, capsys, no_chart_drawing):
    # catches two HTML paths drifting apart: the dashboard's download (report_html of the session's study)
    # must be the page `lowgmap report -o x.html` writes for the same study
    from lowgmap.app.outputs.exports import report_html

    case = sample_case_path("drop_tower_silicone")
    out = tmp_path / "r.html"
    code, _, err = run(capsys, "report", case, "--points", POINTS, *TUBE_MAP, "-o", out)
    assert code == 0, err
    written = out.read_text(encoding="utf-8")
    date = re.search(r"· (\d{4}-\d{2}-\d{2}) · lowgmap", written).group(1)
    doc = load_case(case)
    f = doc.case.fluid
    tps = read_test_points(POINTS, pressure=f.pressure, temperature=f.temperature)
    study = run_study(doc.case, points=tps, regime_map={"annular": "annular (gas core)"})
    page = report_html(study, settings=doc.settings, invented=doc.invented, document=doc, point_file=tps, date=date)
    assert page == written


def test_templates_are_shipped_as_package_data():
    # catches a wheel without the templates: the report would work from the source tree only
    data = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    globs = data["tool"]["setuptools"]["package-data"]["lowgmap.app"]
    shipped = {p for g in globs for p in (ROOT / "app").glob(g)}
    templates = set((ROOT / "app" / "outputs" / "templates").iterdir())
    assert templates and templates <= shipped
    deps = " ".join(data["project"]["dependencies"]).lower()
    assert "jinja2" in deps


# =============================================================================================
# history, options and refusals

def test_revision_history_entries_are_listed(tmp_path, capsys, no_chart_drawing):
    # catches a report of revision B that hides what revision A was and why it changed
    history = ('\n[[history]]\nrevision = "A"\ndate = 2026-11-02\nchange = "revision B: alpha_c fitted to '
               'ten drop-tower points"\nmodels = [{name = "bubble_slug_dukler_1988", constants = {alpha_c = 0.45}}]\n')
    case = case_copy(tmp_path, "condensate_line", ('revision = "A"', 'revision = "B"'))
    case.write_text(case.read_text(encoding="utf-8") + history, encoding="utf-8")
    out = tmp_path / "r.html"
    code, _, err = run(capsys, "report", case, "-o", out)
    assert code == 0, err
    text = html_text(out.read_text(encoding="utf-8"))
    assert "Revision B is current" in text
    assert "A 2026-11-02 revision B: alpha_c fitted to ten drop-tower points" in text
    assert "bubble_slug_dukler_1988 (alpha_c = 0.45)" in text


def test_required_margin_option_changes_the_verdict(tmp_path, capsys, no_chart_drawing):
    # catches --required-margin being shown but not used by the verdict
    out = tmp_path / "r.html"
    code, stdout, err = run(capsys, "report", sample_case_path("wedge_separator"), "--required-margin", "90 %",
                            "-o", out, "--json", "--nominal-only")
    assert code == 0, err
    data = json.loads(stdout)
    assert data["verdicts"]["Required margin ±90 %"] == "NOT MET"
    assert "Required margin ±90 % NOT MET" in html_text(out.read_text(encoding="utf-8"))


def test_existing_file_is_replaced_only_with_force(tmp_path, capsys, no_chart_drawing):
    # catches a report that silently overwrites an earlier review pack
    out = tmp_path / "r.html"
    out.write_text("earlier pack", encoding="utf-8")
    code, _, err = run(capsys, "report", sample_case_path("condensate_line"), "-o", out)
    assert code == 2 and "--force" in err
    assert out.read_text(encoding="utf-8") == "earlier pack"
    code, _, err = run(capsys, "report", sample_case_path("condensate_line"), "-o", out, "--force")
    assert code == 0, err
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")


def test_output_format_is_checked_before_computing(tmp_path, capsys, monkeypatch):
    # catches a wrong suffix found only after the chart was built (or a file written in the wrong format)
    def refuse(*args, **kwargs):
        raise AssertionError("the chart was built before the output name was checked")
    monkeypatch.setattr(Chart, "build", refuse)
    code, _, err = run(capsys, "report", tmp_path / "no_such_case.toml", "-o", tmp_path / "review.docx")
    assert code == 2 and "--output must end in .pdf or .html" in err
    assert not (tmp_path / "review.docx").exists()


def test_bad_required_margin_is_refused(tmp_path, capsys):
    code, _, err = run(capsys, "report", sample_case_path("condensate_line"), "--required-margin", "150 %",
                       "-o", tmp_path / "r.pdf")
    assert code == 2 and "--required-margin" in err
