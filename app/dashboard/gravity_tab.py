"""Gravity tab of the dashboard: the session's case at two gravity levels side by side.

:class:`GravityTab` draws a ground test beside the flight prediction (or any two levels): the case as
edited in the session on the left (at its own residual acceleration, or at the optional "left gravity
level"), the same case at the "second gravity level" on the right, each the full annotated chart with
the session's test points on the chart of their own gravity level. It is the figure of
``lowgmap chart CASE --gravity G1 --compare G2 --points P -o pair.png``, made by the same functions
(:func:`lowgmap.app.files.casefile.with_conduit`, :func:`lowgmap.app.outputs.gravity_pair.gravity_pair`,
:func:`lowgmap.app.outputs.gravity_pair.pair_bytes`), so the two never disagree; each panel's regime
and symmetric margin of the operating point are those of ``lowgmap margin CASE --gravity G
--nominal-only`` at that level.

The case drawn is the one a download of the session's case file would hold (:meth:`Session.case_text`),
so an operating point moved on the chart is the point of both panels. The two charts are built and the
picture rendered on a worker thread (``asyncio.to_thread``; some seconds); a result that arrives after
the case, the operating point or the test points changed is dropped, and a figure already shown is
taken off with "Case changed: draw again".
"""
from __future__ import annotations

import asyncio
import html
import io
from dataclasses import dataclass
from pathlib import Path

import panel as pn
import param

from lowgmap.app.dashboard.inputs import FIELD_CSS
from lowgmap.app.files.casefile import CaseFileError, check_bounds, loads_case, with_conduit
from lowgmap.app.files.units import UnitError, gravity_names, parse_gravity

__all__ = ["GravityTab", "PairView", "PANEL_DPI", "default_second_level", "draw_pair"]

#: Resolution of the pair picture shown and offered for download [dots per inch]. The figure is about
#: 23 in wide (two full charts), so the picture fitted to the tab is a preview; "Show at full size"
#: shows it at its print size, where the text is as large as on paper.
PANEL_DPI = 150

#: Field names, as on screen (messages start with them).
SECOND_FIELD = "second gravity level"
LEFT_FIELD = "left gravity level"

_CSS_PX_PER_INCH = 96
_TYPED = "(as typed)"          # the select's entry when the field holds a value rather than a named level


def default_second_level(g: float) -> str:
    """The second level offered for a case at ``g`` [m/s^2]: the flight level "1e-6 g0" beside a case at
    0.01 g0 or more (a ground test, a partial-gravity surface), "ground" beside a low-gravity case.

    >>> default_second_level(9.80665), default_second_level(9.80665e-6)
    ('1e-6 g0', 'ground')
    """
    from lowgmap.physics.case import STANDARD_GRAVITY

    return "1e-6 g0" if g >= 0.01 * STANDARD_GRAVITY else "ground"


def _level_words(g: float) -> str:
    from lowgmap.physics.case import STANDARD_GRAVITY

    return f"{g / STANDARD_GRAVITY:.3g} g0 ({g:.4g} m/s²)"


@dataclass(frozen=True)
class PairView:
    """What the tab shows: the pair (its two panels, their studies and captions) and its PNG bytes.

    Attributes
    ----------
    pair : GravityPair   :func:`lowgmap.app.outputs.gravity_pair.gravity_pair` of the two documents
    png : bytes          :func:`lowgmap.app.outputs.gravity_pair.pair_bytes` (PNG at ``dpi``)
    dpi : int            resolution of ``png`` [dots per inch]
    size : (int, int)    width and height of ``png`` [pixels]
    """

    pair: object
    png: bytes
    dpi: int
    size: tuple

    def margins(self) -> list[dict]:
        """Per panel: residual acceleration [m/s^2], regime and symmetric margin of the operating point (None
        without a point, or on a chart without regimes, as ``lowgmap margin --json``), limiting line label."""
        rows = []
        for p in self.pair.panels:
            pm = p.study.margins
            has_regimes = bool(p.study.chart.regime_names)
            rows.append({
                "g": p.g,
                "regime": None if pm is None or not has_regimes else pm.regime,
                "symmetric_margin": None if pm is None or not has_regimes else pm.symmetric_margin,
                "limiting": None if pm is None or pm.limiting is None else pm.limiting.label,
            })
        return rows


def draw_pair(left, right, points=None, *, dpi: int = PANEL_DPI) -> PairView:
    """The pair of ``left`` and ``right`` (case documents) with ``points`` split between them, drawn as PNG,
    with the defaults of ``lowgmap chart --compare`` (the case's axes, the operating point drawn, bands where
    a line has an uncertain constant). Runs on a worker thread (matplotlib, two chart builds)."""
    from lowgmap.app.outputs.gravity_pair import gravity_pair, pair_bytes

    pair = gravity_pair(left, right, points=points)
    png = pair_bytes(pair, "png", dpi=dpi)
    return PairView(pair, png, int(dpi), _png_size(png))


def _png_size(png: bytes) -> tuple[int, int]:
    """Width and height [pixels] from a PNG header."""
    if png[:8] != b"\x89PNG\r\n\x1a\n" or png[12:16] != b"IHDR":
        raise ValueError("the pair picture is not a PNG")
    return int.from_bytes(png[16:20], "big"), int.from_bytes(png[20:24], "big")


def _points_table(test_points):
    """The test-point table of the session (a TestPointSet's ``points``, or a table as it is); None without."""
    if test_points is None:
        return None
    table = getattr(test_points, "points", test_points)
    return table if table is not None and len(table) else None


def _message(field: str, exc: BaseException) -> str:
    """An input problem in the words of the field (the message starts with the field's name)."""
    if isinstance(exc, CaseFileError):
        text = "; ".join(p.message for p in exc.problems) or str(exc)
    else:
        text = str(exc)
    for prefix in (f"{field}: ", f"{field} "):
        if text.startswith(prefix):
            return text
    return f"{field}: {text}"


class GravityTab(pn.viewable.Viewer):
    """The session's case at two gravity levels side by side (see the module notes).

    Parameters
    ----------
    session : lowgmap.app.dashboard.state.Session   its case text, test points and revision counter
    dpi : int   resolution of the picture [dots per inch] (default :data:`PANEL_DPI`)
    """

    running = param.Boolean(default=False, doc="a pair is being drawn")
    stale = param.Boolean(default=False, doc="the figure shown was taken off: the case changed since it was drawn")

    def __init__(self, session, *, dpi: int = PANEL_DPI, **params):
        super().__init__(**params)
        self.session = session
        self.dpi = int(dpi)
        self.view: PairView | None = None     # the pair shown (None before the first draw or once stale)
        self._token = 0
        g = session.doc.case.g
        self._default = default_second_level(g)
        names = gravity_names()
        self.level = pn.widgets.TextInput(label=SECOND_FIELD, value=self._default, width=220,
                                          placeholder="e.g. 1e-6 g0, 0.38 g0 or lunar surface",
                                          description="residual acceleration of the right-hand chart: a value with "
                                                      "units or a named level",
                                          css_classes=["gravity-second"])
        self.named = pn.widgets.Select(label="named level", options={_TYPED: "", **{n: n for n in names}}, width=170,
                                       value=self._default if self._default in names else "",
                                       css_classes=["gravity-named"])
        self.left = pn.widgets.TextInput(label=LEFT_FIELD, value="", width=220,
                                         placeholder=f"the case's own: {_level_words(g)}",
                                         description="residual acceleration of the left-hand chart; empty: the "
                                                     "case's own level",
                                         css_classes=["gravity-left"])
        self.level_message = self._field_message("gravity-second")
        self.left_message = self._field_message("gravity-left")
        self.draw_button = pn.widgets.Button(label="Draw both levels", color="primary", css_classes=["gravity-draw"])
        self.full_size = pn.widgets.Checkbox(label="Show at full size (scroll sideways)", value=False,
                                             css_classes=["gravity-full-size"])
        self.progress = pn.indicators.Progress(active=False, visible=False, sizing_mode="stretch_width",
                                               css_classes=["gravity-progress"])
        self.status = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["gravity-status"])
        self.image = pn.pane.PNG(None, sizing_mode="scale_width", alt_text="", css_classes=["gravity-pair"])
        self.captions = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["gravity-captions"])
        self.download = pn.widgets.FileDownload(callback=self._png, filename="gravity_pair.png",
                                                label="Download pair (PNG)", disabled=True,
                                                description="the pair picture shown, as a PNG file",
                                                css_classes=["gravity-download"])
        self._frame = pn.Column(self.image, sizing_mode="stretch_width", scroll=False, css_classes=["gravity-frame"])
        self.named.param.watch(self._named_chosen, "value")
        self.level.param.watch(self._level_typed, "value")
        self.full_size.param.watch(lambda e: self._fit(), "value")
        self.draw_button.on_click(self._on_draw)
        session.param.watch(self._case_changed, ["revision_counter", "ql", "qg", "test_points"])

    @staticmethod
    def _field_message(name: str):
        return pn.pane.HTML("", visible=False, stylesheets=[FIELD_CSS], sizing_mode="stretch_width",
                            css_classes=["field-message", f"message-{name}"])

    # ----------------------------------------------------------------------------------- form
    def _named_chosen(self, event):
        if event.new:
            self.level.value = event.new

    def _level_typed(self, event):
        words = " ".join(str(event.new).split()).lower()
        match = next((n for n in gravity_names() if n.lower() == words), "")
        if self.named.value != match:
            self.named.value = match

    def _case_changed(self, *_):
        g = self.session.doc.case.g
        new_default = default_second_level(g)
        if self.level.value == self._default and new_default != self._default:
            self.level.value = new_default          # not typed over: follow the case
        self._default = new_default
        self.left.placeholder = f"the case's own: {_level_words(g)}"
        self._token += 1                            # a pair being drawn is for the case as it was
        if self.view is not None or self.running:
            self._drop()
            self.stale = True
            self.status.object = ("<p class='gravity-stale'>Case changed: draw again (the pair shown was for the "
                                  "case as it was).</p>")

    def _drop(self):
        self.view = None
        self.image.object = None
        self.image.alt_text = ""
        self.captions.object = ""
        self.download.disabled = True

    def _say(self, pane, text: str | None):
        pane.object = f"<p>{html.escape(text)}</p>" if text else ""
        pane.visible = bool(text)

    def documents(self):
        """(left, right) case documents from the form; problems under their fields (UnitError, ValueError,
        CaseFileError), each message starting with the field's name. The case is the session's case text
        (what a download of the case holds), so a moved operating point is included."""
        s = self.session
        base = loads_case(s.case_text(), source=s.source_name, base_dir=s.base_dir)
        if s.base_dir is not None:
            base.path = Path(s.base_dir) / s.source_name      # file references resolve from the case's folder
        sides = {}
        problems = {}
        for key, field, text in (("left", LEFT_FIELD, self.left.value.strip()),
                                 ("right", SECOND_FIELD, self.level.value.strip())):
            if key == "left" and not text:
                sides[key] = base
                continue
            try:
                if not text:
                    raise UnitError(f"{field}: give a residual acceleration with units (e.g. '1e-6 g0') or a "
                                    f"named level ({', '.join(repr(n) for n in gravity_names())})")
                check_bounds("acceleration", parse_gravity(text, field), field)
                sides[key] = with_conduit(base, residual_acceleration=text)
            except (UnitError, ValueError, CaseFileError) as exc:
                problems[key] = _message(field, exc)
        self._say(self.left_message, problems.get("left"))
        self._say(self.level_message, problems.get("right"))
        if problems:
            raise ValueError("; ".join(problems.values()))
        return sides["left"], sides["right"]

    # ----------------------------------------------------------------------------------- drawing
    def draw_sync(self) -> PairView | None:
        """Draw in this thread (tests, scripts); the view shown, or None when a field has a problem (shown
        under it; the figure shown before stays)."""
        try:
            left, right = self.documents()
        except ValueError:
            return None
        view = draw_pair(left, right, _points_table(self.session.test_points), dpi=self.dpi)
        self._show(view)
        return view

    async def _on_draw(self, event=None):
        if self.running:
            return
        try:
            left, right = self.documents()
        except ValueError:
            return                                      # said under the field; the figure shown stays
        self._token += 1
        token = self._token
        own_left = not self.left.value.strip()          # the left chart is the session's own case
        points = _points_table(self.session.test_points)
        self.running = True
        self.draw_button.disabled = True
        self.progress.active, self.progress.visible = True, True
        self.status.object = (f"<p>Computing… the case at {html.escape(_level_words(left.case.g))} and at "
                              f"{html.escape(_level_words(right.case.g))} (two charts, some seconds).</p>")
        try:
            view = await asyncio.to_thread(draw_pair, left, right, points, dpi=self.dpi)
            if token != self._token:
                return                                  # the case changed meanwhile: already said so
            self._show(view)
        except Exception as exc:  # shown in the page, never as a traceback
            if token != self._token:
                return
            text = f"The pair could not be drawn: {exc}"
            if own_left:                                # the session's own case draws: the second level did it
                self._say(self.level_message, _message(SECOND_FIELD, exc))
            self.status.object = f"<p class='gravity-error' style='color:#8B0000'>{html.escape(text)}</p>"
        finally:
            self.running = False
            self.draw_button.disabled = False
            self.progress.active, self.progress.visible = False, False

    def _show(self, view: PairView):
        from lowgmap.app.formatting import format_percent

        self.view = view
        self.stale = False
        self.image.object = view.png
        panels = view.pair.panels
        self.image.alt_text = ("Regime charts of the case side by side: " + " and ".join(
            _level_words(p.g) for p in panels))
        self._fit()
        parts = []
        for p, m in zip(panels, view.margins()):
            caption = "<br>".join(html.escape(line) for line in p.caption.split("\n"))
            if m["symmetric_margin"] is not None:
                pct = format_percent(m["symmetric_margin"])
                margin = (f"symmetric margin ±{pct}, limited by {html.escape(m['limiting'])}" if m["limiting"]
                          else f"symmetric margin at least ±{pct} (no boundary comes closer)")
                point = f"Operating point: <b>{html.escape(str(m['regime']))}</b>, {margin}."
            elif p.study.margins is None:
                point = "No operating point in the case."
            else:
                point = "No regimes on this chart: no margin."
            note = f"<br><i>{html.escape(p.handover)}</i>" if p.handover else ""
            parts.append(f"<div class='gravity-panel' data-g='{p.g:.6g}'><p>{caption}</p><p class='gravity-margin'>"
                         f"{point}{note}</p></div>")
        if view.pair.unplaced:
            parts.append(f"<p>{view.pair.unplaced} test point(s) have no residual acceleration (given or from their "
                         f"platform) and are on neither chart.</p>")
        self.captions.object = "".join(parts)
        extra = ""
        if getattr(self.session, "exact", False):
            extra = " Drawn with the surrogate solves, as <code>lowgmap chart --compare</code>."
        self.status.object = (f"<p>The case at {html.escape(_level_words(panels[0].g))} (left) and "
                              f"{html.escape(_level_words(panels[1].g))} (right).{extra}</p>")
        self.download.disabled = False

    def _fit(self):
        """Fitted to the tab (a preview), or at the print size of the figure with a sideways scroll."""
        if self.full_size.value and self.view is not None:
            self.image.sizing_mode = "fixed"
            self.image.width = int(round(self.view.size[0] * _CSS_PX_PER_INCH / self.view.dpi))
            self.image.height = int(round(self.view.size[1] * _CSS_PX_PER_INCH / self.view.dpi))
            self._frame.scroll = True
        else:
            self.image.sizing_mode = "scale_width"
            self._frame.scroll = False

    def _png(self):
        return io.BytesIO(self.view.png if self.view is not None else b"")

    def __panel__(self):
        form = pn.Column(
            pn.pane.Markdown("#### Two gravity levels\nThe case as edited beside the same case at a second "
                             "residual acceleration (a ground test beside the flight prediction), each test point on "
                             "the chart of the level closest to its own. As `lowgmap chart CASE --compare G`."),
            pn.Row(pn.Column(self.level, self.level_message, width=230), self.named),
            pn.Column(self.left, self.left_message, width=230),
            pn.Row(self.draw_button, self.download, self.full_size), self.progress, self.status,
            sizing_mode="stretch_width")
        return pn.Column(form, self._frame, self.captions, sizing_mode="stretch_width")
