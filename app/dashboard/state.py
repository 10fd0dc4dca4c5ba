"""Session state of the dashboard: the case being edited, its study (chart, point, margins, test points).

No bokeh or panel widgets here: this is a ``param.Parameterized`` model that views bind to. Each
browser session gets its own :class:`Session` (built by the server's factory function), so two users
never share state. Case inputs are kept as the text a person types (numbers with units) in a copy
of the case-file document; every change re-validates the whole case with :mod:`lowgmap.app.files.casefile`, the
same path the CLI uses. An invalid entry is not applied: the last good case and chart stay, the
field keeps showing the value in effect, and the problem is filed under the field that was edited
(:attr:`Session.field_problems`, the field's own words, never a line number of the hidden text).

Everything the views show comes from one :class:`lowgmap.physics.studies.study.Study`
(:attr:`Session.study`): the chart pane draws its chart, the margin table shows its margins, the
test-point panel its agreement, and the exports receive the study itself, so the chart is never
rebuilt for an export. Expensive work (building the chart) happens only when the case changes;
moving the operating point only computes the margins of the new point on the same chart
(:meth:`Study.with_point`).

Edits are queued, never lost
----------------------------
Every change (a case field, the operating point, the required margin, test points, a whole case
file, the robust point) is an :class:`Edit` put on the session's queue (:meth:`Session.submit`).
The queue keeps one entry per field: a newer value of a field replaces its older, not yet applied
one and moves to the end, so edits are applied in the order they were last made and the latest
value of each field wins. One batch at a time is worked off by the session's *runner* (see
:mod:`lowgmap.app.dashboard.background`): the work (validating each edit in order, building the
chart, the margins, the test-point agreement) runs on a worker thread from a snapshot of the state
and touches nothing shared; its result is applied back on the session's own thread. Edits that
arrive while a batch is being worked on wait on the queue and form the next batch; the views skip
fields with a queued edit (:attr:`Session.pending_keys`) when they show the state, so a value typed
during a rebuild stays on screen until it is applied.

Live previews (a slider being dragged)
--------------------------------------
While a slider moves, :meth:`Session.preview` asks for the chart of the case with the slider's value,
outside the queue and without changing the case in effect. Previews are coalesced: one job at a time
per session, and while it runs only the latest value waits (older ones are dropped, never queued).
Each preview is published as :attr:`Session.live` (a :class:`Preview`: the case, its chart, the regime
of the operating point and its margins, computed in the same job). A preview's chart is built at preview
resolution (``Chart.build(..., preview=True)``: the same physics and surrogates, the lines sampled more
coarsely), and the operating point's regime and symmetric margin are computed near the point only
(:func:`lowgmap.physics.chart.margins.preview_margin`: within about 5e-5 of the final margin, with a caveat that
says so; the margin table and the verdict keep reading the case in effect), so that the chart, the regime and
the margin follow the slider together. On release the value becomes an ordinary
edit, exactly as if it had been typed (:meth:`Session.end_preview`, then :meth:`Session.edit`): the chart
of the released value is built at full resolution and is the one every view reads; previews still running
are dropped, and :attr:`Session.live` is cleared once the edit is applied. A preview's chart is never
reused by the edit.

Full solves and bands
---------------------
:attr:`Session.exact` builds every chart with the full solves (``Chart.build(case, exact=True)``).
The worst-case margin of the operating point over the constants' bands (:attr:`Study.worst_case`) and,
when :attr:`Session.show_bands` is on, the band of every line (:attr:`Study.bands`) are computed on a
background thread (a pool of their own) after each new study (one such job at a time; a result for a study that is no longer
shown is dropped and the latest study is done next): :attr:`Session.worst_case`,
:attr:`Session.bands` and their states ("computing", "ready", "none", "failed"). These jobs take
seconds and give way to what the person waits for (:mod:`lowgmap.physics.pacing`): while a slider is
dragged or an edit is applied they pause at their next pause point, and a job whose study is no longer
shown stops there instead of finishing a result nobody will see.
"""
from __future__ import annotations

import copy
import dataclasses
import logging
import math
import threading
import weakref
from dataclasses import dataclass, field
from typing import Any, Callable

import param
import tomlkit

from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.pacing import Abandoned, paced
from lowgmap.physics.studies.study import Study, run_study

from lowgmap.app.files.casefile import CaseDocument, CaseFileError, build_case, dumps_case, loads_case
from lowgmap.app.files.units import UnitError, convert, parse_flow

__all__ = ["Session", "Edit", "Preview", "CompareSettings", "GROUPS", "group_of", "build_chart", "live_sessions"]

_LOG = logging.getLogger("lowgmap.dashboard")

#: How often a paused background job looks whether its result is still wanted [s] (it resumes at once when
#: the drag or the edit it gave way to ends: the wait is on an event).
_PACE_POLL_S = 0.25

#: Input groups as an engineer thinks of them: (key, title, case-file tables/keys in the group).
GROUPS = (
    ("fluid", "Fluid and temperature", ("fluid",)),
    ("section", "Cross-section and length", ("section", "conduit.length")),
    ("wetting", "Wetting", ("wetting",)),
    ("gravity", "Gravity level and orientation", ("conduit.residual_acceleration", "conduit.orientation")),
    ("models", "Boundary models and constants", ("models", "custom_boundaries")),
    ("chart", "Chart ranges, axes and units", ("chart",)),
    ("point", "Operating point", ("operating_point",)),
)

#: Live sessions (weak: a session that is closed and dropped by the server disappears from it).
_LIVE: "weakref.WeakSet[Session]" = weakref.WeakSet()


def live_sessions() -> int:
    """Number of :class:`Session` objects still alive in this process (for memory checks)."""
    return len(_LIVE)


def group_of(path: str) -> str:
    """Input group key of a case-file key path (for placing a message next to its field)."""
    best, best_len = "case", -1
    for key, _, prefixes in GROUPS:
        for p in prefixes:
            if (path == p or path.startswith(p + ".") or path.startswith(p + "[")) and len(p) > best_len:
                best, best_len = key, len(p)
    if path == "conduit":
        return "section"
    return best


def build_chart(case, exact: bool = False) -> Chart:
    """Build the chart of ``case`` (the one expensive step of a case edit; runs on a worker thread);
    ``exact``: with the full solves instead of the surrogates."""
    return Chart.build(case, exact=exact) if exact else Chart.build(case)


def _build(case, exact: bool) -> Chart:
    # called as build_chart(case) unless exact, so a replacement taking one argument still works
    return build_chart(case, exact=True) if exact else build_chart(case)


@dataclass(frozen=True)
class Preview:
    """The chart of a value being dragged on a slider (not the case in effect; see :meth:`Session.preview`).

    Attributes
    ----------
    key, label : str     the field being dragged and its label
    text : str           the value previewed, as written in the field ("6.35 deg")
    seq : int            order of the request (a later request has a larger number)
    changes : dict       {case-file key path: text} previewed
    doc : CaseDocument or None   the case with that value (None when it is not a valid case)
    chart : Chart or None        its chart
    regime : str or None         regime of the operating point on that chart
    margins : PreviewMargin or None  the operating point's regime and symmetric margin at preview resolution
                                 (:func:`lowgmap.physics.chart.margins.preview_margin`; None without an operating
                                 point or when they cannot be computed)
    display : object             what the view asked to have prepared off the event loop (its drawing data)
    problem : str                why there is no chart for this value ('' when there is one)
    released : bool              the slider was released: the value is being applied as an edit
    """

    key: str
    label: str
    text: str
    seq: int
    changes: Any = None
    doc: Any = None
    chart: Any = None
    regime: str | None = None
    margins: Any = None
    display: Any = None
    problem: str = ""
    released: bool = False


@dataclass(frozen=True)
class CompareSettings:
    """How test points are compared with the chart, as for ``lowgmap compare`` (``--map``, ``--length``).

    Attributes
    ----------
    regime_map : tuple of (str, str)   (label in the file, chart regime name) pairs
    observation_length : float or None   distance from the inlet to where the regime was observed [m];
                                       None: the conduit length (the default of the agreement module)
    """

    regime_map: tuple = ()
    observation_length: float | None = None

    def criteria(self):
        """The validity criteria (:class:`lowgmap.physics.studies.agreement.ValidityCriteria`)."""
        from lowgmap.physics.studies.agreement import ValidityCriteria

        return ValidityCriteria(observation_length=self.observation_length)

    def mapping(self) -> dict | None:
        return dict(self.regime_map) or None


@dataclass(frozen=True)
class MarginRow:
    name: str
    label: str
    source: str
    role: str
    ql_up: float | None
    ql_down: float | None
    qg_up: float | None
    qg_down: float | None
    log_distance: float | None


@dataclass
class Edit:
    """One change asked for by a person, waiting on the session's queue.

    Attributes
    ----------
    key : str        the field it comes from ("section.diameter", "point", "required_margin", ...):
                     one queued entry per key, problems are filed under it
    kind : str       "case" (``changes`` to the case document), "point" (``point``), "points"
                     (``points``), "load" (a whole case file, ``text`` and ``name``) or "robust"
                     (move to the most robust point of ``regime``)
    label : str      the field's label, for messages ("Diameter")
    path : str       case-file key path whose value is in effect for this field (for messages)
    on_done : callable(ok: bool, messages: list[str]), optional   called on the session's thread
                     once the edit was applied or refused (not when a newer edit replaced it)
    """

    key: str
    kind: str = "case"
    changes: dict | None = None
    label: str = ""
    path: str = ""
    point: tuple | None = None
    points: Any = None
    text: str | None = None
    name: str | None = None
    regime: str | None = None
    on_done: Callable | None = None


@dataclass
class _Snapshot:
    data: Any
    doc: CaseDocument
    study: Study
    point: tuple | None
    test_points: Any
    source_name: str
    base_dir: Any
    compare: "CompareSettings"
    exact: bool = False


@dataclass
class _Outcome:
    """What a batch of edits came to (computed on a worker thread from a snapshot)."""

    data: Any
    doc: CaseDocument
    study: Study
    point: tuple | None
    test_points: Any
    source_name: str
    case_changed: bool
    compare: "CompareSettings" = None
    exact: bool = False
    accepted: list = field(default_factory=list)      # [Edit]
    refused: list = field(default_factory=list)       # [(Edit, [message])]
    notes: list = field(default_factory=list)         # [(Edit, message)]


class Session(param.Parameterized):
    """One browser session's case, chart, operating point and margins (all read from :attr:`study`).

    Parameters
    ----------
    doc : CaseDocument   the case to start from
    runner : optional    where queued work runs (:mod:`lowgmap.app.dashboard.background`); default:
                         at once in the calling thread (:class:`InlineRunner`)
    """

    doc = param.Parameter(doc="the last valid CaseDocument")
    study = param.ClassSelector(class_=Study, doc="Study of the last valid case at the current operating point")
    chart = param.Parameter(doc="chart of the last valid case (the study's chart)")
    problems = param.Dict(default={}, doc="group key -> list of problem strings (whole-file problems)")
    field_problems = param.Dict(default={}, doc="field key -> list of messages from its last edit")
    notices = param.Dict(default={}, doc="field key -> message about its last edit that is not a problem")
    ql = param.Number(default=None, allow_None=True, doc="operating-point liquid flow [m^3/s]")
    qg = param.Number(default=None, allow_None=True, doc="operating-point gas flow [m^3/s]")
    margins = param.Parameter(doc="PointMargins of the operating point (the study's margins)")
    test_points = param.Parameter(doc="the test points compared with the chart (TestPointSet or table), or None")
    required_margin = param.Number(default=0.2, bounds=(0, 0.99), doc="required symmetric margin (fraction), "
                                   "the case's chart.required_margin")
    show_uncertainty = param.Boolean(default=False)
    compare = param.ClassSelector(class_=CompareSettings, default=CompareSettings(),
                                  doc="label mapping and observation length of the test-point comparison")
    revision_counter = param.Integer(default=0, doc="increments on every successful case rebuild")
    applied_counter = param.Integer(default=0, doc="increments after every batch of edits is applied")
    busy = param.Boolean(default=False, doc="a batch of edits is being worked on")
    activity = param.String(default="", doc="what the session is working on, in words ('' when idle)")
    exact = param.Boolean(default=False, doc="charts built with the full solves (Chart.build(..., exact=True))")
    live = param.Parameter(default=None, doc="Preview of a slider value being dragged, or None")
    show_bands = param.Boolean(default=False, doc="compute and draw the band of every line")
    bands = param.Parameter(default=None, doc="bands of the study's lines (Study.bands) once computed, or None")
    bands_state = param.Selector(default="off", objects=["off", "computing", "ready", "none", "failed"])
    worst_case = param.Parameter(default=None, doc="the study's worst case (Study.worst_case) once computed")
    worst_case_state = param.Selector(default="off", objects=["off", "computing", "ready", "none", "failed"],
                                      doc="off until a view asks for it (want_worst_case)")
    extras_problem = param.String(default="", doc="why the bands or the worst case could not be computed")

    def __init__(self, doc: CaseDocument, runner=None, **params):
        super().__init__(**params)
        from lowgmap.app.dashboard.background import InlineRunner

        self.runner = runner or InlineRunner()
        self.data = copy.deepcopy(doc.data)
        self.base_dir = doc.path.parent if doc.path else None
        self.source_name = doc.path.name if doc.path else "case.toml"
        self._queue: dict[str, Edit] = {}
        self._in_flight: dict[str, Edit] = {}
        self._closed = False
        self._preview_seq = 0           # number of the latest preview asked for
        self._preview_dropped = 0       # previews up to this number are stale (released)
        self._preview_want = None       # the latest value waiting for the preview job
        self._preview_busy = False
        self._plain_memo: dict = {}     # the case data as plain objects, for the preview jobs (see _preview_work)
        self._previewing = False        # a slider is being dragged
        self._calm = threading.Event()  # set while nothing urgent runs: no drag, no edit in flight (see _pace_extras)
        self._calm.set()
        self._extras_busy = False
        self._want_worst = False
        self.param.watch(lambda *_: self._bands_switched(), ["show_bands"])
        study = run_study(doc.case)
        point = study.point
        if point is None:
            fr = doc.case.flow_range
            point = (math.sqrt(fr.ql_min * fr.ql_max), math.sqrt(fr.qg_min * fr.qg_max))
        if study.point != point:
            study = study.with_point(*point)
        self._publish(data=self.data, doc=doc, study=study, point=point, test_points=None, new_case=True)
        _LIVE.add(self)

    # ------------------------------------------------------------------------------- reading
    def get(self, path: str, default=""):
        """Text of a case-file value by dotted path ("fluid.temperature")."""
        node = self.data
        for part in path.split("."):
            if not isinstance(node, dict) or part not in node:
                return default
            node = node[part]
        return node.unwrap() if hasattr(node, "unwrap") else node

    @property
    def pending_keys(self) -> set[str]:
        """Keys of the edits queued or being worked on (their fields show what was typed)."""
        return set(self._queue) | set(self._in_flight)

    def case_text(self) -> str:
        """The current (valid) case as case-file text, for download."""
        return dumps_case(self.data)

    def regime_at(self, ql: float, qg: float) -> str:
        return self.chart.regime_at(ql, qg) if self.chart is not None else ""

    def export_settings(self):
        """Chart settings for an export: the case's (its required margin is the one on screen)."""
        return dataclasses.replace(self.doc.settings, required_margin=self.required_margin)

    def verdict(self):
        """The verdict on the operating point against the required margin (None without margins)."""
        if self.study is None or self.margins is None:
            return None
        try:
            return self.study.verdict(self.required_margin)
        except ValueError:  # an intended regime that is not on this chart: judge the margin alone
            from lowgmap.physics.chart.margins import margin_verdict

            return margin_verdict(self.margins, self.required_margin)

    # ------------------------------------------------------------------------------- the queue
    def submit(self, edit: Edit) -> None:
        """Queue ``edit`` (a newer edit of the same field replaces a queued older one) and start work."""
        if self._closed:
            return
        self._queue.pop(edit.key, None)
        self._queue[edit.key] = edit
        if self._in_flight:  # say that it was received and waits its turn
            n = len(self._queue)
            self.activity = (_activity_words(list(self._in_flight.values()))
                             + f" ({n} more change{'s' if n > 1 else ''} waiting)")
        self._kick()

    def _kick(self) -> None:
        if self._closed or self._in_flight or not self._queue:
            return
        batch = list(self._queue.values())
        self._in_flight = dict(self._queue)
        self._queue = {}
        self._update_calm()
        snap = _Snapshot(self.data, self.doc, self.study, (self.ql, self.qg), self.test_points,
                         self.source_name, self.base_dir, self.compare, self.exact)
        self.activity = _activity_words(batch)
        self.busy = True
        self.runner.submit(lambda: _work_off(snap, batch), self._finished)

    def _finished(self, outcome: _Outcome | None, error: BaseException | None) -> None:
        batch = list(self._in_flight.values())
        self._in_flight = {}
        self._update_calm()
        if self._closed:
            return
        fp = {k: v for k, v in self.field_problems.items() if k not in {e.key for e in batch}}
        notices = {k: v for k, v in self.notices.items() if k not in {e.key for e in batch}}
        done = []
        if error is not None:  # a bug, not a user error: the state stays as it was
            _LOG.error("dashboard edit failed", exc_info=(type(error), error, error.__traceback__))
            for e in batch:
                msg = (f"{e.label or e.key}: the change could not be applied ({type(error).__name__}: {error}). "
                       "The previous values stay in effect; please report this as a bug.")
                fp[e.key] = [msg]
                done.append((e, False, [msg]))
            with param.parameterized.batch_call_watchers(self):
                self.field_problems = fp
                self.notices = notices
                self.applied_counter += 1
        else:
            for e in outcome.accepted:
                done.append((e, True, []))
            for e, msgs in outcome.refused:
                fp[e.key] = msgs
                done.append((e, False, msgs))
            for e, msg in outcome.notes:
                notices[e.key] = msg
            with param.parameterized.batch_call_watchers(self):
                self.field_problems = fp
                self.notices = notices
                self.source_name = outcome.source_name
                self.compare = outcome.compare
                self.exact = outcome.exact
                self._publish(data=outcome.data, doc=outcome.doc, study=outcome.study, point=outcome.point,
                              test_points=outcome.test_points, new_case=outcome.case_changed)
                if any(e.kind == "load" for e in outcome.accepted):
                    self.problems = {}
                for e, msgs in outcome.refused:
                    if e.kind == "load":
                        self.problems = {"case": msgs}
                self.applied_counter += 1
        live = self.live
        if live is not None and not self._previewing and live.key in {e.key for e in batch}:
            self.live = None            # the released value is in effect (or refused): the preview is over
        for e, ok, msgs in done:
            if e.on_done is not None:
                try:
                    e.on_done(ok, msgs)
                except Exception:  # a view's follow-up must not stop the queue
                    _LOG.exception("follow-up of a dashboard edit failed")
        if self._queue:
            self._kick()
        else:
            self.busy = False
            self.activity = ""
        self._extras_kick()

    def _publish(self, *, data, doc, study, point, test_points, new_case: bool) -> None:
        old = self.study
        with param.parameterized.batch_call_watchers(self):
            if study is not old:
                # results for the study shown before are stale: the bands stay while the chart is the same
                if old is None or study.chart is not old.chart:
                    self.bands = None
                    self.bands_state = "computing" if self.show_bands else "off"
                self.worst_case = None
                self.worst_case_state = "computing" if self._want_worst else "off"
            self.data = data
            self.doc = doc
            self.study = study
            self.chart = study.chart
            self.test_points = test_points
            self.required_margin = min(doc.settings.required_margin, 0.99)
            if point is not None:
                self.ql, self.qg = float(point[0]), float(point[1])
            self.margins = study.margins
            if new_case:
                self.revision_counter += 1

    def close(self) -> None:
        """The browser session ended: drop queued work, results to come and every large object."""
        self._closed = True
        self._queue.clear()
        self._in_flight.clear()
        self._calm.set()                # a paused background job wakes, sees the session closed and stops
        self._preview_want = None
        self.live = None
        self.bands = None
        self.worst_case = None
        self.runner.close()
        self.runner = None
        self.study = None
        self.chart = None
        self.margins = None
        self.test_points = None
        _LIVE.discard(self)

    @property
    def closed(self) -> bool:
        return self._closed

    # ------------------------------------------------------------------------------- live previews
    def preview(self, changes: dict[str, object], *, key: str, label: str = "", text: str = "",
                display: Callable | None = None) -> None:
        """Show the chart of the case with ``changes`` while a slider is dragged (the case stays as it is).

        Coalesced: at most one preview job runs; a request made meanwhile replaces any older waiting
        one, so the latest value is always drawn next and stale ones are dropped. The result is
        published as :attr:`live`, with the margins of the operating point computed in the same job (both at
        preview resolution). ``display(doc, chart)``, when given, is run on the worker too and its result kept as
        ``Preview.display`` (e.g. a view's drawing data). ``text``: the value as written in the field.
        """
        if self._closed:
            return
        self._preview_seq += 1
        self._previewing = True
        self._update_calm()
        self._preview_want = Preview(key=key, label=label or key, text=text, seq=self._preview_seq,
                                     changes=dict(changes), display=display)
        self._preview_kick()

    def end_preview(self) -> None:
        """The slider was released: drop previews still to come (the value is applied as an edit next)."""
        self._preview_dropped = self._preview_seq
        self._preview_want = None
        self._previewing = False
        self._update_calm()
        if self.live is not None and not self.live.released:
            self.live = dataclasses.replace(self.live, released=True)

    def cancel_preview(self) -> None:
        """Drop the preview altogether (e.g. the slider is back at the value in effect)."""
        self.end_preview()
        self.live = None

    def _preview_kick(self) -> None:
        if self._closed or self._preview_busy:
            return
        want = self._preview_want
        if want is not None:
            self._preview_want = None
            self._preview_busy = True
            args = (self.data, self.source_name, self.base_dir, (self.ql, self.qg), self.exact, self._plain_memo)
            self.runner.submit(lambda: _preview_work(want, *args),
                               lambda result, error: self._preview_done(want, result, error))

    def _preview_done(self, req: "Preview", result, error) -> None:
        self._preview_busy = False
        if self._closed or self.runner is None:
            return
        # the next value (if one was asked for meanwhile) is computed while this one is drawn: a frame then
        # takes the longer of the two, not their sum. A runner that works inline has drawn that newer value
        # by now, and this older one is not drawn over it.
        self._preview_kick()
        newer = self.live is not None and self.live.seq > req.seq
        if req.seq > self._preview_dropped and not newer:     # not released since it was asked for
            if error is not None:
                old = self.live
                self.live = dataclasses.replace(req, doc=None, display=old.display if old else None,
                                                chart=None, problem=_preview_problem(req, error))
            else:
                self.live = result

    # ------------------------------------------------------------------------------- full solves, bands
    def set_exact(self, on: bool, on_done=None) -> None:
        """Build the charts with the full solves (True) or the surrogates (False); rebuilds the chart."""
        self.submit(Edit(key="exact", kind="exact", label="Full solves", changes={"exact": bool(on)},
                         on_done=on_done))

    def want_worst_case(self) -> None:
        """A view shows the worst-case margin: compute it (in the background) for every study from now on."""
        if self._want_worst:
            return
        self._want_worst = True
        if self.worst_case_state == "off":
            self.worst_case_state = "computing"
        self._extras_kick()

    def _bands_switched(self) -> None:
        if self.show_bands and self.bands_state == "off":
            self.bands_state = "computing"
        elif not self.show_bands and self.bands_state == "computing":
            self.bands_state = "off"
        self._extras_kick()

    def _extras_kick(self) -> None:
        """Start the next background job for the study shown: its bands (when asked for), then its worst case."""
        if self._closed or self._extras_busy or self.study is None or self.runner is None:
            return
        study = self.study
        if self.bands_state == "computing":
            what = "bands"
        elif self.worst_case_state == "computing":
            what = "worst_case"
        else:
            return
        self._extras_busy = True
        paced_job = getattr(self.runner, "concurrent", False)   # an inline job cannot wait for this thread
        submit = getattr(self.runner, "submit_background", self.runner.submit)
        submit(lambda: self._extras_work(study, what, paced_job),
               lambda result, error: self._extras_done(study, what, result, error))

    def _extras_current(self, study, what: str) -> bool:
        """Whether a background result for ``study`` would still be shown (bands: while the chart is the same)."""
        shown = self.study
        return shown is study or (what == "bands" and shown is not None and shown.chart is study.chart)

    def _extras_work(self, study, what: str, paced_job: bool = True):
        """The background job: ``study.bands`` or ``study.worst_case``, paced by :meth:`_pace_extras`."""
        with paced((lambda: self._pace_extras(study, what)) if paced_job else None):
            return getattr(study, what)

    def _pace_extras(self, study, what: str) -> None:
        """Pacer of a background job (:mod:`lowgmap.physics.pacing`), called at its pause points.

        The job gives way to what the person is waiting for: while a slider is dragged or an edit is being
        applied it waits (releasing the processor, so each preview is drawn as fast as when nothing runs
        beside it); it is abandoned once its result would no longer be shown (another study, or the session
        ended). A result still wanted is finished after the drag, from where it stopped.
        """
        while True:
            if self._closed or not self._extras_current(study, what):
                raise Abandoned(f"the {what.replace('_', ' ')} of a study no longer shown")
            if self._calm.wait(_PACE_POLL_S):
                return

    def _update_calm(self) -> None:
        if self._closed or not (self._previewing or self._in_flight):
            self._calm.set()
        else:
            self._calm.clear()

    def _extras_done(self, study, what: str, result, error) -> None:
        self._extras_busy = False
        if self._closed:
            return
        if self._extras_current(study, what):          # a result for a study no longer shown is dropped
            state = "failed" if error is not None else ("none" if result is None else "ready")
            if error is not None:
                _LOG.warning("dashboard %s failed", what, exc_info=(type(error), error, error.__traceback__))
                self.extras_problem = f"The {what.replace('_', ' ')} could not be computed: {error}"
            with param.parameterized.batch_call_watchers(self):
                if what == "bands":
                    if self.show_bands:
                        self.bands, self.bands_state = result, state
                else:
                    self.worst_case, self.worst_case_state = result, state
        self._extras_kick()

    # ------------------------------------------------------------------------------- edits
    def edit(self, changes: dict[str, object], *, key: str | None = None, label: str = "",
             path: str = "") -> bool | None:
        """Queue text edits {dotted path: value or None to remove} of the case.

        With the inline runner the edit is applied at once and the result is returned (True: the
        case was valid and the chart rebuilt; False: refused, problems in :attr:`field_problems`
        under ``key``). With a threaded runner it returns None; the result arrives later.
        """
        key = key or ",".join(changes)
        result: list[bool] = []
        self.submit(Edit(key=key, kind="case", changes=dict(changes), label=label or key,
                         path=path or (next(iter(changes)) if len(changes) == 1 else ""),
                         on_done=lambda ok, msgs: result.append(ok)))
        return result[0] if result else None

    def load_text(self, text: str, name: str = "uploaded case", on_done=None) -> bool | None:
        """Replace the whole case by an uploaded case file (validated first)."""
        result: list[bool] = []

        def done(ok, msgs):
            result.append(ok)
            if on_done is not None:
                on_done(ok, msgs)
        self.submit(Edit(key="case", kind="load", text=text, name=name, label="Case file", on_done=done))
        return result[0] if result else None

    def set_required_margin(self, fraction: float) -> None:
        """Set the required symmetric margin (fraction), written into the case as chart.required_margin."""
        self.submit(Edit(key="required_margin", kind="case", label="Required margin",
                         path="chart.required_margin",
                         changes={"chart.required_margin": f"{100.0 * float(fraction):.6g} %"}))

    def set_test_points(self, points, on_done=None, *, compare: CompareSettings | None = None) -> None:
        """Compare ``points`` (a TestPointSet, or None to drop them) with the chart; kept across case edits.

        ``compare``: label mapping and observation length (default: the ones in effect).
        """
        self.submit(Edit(key="points", kind="points", points=points, label="Test points", on_done=on_done,
                         changes={"compare": compare or self.compare}))

    def set_compare(self, compare: CompareSettings, on_done=None) -> None:
        """Compare the test points with this label mapping and observation length (kept across case edits)."""
        self.submit(Edit(key="compare", kind="compare", label="Test-point comparison", on_done=on_done,
                         changes={"compare": compare}))

    # ------------------------------------------------------------------------------ the point
    def move_point(self, ql: float, qg: float, *, write_back: bool = True) -> None:
        """Move the operating point (SI) and recompute its margins (no chart rebuild).

        Raises ValueError at once for flows that are not positive and finite; the move itself is
        queued like every edit (applied at once with the inline runner).
        """
        if not (ql > 0 and qg > 0 and math.isfinite(ql) and math.isfinite(qg)):
            raise ValueError(f"operating point must have positive finite flows, got Q_L={ql!r}, Q_G={qg!r}")
        self.submit(Edit(key="point", kind="point", point=(float(ql), float(qg)), label="Operating point",
                         changes={"write_back": write_back}))

    def parse_point_text(self, ql_text: str, qg_text: str) -> tuple[float, float]:
        """Typed operating-point fields (text with units; sccm/slpm allowed for gas) -> SI."""
        f = self.doc.case.fluid
        ql = parse_flow(ql_text, "liquid flow", gas=False)
        qg = parse_flow(qg_text, "gas flow", gas=True, pressure=f.pressure, temperature=f.temperature)
        for name, v in (("liquid flow", ql), ("gas flow", qg)):
            if not v > 0:
                raise UnitError(f"{name} must be > 0, got {v:g} m^3/s")
        return ql, qg

    def request_robust_point(self, regime: str, on_done=None, *, ql_range=None, qg_range=None) -> None:
        """Queue a move of the point to the most robust point of ``regime`` (computed on a worker).

        ``ql_range``, ``qg_range``: flows searched, each (low, high) [m^3/s]; default (None): a decade
        either side of the operating point (:func:`lowgmap.physics.chart.margins.robust_point`).
        """
        self.submit(Edit(key="robust", kind="robust", regime=regime, label="Robust point", on_done=on_done,
                         changes={"ql_range": ql_range, "qg_range": qg_range}))

    def robust_point(self, regime: str, *, ql_range=None, qg_range=None):
        """Move the point to the most robust point of ``regime`` at once; returns the RobustPoint."""
        from lowgmap.physics.chart.margins import robust_point

        rp = robust_point(self.chart, regime, ql_range, qg_range, around=(self.ql, self.qg))
        self.move_point(rp.ql, rp.qg)
        return rp

    def robust_default_ranges(self) -> tuple[tuple[float, float], tuple[float, float]] | None:
        """The default search ranges of the robust point: a decade either side of the operating point [m^3/s]."""
        if self.ql is None:
            return None
        return (self.ql / 10.0, self.ql * 10.0), (self.qg / 10.0, self.qg * 10.0)

    def update_margins(self) -> None:
        """Publish the margins of the study (kept for callers of the former interface)."""
        self.margins = self.study.margins if self.study is not None else None

    # ------------------------------------------------------------------------------ uncertainty
    def flow_uncertainty_box(self) -> tuple[float, float, float, float] | None:
        """(ql_lo, ql_hi, qg_lo, qg_hi) [m^3/s]: ±1 size of the case's flow-rate uncertainties."""
        if self.ql is None:
            return None
        box = [self.ql, self.ql, self.qg, self.qg]
        for u in self.doc.uncertainties:
            if u.target not in ("liquid_flow", "gas_flow"):
                continue
            base = self.ql if u.target == "liquid_flow" else self.qg
            d = u.size * base if u.relative else u.size
            i = 0 if u.target == "liquid_flow" else 2
            box[i], box[i + 1] = max(base - d, base * 1e-3), base + d
        return tuple(box) if (box[0] != box[1] or box[2] != box[3]) else None


# ===================================================================================== the work
def _preview_work(req: Preview, data, source, base_dir, point, exact: bool, memo: dict | None = None) -> Preview:
    """The chart of the case with a slider's value and the operating point's regime and margins, at preview
    resolution (worker thread; touches nothing shared). The case is validated by the same builder as a
    loaded file (:func:`build_case`, without writing and parsing the text: the released value goes through
    the edit path, which does). ``memo``: the session's {"data": ..., "plain": ...} holder of the case data as
    plain Python objects (unwrapping the case-file document costs far more than copying plain data; one
    preview job runs at a time, so the holder is not shared between threads)."""
    from lowgmap.physics.chart.margins import preview_margin

    if memo is not None:
        if memo.get("data") is not data:
            memo["plain"] = data.unwrap() if hasattr(data, "unwrap") else copy.deepcopy(data)
            memo["data"] = data
        trial = copy.deepcopy(memo["plain"])
    else:
        trial = copy.deepcopy(data)
    for path, value in req.changes.items():
        _set_path(trial, path, value)
    new = build_case(trial, source=source, base_dir=base_dir)
    chart = Chart.build(new.case, exact=exact, preview=True)
    regime = margins = None
    if point[0] is not None and chart.regime_names:
        try:                                # the label shows the regime and the margin, nothing else
            margins = preview_margin(chart, *point)
            regime = margins.regime
        except _BUILD_ERRORS:               # the label then says the margin is not available
            regime = str(chart.regime_at(*point))
    display = req.display(new, chart) if req.display is not None else None
    return dataclasses.replace(req, doc=new, chart=chart, regime=regime, margins=margins, display=display)


def _preview_problem(req: Preview, error) -> str:
    if isinstance(error, CaseFileError):
        return "; ".join(f"{req.label}: {p.message}" for p in error.problems) or str(error)
    if isinstance(error, _BUILD_ERRORS):
        return f"{req.label}: the chart cannot be built with this value: {error}"
    _LOG.error("dashboard preview failed", exc_info=(type(error), error, error.__traceback__))
    return f"{req.label}: no preview ({type(error).__name__}: {error})"


def _activity_words(batch: list[Edit]) -> str:
    kinds = {e.kind for e in batch}
    if "exact" in kinds and len(kinds) == 1:
        return "Rebuilding the chart with the full solves…" if any(e.changes["exact"] for e in batch) \
            else "Rebuilding the chart with the surrogates…"
    if "load" in kinds:
        return "Opening the case file and building its chart…"
    if "case" in kinds:
        names = ", ".join(e.label for e in batch if e.kind == "case")
        return f"Applying {names} and rebuilding the chart…"
    if "robust" in kinds:
        return "Searching for the most robust point…"
    if "points" in kinds or "compare" in kinds:
        return "Comparing the test points with the chart…"
    return "Computing the margins of the operating point…"


def _set_path(data, path: str, value) -> None:
    *parents, key = path.split(".")
    node = data
    for p in parents:
        if p not in node:
            node[p] = tomlkit.table() if hasattr(node, "unwrap") else {}      # a document, or plain data
        node = node[p]
    if value is None:
        if key in node:
            del node[key]
    else:
        node[key] = value


def _words(path: str) -> str:
    return path.replace("_", " ").replace(".", " ").strip().capitalize()


def _concerns(p, edit: Edit) -> bool:
    """Whether case-file problem ``p`` is about the field ``edit`` changed."""
    return bool(edit.path) and (p.path == edit.path or p.path.startswith(edit.path + "[")
                                or p.path.startswith(edit.path + ".") or edit.path.startswith(p.path + "."))


def _own_problems(problems, edit: Edit) -> list:
    """The problems to show for ``edit``: those about its own field when there are any.

    A bad value in one field can make the reader stumble over another that depends on it (a
    temperature out of range leaves '400 sccm' without the conditions to convert it); that second
    problem is a consequence, not a fault of the other field, so it is not shown. When no problem is
    about the edited field, every problem is shown (the edit did cause them).
    """
    problems = list(problems)
    own = [p for p in problems if _concerns(p, edit)]
    return own or problems


def _problem_text(p, edit: Edit) -> str:
    """A case-file problem in the words of the field (no line number: the text is not on screen)."""
    written = ""
    if isinstance(p.value, str) and p.value not in p.message:
        written = f" (written: {p.value!r})"
    same = edit.path and (p.path == edit.path or p.path.startswith(edit.path + "[")
                          or edit.path.startswith(p.path + "."))
    who = edit.label if same else _words(p.path)
    return f"{who}: {p.message}{written}"


def _in_effect(data, path: str) -> str:
    node = data
    for part in path.split("."):
        if not isinstance(node, dict) or part not in node:
            return "(empty)"
        node = node[part]
    node = node.unwrap() if hasattr(node, "unwrap") else node
    if isinstance(node, list):
        return " to ".join(str(x) for x in node)
    return str(node)


def _refusal(edit: Edit, messages: list[str], data) -> list[str]:
    tail = "Not applied"
    if edit.kind == "case" and edit.path:
        tail += f"; in effect: {_in_effect(data, edit.path)}"
    elif edit.kind == "load":
        tail = "The case file was not opened; the previous case stays in effect"
    return messages + [tail + "."]


def _write_point(data, doc: CaseDocument, point) -> None:
    st = doc.settings
    op = data.setdefault("operating_point", tomlkit.table())
    op["liquid_flow"] = f"{convert(point[0], 'flow', st.liquid_flow_unit):.6g} {st.liquid_flow_unit}"
    op["gas_flow"] = f"{convert(point[1], 'flow', st.gas_flow_unit):.6g} {st.gas_flow_unit}"


def _point_of(doc: CaseDocument, old):
    op = doc.case.operating_point
    if op is not None:
        return (op.ql, op.qg)
    return old


def _robust_words(rp) -> str:
    from lowgmap.app.formatting import format_percent

    text = f"Moved to the most robust point of \u201c{rp.regime}\u201d: symmetric margin ±{format_percent(rp.margin)}."
    if not rp.established and rp.reasons:
        text += " Not established: " + " ".join(rp.reasons)
    return text


class _ChartFailed(Exception):
    """The chart of the batch's final case could not be built (find the edit to blame)."""


def _same_case(a, b) -> bool:
    try:
        return bool(a == b)
    except (TypeError, ValueError):  # a field that does not compare as a plain value
        return False


#: Errors a chart build raises for a case it cannot draw (a constant out of range, an overflow);
#: anything else is a defect, reported as such.
_BUILD_ERRORS = (ValueError, OverflowError, FloatingPointError)


def _work_off(snap: _Snapshot, batch: list[Edit]) -> _Outcome:
    """Apply ``batch`` in order to the snapshot (worker thread; touches nothing shared).

    The chart is built once, for the final case. If that build fails, the batch is worked off
    again with a build after every case edit, so the failure is filed under the edit that caused
    it and the other edits still apply.
    """
    try:
        return _run(snap, batch, strict=False)
    except _ChartFailed:
        return _run(snap, batch, strict=True)


def _run(snap: _Snapshot, batch: list[Edit], strict: bool) -> _Outcome:
    from lowgmap.physics.chart.margins import robust_point

    data, doc, point = snap.data, snap.doc, snap.point
    points, source = snap.test_points, snap.source_name
    compare = snap.compare or CompareSettings()
    chart = snap.study.chart
    exact = snap.exact
    accepted, refused, notes = [], [], []

    def chart_of(d):
        if getattr(chart, "exact", False) == exact and (chart.case is d.case or _same_case(chart.case, d.case)):
            return chart
        try:
            return _build(d.case, exact)
        except _BUILD_ERRORS as exc:
            if strict:
                raise
            raise _ChartFailed() from exc

    for e in batch:
        if e.kind in ("case", "load"):
            try:
                if e.kind == "case":
                    trial = copy.deepcopy(data)
                    for path, value in e.changes.items():
                        _set_path(trial, path, value)
                    new = loads_case(dumps_case(trial), source=source, base_dir=snap.base_dir)
                else:
                    new = loads_case(e.text, source=e.name or "uploaded case", base_dir=snap.base_dir)
            except CaseFileError as exc:
                msgs = ([_problem_text(p, e) for p in _own_problems(exc.problems, e)] if e.kind == "case"
                        else [str(p) for p in exc.problems])   # an uploaded file: its own line numbers
                refused.append((e, _refusal(e, msgs, data)))
                continue
            if strict:
                try:
                    chart = chart_of(new)
                except _BUILD_ERRORS as exc:
                    msg = f"{e.label}: the chart cannot be built with this value: {exc}"
                    refused.append((e, _refusal(e, [msg], data)))
                    continue
            if e.kind == "load":
                source = e.name or "uploaded case"
            data, doc = new.data, new
            point = _point_of(doc, point)
            accepted.append(e)
        elif e.kind == "point":
            point = e.point
            if e.changes is None or e.changes.get("write_back", True):
                data = copy.deepcopy(data)
                _write_point(data, doc, point)
            accepted.append(e)
        elif e.kind == "points":
            points = e.points
            compare = (e.changes or {}).get("compare") or compare
            accepted.append(e)
        elif e.kind == "compare":
            compare = e.changes["compare"]
            accepted.append(e)
        elif e.kind == "exact":
            exact = bool(e.changes["exact"])
            accepted.append(e)
        elif e.kind == "robust":
            chart = chart_of(doc)
            ranges = e.changes or {}
            try:
                rp = robust_point(chart, e.regime, ranges.get("ql_range"), ranges.get("qg_range"),
                                  around=tuple(point) if point is not None else None)
            except (ValueError, RuntimeError) as exc:
                refused.append((e, [f"No robust point: {exc}"]))
                continue
            point = (rp.ql, rp.qg)
            data = copy.deepcopy(data)
            _write_point(data, doc, point)
            notes.append((e, _robust_words(rp)))
            accepted.append(e)
    chart = chart_of(doc)
    study = snap.study
    if chart is not study.chart or not _same_case(study.case, doc.case):
        study = run_study(doc.case, chart=chart, points=points, regime_map=compare.mapping(),
                          criteria=compare.criteria())
    elif points is not snap.test_points or compare != snap.compare:
        study = study.with_test_points(points, regime_map=compare.mapping(), criteria=compare.criteria())
    if point is not None and study.point != tuple(point):
        study = study.with_point(*point)
    return _Outcome(data=data, doc=doc, study=study, point=point, test_points=points, source_name=source,
                    case_changed=chart is not snap.study.chart or doc is not snap.doc, accepted=accepted,
                    refused=refused, notes=notes, compare=compare, exact=exact)
