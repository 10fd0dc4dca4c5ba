"""Every drawn line ends on a chart edge or on a crossing with another line.

A line that stops short of the chart edge, or that stops before the line it ends on, leaves a gap through
which two regions leak into each other and a reader mistakes for a physical end. This is a geometric
invariant of a correct chart (no outside source is involved): each end of each drawn run of each boundary
lies within TOL of an edge of the chart box or of another drawn line, in log-log box units.

The cases are randomised (hypothesis, derandomized, few examples): tubes with the closed-tube criteria and
V-grooves with the corner family, over random flow ranges, fluids, lengths and constants. Two mutated
samplers (one dropping its last sample, one never reaching the end of its parameter range) must fail the
check: a test that could not catch them would be worth nothing.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lowgmap.physics.case import Case, FlowRange, ModelChoice
from lowgmap.physics.chart import composition
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.geometry.sections import Circle, Groove
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.properties.wetting import Wetting

TOL = 1e-6          # box units; crossings and edge points are found by root finding to ~1e-12

# Inputs, not check values (typical properties, from memory).
WATER_AIR = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.204, 1.82e-5,
                      "typical, from memory", "typical, from memory")
OIL_AIR = FluidPair("silicone oil 5 cSt", "air", 298.15, 101325.0, 913.0, 4.565e-3, 0.0197, 1.184, 1.85e-5,
                    "typical, from memory", "typical, from memory")


def _box(chart):
    fr = chart.case.flow_range
    lx0, lx1 = math.log10(fr.ql_min), math.log10(fr.ql_max)
    ly0, ly1 = math.log10(fr.qg_min), math.log10(fr.qg_max)
    return lambda ql, qg: ((np.log10(ql) - lx0) / (lx1 - lx0), (np.log10(qg) - ly0) / (ly1 - ly0))


def _runs(b, to_uv):
    """Drawn runs of a boundary as (u, v) arrays (NaN rows separate runs)."""
    if b.ql.size == 0:
        return []
    with np.errstate(divide="ignore", invalid="ignore"):
        u, v = to_uv(b.ql, b.qg)
    ok = np.isfinite(u) & np.isfinite(v)
    out, start = [], None
    for i, good in enumerate(np.append(ok, False)):
        if good and start is None:
            start = i
        elif not good and start is not None:
            if i - start >= 2:
                out.append((u[start:i], v[start:i]))
            start = None
    return out


def _dist_to_polyline(px, py, u, v):
    du, dv = np.diff(u), np.diff(v)
    L2 = du * du + dv * dv
    with np.errstate(invalid="ignore", divide="ignore"):
        w = np.clip(((px - u[:-1]) * du + (py - v[:-1]) * dv) / np.where(L2 > 0, L2, 1.0), 0.0, 1.0)
    return float(np.min(np.hypot(u[:-1] + w * du - px, v[:-1] + w * dv - py)))


def line_end_defects(chart, tol=TOL):
    """Ends of drawn runs that lie neither on the chart edge nor on another drawn line (nor at a crossing)."""
    to_uv = _box(chart)
    runs = {b.name: _runs(b, to_uv) for b in chart.boundaries}
    cross = [to_uv(np.array([x.ql]), np.array([x.qg])) for x in chart.intersections]
    bad = []
    for name, rs in runs.items():
        for u, v in rs:
            for px, py in ((u[0], v[0]), (u[-1], v[-1])):
                edge = min(px, 1.0 - px, py, 1.0 - py)
                if abs(edge) <= tol:
                    continue
                others = [_dist_to_polyline(px, py, ou, ov) for n, ors in runs.items() if n != name for ou, ov in ors]
                at_cross = [math.hypot(px - float(cu[0]), py - float(cv[0])) for cu, cv in cross]
                if min(others + at_cross + [math.inf]) <= tol:
                    continue
                bad.append((name, float(px), float(py), float(edge), min(others + [math.inf])))
    return bad


def _tube_case(d, g, fr, fluid):
    return Case(fluid, Circle(d), Wetting(0.0), 1.0, g, fr)


def _groove_case(alpha_deg, theta_deg, depth, length, fr, fluid, consts):
    models = []
    from lowgmap.physics.models.boundary import get_model
    from lowgmap.physics.models.corner import CORNER_MODEL_NAMES
    for n in CORNER_MODEL_NAMES:
        own = {c.name for c in get_model(n).constants}
        models.append(ModelChoice.of(n, {k: v for k, v in consts.items() if k in own}))
    return Case(fluid, Groove(math.radians(alpha_deg), depth), Wetting(math.radians(theta_deg)), length, 1e-7, fr,
                models=tuple(models))


def _flow_range(lo_l, span_l, lo_g, span_g):
    return FlowRange(10.0 ** lo_l, 10.0 ** (lo_l + span_l), 10.0 ** lo_g, 10.0 ** (lo_g + span_g))


# -------------------------------------------------------------------------------------------------- samples
@pytest.mark.parametrize("name", ["wedge_separator", "cryogenic_groove", "condensate_line"])
def test_sample_charts_have_no_loose_line_ends(name):
    from lowgmap.app.files.casefile import load_case, sample_case_path

    chart = Chart.build(load_case(sample_case_path(name)).case)
    assert sum(len(_runs(b, _box(chart))) for b in chart.boundaries) >= 2
    assert line_end_defects(chart) == []


# ------------------------------------------------------------------------------------------- randomised
@settings(max_examples=12, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(d_mm=st.floats(2.0, 40.0), log_g=st.floats(-7.0, -3.0),
       lo_l=st.floats(-8.0, -5.0), span_l=st.floats(1.0, 4.0), lo_g=st.floats(-8.0, -5.0), span_g=st.floats(1.0, 4.0),
       oil=st.booleans())
def test_tube_chart_lines_end_on_edges_or_crossings(d_mm, log_g, lo_l, span_l, lo_g, span_g, oil):
    case = _tube_case(d_mm * 1e-3, 9.80665 * 10.0 ** log_g, _flow_range(lo_l, span_l, lo_g, span_g),
                      OIL_AIR if oil else WATER_AIR)
    chart = Chart.build(case)
    assert line_end_defects(chart) == []


@settings(max_examples=10, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(alpha=st.sampled_from([6.0, 15.0]), theta=st.sampled_from([0.0, 5.0]), depth_mm=st.floats(1.0, 20.0),
       length=st.floats(0.005, 0.5), lo_l=st.floats(-10.0, -6.0), span_l=st.floats(1.5, 4.5),
       lo_g=st.floats(-11.0, -6.0), span_g=st.floats(1.5, 5.0), inj=st.floats(0.0, 0.6),
       width=st.floats(0.05, 0.4), k_m=st.floats(1.0, 3.0), oil=st.booleans())
def test_corner_chart_lines_end_on_edges_or_crossings(alpha, theta, depth_mm, length, lo_l, span_l, lo_g, span_g,
                                                      inj, width, k_m, oil):
    # shapes from a small set (the open channel's Stokes tables are built once per shape), the rest random
    consts = dict(injection_position=inj, injector_width_ratio=width, merge_length_ratio=k_m)
    case = _groove_case(alpha, theta, depth_mm * 1e-3, length, _flow_range(lo_l, span_l, lo_g, span_g),
                        OIL_AIR if oil else WATER_AIR, consts)
    chart = Chart.build(case)
    assert line_end_defects(chart) == []


# -------------------------------------------------------------------------- the check catches sampler bugs
def _mutant_drop_last(real):
    def sampler(f, t0, t1, **kw):
        t, coords = real(f, t0, t1, **kw)
        return (t[:-1], tuple(c[:-1] for c in coords)) if t.size > 2 else (t, coords)
    return sampler


def _mutant_skip_last_interval(real):
    def sampler(f, t0, t1, **kw):
        n = kw.get("n_start", 33)
        return real(f, t0, t1 - (t1 - t0) / max(n - 1, 1), **kw)
    return sampler


def _mutant_drop_first(real):
    # the samplers take samples at 1e-2 .. 1e-10 of the range next to each end, so losing the very first
    # sample moves the end by 1e-10 of the range (harmless); losing the first hundredth of the range is not
    def sampler(f, t0, t1, **kw):
        t, coords = real(f, t0, t1, **kw)
        keep = t >= t0 + 1e-2 * (t1 - t0)
        return (t[keep], tuple(c[keep] for c in coords)) if keep.sum() >= 2 else (t, coords)
    return sampler


def _mutant_skip_first_interval(real):
    def sampler(f, t0, t1, **kw):
        n = kw.get("n_start", 33)
        return real(f, t0 + (t1 - t0) / max(n - 1, 1), t1, **kw)
    return sampler


@pytest.mark.parametrize("which, mutant", [
    # closed-tube lines are sampled over exactly the chart's liquid range: losing the last sample or the last
    # interval leaves the line short of the right edge
    ("tube", _mutant_drop_last), ("tube", _mutant_skip_last_interval),
    # the corner family draws parametric pieces whose last end runs past the chart box by design (losing it is
    # harmless there) while their first end can lie inside it, on the confinement line: the mirror-image bugs
    ("groove", _mutant_drop_first), ("groove", _mutant_skip_first_interval),
], ids=["tube-drops last point", "tube-skips last interval", "groove-drops first hundredth",
        "groove-skips first interval"])
def test_the_check_fails_on_a_sampler_that_loses_a_line_end(monkeypatch, which, mutant):
    fr = FlowRange(1e-8, 1e-4, 1e-9, 1e-4)
    case = _tube_case(0.01, 1e-5, fr, WATER_AIR) if which == "tube" else \
        _groove_case(15.0, 0.0, 0.004, 0.05, fr, OIL_AIR, {"injection_position": 0.3})
    assert line_end_defects(Chart.build(case)) == []
    monkeypatch.setattr(composition, "sample_line", mutant(composition.sample_line))
    assert line_end_defects(Chart.build(dataclasses.replace(case))) != []
