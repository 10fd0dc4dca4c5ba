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
import weakref

import param
import pytest

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
    point.required_box.value = 42.5
    assert s.required_margin == pytest.approx(0.425)
    assert point.required.value == 42.5                                   # the slider follows
    assert 'required_margin = "42.5 %"' in s.case_text()
    assert export._export_args()["settings"].required_margin == pytest.approx(0.425)
    assert "required ±42 %" in table.pane.object or "required ±43 %" in table.pane.object
    with param.edit_constant(point.required):
        point.required.value_throttled = 20.0                              # the slider, released
    assert s.doc.settings.required_margin == pytest.approx(0.20) and point.required_box.value == 20.0


def test_point_outside_the_chart_range_is_stated_in_words(doc):
    from lowgmap.app.dashboard.panels import MarginTable

    s = _session(doc)
    table = MarginTable(s)
    assert not table.outside.visible
    s.move_point(3e-3 / 60, 500e-3 / 60)                                  # Q_G 500 L/min; range ends at 100
    assert s.margins.outside_chart
    assert table.outside.visible
    assert ("The operating point lies outside the drawn chart range (Q_G above 100 L/min): margins are "
            "computed on lines sampled around the point; widen the chart range to see it.") in table.outside.object


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
