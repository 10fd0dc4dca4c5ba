"""One case studied: its chart, the operating point's margins, an envelope check and test-point agreement.

A :class:`Study` is what every view shows for one case (the dashboard's chart and margin table, the
CLI's reports, the exported chart and review report). It is built once by :func:`run_study` and
handed to each view, so every number shown comes from one chart object and is never recomputed by
a view.

The split of work follows the cost: building the chart (property look-ups, boundary curves) is the
expensive step and happens once per case; moving the operating point (:meth:`Study.with_point`)
only computes the margins of the new point on the same chart; adding test points
(:meth:`Study.with_test_points`) only classifies them on the same chart.

All flows are volumetric at local conditions [m^3/s].
"""
from __future__ import annotations

import dataclasses
import functools
from dataclasses import dataclass

from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.chart.margins import envelope_check, margin_verdict, point_margins
from lowgmap.physics.studies.agreement import agreement as _agreement_of
from lowgmap.physics.validate import positive

__all__ = ["Study", "run_study"]


@dataclass(frozen=True, eq=False)
class Study:
    """Everything the views show for one case (immutable; build it with :func:`run_study`).

    Attributes
    ----------
    case : Case
    chart : Chart                 the chart of ``case`` (shared, never rebuilt by the methods below)
    point : (float, float) or None   the operating point (Q_L, Q_G) studied [m^3/s]
    margins : PointMargins or None   margins of ``point`` (:func:`lowgmap.physics.chart.margins.point_margins`);
                                  None without a point or when the chart has no regimes
    envelope : EnvelopeCheck or None   the operating envelope check
                                  (:func:`lowgmap.physics.chart.margins.envelope_check`)
    agreement : Agreement or None   test points against the chart
                                  (:func:`lowgmap.physics.studies.agreement.agreement`)
    bands : tuple of Band or None   model-form band of every line (computed on first use, cached)
    worst_case : WorstCaseMargins or None   nominal and worst-case margins of ``point`` over the
                                  constants' bands (computed on first use, cached)

    Notes
    -----
    ``point`` may differ from ``case.operating_point`` after :meth:`with_point`: the study follows the
    point being examined, the case keeps the point written in the case file. The envelope check
    uses the rectangle's centre as its reference point, so it does not depend on ``point``.

    The band results (:attr:`bands`, :attr:`worst_case`) are computed when a view first asks for
    them and kept on the study (and per chart by :mod:`lowgmap.physics.chart.bands`), so the CLI, the
    exports, the report and the dashboard read the same numbers. They cost little for the closed-tube
    lines and tens of seconds for the corner family (bands and worst case each).
    """

    case: object
    chart: Chart
    point: tuple | None = None
    margins: object = None
    envelope: object = None
    agreement: object = None

    @property
    def regime(self) -> str | None:
        """Regime at the operating point (None without a point or without regimes)."""
        if self.point is None or not self.chart.regime_names:
            return None
        return str(self.chart.regime_at(*self.point))

    @functools.cached_property
    def has_bands(self) -> bool:
        """True when some line of the chart has a constant with an uncertainty band of width > 0 (cheap)."""
        from lowgmap.physics.chart.bands import chart_constant_bands

        try:
            per_line = chart_constant_bands(self.chart)
        except ValueError:                       # a case band the models do not accept: no bands to show
            return False
        return any(b.high > b.low for bands in per_line.values() for b in bands)

    @functools.cached_property
    def bands(self):
        """Band of every line of the chart (:func:`lowgmap.physics.chart.bands.chart_bands`), region lines
        first; None when no line has a banded constant. Computed once, on first use."""
        if not self.has_bands:
            return None
        from lowgmap.physics.chart.bands import chart_bands

        return chart_bands(self.chart)

    @functools.cached_property
    def worst_case(self):
        """Nominal and worst-case symmetric margins of the operating point over the bands of the constants
        (:func:`lowgmap.physics.chart.bands.worst_case_margins`); None without margins or without banded
        constants. Computed once, on first use."""
        if self.margins is None or not self.has_bands:
            return None
        from lowgmap.physics.chart.bands import worst_case_margins

        return worst_case_margins(self.chart, *self.point)

    def verdict(self, required_margin: float, intended_regime: str | None = None):
        """The verdict on the operating point, in words (:func:`lowgmap.physics.chart.margins.margin_verdict`).

        ``intended_regime`` defaults to the case's own (``case.intended_regime``); None when the study has
        no point or the chart has no regimes.
        """
        if self.margins is None:
            return None
        intended = intended_regime if intended_regime is not None else (getattr(self.case, "intended_regime", "") or None)
        return margin_verdict(self.margins, required_margin, intended)

    def with_point(self, ql: float, qg: float) -> "Study":
        """The same study with the operating point moved to (``ql``, ``qg``) [m^3/s].

        Cheap: the chart, the envelope check and the agreement are reused; only the margins of the
        new point are computed.
        """
        point = (positive("ql", ql, "m^3/s"), positive("qg", qg, "m^3/s"))
        return dataclasses.replace(self, point=point, margins=_margins(self.chart, point))

    def with_test_points(self, points, *, regime_map=None, criteria=None) -> "Study":
        """The same study with ``points`` compared against its chart (``points=None`` drops them).

        ``points``, ``regime_map`` and ``criteria`` as for :func:`lowgmap.physics.studies.agreement.agreement`.
        """
        res = None if points is None else _agreement_of(self.chart, points, regime_map=regime_map,
                                                        criteria=criteria)
        return dataclasses.replace(self, agreement=res)


def _margins(chart, point):
    if point is None or not chart.regime_names:
        return None
    return point_margins(chart, *point)


def run_study(case, *, chart=None, points=None, regime_map=None, criteria=None, envelope=None) -> Study:
    """Study one case: chart, margins of its operating point, envelope check, test-point agreement.

    Parameters
    ----------
    case : Case
    chart : Chart, optional       the chart of ``case`` when it is already built (reused, not rebuilt);
                                  default: :meth:`lowgmap.physics.chart.composition.Chart.build` of ``case``
    points : table, optional      test points, compared with
                                  :func:`lowgmap.physics.studies.agreement.agreement`
    regime_map : dict, optional   ``{"file label": "chart regime"}`` for the test points
    criteria : ValidityCriteria, optional   validity thresholds for the test points
    envelope : (ql_range, qg_range), optional   the system's range of liquid and gas flow, each
                                  (low, high) [m^3/s], checked with
                                  :func:`lowgmap.physics.chart.margins.envelope_check`

    Returns
    -------
    Study

    Raises
    ------
    ValueError
        ``chart`` was built for another case, or ``envelope`` is not two (low, high) ranges.

    Notes
    -----
    The operating point is ``case.operating_point``; without one, ``point`` and ``margins`` are None
    (use :meth:`Study.with_point`). A chart without regimes (no boundary model applies) gives no margins.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> study = run_study(example_case(point=(1e-5, 1e-6)), envelope=((5e-6, 2e-5), (5e-7, 2e-6)))
    >>> study.regime, round(study.margins.symmetric_margin, 3), study.envelope.wholly_inside
    ('dispersed bubbles', 0.843, True)
    >>> moved = study.with_point(1e-5, 1e-3)                   # same chart, new margins
    >>> moved.chart is study.chart, moved.regime
    (True, 'annular (gas core)')
    >>> v = moved.verdict(0.3, "dispersed bubbles")
    >>> v.regime_status, v.margin_status
    ('NOT IN THE INTENDED REGIME', 'NOT MET')

    The bands of the lines and the worst-case margin over them are computed on first use, then kept:

    >>> wc = study.worst_case                                  # constants of the bounding lines over their bands
    >>> round(wc.worst_case, 3), wc.limiting_boundary, wc.limiting_constant, wc is study.worst_case
    (0.687, 'bubble_slug_dukler_1988', 'alpha_c', True)
    """
    if chart is None:
        chart = Chart.build(case)
    elif chart.case is not case and not _same_case(chart.case, case):
        raise ValueError("chart was built for another case: pass the chart of this case or leave chart out")
    op = getattr(case, "operating_point", None)
    point = None if op is None else (float(op.ql), float(op.qg))
    env = None
    if envelope is not None:
        try:
            ql_range, qg_range = envelope
        except (TypeError, ValueError):
            raise ValueError(f"envelope must be (ql_range, qg_range), each (low, high) in m^3/s, "
                             f"got {envelope!r}") from None
        env = envelope_check(chart, ql_range, qg_range)
    res = None if points is None else _agreement_of(chart, points, regime_map=regime_map, criteria=criteria)
    return Study(case=case, chart=chart, point=point, margins=_margins(chart, point), envelope=env,
                 agreement=res)


def _same_case(a, b) -> bool:
    try:
        return bool(a == b)
    except (TypeError, ValueError):  # a field that does not compare as a plain value
        return False
