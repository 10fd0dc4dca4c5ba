"""Tests for lowgmap.physics.geometry.sections: closed forms, corners, Concus–Finn per corner, invariants, errors."""
from __future__ import annotations

import dataclasses
import inspect
import json
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from lowgmap.physics.geometry.sections import (
    CIRCLE_OUTLINE_VERTICES,
    SECTION_KINDS,
    SECTION_QUANTITIES,
    Circle,
    Corner,
    Groove,
    Polygon,
    Rectangle,
    RegularPolygon,
    Section,
    SectionField,
    WedgeChannel,
    section_fields,
    section_label,
)
from lowgmap.physics.properties.wetting import Wetting

R = math.radians
REL = 1e-12
SQ3 = math.sqrt(3.0)

# Tolerance for the polygon inscribed radius: shapely/GEOS search stopped at 1e-10 x size.
MIC_REL = 1e-8
# The same radius compared between two placements of one polygon (rotated, scaled): GEOS's grid search can stop
# short of its tolerance for some orientations (3.8e-6 relative measured, see
# test_inscribed_radius_of_an_axis_aligned_pentagon), and each placement may stop short differently.
MIC_MOVED_REL = 1e-5


def approx(x, rel=REL, abs_=0.0):
    return pytest.approx(x, rel=rel, abs=abs_)


def same_geometry(a: Section, b: Section, rel=1e-12, mic_rel=MIC_REL):
    assert a.area == approx(b.area, rel)
    assert a.wetted_perimeter == approx(b.wetted_perimeter, rel)
    assert a.open_perimeter == approx(b.open_perimeter, rel, 1e-15)
    assert a.hydraulic_diameter == approx(b.hydraulic_diameter, rel)
    assert a.inscribed_radius == approx(b.inscribed_radius, mic_rel)
    assert sorted(c.half_angle for c in a.corners) == pytest.approx(
        sorted(c.half_angle for c in b.corners), abs=1e-12)
    assert a.is_open == b.is_open


# =============================================================================================
# Closed forms (elementary plane geometry; D_h = 4A/P as defined by Shah & London 1978)
# =============================================================================================
def test_circle_closed_forms():
    D = 0.0127
    c = Circle(D)
    assert c.area == approx(math.pi * D**2 / 4)           # closed form: pi D^2 / 4
    assert c.wetted_perimeter == approx(math.pi * D)      # closed form: pi D
    assert c.hydraulic_diameter == approx(D)              # closed form: D_h = D for a circle
    assert c.inscribed_radius == approx(D / 2)
    assert c.length_scale == approx(D)
    assert c.open_perimeter == 0.0 and not c.is_open
    assert c.corners == () and c.open_edges() == ()


def test_circle_outline_is_regular_256_gon():
    D = 2.0
    v = Circle(D).outline()
    assert v.shape == (CIRCLE_OUTLINE_VERTICES, 2) == (256, 2)
    assert np.hypot(v[:, 0], v[:, 1]) == pytest.approx(np.full(256, D / 2), rel=1e-14)
    # closed form: area of a regular N-gon inscribed in radius r is (N/2) r^2 sin(2 pi / N)
    p = Polygon(v)
    assert p.area == approx(128 * 1.0 * math.sin(2 * math.pi / 256), 1e-12)
    # closed form: its inscribed radius (apothem) is r cos(pi / N)
    assert p.inscribed_radius == approx(math.cos(math.pi / 256), MIC_REL)


def test_square_closed_forms():
    s = 0.004
    sq = RegularPolygon(4, s)
    assert sq.area == approx(s * s)                       # closed form: s^2
    assert sq.wetted_perimeter == approx(4 * s)
    assert sq.hydraulic_diameter == approx(s)             # closed form: D_h = side for a square
    assert sq.inscribed_radius == approx(s / 2)           # closed form: s/2
    assert [c.half_angle for c in sq.corners] == pytest.approx([R(45)] * 4)  # interior angle 90 deg
    same_geometry(sq, Rectangle(s, s))


@pytest.mark.parametrize("w,h", [(2.0, 1.0), (1.0, 4.0), (3e-3, 0.375e-3)])
def test_rectangle_closed_forms(w, h):
    r = Rectangle(w, h)
    assert r.area == approx(w * h)
    assert r.wetted_perimeter == approx(2 * (w + h))
    assert r.hydraulic_diameter == approx(2 * w * h / (w + h))   # closed form: 2wh/(w+h)
    assert r.length_scale == approx(r.hydraulic_diameter)
    assert r.inscribed_radius == approx(min(w, h) / 2)           # closed form: min(w, h)/2
    assert [c.half_angle_deg for c in r.corners] == pytest.approx([45.0] * 4)
    assert Polygon(r.outline()).inscribed_radius == approx(min(w, h) / 2, MIC_REL)


def test_equilateral_triangle_closed_forms():
    s = 0.003
    t = RegularPolygon(3, s)
    assert t.area == approx(SQ3 / 4 * s * s)               # closed form: sqrt(3)/4 s^2
    assert t.wetted_perimeter == approx(3 * s)
    assert t.hydraulic_diameter == approx(s / SQ3)         # closed form: D_h = s/sqrt(3)
    assert t.inscribed_radius == approx(s / (2 * SQ3))     # closed form: inradius s/(2 sqrt(3))
    assert [c.half_angle_deg for c in t.corners] == pytest.approx([30.0] * 3)  # interior angle 60 deg


def test_regular_hexagon_closed_forms():
    s = 0.002
    h = RegularPolygon(6, s)
    assert h.area == approx(3 * SQ3 / 2 * s * s)           # closed form: 3 sqrt(3)/2 s^2
    assert h.wetted_perimeter == approx(6 * s)
    assert h.hydraulic_diameter == approx(SQ3 * s)         # closed form: D_h = 2 x apothem = sqrt(3) s
    assert h.inscribed_radius == approx(SQ3 / 2 * s)       # closed form: apothem sqrt(3)/2 s
    assert h.circumradius == approx(s)                     # closed form: hexagon circumradius = side
    assert [c.half_angle_deg for c in h.corners] == pytest.approx([60.0] * 6)  # interior angle 120 deg


def test_regular_polygon_tends_to_circle():
    # limiting case: n -> infinity, D_h -> circumscribed-circle diameter
    s_of = lambda n: 2 * math.sin(math.pi / n)  # side for circumradius 1
    errs = [abs(RegularPolygon(n, s_of(n)).hydraulic_diameter - 2.0) for n in (6, 24, 96, 384)]
    assert all(a > b for a, b in zip(errs, errs[1:]))
    assert errs[-1] < 1e-4


def test_regular_polygon_outline_matches_dedicated_class():
    for n in (3, 4, 5, 6, 7, 12):
        rp = RegularPolygon(n, 0.01)
        v = rp.outline()
        assert v.shape == (n, 2)
        assert np.allclose(np.linalg.norm(np.roll(v, -1, 0) - v, axis=1), 0.01, rtol=1e-12)
        same_geometry(Polygon(v), rp, rel=1e-11)
        assert rp.as_polygon().kind == "polygon"


def test_polygon_from_square_and_triangle_vertices_equals_dedicated_classes():
    s = 0.005
    sq = Polygon([(0, 0), (s, 0), (s, s), (0, s)])
    same_geometry(sq, RegularPolygon(4, s))
    same_geometry(sq, Rectangle(s, s))
    tri = Polygon([(0, 0), (s, 0), (s / 2, s * SQ3 / 2)])
    same_geometry(tri, RegularPolygon(3, s))
    assert tri.inscribed_radius == approx(s / (2 * SQ3), MIC_REL)   # closed form: s/(2 sqrt(3))


# ---- open sections --------------------------------------------------------------------------
@pytest.mark.parametrize("alpha_deg", [7.9, 30.0, 45.0, 70.0])
def test_groove_closed_forms(alpha_deg):
    a, d = R(alpha_deg), 0.002
    g = Groove(a, d)
    # closed forms of an isosceles triangle with apex angle 2a and height d
    assert g.area == approx(d * d * math.tan(a))
    assert g.wetted_perimeter == approx(2 * d / math.cos(a))      # walls only
    assert g.open_perimeter == approx(2 * d * math.tan(a))        # the free top side
    assert g.hydraulic_diameter == approx(2 * d * math.sin(a))    # 4A / P_wall
    assert g.inscribed_radius == approx(d * math.sin(a) / (1 + math.sin(a)))  # r = A / semi-perimeter
    assert g.inscribed_radius == approx(g.area / ((g.wetted_perimeter + g.open_perimeter) / 2))
    assert g.length_scale == d
    assert g.is_open and g.open_edges() == (1,)
    assert g.corners == (Corner(0, (0.0, 0.0), a),)
    same_geometry(Polygon(g.outline(), open_edges=[1]), g, rel=1e-11)
    assert Polygon(g.outline(), open_edges=[1]).length_scale == approx(d)  # depth normal to the open side


@pytest.mark.parametrize("alpha_deg", [10.0, 30.0, 60.0])
def test_wedge_channel_closed_forms_and_equivalence_with_groove(alpha_deg):
    a, L = R(alpha_deg), 0.01
    w = WedgeChannel(a, L)
    assert w.area == approx(0.5 * L * L * math.sin(2 * a))    # closed form: (1/2) L^2 sin(2a)
    assert w.wetted_perimeter == approx(2 * L)
    assert w.open_perimeter == approx(2 * L * math.sin(a))
    assert w.hydraulic_diameter == approx(4 * w.area / (2 * L))
    assert w.depth == approx(L * math.cos(a))
    assert w.length_scale == L
    assert w.corners[0].half_angle == a and len(w.corners) == 1
    g = Groove(a, L * math.cos(a))       # same triangle, given by depth
    same_geometry(w, g, rel=1e-12, mic_rel=1e-12)
    assert w.kind == "wedge_channel" and g.kind == "groove" and w != g


def test_open_polygon_rectangular_groove():
    a, b = 0.003, 0.002   # width a, depth b, open across the top (edge 2)
    p = Polygon([(0, 0), (a, 0), (a, b), (0, b)], open_edges=[2])
    assert p.is_open and p.open_edges() == (2,)
    assert p.wetted_perimeter == approx(a + 2 * b) and p.open_perimeter == approx(a)
    assert p.hydraulic_diameter == approx(4 * a * b / (a + 2 * b))
    assert p.length_scale == approx(b)                    # depth normal to the open side
    assert [c.index for c in p.corners] == [0, 1]         # only the two bottom wall-wall corners
    assert [c.half_angle_deg for c in p.corners] == pytest.approx([45.0, 45.0])


def test_open_polygon_parallel_plates():
    a, b = 0.001, 0.01   # gap a, plate breadth b; both ends open
    p = Polygon([(0, 0), (b, 0), (b, a), (0, a)], open_edges=[1, 3])
    assert p.wetted_perimeter == approx(2 * b) and p.open_perimeter == approx(2 * a)
    assert p.hydraulic_diameter == approx(2 * a)          # closed form: D_h = 2 x gap (walls only)
    assert p.length_scale == approx(2 * a)                # more than one open edge: D_h
    assert p.corners == ()                                # every vertex touches an open side
    assert p.inscribed_radius == approx(a / 2, MIC_REL)


# ---- non-convex polygon -----------------------------------------------------------------------
L_SHAPE = [(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)]


def test_l_shape_inscribed_radius_and_corners():
    p = Polygon(L_SHAPE)
    assert p.area == approx(3.0)
    # closed form (geometry, derived here) [calc]: the circle touching x=0, y=0 and the reflex vertex
    # (1, 1): centre (r, r), sqrt(2)(1 - r) = r  =>  r = 2 - sqrt(2)
    assert p.inscribed_radius == approx(2 - math.sqrt(2), MIC_REL)
    # the reflex vertex 3 (interior angle 270 deg) is not a corner; the other five are 90 deg
    assert [c.index for c in p.corners] == [0, 1, 2, 4, 5]
    assert p.interior_angles[3] == approx(1.5 * math.pi)
    assert [c.half_angle_deg for c in p.corners] == pytest.approx([45.0] * 5)


def test_straight_vertex_is_not_a_corner():
    p = Polygon([(0, 0), (1, 0), (2, 0), (2, 1), (0, 1)])    # vertex 1 lies on a straight wall
    assert [c.index for c in p.corners] == [0, 2, 3, 4]
    assert p.area == approx(2.0)


# =============================================================================================
# Vertex order, normalisation, serialisation
# =============================================================================================
def test_clockwise_input_is_normalised_and_open_edges_renumbered():
    ccw = Polygon([(0, 0), (3, 0), (3, 2), (0, 2)], open_edges=[2])         # top open
    cw = Polygon([(0, 0), (0, 2), (3, 2), (3, 0)], open_edges=[1])          # same top edge, cw
    assert cw == ccw
    assert cw.vertices[0] == (0.0, 0.0)
    assert cw.open_edges() == (2,)
    assert cw.area > 0


def test_to_dict_from_dict_round_trip_all_kinds():
    examples = [Circle(0.01), Rectangle(0.002, 0.001), RegularPolygon(6, 1e-3), Groove(R(20), 0.004),
                WedgeChannel(R(15), 0.02), Polygon(L_SHAPE), Polygon(L_SHAPE, open_edges=(1, 2))]
    assert {e.kind for e in examples} == set(SECTION_KINDS)
    for e in examples:
        d = e.to_dict()
        assert d["kind"] == e.kind
        back = Section.from_dict(json.loads(json.dumps(d)))
        assert back == e and type(back) is type(e) and hash(back) == hash(e)
        assert type(e).from_dict(d) == e
    assert Groove(R(20), 0.004).to_dict() == {"kind": "groove", "half_angle": R(20), "depth": 0.004}
    assert RegularPolygon(6.0, 1e-3).to_dict()["n_sides"] == 6


def test_describe_is_json_ready_with_units():
    d = Groove(R(30), 0.002).describe()
    json.dumps(d)
    for key in ("area_m2", "wetted_perimeter_m", "open_perimeter_m", "hydraulic_diameter_m",
                "inscribed_radius_m", "length_scale_m"):
        assert isinstance(d[key], float)
    assert d["kind"] == "groove" and d["is_open"] is True and d["open_edges"] == [1]
    assert d["length_scale_name"] == "depth"
    names = {Circle(1.0): "diameter", Rectangle(1.0, 2.0): "hydraulic diameter",
             WedgeChannel(R(10), 1.0): "wall length", Polygon(L_SHAPE): "hydraulic diameter",
             Polygon(L_SHAPE, open_edges=[0]): "depth normal to the open side",
             Polygon(L_SHAPE, open_edges=[0, 2]): "hydraulic diameter"}
    assert {k: k.length_scale_name for k in names} == names
    assert d["corners"][0]["half_angle_deg"] == pytest.approx(30.0)
    assert d["parameters"] == {"kind": "groove", "half_angle": R(30), "depth": 0.002}


def test_sections_are_frozen_and_hashable():
    c = Circle(0.01)
    with pytest.raises(dataclasses.FrozenInstanceError):
        c.diameter = 0.02
    assert {Circle(0.01): 1}[Circle(0.01)] == 1
    p = Polygon(L_SHAPE)
    assert dataclasses.replace(p, open_edge_indices=(0,)).open_edges() == (0,)


# =============================================================================================
# Concus–Finn per corner
# =============================================================================================
@pytest.mark.parametrize("section,alpha_deg", [
    (RegularPolygon(3, 1e-3), 30.0), (RegularPolygon(4, 1e-3), 45.0), (RegularPolygon(6, 1e-3), 60.0),
    (Rectangle(2e-3, 1e-3), 45.0), (Groove(R(7.9), 1e-3), 7.9), (WedgeChannel(R(20), 1e-2), 20.0),
])
def test_concus_finn_per_corner(section, alpha_deg):
    # Concus & Finn (1969), doi:10.1073/pnas.63.2.292: a corner wicks iff theta + alpha < 90 deg
    crit = 90.0 - alpha_deg
    below = Wetting(R(crit - 0.2)).corners_that_wick(section)
    above = Wetting(R(crit + 0.2)).corners_that_wick(section)
    assert below and all(w for _, _, w in below)
    assert not any(w for _, _, w in above)
    assert [i for i, _, _ in below] == [c.index for c in section.corners]
    assert [a for _, a, _ in below] == pytest.approx([R(alpha_deg)] * len(below))


def test_concus_finn_groove_7_9_deg():
    # [calc] from the Concus & Finn (1969) condition theta + alpha < 90 deg (PNAS 63(2):292-299):
    # a 7.9 deg half-angle wicks for theta < 82.1 deg
    g = Groove(R(7.9), 0.001)
    assert Wetting(R(82.0)).corners_that_wick(g) == [(0, R(7.9), True)]
    assert Wetting(R(82.2)).corners_that_wick(g) == [(0, R(7.9), False)]


def test_concus_finn_mixed_polygon_corners():
    # right triangle 30-60-90: corners of half-angle 15, 30 and 45 deg; theta = 50 deg -> only the
    # 15 and 30 deg corners wick (Concus & Finn 1969)
    p = Polygon([(0, 0), (SQ3, 0), (0, 1)])
    halves = sorted(c.half_angle_deg for c in p.corners)
    assert halves == pytest.approx([15.0, 30.0, 45.0])
    res = {round(math.degrees(a), 6): w for _, a, w in Wetting(R(50)).corners_that_wick(p)}
    assert res == {15.0: True, 30.0: True, 45.0: False}
    assert Wetting(R(30)).corners_that_wick(Circle(0.01)) == []


# =============================================================================================
# Property-based invariants
# =============================================================================================
int_pts = st.lists(st.tuples(st.integers(-40, 40), st.integers(-40, 40)), min_size=3, max_size=14)


def convex_hull_vertices(points):
    import shapely

    hull = shapely.MultiPoint(points).convex_hull
    assume(hull.geom_type == "Polygon" and hull.area >= 1.0)
    return np.asarray(hull.exterior.coords)[:-1]


def rotate(v, ang, shift=(0.0, 0.0)):
    c, s = math.cos(ang), math.sin(ang)
    return v @ np.array([[c, s], [-s, c]]) + np.asarray(shift)


COMMON = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])


def test_inscribed_radius_of_an_axis_aligned_pentagon():
    # closed form: the pentagon (-3,-2), (0,-2), (1,-1), (0,0), (-1,0) mm lies between y = -2 and y = 0 mm, and a
    # circle of radius 1 mm centred at (x0, -1 mm) clears its slanted sides for x0 in [sqrt(2) - 2, 1 - sqrt(2)] mm:
    # r_i = 1 mm. GEOS's search (shapely.maximum_inscribed_circle) returns a circle that fits (a lower bound) but
    # stops 3.8e-6 short here for the axis-aligned outline (rotated by 1 rad it is exact to 1e-12); found by the
    # placement-invariance property below. Catches a radius taken for a diameter and a bound that exceeds the truth.
    p = Polygon([(-0.003, -0.002), (0.0, -0.002), (0.001, -0.001), (0.0, 0.0), (-0.001, 0.0)])
    assert p.inscribed_radius <= 1e-3 * (1 + 1e-12)
    assert p.inscribed_radius == approx(1e-3, MIC_MOVED_REL)


@COMMON
@given(int_pts, st.floats(0.0, 2 * math.pi), st.floats(-50, 50), st.floats(-50, 50),
       st.floats(1e-4, 1e3))
def test_convex_polygon_invariants(points, ang, dx, dy, s):
    v = convex_hull_vertices(points) * 1e-3
    p = Polygon(v)
    n = len(p.vertices)
    # rigid motion: rotation + translation
    q = Polygon(rotate(v, ang, (dx * 1e-3, dy * 1e-3)))
    same_geometry(q, p, rel=1e-9, mic_rel=MIC_MOVED_REL)
    # vertex order reversed (clockwise input)
    r = Polygon(v[::-1])
    same_geometry(r, p, rel=1e-12)
    assert r.area > 0
    # scaling by s: A ~ s^2, P ~ s, D_h ~ s, r_i ~ s, angles unchanged
    k = Polygon(v * s)
    assert k.area == approx(p.area * s * s, 1e-12)
    assert k.wetted_perimeter == approx(p.wetted_perimeter * s, 1e-12)
    assert k.hydraulic_diameter == approx(p.hydraulic_diameter * s, 1e-12)
    assert k.inscribed_radius == approx(p.inscribed_radius * s, MIC_MOVED_REL)
    # an inscribed disc fits inside: pi r^2 <= A
    assert p.inscribed_radius <= math.sqrt(p.area / math.pi) * (1 + 1e-12)
    # interior angles of a convex n-gon sum to (n - 2) pi, and every vertex is a corner
    assert float(np.sum(p.interior_angles)) == approx((n - 2) * math.pi, 1e-12)
    assert len(p.corners) == n
    assert sum(2 * c.half_angle for c in p.corners) == approx((n - 2) * math.pi, 1e-12)
    assert all(0 < c.half_angle < math.pi / 2 for c in p.corners)
    # serialisation round trip
    assert Section.from_dict(p.to_dict()) == p
    assert Section.from_dict(json.loads(json.dumps(p.to_dict()))) == p


star = st.lists(st.integers(0, 71), min_size=3, max_size=20, unique=True)


@COMMON
@given(star, st.data(), st.floats(0.0, 2 * math.pi))
def test_star_shaped_polygon_invariants(angle_idx, data, rot):
    idx = sorted(angle_idx)
    gaps = np.diff(idx + [idx[0] + 72])
    assume(gaps.max() < 36)                      # every gap < 180 deg: the origin is inside
    radii = data.draw(st.lists(st.integers(2, 10), min_size=len(idx), max_size=len(idx)))
    t = np.radians(np.array(idx) * 5.0)
    v = np.column_stack([np.cos(t), np.sin(t)]) * (np.array(radii)[:, None] / 10.0)
    p = Polygon(v)
    n = len(v)
    assert p.area > 0
    # interior angles of any simple n-gon (reflex ones included) sum to (n - 2) pi
    assert float(np.sum(p.interior_angles)) == approx((n - 2) * math.pi, 1e-12)
    assert all(c.half_angle < math.pi / 2 for c in p.corners)
    assert p.inscribed_radius <= math.sqrt(p.area / math.pi) * (1 + 1e-12)
    same_geometry(Polygon(rotate(v, rot)), p, rel=1e-9, mic_rel=MIC_MOVED_REL)
    assert Section.from_dict(p.to_dict()) == p


@settings(max_examples=40, deadline=None)
@given(st.sampled_from(["circle", "rectangle", "regular_polygon", "groove", "wedge_channel"]),
       st.floats(1e-5, 1.0), st.floats(1e-5, 1.0), st.integers(3, 12), st.floats(0.5, 89.5))
def test_parametric_sections_round_trip_and_polygon_agreement(kind, a, b, n, alpha_deg):
    sec = {
        "circle": lambda: Circle(a),
        "rectangle": lambda: Rectangle(a, b),
        "regular_polygon": lambda: RegularPolygon(n, a),
        "groove": lambda: Groove(R(alpha_deg), a),
        "wedge_channel": lambda: WedgeChannel(R(alpha_deg), a),
    }[kind]()
    assert Section.from_dict(json.loads(json.dumps(sec.to_dict()))) == sec
    assert sec.hydraulic_diameter == approx(4 * sec.area / sec.wetted_perimeter, 1e-12)
    assert sec.inscribed_radius <= math.sqrt(sec.area / math.pi) * (1 + 1e-12)
    json.dumps(sec.describe())
    if kind != "circle":
        same_geometry(sec.as_polygon(), sec, rel=1e-9, mic_rel=MIC_REL)


# =============================================================================================
# Errors
# =============================================================================================
@pytest.mark.parametrize("make,field", [
    (lambda v: Circle(v), "circle.diameter"),
    (lambda v: Rectangle(v, 1.0), "rectangle.width"),
    (lambda v: Rectangle(1.0, v), "rectangle.height"),
    (lambda v: RegularPolygon(4, v), "regular_polygon.side"),
    (lambda v: Groove(R(30), v), "groove.depth"),
    (lambda v: WedgeChannel(R(30), v), "wedge_channel.wall_length"),
])
@pytest.mark.parametrize("value", [0.0, -1e-3])
def test_non_positive_sizes_rejected(make, field, value):
    with pytest.raises(ValueError, match=rf"{field} must be > 0 \[m\], got {value:g}"):
        make(value)


@pytest.mark.parametrize("value", [math.nan, math.inf])
def test_non_finite_size_rejected(value):
    with pytest.raises(ValueError, match="circle.diameter must be a finite number"):
        Circle(value)
    with pytest.raises(TypeError, match="rectangle.width must be a number"):
        Rectangle("wide", 1.0)


@pytest.mark.parametrize("cls", [Groove, WedgeChannel])
@pytest.mark.parametrize("deg", [0.0, 90.0, 95.0, -5.0])
def test_half_angle_outside_0_90_rejected(cls, deg):
    with pytest.raises(ValueError, match=rf"{cls.kind}.half_angle must be within \(0, 90\) deg, got {deg:g} deg"):
        cls(R(deg), 1e-3)


@pytest.mark.parametrize("n", [2, 0, -3, 3.5, True, "4", None])
def test_bad_n_sides_rejected(n):
    with pytest.raises(ValueError, match=r"regular_polygon.n_sides must be an integer >= 3, got"):
        RegularPolygon(n, 1e-3)


def test_polygon_too_few_vertices():
    with pytest.raises(ValueError, match="polygon.vertices must have at least 3 vertices, got 2"):
        Polygon([(0, 0), (1, 0)])


@pytest.mark.parametrize("verts", [[(0, 0, 0), (1, 0, 0), (0, 1, 0)], [(0, 0), (1, 0), (0, 1, 2)], "abc"])
def test_polygon_bad_shape(verts):
    with pytest.raises(ValueError, match="polygon.vertices must be a sequence of"):
        Polygon(verts)


def test_polygon_non_finite_vertex():
    with pytest.raises(ValueError, match="polygon.vertices must be finite numbers .* vertex 1"):
        Polygon([(0, 0), (math.nan, 0), (0, 1)])


def test_polygon_coincident_points():
    with pytest.raises(ValueError, match="vertex 2 .* coincides with vertex 0"):
        Polygon([(0, 0), (1, 0), (0, 0), (0, 1)])
    with pytest.raises(ValueError, match="vertex 3 .* coincides with vertex 0 .*do not repeat the first vertex"):
        Polygon([(0, 0), (1, 0), (0, 1), (0, 0)])      # closed ring given explicitly


def test_polygon_collinear_zero_area():
    with pytest.raises(ValueError, match=r"polygon.vertices must enclose an area > 0 m\^2.*collinear"):
        Polygon([(0, 0), (1, 1), (3, 3)])
    with pytest.raises(ValueError, match="zero area"):
        Polygon([(0, 0), (1, 0), (2, 0), (5, 0)])


def test_polygon_self_intersecting_names_edges():
    # bow-tie: edge 1 (1,0)->(0,1) and edge 3 (1,1)->(0,0) cross at (0.5, 0.5)
    with pytest.raises(ValueError, match=r"edges 1 and 3 cross at \(0.5, 0.5\)"):
        Polygon([(0, 0), (1, 0), (0, 1), (1, 1)])
    # six vertices: edge 3 (1,2)->(1,-1) cuts edge 0 (0,0)->(2,0) at (1, 0)
    with pytest.raises(ValueError, match=r"edges 0 and 3 cross at \(1, 0\)"):
        Polygon([(0, 0), (2, 0), (2, 2), (1, 2), (1, -1), (0, -1)])


def test_polygon_touching_and_folding_back():
    with pytest.raises(ValueError, match=r"edges 0 and 2 touch at \(1, 0\)"):
        Polygon([(0, 0), (2, 0), (2, 2), (1, 0), (0, 2)])       # vertex 3 lies on edge 0
    with pytest.raises(ValueError, match="edges 0 and 1 overlap .*doubles back at vertex 1"):
        Polygon([(0, 0), (2, 0), (1, 0), (1, 1)])
    # edge 4 (2,0)->(1,0) runs back along edge 0; the first contact found is edge 3 ending on edge 0
    with pytest.raises(ValueError, match=r"edges 0 and 3 touch at \(2, 0\)"):
        Polygon([(0, 0), (3, 0), (3, 1), (2, 1), (2, 0), (1, 0), (1, 1), (0, 1)])


@pytest.mark.parametrize("edges,msg", [
    ([5], r"within \[0, 3\], got 5"), ([-1], r"within \[0, 3\], got -1"),
    ([1, 1], "edge 1 twice"), ([0, 1, 2, 3], "at least one wall edge"), ([1.5], "integer edge indices"),
    ([True], "integer edge indices"),
])
def test_polygon_bad_open_edges(edges, msg):
    with pytest.raises(ValueError, match="polygon.open_edges .*" + msg):
        Polygon([(0, 0), (1, 0), (1, 1), (0, 1)], open_edges=edges)


@pytest.mark.parametrize("d,msg", [
    ({"diameter": 0.01}, "section.kind is missing"),
    ({"kind": "ellipse"}, "section.kind must be one of circle, groove, polygon, rectangle, regular_polygon, "
                          "wedge_channel, got 'ellipse'"),
    ({"kind": "rectangle", "width": 1.0}, r"section \(rectangle\) is missing parameter\(s\) 'height'"),
    ({"kind": "circle", "diameter": 1.0, "radius": 0.5}, r"unknown parameter\(s\) 'radius'; allowed: diameter"),
    ({"kind": "polygon"}, r"section \(polygon\) is missing parameter\(s\) 'vertices'"),
    ({"kind": "groove", "half_angle": 2.0, "depth": 1.0}, r"groove.half_angle must be within \(0, 90\) deg"),
])
def test_from_dict_errors(d, msg):
    with pytest.raises(ValueError, match=msg):
        Section.from_dict(d)


def test_from_dict_wrong_kind_for_class_and_not_a_mapping():
    with pytest.raises(ValueError, match="section.kind must be 'circle' for Circle, got 'rectangle'"):
        Circle.from_dict({"kind": "rectangle", "width": 1.0, "height": 1.0})
    with pytest.raises(TypeError, match="section must be a mapping"):
        Section.from_dict([("kind", "circle")])


# =============================================================================================
# One table of section kinds (section_fields / section_label): it must agree with the classes
# =============================================================================================
#: one valid value per quantity, to build every kind from its table alone (common practice, no source)
EXAMPLE_VALUE = {"length": 0.01, "angle": R(30), "count": 4, "vertices": [[0.0, 0.0], [1e-3, 0.0], [0.0, 1e-3]]}


def from_table(kind):
    return {f.name: EXAMPLE_VALUE[f.quantity] for f in section_fields(kind) if f.required}


def constructor_parameters(cls):
    params = inspect.signature(cls).parameters.values()
    return ({p.name for p in params}, {p.name for p in params if p.default is inspect.Parameter.empty})


@pytest.mark.parametrize("kind", sorted(SECTION_KINDS))
def test_section_table_agrees_with_the_constructor(kind):
    cls = SECTION_KINDS[kind]
    table = section_fields(kind)
    names, required = constructor_parameters(cls)
    assert {f.name for f in table if f.required} == required          # required both ways
    assert {f.name for f in table} <= names                           # every table field can be passed
    assert all(isinstance(f, SectionField) and f.quantity in SECTION_QUANTITIES for f in table)
    assert all(f.label and f.label == f.label.strip() and "_" not in f.label for f in table)
    for f in table:
        if not f.required:                                            # the table's default is the constructor's
            assert inspect.signature(cls).parameters[f.name].default == f.default


@pytest.mark.parametrize("kind", sorted(SECTION_KINDS))
def test_to_dict_and_from_dict_use_the_table_names(kind):
    sec = Section.from_dict({"kind": kind, **from_table(kind)})       # the table alone builds the section
    assert type(sec) is SECTION_KINDS[kind]
    d = sec.to_dict()
    assert set(d) - {"kind"} == {f.name for f in section_fields(kind)}
    assert Section.from_dict(d) == sec


@pytest.mark.parametrize("kind", sorted(SECTION_KINDS))
def test_table_quantities_match_what_the_constructor_checks(kind):
    # a negative length and an angle of 95 deg are refused, and the message names the field
    base = from_table(kind)
    for f in section_fields(kind):
        bad = {"length": -1.0, "angle": R(95), "count": 2}.get(f.quantity)
        if bad is None:
            continue
        with pytest.raises(ValueError, match=f"{kind}.{f.name}"):
            Section.from_dict({"kind": kind, **base, f.name: bad})


def test_section_labels_are_plain_and_distinct():
    labels = [section_label(k) for k in SECTION_KINDS]
    assert len(set(labels)) == len(labels) and all(labels)
    assert section_label("circle") == "circular tube" and section_label("groove") == "V-groove (open)"
    assert [f.label for f in section_fields("groove")] == ["corner half-angle", "depth"]


def test_section_table_errors():
    with pytest.raises(ValueError, match="section kind must be one of circle, .*got 'ellipse'"):
        section_fields("ellipse")
    with pytest.raises(ValueError, match="section kind must be one of"):
        section_label(None)
