"""The same case at two gravity levels side by side: a ground test beside the flight prediction.

``lowgmap chart CASE --gravity 1g0 --compare 1e-6g0 -o pair.png`` draws two panels, each the full
annotated chart of the case at one residual acceleration (the exported chart of
:func:`lowgmap.app.outputs.exports.chart_figure`: regions, lines, key, title block with its own
version and caution line), with the same orientation, axes and flow units. Test points go to the
panel of their own gravity level: a point is drawn on the panel whose residual acceleration is nearest
the point's own (|g_point - g_panel|; its ``residual_acceleration`` column, or its platform's
typical level, :func:`lowgmap.physics.studies.platforms.points_conditions`); points without any known
level are drawn on neither panel and counted in the caption. Each panel's caption states its level,
the orientation, which family of lines defines the regions (:func:`lowgmap.physics.models.tube_gravity.handover`
for closed conduits) and how many points it shows. The caution line and the version close the figure.

Each panel is drawn by the chart export and placed as a picture (at ``dpi``): the renderer of
:mod:`lowgmap.app.outputs.render` draws a whole page of its own and cannot yet draw into a given part of
another figure, so SVG and PDF pairs hold the two panels as embedded images (text in them is not
selectable). Nothing is recomputed here: each panel's numbers are those of its own study.
"""
from __future__ import annotations

import io
from dataclasses import dataclass

import numpy as np

import matplotlib

matplotlib.use("Agg")
from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.image import imread  # noqa: E402

__all__ = ["PairPanel", "GravityPair", "split_points_by_gravity", "handover_note", "gravity_pair", "pair_figure",
           "pair_bytes"]

_CAPTION_IN = 0.75     # room above each panel for its caption [inch]
_FOOTER_IN = 0.55      # room at the bottom for the caution line and the version [inch]
_TITLE_IN = 0.45       # room at the top for the figure title [inch]


@dataclass(frozen=True)
class PairPanel:
    """One panel: the case document at its gravity level, its study and the test points drawn on it.

    ``points`` is the subset of the test-point table on this panel (None without points); ``caption``
    the text above the panel; ``handover`` the hand-over sentence (closed conduits) or "".
    """

    document: object
    study: object
    points: object
    caption: str
    handover: str

    @property
    def g(self) -> float:
        """Residual acceleration of the panel [m/s^2]."""
        return float(self.document.case.g)


@dataclass(frozen=True)
class GravityPair:
    """Both panels, and how many test points had no gravity level to place them by."""

    panels: tuple[PairPanel, PairPanel]
    unplaced: int = 0


def split_points_by_gravity(points, levels) -> tuple[list[np.ndarray], np.ndarray]:
    """Which test points go to which gravity level: each to the level nearest its own, |g_point - g_level|.

    Linear distance, so that every low-gravity point (a parabolic flight at 1e-2 g0 as much as a drop
    tower) goes with the flight prediction when the other panel is a 1-g ground test, and the midpoint
    between two partial-gravity levels divides them.

    Parameters
    ----------
    points : DataFrame   test points (columns ``g_m_s2`` [m/s^2], NaN when absent, and ``platform``)
    levels : sequence of float   the panels' residual accelerations [m/s^2]

    Returns
    -------
    (masks, unplaced) : a boolean mask per level, and the mask of the points with no known level
    (neither given nor from their platform). A tie goes to the first level.

    Examples
    --------
    >>> import pandas as pd
    >>> pts = pd.DataFrame({"g_m_s2": [9.8, 1e-5, float("nan"), 0.2], "platform": ["", "", "", ""]})
    >>> masks, unplaced = split_points_by_gravity(pts, [9.80665, 9.80665e-6])
    >>> masks[0].tolist(), masks[1].tolist(), unplaced.tolist()
    ([True, False, False, False], [False, True, False, True], [False, False, True, False])
    """
    from lowgmap.physics.studies.platforms import points_conditions

    levels = [float(v) for v in levels]
    n = len(points)
    if n == 0:
        return [np.zeros(0, dtype=bool) for _ in levels], np.zeros(0, dtype=bool)
    g, _ = points_conditions(points["platform"].tolist(), points["g_m_s2"].to_numpy(float), None)
    g = np.asarray(g, dtype=float)
    known = np.isfinite(g) & (g >= 0)
    dist = np.vstack([np.abs(np.where(known, g, 0.0) - v) for v in levels])
    best = np.argmin(dist, axis=0)
    masks = [known & (best == i) for i in range(len(levels))]
    return masks, ~known


def _level_text(g: float) -> str:
    from lowgmap.physics.case import STANDARD_GRAVITY

    return f"{g / STANDARD_GRAVITY:.3g} g0 ({g:.4g} m/s²)"


def _handover(case):
    """The hand-over verdict of a closed conduit, None for an open one (or a case the rule cannot judge)."""
    if getattr(case.section, "is_open", False):
        return None
    from lowgmap.physics.models.tube_gravity import handover

    try:
        return handover(case)
    except ValueError:
        return None


def handover_note(case) -> str:
    """The hand-over sentence of a closed conduit (:func:`lowgmap.physics.models.tube_gravity.handover`: which
    family of lines defines the regions at the case's gravity level and orientation); "" for an open conduit,
    whose lines are the corner family."""
    h = _handover(case)
    return h.message if h is not None else ""


def gravity_pair(document, compare, *, points=None) -> GravityPair:
    """The two panels: ``document`` as it is and ``compare`` (the same case at the other gravity level,
    e.g. :func:`lowgmap.app.files.casefile.with_conduit`), with the test points split between them
    (:func:`split_points_by_gravity`)."""
    from lowgmap.app.outputs.report import document_study

    docs = (document, compare)
    if points is not None and len(points):
        masks, unplaced_mask = split_points_by_gravity(points, [d.case.g for d in docs])
        subsets = [points[m].reset_index(drop=True) for m in masks]
        unplaced = int(unplaced_mask.sum())
    else:
        subsets, unplaced = [None, None], 0
    panels = []
    for i, (doc, pts) in enumerate(zip(docs, subsets)):
        study = document_study(doc, test_points=pts if pts is not None and len(pts) else None)
        h = _handover(doc.case)
        message = h.message if h is not None else ""
        family = f"; {h.family} lines define the regions" if h is not None else ""
        words = ("left" if i == 0 else "right")
        caption = (f"{words.capitalize()}: residual acceleration {_level_text(doc.case.g)}, "
                   f"{doc.case.orientation.describe()}{family}")
        if points is not None:
            k = 0 if pts is None else len(pts)
            caption += (f"\n{k} test point(s) whose residual acceleration is closest to this level "
                        f"(of {len(points)})")
        panels.append(PairPanel(doc, study, pts, caption, message))
    return GravityPair((panels[0], panels[1]), unplaced)


def _panel_image(panel: PairPanel, *, axes, log_axes, with_point, dpi, bands=None) -> np.ndarray:
    from lowgmap.app.outputs.exports import chart_figure
    from lowgmap.app.outputs.render import figure_bytes

    fig = chart_figure(panel.study, axes=axes, log_axes=log_axes, with_point=with_point,
                       settings=panel.document.settings, invented=panel.document.invented, document=panel.document,
                       bands=bands)
    return imread(io.BytesIO(figure_bytes(fig, "png", dpi=dpi)), format="png")


def pair_figure(pair: GravityPair, *, axes=None, log_axes=None, with_point=True, dpi: int = 150,
                bands=None) -> Figure:
    """Both panels side by side in one figure (each panel drawn at ``dpi``), captions, title and caution line.

    ``bands``: draw the boundaries' uncertainty bands (None: where a line has an uncertain constant), as
    :func:`lowgmap.app.outputs.exports.chart_figure`.
    """
    from lowgmap.app.outputs.render import add_footer

    images = [_panel_image(p, axes=axes, log_axes=log_axes, with_point=with_point, dpi=dpi, bands=bands)
              for p in pair.panels]
    w_in = [im.shape[1] / dpi for im in images]
    h_in = max(im.shape[0] / dpi for im in images)
    width = sum(w_in)
    height = _TITLE_IN + _CAPTION_IN + h_in + _FOOTER_IN
    fig = Figure(figsize=(width, height), dpi=dpi)
    FigureCanvasAgg(fig)
    left = 0.0
    for panel, im, w in zip(pair.panels, images, w_in):
        h = im.shape[0] / dpi
        bottom = _FOOTER_IN + (h_in - h)
        ax = fig.add_axes((left / width, bottom / height, w / width, h / height))
        ax.imshow(im, interpolation="none")
        ax.set_axis_off()
        ax.set_gid(f"panel:{panel.g:.6g}")
        fig.text((left + 0.15) / width, (_FOOTER_IN + h_in + 0.08) / height, panel.caption, fontsize=11,
                 va="bottom", ha="left", gid=f"caption:{panel.g:.6g}")
        left += w
    case = pair.panels[0].document.case
    title = f"{case.title} (revision {case.revision}): the same case at two gravity levels"
    if pair.unplaced:
        title += f"; {pair.unplaced} test point(s) with no known residual acceleration are on neither chart"
    fig.text(0.15 / width, 1 - 0.12 / height, title, fontsize=13, weight="bold", va="top", ha="left", gid="title")
    add_footer(fig, fontsize=9)                     # caution line and version
    return fig


def pair_bytes(pair: GravityPair, fmt: str, *, axes=None, log_axes=None, with_point=True, dpi: int | None = None,
               bands=None) -> bytes:
    """The pair figure as PNG, SVG or PDF bytes (panels at ``dpi``, default the export resolution)."""
    from lowgmap.app.outputs.render import EXPORT_DPI, figure_bytes

    d = int(dpi or EXPORT_DPI)
    fig = pair_figure(pair, axes=axes, log_axes=log_axes, with_point=with_point, dpi=d, bands=bands)
    return figure_bytes(fig, fmt, dpi=d)
