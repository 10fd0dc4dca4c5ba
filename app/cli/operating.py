"""Options shared by `margin`, `robust` and `uncertainty`: the chart of the case, the operating point
given with units (``--ql``/``--qg``), flow ranges and regime names.

The chart comes from :meth:`lowgmap.physics.chart.composition.Chart.build`, as in the dashboard and the
exported reports.
"""
from __future__ import annotations

from lowgmap.app.cli import common

__all__ = ["case_chart", "operating_point", "flow_range", "regime_name", "flow_text"]


def case_chart(doc):
    """The regime chart of a loaded case document."""
    from lowgmap.physics.chart.composition import Chart

    return Chart.build(doc.case)


def flow_text(q: float, unit: str) -> str:
    """A flow rate [m^3/s] in ``unit``, e.g. '3 L/min'."""
    from lowgmap.app.outputs.report import format_flow

    return format_flow(q, unit)


def operating_point(args, doc) -> tuple[float, float]:
    """Operating point from --ql/--qg (text with units), the case's point filling a missing one."""
    from lowgmap.app.files.units import UnitError, parse_flow

    op = doc.case.operating_point
    f = doc.case.fluid
    ql = op.ql if op is not None else None
    qg = op.qg if op is not None else None
    for opt, gas in (("ql", False), ("qg", True)):
        text = getattr(args, opt, None)
        if text is None:
            continue
        try:
            v = parse_flow(text, f"--{opt}", gas=gas, pressure=f.pressure, temperature=f.temperature)
        except UnitError as exc:
            raise common.CliError(str(exc)) from None
        if not v > 0:
            raise common.CliError(f"--{opt} must be a flow rate > 0, got {text!r}")
        _in_bounds(v, f"--{opt}", text)
        if opt == "ql":
            ql = v
        else:
            qg = v
    if ql is None or qg is None:
        missing = " and ".join(o for o, v in (("--ql", ql), ("--qg", qg)) if v is None)
        raise common.CliError(f"the case has no operating point: give {missing} (a flow rate with units, e.g. '3 L/min')")
    return ql, qg


def flow_range(args, opt: str, gas: bool, doc):
    """``--<opt> LOW HIGH`` as (low, high) [m^3/s]; None when not given."""
    from lowgmap.app.files.units import UnitError, parse_flow

    pair = getattr(args, opt.replace("-", "_"), None)
    if pair is None:
        return None
    f = doc.case.fluid
    try:
        lo, hi = (parse_flow(t, f"--{opt}", gas=gas, pressure=f.pressure, temperature=f.temperature) for t in pair)
    except UnitError as exc:
        raise common.CliError(str(exc)) from None
    if not (lo > 0 and hi > lo):
        raise common.CliError(f"--{opt} must be LOW HIGH with 0 < LOW < HIGH, got {pair[0]!r} {pair[1]!r}")
    _in_bounds(lo, f"--{opt}", pair[0])
    _in_bounds(hi, f"--{opt}", pair[1])
    return lo, hi


def _in_bounds(q: float, option: str, text: str) -> None:
    """A flow rate [m^3/s] within the bounds of case files (:data:`lowgmap.app.files.casefile.BOUNDS`)."""
    from lowgmap.app.files.casefile import check_bounds

    try:
        check_bounds("flow", q, option)
    except ValueError as exc:
        raise common.CliError(f"{exc} (written: {text!r})") from None


def regime_name(chart, text: str) -> str:
    """The chart's regime named ``text`` (case-insensitive); CliError listing the regimes otherwise."""
    names = list(chart.regime_names)
    if text in names:
        return text
    folded = [n for n in names if n.casefold() == text.strip().casefold()]
    if len(folded) == 1:
        return folded[0]
    known = "; ".join(f'"{n}"' for n in names) if names else "none (no boundary model applies to this case)"
    raise common.CliError(f"unknown regime {text!r}; regimes on this chart: {known}")
