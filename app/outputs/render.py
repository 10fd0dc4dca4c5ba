"""Static chart export with matplotlib (headless, deterministic): PNG (300 dpi), SVG, PDF.

The figure shows the regime regions (faint colour plus hatching), every boundary in its own colour
and dash pattern (fixed per boundary model, :mod:`lowgmap.app.outputs.styles`; lines that define the
regions thick, comparison lines thin, the parts outside a source's validity range dotted and faint),
the band of each boundary (the region its line sweeps as its constants move over their ranges: a
translucent fill in the line's own colour under the line, one key entry), the regime names inside
their regions, a short label on each line, test points (a marker per
platform class, a fill per observed regime, a ring where the chart disagrees, arrows at the edge
for points beyond the chart range, with their count written on the chart), the operating point
with its callout, a key with all of these, the chart's warnings and a title block with the case
inputs, the version and the caution line.

Labels are placed by :func:`place_labels` so that no two text boxes overlap and none covers the
operating point: every label has a list of candidate positions (measured from the rendered text),
the operating point and the labels already placed are obstacles, test points and lines covered
cost extra, and a small search over the callout's best positions keeps the other labels on the
chart. A label with no free position left is not drawn and is named in a note under the chart.
Symbols are typeset (:func:`typeset`: ``Q_L`` -> :math:`Q_\\mathrm{L}`, ``m^3/s`` -> m³/s).
"""
from __future__ import annotations

import datetime as _dt
import io
import math
import re
import textwrap
import threading
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

import matplotlib

matplotlib.use("Agg")
from matplotlib import patheffects  # noqa: E402
from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.lines import Line2D  # noqa: E402
from matplotlib.patches import FancyArrowPatch, Patch  # noqa: E402

from lowgmap.app import CAUTION, __version__  # noqa: E402
from lowgmap.app.files.atomic import write_atomic  # noqa: E402
from lowgmap.app.outputs import styles  # noqa: E402
from lowgmap.app.outputs.chartview import BAND_KEY_TEXT, ChartView  # noqa: E402

__all__ = ["render_chart", "chart_figure", "figure_bytes", "typeset", "place_labels", "add_footer", "RENDER_LOCK",
           "LabelRequest", "Candidate", "FORMATS", "EXPORT_DPI", "RC", "BAND_ALPHA", "BAND_ALPHA_COMPARISON"]

FORMATS = ("png", "svg", "pdf")

#: Resolution of exported PNG files [dots per inch].
EXPORT_DPI = 300

#: Resolution the layout is measured at (text extents scale with the resolution of the file).
_LAYOUT_DPI = 100

#: matplotlib settings of every export: text stays text in SVG (searchable), no random ids, dash
#: lengths in points whatever the line width.
RC = {"svg.hashsalt": "lowgmap", "svg.fonttype": "none", "lines.scale_dashes": False}

#: Fixed metadata so the same inputs give the same bytes (no timestamps in SVG/PDF).
_METADATA = {
    "svg": {"Date": None, "Creator": f"lowgmap {__version__}"},
    "pdf": {"CreationDate": None, "ModDate": None, "Creator": f"lowgmap {__version__}", "Producer": "lowgmap"},
    "png": {"Software": f"lowgmap {__version__}"},
}

# layout of the page [inch]
_W = 11.69             # A4 landscape width; the height grows with the key and the title block
_H_MIN = 8.27
_MARGIN_L = 0.6
_AX_L, _AX_W, _AX_H = 0.95, 6.55, 4.5
_AX_TOP = 0.8          # top of the chart axes, from the top of the page
_KEY_L = 8.05
_KEY_W = _W - _KEY_L - 0.15
_DARK = "#222222"

#: Opacity of a band's fill for a region boundary (its outline is drawn stronger, in the same colour); the
#: bands of comparison lines are fainter (:data:`BAND_ALPHA_COMPARISON`) and outlined dashed.
BAND_ALPHA = 0.12
BAND_ALPHA_COMPARISON = 0.05
_CAUTION_COLOUR = "#8B0000"

# =============================================================================================
# typesetting

_MATH = [
    (re.compile(r"\bQ_G/Q_L\b"), r"$Q_\\mathrm{G}/Q_\\mathrm{L}$"),
    (re.compile(r"\bQ_([LG])\b"), r"$Q_\\mathrm{\1}$"),
    (re.compile(r"\bU_S([LG])\b"), r"$U_\\mathrm{S\1}$"),
    (re.compile(r"\b(Re|We|Ca|Bo|Su)_(S?[LG])\b"), r"$\\mathrm{\1}_\\mathrm{\2}$"),
    (re.compile(r"\b(rho|mu)_([LGlg])\b"), lambda m: rf"$\{m.group(1)}_\mathrm{{{m.group(2).upper()}}}$"),
    (re.compile(r"\bsigma\b"), r"$\\sigma$"),
    (re.compile(r"\balpha_c\b"), r"$\\alpha_\\mathrm{c}$"),
    (re.compile(r"\bk_m\b"), r"$k_\\mathrm{m}$"),
    (re.compile(r"\bD_h\b"), r"$D_\\mathrm{h}$"),
    (re.compile(r"\bg0\b"), r"$g_0$"),
    # a unit with a power: m^3/s, kg/m^3, m/s^2, mm^2
    (re.compile(r"(?<![\w$\\])([A-Za-z]+(?:/[A-Za-z]+)*)\^(-?\d+)((?:/[A-Za-z]+)?)"), r"$\\mathrm{\1^{\2}\3}$"),
]
_PLAIN = [
    (re.compile(r"\bdegC\b"), "°C"),
    (re.compile(r"(\d) ?deg\b"), r"\1°"),
    (re.compile(r"(?<=\S) x (?=\S)"), " × "),
    (re.compile(r" -> "), " → "),
]


#: One figure is drawn or written at a time in this process: matplotlib's rc settings (used through
#: ``rc_context``) are process-wide, so two threads drawing at once (dashboard sessions, the design and
#: gravity tabs, exports) could see each other's settings. Re-entrant: a drawing may write a figure.
RENDER_LOCK = threading.RLock()


def typeset(text: str) -> str:
    """Text for a figure with its symbols typeset (matplotlib mathtext) and degrees as °.

    Symbols written the plain way in lowgmap's text (``Q_L``, ``We_SG``, ``rho_L``, ``m^3/s``) become
    subscripts and superscripts; a ``$`` already in the text is kept as a dollar sign.

    Examples
    --------
    >>> typeset("liquid flow rate Q_L [m^3/s]")
    'liquid flow rate $Q_\\\\mathrm{L}$ [$\\\\mathrm{m^{3}/s}$]'
    >>> typeset("We_SG = 1 (Zhao & Rezkallah 1993)")
    '$\\\\mathrm{We}_\\\\mathrm{SG}$ = 1 (Zhao & Rezkallah 1993)'
    >>> typeset("gas-to-liquid flow ratio Q_G/Q_L [-], Re_SL")
    'gas-to-liquid flow ratio $Q_\\\\mathrm{G}/Q_\\\\mathrm{L}$ [-], $\\\\mathrm{Re}_\\\\mathrm{SL}$'
    >>> typeset("contact angle 40 deg, 22 degC, cost $5")
    'contact angle 40°, 22 °C, cost \\\\$5'
    """
    parts: list[tuple[bool, str]] = [(False, str(text).replace("$", r"\$"))]
    for rx, rep in _PLAIN:
        parts = [(m, s if m else rx.sub(rep, s)) for m, s in parts]
    for rx, rep in _MATH:
        out: list[tuple[bool, str]] = []
        for is_math, s in parts:
            if is_math:
                out.append((True, s))
                continue
            pos = 0
            for mt in rx.finditer(s):
                if mt.start() > pos:
                    out.append((False, s[pos:mt.start()]))
                out.append((True, mt.expand(rep) if isinstance(rep, str) else rep(mt)))
                pos = mt.end()
            if pos < len(s):
                out.append((False, s[pos:]))
        parts = out
    return "".join(s for _, s in parts)


def _wrap(text: str, width: int) -> str:
    return "\n".join(textwrap.wrap(str(text), width, break_long_words=False)) or str(text)


# =============================================================================================
# label placement

@dataclass
class Candidate:
    """One position of a label: its box [x0, y0, x1, y1] (pixels, axes origin), cost and drawing data."""

    box: tuple
    cost: float
    text: str = ""
    fontsize: float = 9.0
    anchor: tuple | None = None      # leader-line target (pixels), None: no leader


@dataclass
class LabelRequest:
    """A label to place: a key, what it is (for the note when it is left off) and its candidates."""

    key: str
    what: str
    candidates: list = field(default_factory=list)


def _overlaps(boxes: np.ndarray, placed: np.ndarray) -> np.ndarray:
    """Row i True where boxes[i] intersects any of ``placed`` (both (n, 4) arrays of x0, y0, x1, y1)."""
    if placed.size == 0 or boxes.size == 0:
        return np.zeros(len(boxes), dtype=bool)
    b, p = boxes[:, None, :], placed[None, :, :]
    return np.any((b[..., 0] < p[..., 2]) & (p[..., 0] < b[..., 2]) & (b[..., 1] < p[..., 3])
                  & (p[..., 1] < b[..., 3]), axis=1)


#: Cost of a leader line running through a text box (a label far away is better than a crossed text).
_CROSSING_COST = 25.0


def _leader_points(c: Candidate) -> np.ndarray:
    """Points along a candidate's leader line, outside its own box ((0, 2) without a leader)."""
    if c.anchor is None:
        return np.zeros((0, 2))
    x0, y0, x1, y1 = c.box
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    n = int(min(400, max(12, math.hypot(c.anchor[0] - cx, c.anchor[1] - cy) / 4.0)))
    t = np.linspace(0.0, 1.0, n)[1:-1]
    pts = np.column_stack([cx + t * (c.anchor[0] - cx), cy + t * (c.anchor[1] - cy)])
    own = (pts[:, 0] >= x0) & (pts[:, 0] <= x1) & (pts[:, 1] >= y0) & (pts[:, 1] <= y1)
    return pts[~own]


def _holds(boxes: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Row i True where boxes[i] contains any of ``points`` ((n, 2))."""
    if points.size == 0 or boxes.size == 0:
        return np.zeros(len(boxes), dtype=bool)
    b, p = boxes[:, None, :], points[None, :, :]
    return np.any((p[..., 0] > b[..., 0]) & (p[..., 0] < b[..., 2]) & (p[..., 1] > b[..., 1])
                  & (p[..., 1] < b[..., 3]), axis=1)


def _greedy(requests, fixed: np.ndarray, first_choice=None):
    placed = [fixed] if fixed.size else []
    leaders = []       # points along the leader lines placed so far
    out, total, dropped = {}, 0.0, 0
    for i, req in enumerate(requests):
        cands = req.candidates if not (i == 0 and first_choice is not None) else [first_choice]
        if not cands:
            out[req.key] = None
            dropped += 1
            continue
        boxes = np.array([c.box for c in cands], dtype=float)
        costs = np.array([c.cost for c in cands], dtype=float)
        allp = np.vstack(placed) if placed else np.zeros((0, 4))
        free = ~_overlaps(boxes, allp)
        if not free.any():
            out[req.key] = None
            dropped += 1
            continue
        # a leader line should not run through a text either (a cost, so the fewest crossings win)
        crossing = _holds(boxes, np.vstack(leaders)).astype(float) if leaders else np.zeros(len(cands))
        for j in np.flatnonzero(free):
            if cands[j].anchor is not None and allp.size:
                crossing[j] += _holds(allp, _leader_points(cands[j])).sum()
        eff = costs + _CROSSING_COST * crossing
        k = int(np.flatnonzero(free)[np.argmin(eff[free])])
        out[req.key] = cands[k]
        total += eff[k]
        placed.append(boxes[k:k + 1])
        if cands[k].anchor is not None:
            leaders.append(_leader_points(cands[k]))
    return out, dropped, total


def place_labels(requests, obstacles=(), *, search: int = 8) -> dict:
    """Choose one candidate per label so that no two chosen boxes overlap nor cover an obstacle.

    Greedy in the order given (most important first), each label taking its cheapest free
    candidate; the first label's ``search`` cheapest candidates are each tried in turn and the
    arrangement that leaves the fewest labels off (then the lowest total cost) is kept.

    Parameters
    ----------
    requests : list of LabelRequest   in order of importance
    obstacles : sequence of boxes     (x0, y0, x1, y1) no label may cover (the operating point)
    search : int                      positions of the first label tried

    Returns
    -------
    dict   key -> chosen Candidate, or None for a label left off

    Examples
    --------
    >>> a = LabelRequest("a", "first", [Candidate((0, 0, 10, 10), 0.0), Candidate((20, 0, 30, 10), 1.0)])
    >>> b = LabelRequest("b", "second", [Candidate((5, 5, 15, 15), 0.0)])
    >>> got = place_labels([a, b], obstacles=[(100, 100, 110, 110)])
    >>> got["a"].box, got["b"].box
    ((20, 0, 30, 10), (5, 5, 15, 15))
    """
    fixed = np.array([tuple(o) for o in obstacles], dtype=float).reshape(-1, 4)
    if not requests:
        return {}
    best = _greedy(requests, fixed)
    first = requests[0]
    ranked = sorted(range(len(first.candidates)), key=lambda i: first.candidates[i].cost)
    free0 = [i for i in ranked if not _overlaps(np.array([first.candidates[i].box], float), fixed)[0]]
    for i in free0[:max(search, 0)]:
        trial = _greedy(requests, fixed, first.candidates[i])
        if (trial[1], trial[2]) < (best[1], best[2]):
            best = trial
    return best[0]


# =============================================================================================
# the figure

def render_chart(view: ChartView, target=None, *, fmt: str | None = None, title: str = "",
                 title_block: list[tuple[str, str]] | None = None, point_label: str | None = None,
                 extra_points: list[dict] | None = None, dpi: int = EXPORT_DPI, point_alert: bool = False,
                 notes: list[str] | None = None, bands: bool = True):
    """Draw ``view`` and write it to ``target`` (path or binary file); return bytes when target is None.

    Parameters
    ----------
    view : ChartView        display data (:func:`lowgmap.app.outputs.chartview.chart_view`)
    target : path, file or None
    fmt : "png" | "svg" | "pdf"   default: from the file suffix
    title : str             figure title (the case title)
    title_block : list of (field, value)   rows of the title block (case inputs, margins, ...)
    point_label : str       callout text of the operating point
    extra_points : list of dict   marks: see :func:`chart_figure`
    dpi : int               PNG resolution (default :data:`EXPORT_DPI`)
    point_alert : bool      draw the callout in red (a verdict that fails)
    notes : list of str     extra lines under the chart
    bands : bool            draw the bands the view carries (``view.bands``; a view built without
                            bands has none to draw)
    """
    if fmt is None:
        if target is None or not hasattr(target, "__fspath__") and not isinstance(target, str):
            raise ValueError("fmt must be given when writing to a file object or returning bytes")
        fmt = Path(target).suffix.lstrip(".").lower()
    if fmt not in FORMATS:
        raise ValueError(f"output format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    fig = chart_figure(view, title=title, title_block=title_block, point_label=point_label,
                       extra_points=extra_points, point_alert=point_alert, notes=notes, bands=bands)
    data = figure_bytes(fig, fmt, dpi=dpi)
    if target is None:
        return data
    if hasattr(target, "write"):
        target.write(data)
        return None
    write_atomic(target, data)
    return None


def figure_bytes(fig, fmt: str, *, dpi: int = EXPORT_DPI) -> bytes:
    """A figure as PNG/SVG/PDF bytes with the export settings (:data:`RC`, fixed metadata, ``dpi``)."""
    if fmt not in FORMATS:
        raise ValueError(f"output format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    buf = io.BytesIO()
    with RENDER_LOCK, matplotlib.rc_context(RC):
        fig.savefig(buf, format=fmt, dpi=dpi, metadata=_METADATA[fmt])
    return buf.getvalue()


def add_footer(fig, *, fontsize: float = 7.5) -> None:
    """Write the version and the caution line along the bottom of ``fig`` (for figures without a title block).

    The caller leaves room at the bottom (about 0.45 inch).
    """
    w = fig.get_figwidth()
    text = _wrap("CAUTION: " + CAUTION, max(40, int(w * 72 / (fontsize * 0.58))))
    fig.text(0.01, 0.008, text + f"\nlowgmap {__version__}", fontsize=fontsize, color=_CAUTION_COLOUR,
             weight="bold", va="bottom", ha="left", gid="caution")


class _Measure:
    """Text extents [pixels] from the figure's renderer (cached)."""

    def __init__(self, fig):
        self.fig = fig
        self.renderer = fig.canvas.get_renderer()
        self._cache = {}

    def size(self, text, fontsize, weight="normal", style="normal"):
        key = (text, fontsize, weight, style)
        if key not in self._cache:
            t = self.fig.text(0, 0, text, fontsize=fontsize, weight=weight, style=style, ha="center",
                              va="center")
            bb = t.get_window_extent(self.renderer)
            t.remove()
            self._cache[key] = (bb.width, bb.height)
        return self._cache[key]


def _pt(fig, points: float) -> float:
    return points * fig.dpi / 72.0


def chart_figure(view: ChartView, *, title: str = "", title_block=None, point_label: str | None = None,
                 extra_points=None, point_alert: bool = False, notes=None, bands: bool = True) -> Figure:
    """The annotated chart as a matplotlib Figure (headless, not attached to pyplot).

    ``extra_points`` are marks, each a dict: ``x``, ``y`` (display units); ``marker`` (matplotlib
    code), ``colour`` (fill), ``edge``, ``size``; for test points also ``kind="test point"``,
    ``platform`` (key text of the marker), ``fill_key`` (key text of the fill, the observed regime),
    ``ring`` (True: the chart predicts another regime), ``faded`` (True: not valid for a low-gravity
    conclusion); other marks carry ``key`` (their key text) and ``kind`` (a plural noun for the
    count of marks beyond the chart, e.g. ``"envelope corners"``).

    ``bands``: draw the boundaries' bands carried by ``view`` (``view.bands``, see
    :func:`lowgmap.app.outputs.chartview.chart_view`): a translucent fill in the line's colour under
    the line, and one key entry (:data:`lowgmap.app.outputs.chartview.BAND_KEY_TEXT`).

    Artists carry ids (``gid``) for tests and SVG readers: ``operating-point``,
    ``boundary:<name>``, ``band:<name>``, ``label:region:<name>``, ``label:line:<name>``, ``label:callout``,
    ``label:count:<edge>``, ``key``.
    """
    with RENDER_LOCK, matplotlib.rc_context(RC):
        return _ChartFigure(view, title, list(title_block or []), point_label, list(extra_points or []),
                            point_alert, list(notes or []), bool(bands)).build()


class _ChartFigure:
    def __init__(self, view, title, rows, point_label, marks, point_alert, notes, bands=True):
        self.view, self.title, self.rows = view, title, rows
        self.bands = tuple(view.bands) if bands else ()
        self.point_label, self.marks, self.point_alert, self.notes = point_label, marks, point_alert, notes
        self.fig = Figure(figsize=(_W, _H_MIN), dpi=_LAYOUT_DPI)
        FigureCanvasAgg(self.fig)
        self.m = _Measure(self.fig)
        self.H = _H_MIN
        self.soft_points = []        # axes pixels of marks that labels should not cover
        self.out_counts = {}         # (kind, edge) -> (count, mean position along the edge)
        self.any_invalid = False
        self.placed_dropped = []

    # ------------------------------------------------------------------------------- geometry
    def _rect(self, left, top, width, height):
        return (left / _W, (self.H - top - height) / self.H, width / _W, height / self.H)

    def _to_px(self, x, y):
        """Display data -> pixels from the axes' lower-left corner (NaN where not drawable)."""
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        if self.view.log_axes:
            x = np.where(x > 0, x, np.nan)
            y = np.where(y > 0, y, np.nan)
        with np.errstate(invalid="ignore", divide="ignore"):
            pts = self.ax.transData.transform(np.column_stack([x.ravel(), y.ravel()]))
        bb = self.ax.bbox
        return pts[:, 0] - bb.x0, pts[:, 1] - bb.y0

    def _fractions(self, x, y):
        """Display data -> axes fractions; beyond the limits (or not positive on log axes): outside [0, 1]."""
        v = self.view
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        with np.errstate(invalid="ignore", divide="ignore"):
            if v.log_axes:
                fx = (np.log10(np.where(x > 0, x, 1e-300)) - math.log10(v.x_range[0])) / math.log10(
                    v.x_range[1] / v.x_range[0])
                fy = (np.log10(np.where(y > 0, y, 1e-300)) - math.log10(v.y_range[0])) / math.log10(
                    v.y_range[1] / v.y_range[0])
            else:
                fx = (x - v.x_range[0]) / (v.x_range[1] - v.x_range[0])
                fy = (y - v.y_range[0]) / (v.y_range[1] - v.y_range[0])
        return fx, fy

    # ------------------------------------------------------------------------------- build
    def build(self):
        v, fig = self.view, self.fig
        self.ax = ax = fig.add_axes(self._rect(_AX_L, _AX_TOP, _AX_W, _AX_H))
        if v.log_axes:
            ax.set_xscale("log")
            ax.set_yscale("log")
        ax.set_xlim(*v.x_range)
        ax.set_ylim(*v.y_range)
        self.w_px, self.h_px = ax.bbox.width, ax.bbox.height
        self._draw_regions()
        self._draw_bands()
        self._draw_curves()
        self._draw_marks()
        self._draw_point()
        ax.set_xlabel(typeset(v.x_label), fontsize=11)
        ax.set_ylabel(typeset(v.y_label), fontsize=11)
        ax.tick_params(labelsize=9)
        ax.grid(True, which="major", color="#bbbbbb", linewidth=0.6, alpha=0.7, zorder=0)
        self._place()
        self._layout()
        return fig

    def _draw_regions(self):
        for r in self.view.regions:
            self.ax.fill(r.x, r.y, facecolor=r.colour, alpha=0.32, edgecolor="none", zorder=1)
            if r.hatch:
                self.ax.fill(r.x, r.y, facecolor="none", edgecolor=r.colour, hatch=r.hatch, linewidth=0,
                             alpha=0.75, zorder=1)

    def _draw_bands(self):
        """Each band as a translucent fill in its line's colour, under the lines (over the regions)."""
        for b in self.bands:
            main = b.role == "regions"
            for x, y in b.polygons:
                (poly,) = self.ax.fill(x, y, facecolor=b.colour, alpha=BAND_ALPHA if main else BAND_ALPHA_COMPARISON,
                                       edgecolor="none", zorder=2)
                poly.set_gid(f"band:{b.name}")
                (edge,) = self.ax.fill(x, y, facecolor="none", edgecolor=b.colour, alpha=0.85 if main else 0.6,
                                       linewidth=0.8 if main else 0.6, linestyle="solid" if main else (0, (4, 3)),
                                       zorder=2)
                edge.set_gid(f"band-edge:{b.name}")

    def _draw_curves(self):
        self.line_geoms = []   # (name, shapely geometry in axes pixels, pieces)
        self.roles = {c.name: c.role for c in self.view.curves}
        from shapely.geometry import LineString, MultiLineString

        for c in self.view.curves:
            lw = 2.3 if c.role == "regions" else 1.4
            halo = [patheffects.withStroke(linewidth=lw + 2.2, foreground="white", alpha=0.7)]
            z = 4 if c.role == "regions" else 3.5
            for x, y in c.pieces(True):
                (ln,) = self.ax.plot(x, y, color=c.colour, linestyle=styles.mpl_linestyle(c.dash), linewidth=lw,
                                     zorder=z, path_effects=halo, dash_capstyle="butt")
                ln.set_gid(f"boundary:{c.name}")
            for x, y in c.pieces(False):
                self.any_invalid = True
                (ln,) = self.ax.plot(x, y, color=c.colour, linestyle=(0, styles.INVALID_DASH), linewidth=lw,
                                     alpha=0.7, zorder=z, path_effects=halo, dash_capstyle="round")
                ln.set_gid(f"boundary-outside-validity:{c.name}")
            px, py = self._to_px(c.x, c.y)
            pieces, cur = [], []
            for a, b in zip(px, py):
                if np.isfinite(a) and np.isfinite(b):
                    cur.append((a, b))
                else:
                    if len(cur) > 1:
                        pieces.append(cur)
                    cur = []
            if len(cur) > 1:
                pieces.append(cur)
            self.line_geoms.append((c.name, MultiLineString([LineString(p) for p in pieces]) if pieces else None,
                                    pieces))

    def _draw_marks(self):
        ax = self.ax
        self.mark_keys = []
        if not self.marks:
            return
        xs = np.array([m["x"] for m in self.marks], dtype=float)
        ys = np.array([m["y"] for m in self.marks], dtype=float)
        fx, fy = self._fractions(xs, ys)
        inside = (fx >= 0) & (fx <= 1) & (fy >= 0) & (fy <= 1)
        px, py = self._to_px(xs, ys)
        for i, mk in enumerate(self.marks):
            faded = bool(mk.get("faded"))
            if inside[i]:
                ax.scatter([xs[i]], [ys[i]], marker=mk.get("marker", "o"), s=mk.get("size", 40),
                           facecolor=mk.get("colour", "white"), edgecolor=mk.get("edge", _DARK), linewidth=0.8,
                           alpha=0.45 if faded else 1.0, zorder=7, gid="test-point" if mk.get("kind") ==
                           "test point" else "mark")
                if mk.get("ring"):
                    ax.scatter([xs[i]], [ys[i]], marker="o", s=mk.get("size", 40) * 4.2, facecolor="none",
                               edgecolor=styles.DISAGREE_COLOUR, linewidth=1.4, zorder=7, gid="disagree-ring")
                self.soft_points.append((px[i], py[i]))
            else:
                self._edge_arrow(fx[i], fy[i], mk.get("colour", "white"), mk.get("kind", "test point"),
                                 plural=mk.get("kind_plural"))

    def _edge_of(self, fx, fy):
        horiz = "left" if not fx >= 0 else ("right" if fx > 1 else "")
        vert = "bottom" if not fy >= 0 else ("top" if fy > 1 else "")
        if horiz and vert:
            return f"{vert}-{horiz} corner"
        return f"{horiz or vert} edge"

    def _edge_arrow(self, fx, fy, colour, kind, plural=None, edge_colour=_DARK):
        """An arrow at the chart's edge pointing toward a mark beyond the range; counted per edge."""
        fxc = float(np.clip(np.nan_to_num(fx, nan=-1.0), 0.0, 1.0))
        fyc = float(np.clip(np.nan_to_num(fy, nan=-1.0), 0.0, 1.0))
        dx = (0 if 0 <= fx <= 1 else (1 if fx > 1 else -1))
        dy = (0 if 0 <= fy <= 1 else (1 if fy > 1 else -1))
        n = math.hypot(dx, dy) or 1.0
        length = 18.0  # pixels
        tip = (fxc * self.w_px - dx / n * 1.5, fyc * self.h_px - dy / n * 1.5)
        tail = (tip[0] - dx / n * length, tip[1] - dy / n * length)
        to_f = lambda p: (p[0] / self.w_px, p[1] / self.h_px)  # noqa: E731
        arrow = FancyArrowPatch(to_f(tail), to_f(tip), transform=self.ax.transAxes,
                                arrowstyle="simple,head_length=0.9,head_width=0.9,tail_width=0.35",
                                mutation_scale=11, facecolor=colour, edgecolor=edge_colour, linewidth=0.7,
                                zorder=7, clip_on=False)
        arrow.set_gid("edge-arrow")
        self.ax.add_patch(arrow)
        self.soft_points.append(tail)
        self.soft_points.append(tip)
        edge = self._edge_of(fx, fy)
        along = fyc if edge.endswith(("left edge", "right edge")) else fxc
        key = (plural or ("test points" if kind == "test point" else str(kind)), edge)
        cnt, mean = self.out_counts.get(key, (0, 0.0))
        self.out_counts[key] = (cnt + 1, (mean * cnt + along) / (cnt + 1))

    def _draw_point(self):
        v = self.view
        self.point_px = None
        self.point_beyond = None
        if v.point is None:
            return
        fx, fy = self._fractions(v.point[0], v.point[1])
        fx, fy = float(fx), float(fy)
        if 0 <= fx <= 1 and 0 <= fy <= 1:
            self.ax.scatter([v.point[0]], [v.point[1]], marker="*", s=260, facecolor=styles.OPERATING_POINT_COLOUR,
                            edgecolor="black", linewidth=1.0, zorder=8, gid="operating-point")
            px, py = self._to_px(v.point[0], v.point[1])
            self.point_px = (float(px[0]), float(py[0]))
        else:
            self.point_beyond = self._edge_of(fx, fy)
            fxc, fyc = float(np.clip(fx, 0, 1)), float(np.clip(fy, 0, 1))
            self._edge_arrow(fx, fy, styles.OPERATING_POINT_COLOUR, "operating point", plural="operating point",
                             edge_colour="black")
            key = ("operating point", self.point_beyond)
            self.out_counts.pop(key, None)  # the callout says it
            self.point_px = (fxc * self.w_px, fyc * self.h_px)

    # ------------------------------------------------------------------------------- placement
    def _box_costs(self, boxes: np.ndarray, *, point_weight=6.0, line_weight=2.0, skip_line=None):
        """Soft cost of each box: test points and arrows covered, lines crossed."""
        cost = np.zeros(len(boxes))
        if len(boxes) == 0:
            return cost
        if self.soft_points:
            p = np.asarray(self.soft_points, dtype=float)
            m = 4.0
            inside = ((p[None, :, 0] > boxes[:, None, 0] - m) & (p[None, :, 0] < boxes[:, None, 2] + m)
                      & (p[None, :, 1] > boxes[:, None, 1] - m) & (p[None, :, 1] < boxes[:, None, 3] + m))
            cost += point_weight * inside.sum(axis=1)
        if line_weight:
            import shapely

            geoms = shapely.box(boxes[:, 0], boxes[:, 1], boxes[:, 2], boxes[:, 3])
            for name, g, _ in self.line_geoms:
                if g is None or name == skip_line:
                    continue
                w = line_weight if self.roles.get(name) == "regions" else 0.4 * line_weight
                cost += w * shapely.intersects(g, geoms)
        return cost

    def _inside_axes(self, boxes: np.ndarray, margin=2.0) -> np.ndarray:
        return ((boxes[:, 0] >= margin) & (boxes[:, 1] >= margin) & (boxes[:, 2] <= self.w_px - margin)
                & (boxes[:, 3] <= self.h_px - margin))

    def _around(self, anchor, w, h, dists, gap):
        """Boxes (w x h) around ``anchor`` in 8 directions at distances ``dists`` (pixels beyond ``gap``)."""
        out = []
        for d in dists:
            for k, (ux, uy) in enumerate(((1, 1), (-1, 1), (1, -1), (-1, -1), (1, 0), (-1, 0), (0, 1), (0, -1))):
                cx = anchor[0] + ux * (gap + d + w / 2)
                cy = anchor[1] + uy * (gap + d + h / 2)
                out.append(((cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2), d, k))
        return out

    def _callout_request(self):
        if not self.point_label or self.point_px is None:
            return None
        text = typeset(self.point_label)
        if self.point_beyond:
            text = f"operating point beyond the {self.point_beyond} of the chart\n" + text
        fs = 8.5
        w, h = self.m.size(text, fs, "bold" if self.point_alert else "normal")
        pad = _pt(self.fig, 0.35 * fs) + 1
        w, h = w + 2 * pad, h + 2 * pad
        raw = self._around(self.point_px, w, h, (14, 28, 46, 70, 100, 140, 190, 250), 10)
        boxes = np.array([b for b, _, _ in raw])
        ok = self._inside_axes(boxes)
        pref = np.array([0.0, 0.6, 0.6, 1.0, 1.5, 1.8, 2.2, 2.4])
        cost = (np.array([d for _, d, _ in raw]) / 10.0 + pref[[k for _, _, k in raw]]
                + self._box_costs(boxes, point_weight=3.0, line_weight=3.0))
        if getattr(self, "region_poles", None):
            p = np.asarray(self.region_poles)
            covered = ((p[None, :, 0] > boxes[:, None, 0]) & (p[None, :, 0] < boxes[:, None, 2])
                       & (p[None, :, 1] > boxes[:, None, 1]) & (p[None, :, 1] < boxes[:, None, 3]))
            cost += 4.0 * covered.sum(axis=1)
        cands = [Candidate(tuple(b), float(c), text, fs, self.point_px) for b, c, o in zip(boxes, cost, ok) if o]
        return LabelRequest("callout", "operating-point callout", cands)

    def _region_requests(self):
        import shapely
        from shapely.geometry import Polygon, box as sbox
        from shapely.ops import polylabel

        frame = sbox(0, 0, self.w_px, self.h_px)
        best: dict[str, tuple[float, object]] = {}
        for r in self.view.regions:
            px, py = self._to_px(r.x, r.y)
            ok = np.isfinite(px) & np.isfinite(py)
            if ok.sum() < 3:
                continue
            poly = Polygon(np.column_stack([px[ok], py[ok]]))
            if not poly.is_valid:
                poly = poly.buffer(0)
            poly = poly.intersection(frame)
            if poly.is_empty:
                continue
            if poly.geom_type != "Polygon":
                parts = [g for g in getattr(poly, "geoms", []) if g.geom_type == "Polygon"]
                if not parts:
                    continue
                poly = max(parts, key=lambda g: g.area)
            if poly.area > best.get(r.name, (0.0, None))[0]:
                best[r.name] = (poly.area, poly)
        self.region_poles = []
        requests = []
        variants = []
        for name, (area, poly) in best.items():
            if area < 4.0:
                continue
            try:
                pole = polylabel(poly, tolerance=1.0)
            except Exception:  # noqa: BLE001 - degenerate sliver
                pole = poly.representative_point()
            self.region_poles.append((pole.x, pole.y))
            texts = [(name, 10.0, 0.0)]
            if len(name) > 16:
                texts.append((_wrap(name, max(12, len(name) // 2 + 2)), 10.0, 1.0))
            texts += [(t, 8.5, pen + 5.0) for t, _, pen in list(texts)]
            x0, y0, x1, y1 = poly.bounds
            step = max(6.0, math.sqrt(max((x1 - x0) * (y1 - y0), 1.0) / 350.0))
            gx, gy = np.meshgrid(np.arange(x0 + step / 2, x1, step), np.arange(y0 + step / 2, y1, step))
            centres = np.column_stack([gx.ravel(), gy.ravel()])
            inside = shapely.contains_xy(poly, centres[:, 0], centres[:, 1]) if len(centres) else np.zeros(0, bool)
            centres = np.vstack([centres[inside], [[pole.x, pole.y]]])
            dist = shapely.distance(poly.boundary, shapely.points(centres))
            dmax = max(float(np.max(dist)), 1.0)
            cands = []
            for text, fs, pen in texts:
                w, h = self.m.size(text, fs, "bold")
                pad = _pt(self.fig, 0.25 * fs) + 1
                w, h = w + 2 * pad, h + 2 * pad
                boxes = np.column_stack([centres[:, 0] - w / 2, centres[:, 1] - h / 2,
                                         centres[:, 0] + w / 2, centres[:, 1] + h / 2])
                ok = self._inside_axes(boxes)
                geoms = shapely.box(boxes[:, 0], boxes[:, 1], boxes[:, 2], boxes[:, 3])
                frac_out = 1.0 - shapely.area(shapely.intersection(poly, geoms)) / (w * h)
                cost = (pen + 6.0 * (1.0 - dist / dmax) + 120.0 * frac_out
                        + self._box_costs(boxes, point_weight=5.0, line_weight=1.5))
                keep = ok & (frac_out < 0.2)
                cands += [Candidate(tuple(b), float(c), text, fs, None) for b, c in zip(boxes[keep], cost[keep])]
                # leader-line positions: the label beside the region, a thin line to its middle
                raw = self._around((pole.x, pole.y), w, h, (20, 45, 80, 120), 4)
                lb = np.array([b for b, _, _ in raw])
                lok = self._inside_axes(lb)
                lcost = (40.0 + pen + np.array([d for _, d, _ in raw]) / 8.0
                         + self._box_costs(lb, point_weight=5.0, line_weight=2.0))
                cands += [Candidate(tuple(b), float(c), text, fs, (pole.x, pole.y))
                          for b, c, o in zip(lb, lcost, lok) if o]
            variants.append((sum(1 for c in cands if c.anchor is None and c.cost < 40), area,
                             LabelRequest(f"region:{name}", f"regime label '{name}'", cands)))
        variants.sort(key=lambda t: (t[0], t[1]))
        requests = [r for _, _, r in variants]
        return requests

    def _line_requests(self):
        import shapely

        requests = []
        curves = {c.name: c for c in self.view.curves}
        for name, geom, pieces in self.line_geoms:
            c = curves[name]
            if geom is None:
                continue
            text = typeset(c.label.split(" (")[0])
            fs = 7.5
            w, h = self.m.size(text, fs)
            pad = _pt(self.fig, 0.15 * fs) + 1
            w, h = w + 2 * pad, h + 2 * pad
            anchors = []
            for piece in pieces:
                p = np.asarray(piece)
                keep = ((p[:, 0] > 3) & (p[:, 0] < self.w_px - 3) & (p[:, 1] > 3) & (p[:, 1] < self.h_px - 3))
                p = p[keep]
                if len(p) < 2:
                    continue
                seg = np.hypot(np.diff(p[:, 0]), np.diff(p[:, 1]))
                s = np.concatenate([[0.0], np.cumsum(seg)])
                if s[-1] < 10:
                    continue
                t = np.arange(6.0, s[-1] - 6.0, 12.0)
                ax_ = np.interp(t, s, p[:, 0])
                ay_ = np.interp(t, s, p[:, 1])
                anchors += [(x, y, abs(ti / s[-1] - 0.5)) for x, y, ti in zip(ax_, ay_, t)]
            if not anchors:
                continue
            boxes, base = [], []
            g = 3.0
            for x, y, mid in anchors:
                for bx in ((x + g, y + g, x + g + w, y + g + h), (x + g, y - g - h, x + g + w, y - g),
                           (x - g - w, y + g, x - g, y + g + h), (x - g - w, y - g - h, x - g, y - g)):
                    boxes.append(bx)
                    base.append(4.0 * mid)
            boxes = np.array(boxes)
            ok = self._inside_axes(boxes)
            own = shapely.intersects(geom, shapely.box(boxes[:, 0], boxes[:, 1], boxes[:, 2], boxes[:, 3]))
            cost = (np.array(base) + 5.0 * own
                    + self._box_costs(boxes, point_weight=5.0, line_weight=3.0, skip_line=name))
            cands = [Candidate(tuple(b), float(cst), text, fs, None) for b, cst, o in zip(boxes, cost, ok) if o]
            requests.append(LabelRequest(f"line:{name}", f"line label '{c.label.split(' (')[0]}'", cands))
        return requests

    def _count_requests(self):
        requests = []
        for (kind, edge), (n, along) in sorted(self.out_counts.items()):
            noun = kind if n != 1 else {"test points": "test point", "envelope corners": "envelope corner"}.get(
                kind, kind)
            arrow = {"left edge": "← ", "right edge": "", "top edge": "↑ ", "bottom edge": "↓ "}.get(edge, "")
            tail = " →" if edge == "right edge" else ""
            text = f"{arrow}{n} {noun} beyond the {edge}{tail}"
            fs = 8.0
            w, h = self.m.size(text, fs, style="italic")
            pad = _pt(self.fig, 0.2 * fs) + 1
            w, h = w + 2 * pad, h + 2 * pad
            inset = 22.0  # clear of the edge arrows
            cands = []
            for t in np.linspace(0.04, 0.96, 23):
                if edge in ("left edge", "right edge"):
                    cx = inset + w / 2 if edge == "left edge" else self.w_px - inset - w / 2
                    cy = t * self.h_px
                elif edge in ("top edge", "bottom edge"):
                    cx = t * self.w_px
                    cy = self.h_px - inset - h / 2 if edge == "top edge" else inset + h / 2
                else:  # a corner
                    right = "right" in edge
                    top = edge.startswith("top")
                    cx = (self.w_px - inset - w / 2) if right else inset + w / 2
                    cy = (self.h_px - inset - h / 2 - t * 0.5 * self.h_px) if top else inset + h / 2 + t * 0.5 * \
                        self.h_px
                cands.append(((cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2), abs(t - along)))
            boxes = np.array([b for b, _ in cands])
            ok = self._inside_axes(boxes)
            cost = 3.0 * np.array([d for _, d in cands]) + self._box_costs(boxes, point_weight=4.0, line_weight=1.0)
            requests.append(LabelRequest(f"count:{edge}:{kind}", f"count '{text}'",
                                         [Candidate(tuple(b), float(c), text, fs, None)
                                          for b, c, o in zip(boxes, cost, ok) if o]))
        return requests

    def _place(self):
        regions = self._region_requests()
        callout = self._callout_request()
        lines = self._line_requests()
        counts = self._count_requests()
        requests = ([callout] if callout else []) + counts + regions + lines
        obstacles = []
        if self.point_px is not None and not self.point_beyond:
            r = _pt(self.fig, 9.0) + 2
            x, y = self.point_px
            obstacles.append((x - r, y - r, x + r, y + r))
        chosen = place_labels(requests, obstacles)
        ax = self.ax
        self.dropped = []
        for req in requests:
            c = chosen.get(req.key)
            if c is None:
                self.dropped.append(req.what)
                continue
            x0, y0, x1, y1 = c.box
            centre = ((x0 + x1) / 2 / self.w_px, (y0 + y1) / 2 / self.h_px)
            kind, _, name = req.key.partition(":")
            gid = f"label:{req.key}" if kind != "callout" else "label:callout"
            if kind == "callout":
                edge = styles.DISAGREE_COLOUR if self.point_alert else styles.OPERATING_POINT_COLOUR
                t = ax.annotate(c.text, (c.anchor[0] / self.w_px, c.anchor[1] / self.h_px), xycoords="axes fraction",
                                xytext=centre, textcoords="axes fraction", fontsize=c.fontsize, ha="center",
                                va="center", zorder=9, color="black",
                                weight="bold" if self.point_alert else "normal",
                                bbox=dict(boxstyle="round,pad=0.35", facecolor="white", edgecolor=edge,
                                          linewidth=1.6 if self.point_alert else 1.0),
                                arrowprops=dict(arrowstyle="-", color=edge, linewidth=1.0, shrinkA=0, shrinkB=9))
            elif kind == "region":
                style = dict(fontsize=c.fontsize, weight="bold", color="#111111", ha="center", va="center",
                             zorder=6, multialignment="center",
                             bbox=dict(boxstyle="round,pad=0.25", facecolor="white", edgecolor="none", alpha=0.78))
                if c.anchor is None:
                    t = ax.text(*centre, c.text, transform=ax.transAxes, **style)
                else:
                    t = ax.annotate(c.text, (c.anchor[0] / self.w_px, c.anchor[1] / self.h_px),
                                    xycoords="axes fraction", xytext=centre, textcoords="axes fraction",
                                    arrowprops=dict(arrowstyle="-", color="#333333", linewidth=0.8, shrinkA=0,
                                                    shrinkB=0), **style)
            elif kind == "line":
                colour = next(cv.colour for cv in self.view.curves if cv.name == name)
                t = ax.text(*centre, c.text, transform=ax.transAxes, fontsize=c.fontsize, color=colour,
                            ha="center", va="center", zorder=5,
                            bbox=dict(boxstyle="round,pad=0.15", facecolor="white", edgecolor="none", alpha=0.85))
            else:
                t = ax.text(*centre, c.text, transform=ax.transAxes, fontsize=c.fontsize, style="italic",
                            color="#111111", ha="center", va="center", zorder=9,
                            bbox=dict(boxstyle="round,pad=0.2", facecolor="#fff8dc", edgecolor="#999999",
                                      linewidth=0.6))
            t.set_gid(gid)

    # ------------------------------------------------------------------------------- key
    def _key_sections(self):
        v = self.view
        secs = []
        regimes = [n for n in v.regime_names if any(r.name == n for r in v.regions)]
        regimes += [r.name for r in v.regions if r.name not in regimes]
        handles = []
        for n in dict.fromkeys(regimes):
            colour, hatch = v.regime_styles.get(n) or next((r.colour, r.hatch) for r in v.regions if r.name == n)
            handles.append((Patch(facecolor=colour, alpha=0.45, hatch=hatch, edgecolor=colour), _wrap(n, 48)))
        if handles:
            secs.append(("Regimes", handles, 2.4))
        for role, head, lw in (("regions", "Region boundaries (thick lines)", 2.3),
                               ("comparison", "Comparison lines (thin; not region boundaries)", 1.4)):
            hs = [(Line2D([], [], color=c.colour, linestyle=styles.mpl_linestyle(c.dash), linewidth=lw),
                   _wrap(typeset(c.label), 50)) for c in v.curves if c.role == role]
            if hs:
                secs.append((head, hs, 3.4))
        if self.bands:
            hs = [(Patch(facecolor=(0.47, 0.47, 0.47, BAND_ALPHA + 0.1), edgecolor="#777777", linewidth=0.7),
                   _wrap(BAND_KEY_TEXT, 50))]
            if any(b.role != "regions" for b in self.bands):
                hs.append((Patch(facecolor=(0.47, 0.47, 0.47, BAND_ALPHA_COMPARISON + 0.05), edgecolor="#777777",
                                 linewidth=0.6, linestyle=(0, (4, 3))), "fainter, dashed edge: band of a comparison line"))
            secs.append(("Line bands (each in its line's colour)", hs, 2.4))
        if self.any_invalid:
            secs.append(("Line parts", [(Line2D([], [], color="#444444", linestyle=(0, styles.INVALID_DASH),
                                                linewidth=2.0), "dotted, faint: outside the validity range\nof "
                                                                "the line's source")], 3.4))
        tp = [m for m in self.marks if m.get("kind") == "test point"]
        if tp:
            plat = {}
            for m in tp:
                plat.setdefault(m.get("platform") or styles.GENERIC_MARKER.label, m.get("marker", "o"))
            hs = [(Line2D([], [], linestyle="none", marker=mk, markersize=7, markerfacecolor="#bbbbbb",
                          markeredgecolor=_DARK), _wrap(p, 48)) for p, mk in plat.items()]
            secs.append(("Test points: marker = platform", hs, 2.0))
            fills = {}
            for m in tp:
                fills.setdefault(m.get("fill_key") or "no observed regime", m.get("colour", "white"))
            hs = [(Line2D([], [], linestyle="none", marker="o", markersize=7, markerfacecolor=col,
                          markeredgecolor=_DARK), _wrap(k, 48)) for k, col in fills.items()]
            if any(m.get("ring") for m in tp):
                hs.append((Line2D([], [], linestyle="none", marker="o", markersize=11, markerfacecolor="none",
                                  markeredgecolor=styles.DISAGREE_COLOUR, markeredgewidth=1.4),
                           "ring: the chart predicts another regime"))
            if any(m.get("faded") for m in tp):
                hs.append((Line2D([], [], linestyle="none", marker="o", markersize=7, markerfacecolor="#bbbbbb",
                                  markeredgecolor=_DARK, alpha=0.45),
                           "faded: not valid for a low-gravity conclusion"))
            secs.append(("Test points: fill = observed regime", hs, 2.0))
        other = {}
        for m in self.marks:
            if m.get("kind") != "test point" and m.get("key"):
                other.setdefault(m["key"], m)
        hs = [(Line2D([], [], linestyle="none", marker=m.get("marker", "o"), markersize=7,
                      markerfacecolor=m.get("colour", "white"), markeredgecolor=m.get("edge", _DARK)),
               _wrap(k, 48)) for k, m in other.items()]
        if v.point is not None:
            hs.append((Line2D([], [], marker="*", color="none", markerfacecolor=styles.OPERATING_POINT_COLOUR,
                              markeredgecolor="black", markersize=14), "operating point"))
        if self.out_counts or self.point_beyond:
            hs.append((FancyArrowPatch((0, 0), (1, 0)), "arrow at the edge: beyond the chart range"))
        if hs:
            secs.append(("Operating point" if v.point is not None and len(hs) == 1 else "Points", hs, 2.0))
        return secs

    def _draw_key(self):
        from matplotlib.legend_handler import HandlerPatch

        class _ArrowHandler(HandlerPatch):
            def create_artists(self, legend, orig, xd, yd, width, height, fontsize, trans):
                a = FancyArrowPatch((xd * 0 + 2, height / 2), (width - 2, height / 2),
                                    arrowstyle="simple,head_length=0.9,head_width=0.9,tail_width=0.35",
                                    mutation_scale=11, facecolor="#bbbbbb", edgecolor=_DARK, linewidth=0.7)
                a.set_transform(trans)
                return [a]

        self.legends = []
        for head, hs, hl in self._key_sections():
            leg = self.fig.legend([h for h, _ in hs], [lab for _, lab in hs], loc="upper left",
                                  bbox_to_anchor=(0, 0), bbox_transform=self.fig.dpi_scale_trans, fontsize=8,
                                  frameon=False, title=head, alignment="left", handlelength=hl,
                                  title_fontproperties={"weight": "bold", "size": 8.8}, borderpad=0.1,
                                  labelspacing=0.35, handler_map={FancyArrowPatch: _ArrowHandler()})
            leg.set_gid("key")
            self.legends.append(leg)

    # ------------------------------------------------------------------------------- page layout
    def _text_block(self, x, text, **kw):
        t = self.fig.text(0, 0, text, transform=self.fig.dpi_scale_trans, va="top", ha="left", **kw)
        bb = t.get_window_extent(self.m.renderer)
        return t, bb.height / self.fig.dpi, bb.width / self.fig.dpi, x

    def _fit(self, text, avail_in, fontsize, weight="normal"):
        """Wrap ``text`` (before typesetting) so that each typeset line fits ``avail_in`` inches."""
        width = max(30, int(avail_in * 72 / (fontsize * 0.5)))
        for _ in range(8):
            lines = textwrap.wrap(str(text), width, break_long_words=False) or [str(text)]
            widest = max(self.m.size(typeset(ln), fontsize, weight)[0] for ln in lines) / self.fig.dpi
            if widest <= avail_in or width <= 20:
                return [typeset(ln) for ln in lines]
            width = max(20, int(width * avail_in / widest) - 1)
        return [typeset(ln) for ln in lines]

    def _layout(self):
        fig, r = self.fig, self.m.renderer
        self._draw_key()
        placed = []   # (artist, x inch, y from top inch)
        title = fig.text(0, 0, self.title or "regime chart", fontsize=13, transform=fig.dpi_scale_trans,
                         va="top", ha="left")
        placed.append((title, _AX_L, 0.28))
        # key, stacked under each other in the right-hand column
        y = _AX_TOP - 0.05
        for leg in self.legends:
            hgt = leg.get_window_extent(r).height / fig.dpi
            placed.append((leg, _KEY_L, y))
            y += hgt + 0.14
        key_bottom = y
        below = 0.0
        for axis in (self.ax.xaxis,):
            bb = axis.get_tightbbox(r)
            if bb is not None:
                below = max(below, (self.ax.bbox.y0 - bb.y0) / fig.dpi)
        y = max(_AX_TOP + _AX_H + below, key_bottom) + 0.12
        notes = list(self.notes)
        if self.dropped:
            notes.append("Left off the chart for lack of room (see the key): " + "; ".join(self.dropped) + ".")
        for note in notes:
            for line in self._fit(note, _W - _MARGIN_L - 0.3, 8.0):
                t, hgt, _, _ = self._text_block(_MARGIN_L, line, fontsize=8.0, style="italic")
                t.set_gid("note")
                placed.append((t, _MARGIN_L, y))
                y += hgt + 0.03
        y += 0.12
        # title block
        rows = list(self.rows) + [("lowgmap", f"version {__version__}, drawn {_dt.date.today().isoformat()}")]
        fs = 7.8
        key_w = max(self.m.size(f"{k}:", fs, "bold")[0] for k, _ in rows) / fig.dpi
        val_x = max(_MARGIN_L + key_w + 0.15, 2.2)
        for k, val in rows:
            t, hgt, _, _ = self._text_block(_MARGIN_L, f"{k}:", fontsize=fs, weight="bold")
            placed.append((t, _MARGIN_L, y))
            for line in self._fit(val, _W - val_x - 0.3, fs)[:3]:
                t, hgt, _, _ = self._text_block(val_x, line, fontsize=fs)
                placed.append((t, val_x, y))
                y += max(hgt, 0.13) + 0.02
        # warnings
        warnings = list(self.view.warnings)
        if warnings:
            y += 0.1
            t, hgt, _, _ = self._text_block(_MARGIN_L, "Warnings:", fontsize=8.2, weight="bold",
                                            color=_CAUTION_COLOUR)
            placed.append((t, _MARGIN_L, y))
            y += hgt + 0.04
            shown = 0
            for w in warnings:
                lines = self._fit("• " + w, _W - _MARGIN_L - 0.5, 7.3)
                if shown + len(lines) > 14:
                    rest = len(warnings) - warnings.index(w)
                    lines = [f"• ({rest} more warning{'s' if rest > 1 else ''} in the review report)"]
                for line in lines:
                    t, hgt, _, _ = self._text_block(_MARGIN_L + 0.1, line, fontsize=7.3, color=_CAUTION_COLOUR)
                    placed.append((t, _MARGIN_L + 0.1, y))
                    y += hgt + 0.015
                shown += len(lines)
                if shown > 14:
                    break
                y += 0.03
        # caution
        y += 0.14
        caution = []
        for line in self._fit("CAUTION: " + CAUTION, _W - _MARGIN_L - 0.3, 8.0, "bold"):
            t, hgt, _, _ = self._text_block(_MARGIN_L, line, fontsize=8.0, weight="bold", color=_CAUTION_COLOUR)
            t.set_gid("caution")
            caution.append((t, hgt))
        total = y + sum(h + 0.02 for _, h in caution) + 0.25
        self.H = H = max(_H_MIN, total)
        fig.set_size_inches(_W, H)
        yc = H - 0.25 - sum(h + 0.02 for _, h in caution)
        for t, hgt in caution:
            placed.append((t, _MARGIN_L, yc))
            yc += hgt + 0.02
        self.ax.set_position(self._rect(_AX_L, _AX_TOP, _AX_W, _AX_H))
        for art, x, top in placed:
            if hasattr(art, "set_bbox_to_anchor"):
                art.set_bbox_to_anchor((x, H - top), transform=fig.dpi_scale_trans)
            else:
                art.set_position((x, H - top))
