"""Dashboard state without a browser: the edit queue, messages next to fields, one required margin,
upload limits, the host check and the release of a closed session.

Wiring and bookkeeping checks (the numbers come from the case reader and the margin module, which
have their own tests against published sources). Work that the server runs on worker threads is
run here by a runner the test steps by hand, so "an edit arrives during a rebuild" is a state the
test sets up, not a race it hopes for.
"""
from __future__ import annotations

import copy
import gc
import html
import threading
import weakref

import param
import pytest

from lowgmap.app.dashboard.display import is_shown
from lowgmap.app.files.casefile import dumps_case, load_case, loads_case, sample_case_path
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.chart.margins import point_margins


class StepRunner:
    """A runner that keeps each job until the test runs it (``step``)."""

    closed = False

    def __init__(self):
        self.jobs = []

    def submit(self, work, done):
        self.jobs.append((work, done))

    def step(self):
        work, done = self.jobs.pop(0)
        try:
            result, error = work(), None
        except Exception as exc:
            result, error = None, exc
        done(result, error)

    def close(self):
        self.closed = True


@pytest.fixture(scope="module")
def doc():
    return load_case(sample_case_path("condensate_line"))


def _expected(doc, changes):
    """Margins of the case's point after ``changes`` (computed without the dashboard)."""
    data = copy.deepcopy(doc.data)
    for path, value in changes.items():
        table, key = path.split(".")
        data[table][key] = value
    edited = loads_case(dumps_case(data))
    op = edited.case.operating_point
    return point_margins(Chart.build(edited.case), op.ql, op.qg)


def _session(doc, runner=None):
    from lowgmap.app.dashboard.state import Session

    return Session(doc, runner=runner)


# ------------------------------------------------------------------------------------- the queue
def test_edits_arriving_during_a_rebuild_wait_and_are_applied_in_order_latest_wins(doc):
    runner = StepRunner()
    s = _session(doc, runner)
    s.edit({"fluid.temperature": "40 degC"}, key="fluid.temperature", label="Temperature")
    assert s.busy and s.pending_keys == {"fluid.temperature"} and len(runner.jobs) == 1
    # while that rebuild runs: a pressure edit, then two temperature edits (the last one counts)
    s.edit({"fluid.pressure": "150 kPa"}, key="fluid.pressure", label="Pressure")
    s.edit({"fluid.temperature": "50 degC"}, key="fluid.temperature", label="Temperature")
    s.edit({"fluid.temperature": "60 degC"}, key="fluid.temperature", label="Temperature")
    assert len(runner.jobs) == 1                                  # one batch at a time
    assert "2 more changes waiting" in s.activity
    runner.step()                                                 # first rebuild done: 40 degC in effect
    assert s.get("fluid.temperature") == "40 degC"
    assert s.pending_keys == {"fluid.pressure", "fluid.temperature"} and len(runner.jobs) == 1
    runner.step()                                                 # the queued batch
    assert (s.get("fluid.temperature"), s.get("fluid.pressure")) == ("60 degC", "150 kPa")
    assert not s.busy and s.pending_keys == set() and s.activity == ""
    ref = _expected(doc, {"fluid.temperature": "60 degC", "fluid.pressure": "150 kPa"})
    assert s.margins.symmetric_margin == pytest.approx(ref.symmetric_margin, rel=1e-12)
    assert s.qg == pytest.approx(ref.qg, rel=1e-12)


def test_refused_edit_names_its_field_keeps_the_value_in_effect_and_others_still_apply(doc):
    runner = StepRunner()
    s = _session(doc, runner)
    s.edit({"fluid.temperature": "22 degC"}, key="fluid.temperature", label="Temperature")
    s.edit({"section.diameter": "-2 mm"}, key="section.diameter", label="Diameter")
    s.edit({"fluid.pressure": "150 kPa"}, key="fluid.pressure", label="Pressure")
    runner.step()
    runner.step()                     # diameter and pressure in one batch
    msgs = s.field_problems["section.diameter"]
    assert msgs[0].startswith("Diameter: must be ") and "'-2 mm'" in msgs[0]
    assert msgs[-1] == "Not applied; in effect: 12.7 mm."
    assert not any("line " in m for m in msgs)                    # the edited text is not on screen
    assert s.get("section.diameter") == "12.7 mm" and s.get("fluid.pressure") == "150 kPa"
    assert "fluid.pressure" not in s.field_problems


def test_chart_that_cannot_be_built_is_filed_under_the_edit_that_caused_it(doc, monkeypatch):
    from lowgmap.app.dashboard import state

    real = state.build_chart

    def build(case):
        if abs(case.section.diameter - 0.02) < 1e-12:
            raise ValueError("no chart for this bore")
        return real(case)
    monkeypatch.setattr(state, "build_chart", build)
    runner = StepRunner()
    s = _session(doc, runner)
    s.edit({"wetting.contact_angle": "40 deg"}, key="wetting.contact_angle", label="Contact angle")
    s.edit({"section.diameter": "20 mm"}, key="section.diameter", label="Diameter")
    s.edit({"fluid.temperature": "60 degC"}, key="fluid.temperature", label="Temperature")
    runner.step()
    revision = s.revision_counter
    runner.step()
    assert s.field_problems["section.diameter"][0] == \
        "Diameter: the chart cannot be built with this value: no chart for this bore"
    assert s.get("section.diameter") == "12.7 mm" and s.get("fluid.temperature") == "60 degC"
    assert s.revision_counter == revision + 1


def test_a_defect_in_the_work_is_reported_next_to_the_fields_and_changes_nothing(doc, monkeypatch):
    from lowgmap.app.dashboard import state

    def broken(case):
        raise ZeroDivisionError("float division by zero")
    monkeypatch.setattr(state, "build_chart", broken)
    s = _session(doc)
    before = s.study
    assert s.edit({"fluid.temperature": "30 degC"}, key="fluid.temperature", label="Temperature") is False
    msg = s.field_problems["fluid.temperature"][0]
    assert msg.startswith("Temperature: the change could not be applied (ZeroDivisionError")
    assert "report this as a bug" in msg
    assert s.study is before and s.get("fluid.temperature") == "22 degC"


def test_point_moves_and_case_edits_share_one_queue(doc):
    runner = StepRunner()
    s = _session(doc, runner)
    s.edit({"fluid.temperature": "60 degC"}, key="fluid.temperature", label="Temperature")
    s.move_point(5e-5, 1e-5)          # typed while the rebuild runs: applied after it, on the new chart
    runner.step()
    runner.step()
    assert (s.ql, s.qg) == (5e-5, 1e-5)
    assert s.study.chart.case.fluid.temperature == pytest.approx(333.15)
    assert s.margins.symmetric_margin == pytest.approx(point_margins(s.chart, 5e-5, 1e-5).symmetric_margin,
                                                       rel=1e-12)
    with pytest.raises(ValueError, match="positive finite"):
        s.move_point(-1.0, 1e-5)


# ------------------------------------------------------------------------------------- fields
def test_field_being_typed_in_is_not_overwritten_by_a_rebuild(doc):
    import panel as pn

    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.panels import PointPanel

    s = _session(doc)
    point = PointPanel(s, ChartPane(s))
    assert point.qg_input.value == "400 sccm"               # the point as written in the case
    point.qg_input.value_input = "0.7 L/m"                   # typing, not yet committed
    s.edit({"fluid.temperature": "60 degC"}, key="fluid.temperature", label="Temperature")
    assert s.get("fluid.temperature") == "60 degC"
    assert point.qg_input.value_input == "0.7 L/m" and point.qg_input.value == "400 sccm"
    # a case load rewrites the point; the field still keeps what is being typed
    data = copy.deepcopy(doc.data)
    data["operating_point"]["gas_flow"] = "0.2 L/min"
    s.load_text(dumps_case(data), "other.toml")
    assert point.qg_input.value_input == "0.7 L/m"
    point.qg_input.param.update(value="0.5 L/min", value_input="0.5 L/min")   # committed
    assert s.qg == pytest.approx(0.5e-3 / 60) and point.qg_input.value == "0.5 L/min"
    assert isinstance(point.qg_input, pn.widgets.TextInput)


def test_setup_fields_show_the_value_in_effect_after_a_refusal(doc):
    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.inputs import SetupPanel

    s = _session(doc)
    setup = SetupPanel(s, ChartPane(s))
    diameter = setup.fields["section.diameter"]
    widget = diameter.widget
    widget.param.update(value_input="abc", value="abc")
    assert widget.value == "12.7 mm" and "cannot read 'abc'" in html.unescape(diameter.message.object)
    assert diameter.message.visible
    widget.param.update(value_input="10 mm", value="10 mm")
    assert s.get("section.diameter") == "10 mm" and not diameter.message.visible
    assert setup.fields["section.diameter"].widget is widget             # never replaced


def test_new_cross_section_kind_is_a_draft_until_its_dimensions_are_given(doc):
    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.inputs import SetupPanel

    s = _session(doc)
    setup = SetupPanel(s, ChartPane(s))
    f = setup.fields
    f["section.kind"].widget.value = "rectangle"
    assert setup.section_draft and f["section.kind"].widget.value == "rectangle"   # not reverted
    assert "Section width: missing" in f["section.kind"].message.object
    assert f["section.width"].widget.visible and not f["section.diameter"].widget.visible
    f["section.width"].widget.param.update(value_input="10 mm", value="10 mm")
    f["section.height"].widget.param.update(value_input="5 mm", value="5 mm")
    assert not setup.section_draft
    assert (s.get("section.kind"), s.get("section.width"), s.get("section.height")) == ("rectangle", "10 mm", "5 mm")


def test_required_margin_is_one_value_for_slider_box_table_exports_and_case_file(doc):
    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.panels import ExportPanel, MarginTable, PointPanel

    s = _session(doc)
    point, table, export = PointPanel(s, ChartPane(s)), MarginTable(s), ExportPanel(s)
    assert s.required_margin == pytest.approx(0.30) and point.required.value == 30
    point.required_box.value = "42.5"
    assert s.required_margin == pytest.approx(0.425)
    assert point.required.value == 42.5                                   # the slider follows
    assert 'required_margin = "42.5 %"' in s.case_text()
    assert export._export_args()["settings"].required_margin == pytest.approx(0.425)
    assert any(f"required ±{t} %" in table.pane.value for t in ("42", "43", "42.5"))   # as format_percent writes it
    with param.edit_constant(point.required):
        point.required.value_throttled = 20.0                              # the slider, released
    assert s.doc.settings.required_margin == pytest.approx(0.20) and point.required_box.value == "20"
    point.required_box.value = "lots"                                      # refused, named, nothing changes
    assert "Required margin: must be a number" in point.required_message.object
    assert s.required_margin == pytest.approx(0.20)


def test_point_outside_the_chart_range_is_stated_in_words(doc):
    from lowgmap.app.dashboard.panels import MarginTable

    s = _session(doc)
    table = MarginTable(s)
    assert not is_shown(table.outside)
    s.move_point(3e-3 / 60, 500e-3 / 60)                                  # Q_G 500 L/min; range ends at 100
    assert s.margins.outside_chart
    assert is_shown(table.outside)
    assert ("The operating point lies outside the drawn chart range (Q_G above 100 L/min): margins are "
            "computed on lines sampled around the point; widen the chart range to see it.") in table.outside.value


# ------------------------------------------------------------------------------------- uploads
class _Event:
    def __init__(self, **data):
        self.event_name = "upload_event"
        self.data = data


def _upload(max_bytes=2500, chunk=1000):
    from lowgmap.app.dashboard.uploads import BoundedUpload

    got, refused = [], []
    w = BoundedUpload(max_bytes=max_bytes, chunk_size=chunk, on_file=lambda n, d: got.append((n, d)),
                      on_refused=lambda n, size: refused.append((n, size)))
    return w, got, refused


def test_upload_is_refused_at_its_first_chunk_when_announced_too_large():
    w, got, refused = _upload()
    w._process_event(_Event(chunk=1, total_chunks=4, name="big.csv", data=b"x" * 1000, type="text/csv"))
    assert refused == [("big.csv", 3000)] and got == []
    w._process_event(_Event(chunk=2, total_chunks=4, name="big.csv", data=b"x" * 1000, type="text/csv"))
    assert got == [] and w._chunks == {}                     # the rest of the file is dropped


def test_upload_is_refused_when_its_chunks_exceed_the_limit_and_a_good_file_arrives_whole():
    w, got, refused = _upload()
    for k in (1, 2, 3):                                      # a client that sends more than it announced
        w._process_event(_Event(chunk=k, total_chunks=3, name="sneaky.csv", data=b"y" * 1000, type="text/csv"))
    assert refused == [("sneaky.csv", 3000)] and got == []
    for k, part in ((1, b"a,b\n"), (2, b"1,2\n")):
        w._process_event(_Event(chunk=k, total_chunks=2, name="ok.csv", data=part, type="text/csv"))
    assert got == [("ok.csv", b"a,b\n1,2\n")]


def test_upload_limits_are_consistent_with_the_transport_limit():
    from lowgmap.app.dashboard import uploads

    # a chunk, even base64-encoded with its message header, fits one websocket message
    assert 4 * uploads.CHUNK_BYTES / 3 + 64_000 < uploads.WEBSOCKET_MAX_MESSAGE_BYTES
    # the file limits are what the browser is told (FilePond counts 1 KB = 1000 bytes)
    w, _, _ = _upload(max_bytes=uploads.UPLOAD_MAX_BYTES, chunk=uploads.CHUNK_BYTES)
    assert w.max_file_size == "10000KB" and uploads.UPLOAD_MAX_BYTES == 10_000_000
    assert "10 MB and 100,000 rows" in uploads.limits_text()


def test_row_limit_is_checked_before_parsing():
    from lowgmap.app.dashboard.uploads import UPLOAD_MAX_ROWS, too_many_rows

    ok = b"a,b\n" + b"1,2\n" * UPLOAD_MAX_ROWS
    assert too_many_rows(ok, "ok.csv") is None
    big = b"a,b\n" + b"1,2\n" * (UPLOAD_MAX_ROWS + 100)
    msg = too_many_rows(big, "big.csv")
    assert msg.startswith("big.csv has 100,101 lines") and "at most 100,000 rows" in msg


# ------------------------------------------------------------------------------------- host check
def _request(host: str):
    from tornado.httputil import HTTPHeaders, HTTPServerRequest, RequestStartLine

    return HTTPServerRequest(start_line=RequestStartLine("GET", "/", "HTTP/1.1"), headers=HTTPHeaders({"Host": host}))


def test_allowed_hosts_are_the_address_and_port_started_for():
    from lowgmap.app.dashboard.hosts import allowed_hosts, websocket_origins

    assert allowed_hosts("127.0.0.1", 5006) == ["127.0.0.1:5006", "localhost:5006"]
    assert allowed_hosts("192.168.1.20", 8000, ["lab-pc", "proxy.example:443"]) == \
        ["192.168.1.20:8000", "lab-pc:8000", "proxy.example:443"]
    assert allowed_hosts("::1", 8000)[0] == "[::1]:8000"
    assert websocket_origins(allowed_hosts("::1", 8000)) == ["localhost:8000", "127.0.0.1:8000"]


def test_host_check_refuses_foreign_host_headers():
    from tornado import web

    from lowgmap.app.dashboard.hosts import HostRefused, allowed_hosts, install_host_check

    class Page(web.RequestHandler):
        def get(self):
            self.write("page")

    app = web.Application([(r"/", Page)])
    install_host_check(app, allowed_hosts("127.0.0.1", 5006), 5006)

    def handler(host):
        return app.find_handler(_request(host)).handler_class

    assert handler("127.0.0.1:5006") is Page and handler("localhost:5006") is Page
    for host in ("evil.example", "evil.example:5006", "127.0.0.1:5007", "localhost.evil.example:5006", ""):
        assert handler(host) is HostRefused, host


def test_serve_configures_limits_origins_and_host_check(doc):
    from lowgmap.app.dashboard import serve
    from lowgmap.app.dashboard.hosts import HostRefused
    from lowgmap.app.dashboard.uploads import WEBSOCKET_MAX_MESSAGE_BYTES

    server = serve(sample_case_path("condensate_line"), port=0, start=False)
    try:
        app = server._tornado
        assert app.settings["websocket_max_message_size"] == WEBSOCKET_MAX_MESSAGE_BYTES
        assert app._websocket_origins == {"127.0.0.1:0", "localhost:0"}
        assert app.find_handler(_request("evil.example")).handler_class is HostRefused
    finally:
        server.stop()


# ------------------------------------------------------------------------------------- release
def test_closed_session_drops_its_work_and_its_large_objects(doc):
    from lowgmap.app.dashboard.state import live_sessions

    gc.collect()
    runner = StepRunner()
    s = _session(doc, runner)
    n = live_sessions()
    chart = weakref.ref(s.chart)
    s.edit({"fluid.temperature": "60 degC"}, key="fluid.temperature", label="Temperature")
    s.close()
    assert runner.closed and s.pending_keys == set() and s.study is None and s.chart is None
    runner.step()                                                   # a result that arrives after closing
    assert s.study is None                                          # is dropped
    s.edit({"fluid.temperature": "30 degC"})                        # and nothing new is queued
    assert runner.jobs == []
    del s
    gc.collect()
    assert live_sessions() == n - 1 and chart() is None


def test_unexpected_callback_error_is_shown_in_its_own_session():
    from bokeh.document import Document
    from panel.io.state import set_curdoc

    from lowgmap.app import dashboard

    doc, shown = Document(), []
    dashboard._ERROR_SINKS[doc] = shown.append
    error = RuntimeError("boom")
    with set_curdoc(doc):
        dashboard._callback_error(error)
    assert shown == [error]


# ------------------------------------------------------------------------------------- issue 15 / 18 inputs
def test_a_bad_value_raises_only_its_own_message_not_a_knock_on_one_in_another_field(doc):
    # Catches: a temperature out of range also reporting "Operating point gas flow: '400 sccm' needs the local
    # pressure and temperature", a second message about a field the person did not touch.
    s = _session(doc)
    assert s.edit({"fluid.temperature": "500 degC"}, key="fluid.temperature", label="Temperature") is False
    msgs = s.field_problems["fluid.temperature"]
    assert msgs[0].startswith("Temperature: must be within") and len(msgs) == 2       # the problem, "Not applied"
    assert not any("gas flow" in m.lower() for m in msgs)
    assert set(s.field_problems) == {"fluid.temperature"}


def test_label_mapping_and_observation_length_reach_the_agreement_as_in_compare(doc):
    # Catches: a mapping or observation length kept by the page but not passed to the agreement module, or
    # lost when the case is edited (the counts would fall back to the unmapped ones).
    from lowgmap.app.dashboard.state import CompareSettings
    from lowgmap.app.files.testpoints import read_test_points
    from lowgmap.physics.studies.agreement import ValidityCriteria, agreement

    f = doc.case.fluid
    tps = read_test_points(sample_case_path("drop_tower_points.csv"), pressure=f.pressure, temperature=f.temperature)
    settings = CompareSettings(regime_map=(("annular (gas core)", "elongated bubbles / slugs"),),
                               observation_length=0.1)
    s = _session(doc)
    s.set_test_points(tps, compare=settings)
    want = agreement(s.chart, tps, regime_map={"annular (gas core)": "elongated bubbles / slugs"},
                     criteria=ValidityCriteria(observation_length=0.1))
    got = s.study.agreement
    assert (got.confusion_all.agreeing, got.n_valid) == (want.confusion_all.agreeing, want.n_valid)
    plain = agreement(s.chart, tps)
    assert (got.confusion_all.agreeing, got.n_valid) != (plain.confusion_all.agreeing, plain.n_valid)
    s.edit({"wetting.contact_angle": "45 deg"}, key="wetting.contact_angle", label="Contact angle")
    assert s.compare == settings and s.study.agreement.criteria.observation_length == 0.1   # kept across a rebuild
    s.set_compare(CompareSettings())
    assert s.study.agreement.regime_map == () and s.study.agreement.criteria.observation_length is None


def test_intended_regime_select_reaches_the_verdict(doc):
    # Catches: the select not showing the file's intended regime (an edit of another input would then drop it),
    # the intended regime chosen in the page not written into the case (verdict and exports would still name
    # the old one), and "none" not removing it.
    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.panels import PointPanel, VerdictPanel

    s = _session(doc)
    point, verdict = PointPanel(s, ChartPane(s)), VerdictPanel(s)
    assert point.intended.options == ["none", *s.chart.regime_names]
    assert point.intended.value == "dispersed bubbles" == s.doc.settings.intended_regime     # the sample's
    assert (s.verdict().regime_status, s.verdict().margin_status) == ("in the intended regime", "met")
    point.intended.value = "annular (gas core)"
    assert s.doc.settings.intended_regime == "annular (gas core)"
    v = s.verdict()
    assert (v.regime_status, v.margin_status) == ("NOT IN THE INTENDED REGIME", "NOT MET")
    assert "class='status fail'>NOT IN THE INTENDED REGIME</span>" in verdict.pane.value
    point.intended.value = "none"
    assert s.doc.settings.intended_regime is None and s.verdict().regime_status == "no intended regime stated"


def test_robust_point_is_searched_in_the_typed_range_default_a_decade_around_the_point(doc):
    # Catches: the search run over the chart box instead of the stated range (issue 15), and typed ranges ignored.
    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.panels import PointPanel

    s = _session(doc)
    point = PointPanel(s, ChartPane(s))
    ql0, qg0 = s.ql, s.qg
    assert s.robust_default_ranges() == ((ql0 / 10, ql0 * 10), (qg0 / 10, qg0 * 10))
    assert point.range_fields["ql_lo"].placeholder.endswith("(default)")
    point.range_fields["ql_lo"].value = "2 L/min"
    point.range_fields["ql_hi"].value = "2.5 L/min"
    point.regime_select.value = "dispersed bubbles"
    point._robust(None)
    assert 2e-3 / 60 * (1 - 1e-9) <= s.ql <= 2.5e-3 / 60 * (1 + 1e-9)
    assert qg0 / 10 * (1 - 1e-9) <= s.qg <= qg0 * 10 * (1 + 1e-9)              # gas: the default decade
    point.range_fields["ql_hi"].value = "1 L/min"                              # 'to' below 'from': refused
    before = (s.ql, s.qg)
    point._robust(None)
    assert "'to' must be above 'from'" in html.unescape(point.range_message.object) and (s.ql, s.qg) == before


def test_gravity_level_slider_and_orientation_write_the_case(doc):
    # Catches: named levels, the log slider or the orientation not reaching the case (the chart would not change
    # with g), and a bad angle filed under another field.
    from types import SimpleNamespace

    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.inputs import SetupPanel
    from lowgmap.physics.case import LUNAR_SURFACE_GRAVITY, Orientation

    s = _session(doc)
    setup = SetupPanel(s, ChartPane(s))
    f = setup.fields
    assert f["conduit.gravity_level"].widget.value == "orbit, 1e-6 g0" and setup.gravity_slider.value == -6.0
    f["conduit.gravity_level"].widget.value = "lunar surface, 1.62 m/s^2"
    assert s.doc.case.g == LUNAR_SURFACE_GRAVITY                     # NASA Moon Fact Sheet value, via the case file
    assert setup.gravity_slider.value == pytest.approx(-0.782, abs=1e-3)   # log10(1.62 / 9.80665)
    setup._slid(SimpleNamespace(new=-3.0))                          # the slider, released at 1e-3 g0
    assert s.get("conduit.residual_acceleration") == "0.001 g0"
    assert s.doc.case.g == pytest.approx(1e-3 * 9.80665, rel=1e-12)
    assert f["conduit.gravity_level"].widget.value == "other (typed below)"
    f["conduit.orientation"].widget.value = "vertical upward flow"
    assert s.doc.case.orientation == Orientation.vertical_up()
    f["conduit.orientation"].widget.value = "inclined (angle below)"
    assert f["conduit.inclination"].widget.visible
    f["conduit.inclination"].widget.param.update(value_input="130 deg", value="130 deg")
    msgs = s.field_problems["conduit.inclination"]
    assert msgs[0].startswith("Inclination: an angle must be within [-90, 90] deg")
    assert s.doc.case.orientation == Orientation.vertical_up()     # refused: the value in effect stays
    f["conduit.inclination"].widget.param.update(value_input="30 deg", value="30 deg")
    assert s.doc.case.orientation.angle_rad == pytest.approx(0.5235987755982988)
    assert "orientation" in s.case_text()                          # the downloaded case file carries it


def test_report_download_is_the_cli_review_page(doc):
    # Catches: the dashboard building its report another way than `lowgmap report -o x.html` (the case file's
    # inputs as written and history, the uploaded file's rows set aside).
    from lowgmap.app.dashboard.panels import ExportPanel
    from lowgmap.app.files.testpoints import read_test_points
    from lowgmap.app.outputs.exports import report_html

    f = doc.case.fluid
    tps = read_test_points(sample_case_path("drop_tower_points.csv"), pressure=f.pressure, temperature=f.temperature)
    s = _session(doc)
    s.set_test_points(tps)
    export = ExportPanel(s, test_points_panel=type("TP", (), {"points": tps})())
    got = export._report().getvalue().decode("utf-8")
    want = report_html(s.study, settings=s.export_settings(), invented=doc.invented, document=s.doc, point_file=tps)
    strip = __import__("re").compile(r'src="data:image/png;base64,[^"]*"')
    assert strip.sub("", got) == strip.sub("", want)
    assert "drop_tower_points.csv" in got


# ------------------------------------------------------------------------------------- sliders and live previews
def _release(slider, x):
    """Drag ``slider`` (a FieldSlider) to position ``x`` and release it there, as the browser reports it."""
    slider.widget.value = x
    with param.edit_constant(slider.widget):
        slider.widget.value_throttled = x


def _shown(pane):
    """The data of every source the chart pane draws from (what the browser receives)."""
    return {name: dict(getattr(pane, f"src_{name}").data)
            for name in ("regions", "region_labels", "valid", "invalid", "line_labels", "point")}


def test_slider_path_and_typed_path_give_the_same_case_and_the_same_numbers():
    # Catches: a slider that commits another text than it shows (rounding, unit), a released value computed by
    # another path than a typed one (a preview's numbers kept as if authoritative, a chart of a stale value),
    # and a field or slider that does not follow the other.
    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.inputs import SetupPanel

    doc = load_case(sample_case_path("wedge_separator"))
    slid = _session(doc)
    pane = ChartPane(slid)
    setup = SetupPanel(slid, pane)
    slider = setup.sliders["section.half_angle"]
    assert slider.widget.start <= 6.0 <= slider.widget.end and slider.widget.value == pytest.approx(6.0)
    for x in (6.5, 7.25):                      # dragged: previews only, the case in effect is unchanged
        slider.widget.value = x
        assert slid.live.text == slider.text_of(x) and slid.get("section.half_angle") == "6 deg"
    assert setup.fields["section.half_angle"].widget.value == slider.text_of(6.5)   # the field follows (throttled)
    preview = slid.live
    _release(slider, 7.25)
    assert slid.live is None and slid.get("section.half_angle") == "7.25 deg"
    assert setup.fields["section.half_angle"].widget.value == "7.25 deg"         # and shows the value released

    typed = _session(doc)
    typed_pane = ChartPane(typed)
    typed_setup = SetupPanel(typed, typed_pane)
    typed_setup.fields["section.half_angle"].widget.param.update(value_input="7.25 deg", value="7.25 deg")
    assert typed_setup.sliders["section.half_angle"].widget.value == pytest.approx(7.25)   # the slider follows
    assert slid.case_text() == typed.case_text() and slid.doc.case == typed.doc.case
    a, b = slid.margins, typed.margins
    assert (a.regime, a.limiting_boundary) == (b.regime, b.limiting_boundary)
    assert a.symmetric_margin == pytest.approx(b.symmetric_margin, rel=1e-12)
    assert _shown(pane) == _shown(typed_pane)
    # the preview of the released value showed the numbers now in effect, to the preview's stated resolution
    # (PREVIEW_CAVEAT: within 5e-5), and was marked as a preview; the chart in effect is a full-resolution one
    from lowgmap.physics.chart.margins import PREVIEW_CAVEAT

    assert preview.chart.preview and not slid.chart.preview and PREVIEW_CAVEAT not in slid.margins.caveats
    assert preview.regime == a.regime and abs(preview.margins.symmetric_margin - a.symmetric_margin) <= 5e-5
    assert preview.margins.caveats[0] == PREVIEW_CAVEAT
    from lowgmap.app.dashboard.chartpane import live_label_text
    from lowgmap.app.formatting import format_percent

    # the label drawn during the drag names the value, the regime and the margin, marked as a preview
    assert live_label_text(preview) == (f"{preview.label} {preview.text} (preview)\noperating point in "
                                        f"{preview.regime}, ±{format_percent(preview.margins.symmetric_margin)}")


def test_the_next_preview_is_computed_while_one_is_drawn_and_an_older_one_never_covers_a_newer(doc):
    # Catches: the next value's chart asked for only after the last one is drawn (the server then draws a frame
    # in the sum of the two times instead of the longer: about 13 instead of 16 frames a second for the wedge),
    # and, once the next job starts first, an older result drawn over a newer one that a runner finished
    # meanwhile (a runner working inline finishes the next job before returning).
    runner = StepRunner()
    s = _session(doc, runner)
    queued_when_drawn = []
    s.param.watch(lambda e: queued_when_drawn.append((e.new.text, len(runner.jobs))) if e.new else None, "live")

    def ask(mm):
        s.preview({"section.diameter": f"{mm} mm"}, key="section.diameter", label="Diameter", text=f"{mm} mm")
    ask(13)
    ask(14)                                            # asked for while 13 mm is computed
    runner.step()
    assert queued_when_drawn == [("13 mm", 1)]         # 14 mm was on its way when 13 mm was drawn
    runner.step()
    assert s.live.text == "14 mm"

    class InlineAfterFirst(StepRunner):
        """Keeps the first job for the test; runs every later one at once (as an inline runner does)."""
        def submit(self, work, done):
            if self.jobs or getattr(self, "kept", False):
                result = work()
                done(result, None)
            else:
                self.kept = True
                super().submit(work, done)

    runner = InlineAfterFirst()
    s = _session(doc, runner)
    ask(13)
    ask(15)
    runner.step()                                      # 13 mm done; 15 mm computed and drawn inside that step
    assert s.live.text == "15 mm" and abs(s.live.chart.case.section.diameter - 0.015) < 1e-12


def test_previews_are_coalesced_the_latest_value_wins_and_stale_ones_are_dropped(doc):
    # Catches: previews queued one per mouse event (the chart lagging seconds behind the slider), a stale
    # result drawn after a newer one or after the release, margins lagging behind the chart drawn, a
    # preview left on screen after its value was applied, and a preview-resolution chart kept as the chart in
    # effect when the released value is applied.
    runner = StepRunner()
    s = _session(doc, runner)
    before = s.chart

    def ask(mm):
        s.preview({"section.diameter": f"{mm} mm"}, key="section.diameter", label="Diameter", text=f"{mm} mm")
    ask(13)
    ask(14)
    ask(15)
    assert len(runner.jobs) == 1                       # one preview job at a time, the rest waits as one value
    runner.step()
    assert s.live.text == "13 mm" and s.get("section.diameter") == "12.7 mm"
    assert abs(s.live.margins.ql - s.ql) == 0.0 and s.live.margins.regime == s.live.regime   # in the same job
    assert len(runner.jobs) == 1                       # next: the chart of 15 mm (14 mm was dropped)
    runner.step()
    assert s.live.text == "15 mm" and abs(s.live.chart.case.section.diameter - 0.015) < 1e-12
    assert s.live.chart.preview and s.live.margins.symmetric_margin == pytest.approx(
        point_margins(s.live.chart, s.ql, s.qg).symmetric_margin, rel=1e-12)
    ask(16)
    s.end_preview()                                    # released at 15 mm: the 16 mm job is dropped
    runner.step() if runner.jobs else None
    assert s.live.text == "15 mm" and s.live.released
    assert s.chart is before                           # nothing applied yet
    s.edit({"section.diameter": "15 mm"}, key="section.diameter", label="Diameter")
    preview_chart = s.live.chart
    runner.step()
    assert s.live is None and s.get("section.diameter") == "15 mm"
    assert s.chart is not preview_chart and not s.chart.preview      # built again at full resolution
    assert s.chart.case == preview_chart.case


def test_full_solves_switch_rebuilds_the_chart_and_stays_for_later_edits(doc):
    # Catches: the exact switch not reaching Chart.build (charts stay on the surrogates), or a later edit
    # silently going back to the surrogates.
    from lowgmap.app.dashboard.chartpane import ChartPane

    s = _session(doc)
    pane = ChartPane(s)
    assert not s.exact and not s.chart.exact
    pane.exact_toggle.value = True
    assert s.exact and s.chart.exact
    s.edit({"section.diameter": "10 mm"}, key="section.diameter", label="Diameter")
    assert s.chart.exact and s.margins.symmetric_margin == pytest.approx(
        point_margins(Chart.build(s.doc.case, exact=True), s.ql, s.qg).symmetric_margin, rel=1e-12)
    s.set_exact(False)
    assert not s.chart.exact and not pane.exact_toggle.value


def test_worst_case_and_bands_come_from_the_background_and_stale_results_are_dropped(doc):
    # Catches: a worst case shown for a point or case no longer in effect, a worst case computed on the event
    # loop (it would be there before the job ran), bands not drawn in their line's colour or missing from the key.
    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.panels import MarginTable
    from lowgmap.app.outputs.chartview import BAND_KEY_TEXT
    from lowgmap.physics.chart.bands import worst_case_margins

    runner = StepRunner()
    s = _session(doc, runner)
    s.move_point(5e-5, 1e-5)                            # job 1: the move
    table = MarginTable(s)                              # job 2: the worst case of the study before the move
    assert s.worst_case_state == "computing" and "computing worst case" in table.worst_notice.value \
        and is_shown(table.worst_notice)
    assert "worst-case" not in table.pane.value
    runner.step()
    runner.step()                                       # a result for the old point: dropped, the new one next
    assert s.worst_case is None and s.worst_case_state == "computing" and len(runner.jobs) == 1
    runner.step()
    want = worst_case_margins(s.chart, 5e-5, 1e-5)
    assert s.worst_case_state == "ready" and not is_shown(table.worst_notice)
    assert f"data-worst-margin='{want.worst_case:.9g}'" in table.pane.value
    pane = ChartPane(s)
    s.show_bands = True
    assert s.bands_state == "computing" and "computing bands" in pane.extras_notice.value
    runner.step()
    colours = {c for c in pane.src_valid.data["colour"]}
    assert s.bands_state == "ready" and pane.src_bands.data["xs"]
    assert set(pane.src_bands.data["colour"]) <= colours            # each band in its line's colour
    assert BAND_KEY_TEXT in [item.label.value for item in pane.figs[True].legend.items if item.visible]
    s.show_bands = False
    assert pane.src_bands.data["xs"] == []


class _WaitSpy:
    """Stands in for the session's "nothing urgent runs" event and says when a job starts waiting on it."""

    def __init__(self, event):
        self.event, self.waiting = event, threading.Event()

    def __getattr__(self, name):
        return getattr(self.event, name)

    def wait(self, timeout=None):
        if not self.event.is_set():
            self.waiting.set()
        return self.event.wait(timeout)


def _in_thread(runner):
    """Run the runner's first job on another thread (as the server's pool does); returns the thread."""
    t = threading.Thread(target=runner.step, daemon=True)
    t.start()
    return t


def test_background_jobs_pause_during_a_drag_and_stop_when_their_study_is_gone(doc):
    # Catches: a worst case that keeps computing while a slider is dragged (it takes seconds and halves the
    # previews drawn per second), a paused job that never resumes after the release, a job for a study no
    # longer shown that finishes anyway (seconds of work for nothing) or whose stop is reported as a failure,
    # and a paused job left waiting after the session closed.
    from lowgmap.physics.chart.bands import worst_case_margins
    from lowgmap.physics.pacing import Abandoned

    runner = StepRunner()
    runner.concurrent = True
    s = _session(doc, runner)
    spy = s._calm = _WaitSpy(s._calm)
    s.want_worst_case()
    assert len(runner.jobs) == 1 and s.worst_case_state == "computing"
    s.preview({"section.diameter": "13 mm"}, key="section.diameter", label="Diameter", text="13 mm")
    job = _in_thread(runner)                           # the worst case (the preview job waits its turn)
    assert spy.waiting.wait(60)                        # paused at its first pause point
    assert job.is_alive() and s.worst_case is None
    s.end_preview()                                    # released: it resumes and finishes
    job.join(120)
    assert not job.is_alive() and s.worst_case_state == "ready"
    assert s.worst_case.worst_case == worst_case_margins(s.chart, s.ql, s.qg).worst_case
    # the next study's worst case, paused by a drag, then the point moves: it stops instead of finishing
    runner.step()                                      # the preview asked for before the release: dropped
    assert not runner.jobs
    s.move_point(5e-5, 1e-5)
    runner.step()                                      # the move is applied; its worst case is queued
    assert len(runner.jobs) == 1 and s.worst_case_state == "computing"
    stale_study = s.study
    spy.waiting.clear()
    s.preview({"section.diameter": "14 mm"}, key="section.diameter", label="Diameter", text="14 mm")
    preview_job = runner.jobs.pop()
    got = []
    work, done = runner.jobs.pop(0)
    runner.jobs.append((work, lambda result, error: (got.append(error), done(result, error))))
    job = _in_thread(runner)
    assert spy.waiting.wait(60)
    runner.jobs.append(preview_job)
    runner.step()                                      # the preview is drawn meanwhile
    s.move_point(6e-5, 1e-5)
    runner.step()                                      # another study is shown: the paused job stops
    job.join(120)
    assert not job.is_alive() and isinstance(got[0], Abandoned) and s.study is not stale_study
    assert s.worst_case_state == "computing" and not s.extras_problem and len(runner.jobs) == 1
    # a job paused when the session closes stops too
    spy.waiting.clear()
    job = _in_thread(runner)
    assert spy.waiting.wait(60)
    s.close()
    job.join(120)
    assert not job.is_alive()


def test_a_new_chart_changes_the_data_of_the_same_sources_and_key_items(doc):
    # Catches: a redraw that replaces glyphs, sources or key entries (bokeh then sends whole new models and the
    # page relayouts: the 0.8-1.2 s per change of issue 17) instead of new data in place.
    from lowgmap.app.dashboard.chartpane import ChartPane

    s = _session(doc)
    pane = ChartPane(s)
    fig = pane.figs[True]
    renderers, items = list(fig.renderers), list(fig.legend.items)
    sources = [r.data_source for r in fig.renderers]
    old = dict(pane.src_valid.data)
    s.edit({"section.diameter": "6 mm"}, key="section.diameter", label="Diameter")
    assert pane.src_valid.data != old
    assert list(fig.renderers) == renderers and [r.data_source for r in fig.renderers] == sources
    assert all(a is b for a, b in zip(fig.legend.items, items))


def test_the_key_draws_from_sources_that_a_new_chart_leaves_alone_with_each_lines_style(doc):
    # Catches: key entries that refer to the glyphs whose data every frame replaces (bokeh's key then rebuilds
    # its entries and the page lays the plot out again on every frame of a drag), and a key entry drawn from
    # the wrong row of its own source (an index kept from the glyph's source: the wrong colour in the key).
    from lowgmap.app.dashboard.chartpane import ChartPane

    s = _session(doc)
    pane = ChartPane(s)
    fig = pane.figs[True]
    changing = {id(pane.src_valid), id(pane.src_invalid), id(pane.src_bands), id(pane.src_regions)}
    shown = [item for item in fig.legend.items if item.visible]
    assert shown
    for item in shown:
        (r,) = item.renderers
        assert id(r.data_source) not in changing
        assert r.name.startswith("key: ")
    key_src = pane.src_key["boundaries"]
    before = {k: list(v) for k, v in key_src.data.items()}
    s.edit({"section.diameter": "6 mm"}, key="section.diameter", label="Diameter")   # same lines, new data
    assert {k: list(v) for k, v in key_src.data.items()} == before
    valid = pane.src_valid.data
    for item in fig.legend.items:
        if item.visible and item.renderers[0].name == "key: boundaries":
            row = item.index
            label = item.label.value
            i = valid["label"].index(label.removesuffix(" (comparison)"))
            assert key_src.data["colour"][row] == valid["colour"][i]
            assert key_src.data["dash"][row] == valid["dash"][i]


def test_the_hidden_axes_figure_draws_from_empty_stand_ins_and_switching_scale_swaps_them(doc):
    # Catches: the hidden figure (log or linear axes) sharing the sources of the shown one: the page then lays
    # it out again on every frame of a drag; and a switch of scale that leaves the shown figure on empty sources.
    from lowgmap.app.dashboard.chartpane import ChartPane

    s = _session(doc)
    pane = ChartPane(s)
    shown, hidden = pane.figs[pane.log_axes], pane.figs[not pane.log_axes]
    by_name = lambda fig: {r.name: r.data_source for r in fig.renderers if r.name}   # noqa: E731
    assert by_name(shown)["boundaries"] is pane.src_valid and by_name(shown)["regions"] is pane.src_regions
    assert by_name(hidden)["boundaries"] is not pane.src_valid
    assert all(not any(len(v) for v in src.data.values())
               for name, src in by_name(hidden).items() if not name.startswith("key: "))
    assert pane.src_valid.data["xs"]
    pane.log_axes = not pane.log_axes
    assert by_name(hidden)["boundaries"] is pane.src_valid and hidden.visible and not shown.visible
    assert by_name(shown)["boundaries"] is not pane.src_valid
    assert pane.src_valid.data["xs"]


def test_slider_moves_skip_only_the_theme_lookup_not_a_property():
    # Catches: the fast path of a dragged slider's value dropping or renaming what panel would send to the
    # page (the page's slider would then not follow a value set on the server).
    import panel as pn

    from lowgmap.app.dashboard.inputs import LiveSlider

    w = LiveSlider(start=0.0, end=10.0, step=0.1, value=1.0)
    model = w.get_root()
    ev = param.parameterized.Event(what="value", name="value", obj=w, cls=type(w), old=1.0, new=2.5, type="changed")
    fast = w._update_properties(ev, doc=model.document)
    slow = pn.widgets.FloatSlider._update_properties(w, ev, doc=model.document)
    assert fast == slow and fast
    w.value = 3.5
    assert model.value == 3.5


def test_the_page_has_no_page_wide_busy_spinner():
    # Catches: panel's page-wide busy spinner back in the page: it flips around every event from the page
    # (about 20 a second during a drag), costing the server a theme lookup and the page a relayout each time.
    from lowgmap.app.dashboard import create_app

    import panel as pn

    from lowgmap.app.dashboard.inputs import LiveSlider

    page = create_app(sample_case_path("condensate_line"))
    assert page.busy_indicator is None
    page.lowgmap_session.close()
    w = LiveSlider(start=0.0, end=10.0, step=0.1, value=1.0)
    counted = []
    watcher = pn.state.param.watch(lambda e: counted.append(e.new), "_busy_counter")
    try:
        w._process_events({"value": 2.0})          # a move from the page: applied, not counted as busy
    finally:
        pn.state.param.unwatch(watcher)
    assert w.value == 2.0 and counted == []


def test_a_gas_flow_typed_in_standard_volume_is_named_beside_the_converted_readout(doc):
    # Catches: the readout showing Q_G = 0.4323 L/min beside a field that says "400 sccm" with nothing to say
    # that one is the other at the local temperature and pressure (a reviewer reads two different numbers).
    from lowgmap.app.dashboard.chartpane import ChartPane

    s = _session(doc)
    pane = ChartPane(s)
    assert str(s.data["operating_point"]["gas_flow"]) == "400 sccm"       # the sample's operating point
    text = html.unescape(pane.readout)
    assert "Q_G typed as 400 sccm (standard volume), shown at the local 22 degC and 101.3 kPa" in text
    s.edit({"operating_point.gas_flow": "0.5 L/min"}, key="operating_point.gas_flow", label="Gas flow")
    assert "typed as" not in pane.readout                               # an actual-volume flow needs no note


def test_a_preview_draws_the_regions_in_flat_colour_and_the_released_chart_hatched(doc):
    # Catches: the hatching left off after the release (the chart in effect would lose what tells its regions
    # apart in print and for colour-blind readers) or kept on during a drag (the page's slowest fill, and bokeh
    # makes a pattern canvas per region and glyph variant whenever the hatched glyph's data change), the hatching
    # glyph's data sent on a frame of a drag, and a preview whose regions lose their colours or names.
    from lowgmap.app.dashboard.chartpane import ChartPane

    runner = StepRunner()
    s = _session(doc, runner)
    pane = ChartPane(s)
    hatching = [r["region-hatching"] for r in pane._renderers.values()]
    assert any(h.strip() for h in pane.src_region_hatch.data["hatch"]) and all(r.visible for r in hatching)
    assert pane.src_region_hatch.data["xs"] == pane.src_regions.data["xs"]
    sent = []
    pane.src_region_hatch.on_change("data", lambda attr, old, new: sent.append(new))
    for i, text in enumerate(("13 mm", "13.5 mm")):             # two frames of one drag, as a slider asks for them
        s.preview({"section.diameter": text}, key="section.diameter", label="Diameter", text=text,
                  display=pane.preview_frame)
        runner.step()
        drawn = pane.src_regions.data
        want = pane.frame_of(s.live.doc, s.live.chart)["regions"]
        assert s.live.text == text and not any(r.visible for r in hatching)          # nothing hatched
        assert list(drawn["colour"]) == list(want["colour"]) and list(drawn["name"]) == list(want["name"])
        assert list(drawn["xs"]) == list(want["xs"])
    assert sent == []                                           # the hatching's data are not sent during a drag
    s.end_preview()
    s.edit({"section.diameter": "13.5 mm"}, key="section.diameter", label="Diameter")
    runner.step()
    assert s.live is None
    final = pane.frame_of(s.doc, s.chart)["regions"]
    assert list(pane.src_region_hatch.data["hatch"]) == list(final["hatch"])
    assert list(pane.src_region_hatch.data["xs"]) == list(final["xs"]) == list(pane.src_regions.data["xs"])
    assert any(h.strip() for h in pane.src_region_hatch.data["hatch"]) and all(r.visible for r in hatching)


def test_the_key_reaches_no_source_a_frame_fills_and_its_clicks_reach_the_drawn_glyphs(doc):
    # Catches: a link from a key entry's stand-in glyph to the glyph drawn in the plot (e.g. a js_link of their
    # visibility): bokeh's key rebuilds all its entries, their elements and canvases in the page, whenever any
    # model reachable from an entry changes, i.e. on every frame of a drag, since the drawn glyph leads to the
    # sources the frames fill. And a key whose clicks no longer reach the drawn glyphs (tests/browser checks
    # the pixels).
    from lowgmap.app.dashboard.chartpane import ChartPane

    runner = StepRunner()
    s = _session(doc, runner)
    pane = ChartPane(s)
    filled = {pane.src_regions, pane.src_region_labels, pane.src_valid, pane.src_invalid, pane.src_line_labels,
              pane.src_bands}
    s.preview({"section.diameter": "13 mm"}, key="section.diameter", label="Diameter", text="13 mm",
              display=pane.preview_frame)
    runner.step()
    for fig in pane.figs.values():
        legend = fig.legend[0]
        shown = [item for item in legend.items if item.visible]
        assert shown                                          # the key has entries for the lines
        reach = set().union(*(item.references() for item in legend.items))
        assert not reach & filled
        drawn = {r.name: r for r in fig.renderers}
        cb, = legend.js_event_callbacks["legend_item_click"]
        pairs = dict(zip((t.name for t in cb.args["twins"]), cb.args["reals"]))
        assert {item.renderers[0].name for item in shown} <= set(pairs)
        assert all(pairs[f"key: {name}"] is drawn[name] for name in ("boundaries", "bands", "test-points"))


def test_background_results_go_to_their_own_pool_and_the_jobs_a_person_waits_for_do_not(doc):
    # Catches: the bands or the worst case sent to the worker pool, where a job paused during a drag holds a
    # thread that a preview needs (with as many dragging sessions as threads, no preview would be drawn), and
    # a preview or an edit sent to the background pool (it would wait behind seconds of band searches).
    class PoolRunner(StepRunner):
        concurrent = True

        def submit_background(self, work, done):
            self.jobs.append((work, done))
            self.background.append(len(self.jobs) - 1)

    runner = PoolRunner()
    runner.background = []
    s = _session(doc, runner)
    s.want_worst_case()
    assert runner.background == [0] and len(runner.jobs) == 1 and s.worst_case_state == "computing"
    runner.step()                                                  # nothing urgent runs: not paused
    assert s.worst_case_state == "ready"
    runner.background.clear()
    s.preview({"section.diameter": "13 mm"}, key="section.diameter", label="Diameter", text="13 mm")
    s.end_preview()
    s.edit({"section.diameter": "13 mm"}, key="section.diameter", label="Diameter")
    assert runner.background == [] and len(runner.jobs) == 2       # the preview and the edit
    runner.step()                                                  # the preview (dropped: released)
    runner.step()                                                  # the edit: a new study
    assert runner.background == [0] and len(runner.jobs) == 1 and s.worst_case_state == "computing"
    runner.background.clear()
    runner.step()
    s.show_bands = True                                            # the bands: background too
    assert runner.background == [0] and len(runner.jobs) == 1 and s.bands_state == "computing"


#: Properties whose change makes bokeh lay out the whole page again (LayoutDOMView in bokeh 3.9).
_RELAYOUT_PROPS = {"visible", "css_classes", "stylesheets", "width", "height", "min_width", "min_height",
                   "max_width", "max_height", "margin", "sizing_mode", "width_policy", "height_policy",
                   "aspect_ratio", "flow_mode", "resizable", "children"}


def test_a_drag_its_release_and_the_background_work_lay_out_no_part_of_the_page_again():
    # Catches: a status line shown or hidden by `visible` (the preview status, the "working" line and its spinner,
    # the worst-case notice), or a pane whose update changes its stylesheets (the chart warnings as an Alert):
    # in the page, each such change lays the whole page out again (85-150 ms each in Chromium on a 2-core
    # machine; ten of them followed every release before, most of the release-to-final time). The lines must
    # still come and go as a person sees them (shown and hidden by style).
    import gc

    from bokeh.document import Document
    from bokeh.models import LayoutDOM

    from lowgmap.app.dashboard import create_app
    from lowgmap.app.dashboard.chartpane import ChartPane

    page = create_app(sample_case_path("condensate_line"))
    bokeh_doc = Document()
    page.server_doc(bokeh_doc)
    s = page.lowgmap_session
    pane = next(o for o in gc.get_objects() if isinstance(o, ChartPane) and o.session is s)

    def by_class(css):
        found = [m for m in bokeh_doc.models if css in getattr(m, "css_classes", ())]
        assert len(found) == 1, css
        return found[0]
    live, working, worst = by_class("live-status-pane"), by_class("session-activity"), by_class("worst-case-notice")
    changed, working_shown = [], []

    def on_change(event):
        if isinstance(getattr(event, "model", None), LayoutDOM) and getattr(event, "attr", None) in _RELAYOUT_PROPS:
            changed.append((type(event.model).__name__, event.attr, event.model.css_classes))
        working_shown.append(is_shown(working))
    bokeh_doc.on_change(on_change)
    for text in ("13 mm", "13.5 mm"):                           # two frames of a drag of the diameter slider
        s.preview({"section.diameter": text}, key="section.diameter", label="Diameter", text=text,
                  display=pane.preview_frame)
        assert is_shown(live) and "Preview while Diameter" in live.text
    s.end_preview()                                             # released: the value is applied as an edit
    s.edit({"section.diameter": "13.5 mm"}, key="section.diameter", label="Diameter")
    assert s.live is None and s.get("section.diameter") == "13.5 mm" and s.worst_case_state == "ready"
    assert changed == []
    assert any(working_shown) and "Applying Diameter" in working.text   # the working line came ...
    assert not is_shown(working) and not is_shown(live) and not is_shown(worst)  # ... and all three are gone
    assert "worst-case" in by_class("margin-pane").text
