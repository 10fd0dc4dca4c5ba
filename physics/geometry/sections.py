r"""Conduit cross-sections: areas, perimeters, hydraulic diameter, inscribed circle, liquid-holding corners.

Every section is a small frozen dataclass in SI units (lengths in m, angles in rad). Closed sections
(:class:`Circle`, :class:`Rectangle`, :class:`RegularPolygon`, closed :class:`Polygon`) are bounded by
wall all round. Open sections (:class:`Groove`, :class:`WedgeChannel`, :class:`Polygon` with
``open_edges``) have one or more sides that are not wall: the liquid there is bounded by a free surface
pinned at the wall edges.

Conventions shared by all kinds
-------------------------------
* ``outline()`` lists the vertices counter-clockwise; edge ``k`` joins vertex ``k`` to vertex ``k+1``
  (the last edge closes back to vertex 0). ``open_edges()`` gives the indices of the open edges.
* ``wetted_perimeter`` counts wall only; the open side is reported separately as ``open_perimeter``.
* ``hydraulic_diameter`` is :math:`4A/P_\mathrm{wall}` for every kind, open or closed.
* ``corners`` lists only the convex interior corners (interior angle < 180 deg) formed by two wall
  edges: those are the corners that can hold a liquid filament (Concus–Finn). Reflex vertices
  (interior angle > 180 deg), straight vertices (= 180 deg) and the edges where a wall meets an open
  side are not corners.
* ``length_scale`` is the length used in Bond numbers: see each class.
* :func:`pinning_edges` lists the other liquid-holding vertices of an open section: each end of an
  open edge where a wall meets the open side, with the angle between them inside the section (a free
  surface pinned there can curve into the liquid only while that angle exceeds the contact angle).

One table of section kinds
--------------------------
Each class states its defining parameters once, as dataclass field metadata: the quantity
(length, angle, count, vertices, edges) and a label in plain words. :func:`section_fields` reads
that table for a kind and :func:`section_label` gives the kind's name in words; the case-file
checker, the dashboard inputs and :meth:`Section.from_dict` all read the same table.
"""
from __future__ import annotations

import math
from abc import ABC, abstractmethod
from dataclasses import MISSING, dataclass, field, fields
from functools import cached_property
from typing import Any, ClassVar, Mapping

import numpy as np

from lowgmap.physics.validate import angle_deg_in_range, finite, positive

__all__ = [
    "Corner",
    "Section",
    "Circle",
    "Rectangle",
    "RegularPolygon",
    "Groove",
    "WedgeChannel",
    "Polygon",
    "SECTION_KINDS",
    "CIRCLE_OUTLINE_VERTICES",
    "SectionField",
    "SECTION_QUANTITIES",
    "section_fields",
    "section_label",
    "PinningEdge",
    "pinning_edges",
]

#: Number of vertices of the polygon that stands for a circle in :meth:`Circle.outline`.
CIRCLE_OUTLINE_VERTICES = 256

#: Relative tolerance for geometric predicates (coincident points, collinearity), scaled by the
#: polygon's bounding-box diagonal.
_REL_TOL = 1e-12

#: Relative tolerance handed to the maximum-inscribed-circle search (times the bounding-box size).
_MIC_REL_TOL = 1e-10

#: Registry of section kinds by their ``kind`` name (filled as the classes are defined).
SECTION_KINDS: dict[str, type["Section"]] = {}


#: What a section parameter is, in SI: a length [m], an angle [rad], a whole number, a list of
#: (x, y) vertices [m], or a list of edge indices.
SECTION_QUANTITIES = ("length", "angle", "count", "vertices", "edges")


def _g(x: float) -> str:
    return f"{x:.6g}"


@dataclass(frozen=True)
class SectionField:
    """One defining parameter of a section kind, as case files and inputs name it.

    Parameters
    ----------
    name : str        parameter name (case-file key, :meth:`Section.to_dict` key, constructor argument)
    quantity : str    one of :data:`SECTION_QUANTITIES`: "length" [m], "angle" [rad], "count"
                      (whole number), "vertices" (list of (x, y) [m]), "edges" (list of edge indices)
    label : str       plain words for people, e.g. "corner half-angle"
    required : bool   True when the section cannot be built without it
    default : object  value used when it is left out (None for a required field)
    """

    name: str
    quantity: str
    label: str
    required: bool = True
    default: Any = None


def _param(quantity: str, label: str, *, name: str | None = None, **kwargs):
    """A dataclass field carrying its :class:`SectionField` metadata (``name`` when the parameter
    differs from the attribute, as for :attr:`Polygon.open_edge_indices`)."""
    if quantity not in SECTION_QUANTITIES:
        raise ValueError(f"quantity must be one of {', '.join(SECTION_QUANTITIES)}, got {quantity!r}")
    meta = {"quantity": quantity, "label": label}
    if name is not None:
        meta["name"] = name
    return field(metadata=meta, **kwargs)


def section_fields(kind: str) -> tuple[SectionField, ...]:
    """Defining parameters of a section kind, in constructor order.

    Parameters
    ----------
    kind : str   a key of :data:`SECTION_KINDS` ("circle", "rectangle", "regular_polygon",
                 "groove", "wedge_channel", "polygon")

    Returns
    -------
    tuple of SectionField

    Raises
    ------
    ValueError   unknown kind (the message lists the known ones)

    Examples
    --------
    >>> [(f.name, f.quantity, f.label) for f in section_fields("groove")]
    [('half_angle', 'angle', 'corner half-angle'), ('depth', 'length', 'depth')]
    >>> [(f.name, f.required, f.default) for f in section_fields("polygon")]
    [('vertices', True, None), ('open_edges', False, ())]
    """
    return _fields_of(_kind_class(kind))


def section_label(kind: str) -> str:
    """Name of a section kind in plain words, e.g. "circular tube" or "V-groove (open)".

    >>> section_label("groove"), section_label("circle")
    ('V-groove (open)', 'circular tube')
    """
    return _kind_class(kind).label


def _kind_class(kind: str) -> type["Section"]:
    if not isinstance(kind, str) or kind not in SECTION_KINDS:
        raise ValueError(f"section kind must be one of {', '.join(SECTION_KINDS)}, got {kind!r}")
    return SECTION_KINDS[kind]


def _fields_of(cls) -> tuple[SectionField, ...]:
    out = []
    for f in fields(cls):
        if "quantity" not in f.metadata:
            raise TypeError(f"{cls.__name__}.{f.name} has no section-field metadata (use _param)")
        default: Any = None
        if f.default is not MISSING:
            default = f.default
        elif callable(f.default_factory):
            default = f.default_factory()
        required = f.default is MISSING and f.default_factory is MISSING
        out.append(SectionField(f.metadata.get("name", f.name), f.metadata["quantity"], f.metadata["label"],
                                required, default))
    return tuple(out)


@dataclass(frozen=True)
class Corner:
    """A convex interior corner formed by two wall edges, able to hold a liquid filament.

    Parameters
    ----------
    index : int                   vertex index in the section's ``outline()``
    vertex : tuple of float       vertex position (x, y) [m]
    half_angle : float            interior half-angle alpha [rad], in (0, 90) deg

    Only corners with an interior angle below 180 deg are listed by a section; reflex or straight
    vertices and wall/open-side edges are not corners.
    """

    index: int
    vertex: tuple[float, float]
    half_angle: float

    @property
    def interior_angle(self) -> float:
        """Full interior angle 2 alpha [rad]."""
        return 2.0 * self.half_angle

    @property
    def half_angle_deg(self) -> float:
        """Interior half-angle [deg]."""
        return math.degrees(self.half_angle)


@dataclass(frozen=True)
class PinningEdge:
    """An end of an open edge where a wall meets the open side: a sharp edge that can pin a free surface.

    Parameters
    ----------
    vertex : int        vertex index in the section's ``outline()``
    open_edge : int     index of the open edge
    wall_edge : int     index of the wall edge on the other side of the vertex
    angle : float       angle between the wall and the open side inside the section [rad], in (0, 360) deg
    """

    vertex: int
    open_edge: int
    wall_edge: int
    angle: float

    @property
    def angle_deg(self) -> float:
        """The angle in degrees."""
        return math.degrees(self.angle)


def pinning_edges(section) -> tuple[PinningEdge, ...]:
    r"""Each end of each open edge of a section where a wall meets the open side, with the angle between them.

    .. math:: \varphi_i = \pi - \operatorname{atan2}\big(\mathbf e_\mathrm{in} \times \mathbf e_\mathrm{out},\,
              \mathbf e_\mathrm{in} \cdot \mathbf e_\mathrm{out}\big)

    (interior angle at vertex i of the counter-clockwise outline, e_in and e_out the edges into and
    out of it).

    Parameters
    ----------
    section : Section

    Returns
    -------
    tuple of PinningEdge   empty for a closed section; a vertex between two open edges is left out

    Notes
    -----
    A free surface pinned at such an edge meets the wall at the angle phi when it is flat (liquid at
    the gas pressure); to carry liquid below the gas pressure it curves into the liquid and that angle
    shrinks. The contact line stays at the edge while the angle is at least the contact angle
    (Gibbs' condition at a sharp edge), so the edge holds liquid below the gas pressure only when
    phi > theta. For a V-groove or a wedge channel phi = 90 deg - alpha, and the condition is the
    Concus–Finn condition theta + alpha < 90 deg of the apex corner (Concus & Finn 1969).

    Examples
    --------
    >>> [round(e.angle_deg, 9) for e in pinning_edges(Groove(math.radians(20.0), 0.004))]
    [70.0, 70.0]
    """
    opened = set(section.open_edges())
    if not opened:
        return ()
    v = np.asarray(section.outline(), dtype=float)
    n = len(v)
    out = []
    for k in sorted(opened):
        for vert, wall in ((k, (k - 1) % n), ((k + 1) % n, (k + 1) % n)):
            if wall in opened:
                continue
            e_in = v[vert] - v[(vert - 1) % n]
            e_out = v[(vert + 1) % n] - v[vert]
            turn = math.atan2(float(e_in[0] * e_out[1] - e_in[1] * e_out[0]), float(np.dot(e_in, e_out)))
            out.append(PinningEdge(int(vert), int(k), int(wall), math.pi - turn))
    return tuple(out)


@dataclass(frozen=True)
class Section(ABC):
    """Abstract conduit cross-section (SI units).

    Sub-classes define ``kind`` (the name used in case files) and the geometric properties.
    Shared here: hydraulic diameter, ``is_open``, :meth:`describe`, :meth:`to_dict`,
    :meth:`from_dict`.
    """

    kind: ClassVar[str] = ""
    #: the kind's name in plain words (:func:`section_label`)
    label: ClassVar[str] = ""

    def __init_subclass__(cls, **kwargs):
        super().__init_subclass__(**kwargs)
        if cls.__dict__.get("kind"):
            SECTION_KINDS[cls.kind] = cls

    # ---- geometry each kind provides -------------------------------------------------------
    @property
    @abstractmethod
    def area(self) -> float:
        """Flow area A [m^2] (for open sections: the area enclosed with the open side)."""

    @property
    @abstractmethod
    def wetted_perimeter(self) -> float:
        """Wall perimeter P_wall [m]; an open side is not counted."""

    @property
    @abstractmethod
    def open_perimeter(self) -> float:
        """Total length of the open side(s) [m]; 0 for a closed section."""

    @property
    @abstractmethod
    def inscribed_radius(self) -> float:
        """Radius of the largest circle inside the section (closed with its open side) [m]."""

    @property
    @abstractmethod
    def corners(self) -> tuple[Corner, ...]:
        """Convex interior wall corners that can hold liquid."""

    @property
    @abstractmethod
    def length_scale(self) -> float:
        """Length used in Bond numbers [m] (see the class docstring for the choice)."""

    @abstractmethod
    def outline(self) -> np.ndarray:
        """Vertices (N, 2) [m], counter-clockwise, for drawing and meshing."""

    def open_edges(self) -> tuple[int, ...]:
        """Indices of the open edges of :meth:`outline` (edge k joins vertex k to k+1)."""
        return ()

    @property
    def length_scale_name(self) -> str:
        """Plain-words name of :attr:`length_scale` for reports (e.g. "depth")."""
        return "hydraulic diameter"

    # ---- shared -----------------------------------------------------------------------------
    @property
    def hydraulic_diameter(self) -> float:
        r"""Hydraulic diameter on the wall perimeter [m].

        .. math:: D_h = 4 A / P_\mathrm{wall}

        For an open section the open side is left out of the perimeter (it carries no wall shear),
        so D_h is the wall-only value; for closed sections it is the usual definition
        (Shah & London 1978).
        """
        return 4.0 * self.area / self.wetted_perimeter

    @property
    def is_open(self) -> bool:
        """True when part of the outline is open (free surface), not wall."""
        return len(self.open_edges()) > 0

    def as_polygon(self) -> "Polygon":
        """The same outline as a :class:`Polygon` (a circle becomes its 256-gon)."""
        return Polygon(self.outline(), open_edges=self.open_edges())

    def to_dict(self) -> dict[str, Any]:
        """Defining parameters in SI units, with ``"kind"``; the inverse of :meth:`from_dict`."""
        d: dict[str, Any] = {"kind": self.kind}
        for f in fields(self):
            d[f.name] = getattr(self, f.name)
        return d

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> "Section":
        """Build a section from ``{"kind": ..., <parameters in SI>}`` (as written by :meth:`to_dict`).

        Raises
        ------
        ValueError
            unknown kind, missing or unknown parameters, or invalid parameter values.
        """
        if not isinstance(d, Mapping):
            raise TypeError(f"section must be a mapping with a 'kind' key, got {type(d).__name__}")
        allowed = ", ".join(sorted(SECTION_KINDS))
        if "kind" not in d:
            raise ValueError(f"section.kind is missing; allowed kinds: {allowed}")
        kind = d["kind"]
        if kind not in SECTION_KINDS:
            raise ValueError(f"section.kind must be one of {allowed}, got {kind!r}")
        target = SECTION_KINDS[kind]
        if cls is not Section and not issubclass(target, cls):
            raise ValueError(f"section.kind must be {cls.kind!r} for {cls.__name__}, got {kind!r}")
        params = {k: v for k, v in d.items() if k != "kind"}
        return target._from_params(params)

    @classmethod
    def _from_params(cls, params: dict[str, Any]) -> "Section":
        table = _fields_of(cls)
        _check_keys(cls.kind, params, [f.name for f in table], [f.name for f in table if f.required])
        return cls(**params)

    def describe(self) -> dict[str, Any]:
        """JSON-ready summary in SI units (keys carry the unit)."""
        return {
            "kind": self.kind,
            "parameters": _jsonable(self.to_dict()),
            "is_open": bool(self.is_open),
            "area_m2": float(self.area),
            "wetted_perimeter_m": float(self.wetted_perimeter),
            "open_perimeter_m": float(self.open_perimeter),
            "hydraulic_diameter_m": float(self.hydraulic_diameter),
            "inscribed_radius_m": float(self.inscribed_radius),
            "length_scale_m": float(self.length_scale),
            "length_scale_name": self.length_scale_name,
            "open_edges": [int(i) for i in self.open_edges()],
            "corners": [
                {
                    "index": int(c.index),
                    "vertex_m": [float(c.vertex[0]), float(c.vertex[1])],
                    "half_angle_rad": float(c.half_angle),
                    "half_angle_deg": float(math.degrees(c.half_angle)),
                }
                for c in self.corners
            ],
        }


def _check_keys(kind: str, params: Mapping[str, Any], names, required) -> None:
    unknown = sorted(set(params) - set(names))
    if unknown:
        raise ValueError(f"section ({kind}) has unknown parameter(s) {', '.join(map(repr, unknown))}; "
                         f"allowed: {', '.join(names)}")
    missing = [n for n in required if n not in params]
    if missing:
        raise ValueError(f"section ({kind}) is missing parameter(s) {', '.join(map(repr, missing))}")


def _jsonable(obj):
    if isinstance(obj, dict):
        return {k: _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return float(obj)
    return obj


def _half_angle(kind: str, value) -> float:
    x = finite(f"{kind}.half_angle", value, "rad")
    angle_deg_in_range(f"{kind}.half_angle", x, 0.0, 90.0, lo_open=True, hi_open=True)
    return x


def _set(obj, name, value):
    object.__setattr__(obj, name, value)


# =============================================================================================
# Closed sections with closed forms
# =============================================================================================
@dataclass(frozen=True)
class Circle(Section):
    r"""Circular tube.

    .. math:: A = \pi D^2/4, \quad P = \pi D, \quad D_h = D, \quad r_i = D/2

    Parameters
    ----------
    diameter : float   inner diameter D [m], > 0

    Notes
    -----
    No corners. ``length_scale`` = D. ``outline()`` is a regular 256-gon inscribed in the circle
    (for drawing only; the properties use the exact circle).

    Examples
    --------
    >>> c = Circle(0.01)
    >>> round(c.hydraulic_diameter, 12), round(c.area * 1e6, 4)
    (0.01, 78.5398)
    """

    kind: ClassVar[str] = "circle"
    label: ClassVar[str] = "circular tube"
    diameter: float = _param("length", "inner diameter")

    def __post_init__(self):
        _set(self, "diameter", positive("circle.diameter", self.diameter, "m"))

    @property
    def area(self) -> float:
        return math.pi * self.diameter**2 / 4.0

    @property
    def wetted_perimeter(self) -> float:
        return math.pi * self.diameter

    @property
    def open_perimeter(self) -> float:
        return 0.0

    @property
    def inscribed_radius(self) -> float:
        return self.diameter / 2.0

    @property
    def corners(self) -> tuple[Corner, ...]:
        return ()

    @property
    def hydraulic_diameter(self) -> float:
        """Hydraulic diameter, equal to the diameter D [m]."""
        return self.diameter

    @property
    def length_scale(self) -> float:
        """Diameter D [m]."""
        return self.diameter

    @property
    def length_scale_name(self) -> str:
        return "diameter"

    def outline(self) -> np.ndarray:
        t = np.linspace(0.0, 2.0 * np.pi, CIRCLE_OUTLINE_VERTICES, endpoint=False)
        r = self.diameter / 2.0
        return np.column_stack([r * np.cos(t), r * np.sin(t)])


@dataclass(frozen=True)
class Rectangle(Section):
    r"""Rectangular duct of width w and height h.

    .. math:: A = w h, \quad P = 2(w + h), \quad D_h = \frac{2 w h}{w + h}, \quad r_i = \min(w, h)/2

    Parameters
    ----------
    width : float    w [m], > 0
    height : float   h [m], > 0

    Notes
    -----
    Four corners of half-angle 45 deg. ``length_scale`` = D_h. Outline centred on the origin,
    vertex 0 at (-w/2, -h/2).

    Examples
    --------
    >>> r = Rectangle(0.002, 0.001)
    >>> round(r.hydraulic_diameter * 1e3, 6)
    1.333333
    """

    kind: ClassVar[str] = "rectangle"
    label: ClassVar[str] = "rectangular duct"
    width: float = _param("length", "width")
    height: float = _param("length", "height")

    def __post_init__(self):
        _set(self, "width", positive("rectangle.width", self.width, "m"))
        _set(self, "height", positive("rectangle.height", self.height, "m"))

    @property
    def area(self) -> float:
        return self.width * self.height

    @property
    def wetted_perimeter(self) -> float:
        return 2.0 * (self.width + self.height)

    @property
    def open_perimeter(self) -> float:
        return 0.0

    @property
    def inscribed_radius(self) -> float:
        return min(self.width, self.height) / 2.0

    @property
    def corners(self) -> tuple[Corner, ...]:
        v = self.outline()
        return tuple(Corner(i, (float(v[i, 0]), float(v[i, 1])), math.pi / 4) for i in range(4))

    @property
    def length_scale(self) -> float:
        """Hydraulic diameter 2wh/(w+h) [m]."""
        return self.hydraulic_diameter

    def outline(self) -> np.ndarray:
        w, h = self.width / 2.0, self.height / 2.0
        return np.array([[-w, -h], [w, -h], [w, h], [-w, h]], dtype=float)


@dataclass(frozen=True)
class RegularPolygon(Section):
    r"""Regular polygon duct with n sides of length s.

    .. math::

        A = \frac{n s^2}{4 \tan(\pi/n)}, \quad P = n s, \quad
        D_h = \frac{s}{\tan(\pi/n)}, \quad r_i = \frac{s}{2\tan(\pi/n)}, \quad
        \alpha = \frac{\pi}{2} - \frac{\pi}{n}

    Parameters
    ----------
    n_sides : int   number of sides n, >= 3
    side : float    side length s [m], > 0

    Notes
    -----
    n corners of half-angle alpha (30 deg for a triangle, 45 deg for a square, 60 deg for a
    hexagon). D_h equals twice the apothem (the inscribed radius). ``length_scale`` = D_h.
    Outline centred on the origin with the first side horizontal at the bottom.

    Examples
    --------
    >>> t = RegularPolygon(3, 0.003)
    >>> round(t.hydraulic_diameter / (0.003 / 3 ** 0.5), 12)
    1.0
    >>> [round(c.half_angle_deg, 9) for c in t.corners]
    [30.0, 30.0, 30.0]
    """

    kind: ClassVar[str] = "regular_polygon"
    label: ClassVar[str] = "regular polygon duct"
    n_sides: int = _param("count", "number of sides")
    side: float = _param("length", "side length")

    def __post_init__(self):
        n = self.n_sides
        ok = False
        if not isinstance(n, (bool, np.bool_)):
            if isinstance(n, (int, np.integer)):
                ok, n = True, int(n)
            elif isinstance(n, (float, np.floating)) and math.isfinite(n) and float(n).is_integer():
                ok, n = True, int(n)
        if not ok or n < 3:
            raise ValueError(f"regular_polygon.n_sides must be an integer >= 3, got {self.n_sides!r}")
        _set(self, "n_sides", n)
        _set(self, "side", positive("regular_polygon.side", self.side, "m"))

    @property
    def area(self) -> float:
        n = self.n_sides
        return n * self.side**2 / (4.0 * math.tan(math.pi / n))

    @property
    def wetted_perimeter(self) -> float:
        return self.n_sides * self.side

    @property
    def open_perimeter(self) -> float:
        return 0.0

    @property
    def inscribed_radius(self) -> float:
        return self.side / (2.0 * math.tan(math.pi / self.n_sides))

    @property
    def circumradius(self) -> float:
        """Radius of the circle through the vertices, s / (2 sin(pi/n)) [m]."""
        return self.side / (2.0 * math.sin(math.pi / self.n_sides))

    @property
    def corners(self) -> tuple[Corner, ...]:
        a = math.pi / 2.0 - math.pi / self.n_sides
        v = self.outline()
        return tuple(Corner(i, (float(v[i, 0]), float(v[i, 1])), a) for i in range(self.n_sides))

    @property
    def length_scale(self) -> float:
        """Hydraulic diameter s / tan(pi/n) [m]."""
        return self.hydraulic_diameter

    def outline(self) -> np.ndarray:
        n = self.n_sides
        t = -np.pi / 2.0 - np.pi / n + 2.0 * np.pi * np.arange(n) / n
        r = self.circumradius
        return np.column_stack([r * np.cos(t), r * np.sin(t)])


# =============================================================================================
# Open channels
# =============================================================================================
@dataclass(frozen=True)
class Groove(Section):
    r"""Open V-groove: two walls meeting at the apex, open across the top at depth d.

    Each wall makes the angle alpha with the vertical bisector; the open side is the horizontal
    line at height d above the apex.

    .. math::

        A = d^2 \tan\alpha, \quad P_\mathrm{wall} = \frac{2d}{\cos\alpha}, \quad
        P_\mathrm{open} = 2 d \tan\alpha, \quad D_h = \frac{4A}{P_\mathrm{wall}} = 2 d \sin\alpha,
        \quad r_i = \frac{d \sin\alpha}{1 + \sin\alpha}

    Parameters
    ----------
    half_angle : float   corner half-angle alpha [rad], in (0, 90) deg
    depth : float        depth d from apex to the open side [m], > 0

    Notes
    -----
    One corner (the apex, half-angle alpha); the two top edges where a wall meets the free surface
    are pinning edges, not corners. ``length_scale`` = depth d (the height over which a free surface
    spans the groove); D_h uses the wall perimeter only. Outline: apex at the origin, groove opening
    toward +y; edge 1 (top) is open.

    Examples
    --------
    >>> import math
    >>> g = Groove(math.radians(30.0), 0.002)
    >>> round(g.hydraulic_diameter * 1e3, 9)   # 2 d sin(alpha)
    2.0
    >>> g.open_edges(), g.length_scale
    ((1,), 0.002)
    """

    kind: ClassVar[str] = "groove"
    label: ClassVar[str] = "V-groove (open)"
    half_angle: float = _param("angle", "corner half-angle")
    depth: float = _param("length", "depth")

    def __post_init__(self):
        _set(self, "half_angle", _half_angle("groove", self.half_angle))
        _set(self, "depth", positive("groove.depth", self.depth, "m"))

    @property
    def area(self) -> float:
        return self.depth**2 * math.tan(self.half_angle)

    @property
    def wall_length(self) -> float:
        """Length of each wall, d / cos(alpha) [m]."""
        return self.depth / math.cos(self.half_angle)

    @property
    def wetted_perimeter(self) -> float:
        return 2.0 * self.wall_length

    @property
    def open_perimeter(self) -> float:
        return 2.0 * self.depth * math.tan(self.half_angle)

    @property
    def inscribed_radius(self) -> float:
        s = math.sin(self.half_angle)
        return self.depth * s / (1.0 + s)

    @property
    def corners(self) -> tuple[Corner, ...]:
        return (Corner(0, (0.0, 0.0), self.half_angle),)

    @property
    def length_scale(self) -> float:
        """Depth d [m]."""
        return self.depth

    @property
    def length_scale_name(self) -> str:
        return "depth"

    def outline(self) -> np.ndarray:
        b = self.depth * math.tan(self.half_angle)
        return np.array([[0.0, 0.0], [b, self.depth], [-b, self.depth]], dtype=float)

    def open_edges(self) -> tuple[int, ...]:
        return (1,)


@dataclass(frozen=True)
class WedgeChannel(Section):
    r"""Open wedge channel: two plates of length L meeting at half-angle alpha, open between their free edges.

    Geometrically a V-groove, but set by the plate (wall) length instead of the depth.

    .. math::

        A = L^2 \sin\alpha \cos\alpha, \quad P_\mathrm{wall} = 2L, \quad
        P_\mathrm{open} = 2 L \sin\alpha, \quad D_h = 2 L \sin\alpha \cos\alpha, \quad
        r_i = \frac{L \sin\alpha \cos\alpha}{1 + \sin\alpha}

    Parameters
    ----------
    half_angle : float    corner half-angle alpha [rad], in (0, 90) deg
    wall_length : float   plate length L from the apex to the free edge [m], > 0

    Notes
    -----
    One corner (the apex). ``length_scale`` = wall length L (the plate length that sets the
    channel size in wedge-channel experiments); the depth is L cos(alpha). Outline: apex at the
    origin, opening toward +y; edge 1 is open.

    Examples
    --------
    >>> import math
    >>> w = WedgeChannel(math.radians(45.0), 0.01)
    >>> round(w.area * 1e4, 12), round(w.open_perimeter * 1e2, 9)
    (0.5, 1.414213562)
    """

    kind: ClassVar[str] = "wedge_channel"
    label: ClassVar[str] = "wedge channel (open)"
    half_angle: float = _param("angle", "corner half-angle")
    wall_length: float = _param("length", "wall length")

    def __post_init__(self):
        _set(self, "half_angle", _half_angle("wedge_channel", self.half_angle))
        _set(self, "wall_length", positive("wedge_channel.wall_length", self.wall_length, "m"))

    @property
    def depth(self) -> float:
        """Apex-to-open-side distance L cos(alpha) [m]."""
        return self.wall_length * math.cos(self.half_angle)

    @property
    def area(self) -> float:
        return self.wall_length**2 * math.sin(self.half_angle) * math.cos(self.half_angle)

    @property
    def wetted_perimeter(self) -> float:
        return 2.0 * self.wall_length

    @property
    def open_perimeter(self) -> float:
        return 2.0 * self.wall_length * math.sin(self.half_angle)

    @property
    def inscribed_radius(self) -> float:
        s, c = math.sin(self.half_angle), math.cos(self.half_angle)
        return self.wall_length * s * c / (1.0 + s)

    @property
    def corners(self) -> tuple[Corner, ...]:
        return (Corner(0, (0.0, 0.0), self.half_angle),)

    @property
    def length_scale(self) -> float:
        """Wall (plate) length L [m]."""
        return self.wall_length

    @property
    def length_scale_name(self) -> str:
        return "wall length"

    def outline(self) -> np.ndarray:
        s, c = math.sin(self.half_angle), math.cos(self.half_angle)
        L = self.wall_length
        return np.array([[0.0, 0.0], [L * s, L * c], [-L * s, L * c]], dtype=float)

    def open_edges(self) -> tuple[int, ...]:
        return (1,)


# =============================================================================================
# Arbitrary polygon
# =============================================================================================
def _parse_vertices(vertices) -> np.ndarray:
    try:
        v = np.asarray(vertices, dtype=float)
    except (TypeError, ValueError):
        raise ValueError("polygon.vertices must be a sequence of (x, y) pairs of numbers [m], "
                         f"got {vertices!r}") from None
    if v.ndim != 2 or v.shape[1] != 2:
        raise ValueError(f"polygon.vertices must be a sequence of (x, y) pairs [m], got an array of shape {v.shape}")
    n = v.shape[0]
    if n < 3:
        raise ValueError(f"polygon.vertices must have at least 3 vertices, got {n}")
    bad = ~np.all(np.isfinite(v), axis=1)
    if np.any(bad):
        i = int(np.flatnonzero(bad)[0])
        raise ValueError(f"polygon.vertices must be finite numbers [m], vertex {i} is ({v[i, 0]!r}, {v[i, 1]!r})")
    return v


def _signed_area(v: np.ndarray) -> float:
    x, y = v[:, 0], v[:, 1]
    return 0.5 * float(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y))


def _check_simple(v: np.ndarray, scale: float) -> None:
    """Raise unless the closed outline ``v`` is a simple polygon (user's vertex order and indices)."""
    n = v.shape[0]
    # coincident vertices
    d = np.linalg.norm(v[:, None, :] - v[None, :, :], axis=2)
    iu = np.triu_indices(n, 1)
    close = d[iu] <= _REL_TOL * scale
    if np.any(close):
        k = int(np.flatnonzero(close)[0])
        i, j = int(iu[0][k]), int(iu[1][k])
        raise ValueError(
            f"polygon.vertices must be distinct points: vertex {j} ({_g(v[j, 0])}, {_g(v[j, 1])}) coincides "
            f"with vertex {i} ({_g(v[i, 0])}, {_g(v[i, 1])}) (do not repeat the first vertex at the end; "
            "the outline closes itself)")
    # all collinear: second singular value of the centred points ~ 0
    sv = np.linalg.svd(v - v.mean(axis=0), compute_uv=False)
    if sv[-1] <= 1e-10 * sv[0]:
        raise ValueError("polygon.vertices must enclose an area > 0 m^2, got collinear vertices (zero area)")

    p, q = v, np.roll(v, -1, axis=0)          # edge k: p[k] -> q[k]
    e = q - p
    L = np.linalg.norm(e, axis=1)

    # adjacent edges folding back on themselves (edge k-1 and edge k at vertex k)
    e_in = np.roll(e, 1, axis=0)
    cr = e_in[:, 0] * e[:, 1] - e_in[:, 1] * e[:, 0]
    dt = np.sum(e_in * e, axis=1)
    fold = (np.abs(cr) <= _REL_TOL * np.roll(L, 1) * L) & (dt < 0)
    if np.any(fold):
        k = int(np.flatnonzero(fold)[0])
        raise ValueError(
            f"polygon.vertices must form a simple (non-self-intersecting) outline: edges {(k - 1) % n} and {k} "
            f"overlap (the outline doubles back at vertex {k}, ({_g(v[k, 0])}, {_g(v[k, 1])})); "
            "edge k joins vertex k to vertex k+1")

    if n < 4:
        return

    def orient(a, b, c):   # (b - a) x (c - a), broadcasting over leading axes
        return (b[..., 0] - a[..., 0]) * (c[..., 1] - a[..., 1]) - (b[..., 1] - a[..., 1]) * (c[..., 0] - a[..., 0])

    I, J = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    pair = (J > I + 1) & ~((I == 0) & (J == n - 1))
    I, J = I[pair], J[pair]
    pi, qi, pj, qj = p[I], q[I], p[J], q[J]
    tol_i = _REL_TOL * L[I] * scale
    tol_j = _REL_TOL * L[J] * scale

    def sgn(x, tol):
        return np.where(np.abs(x) <= tol, 0, np.sign(x)).astype(int)

    s1 = sgn(orient(pi, qi, pj), tol_i)
    s2 = sgn(orient(pi, qi, qj), tol_i)
    s3 = sgn(orient(pj, qj, pi), tol_j)
    s4 = sgn(orient(pj, qj, qi), tol_j)
    collinear = (s1 == 0) & (s2 == 0)
    general = ~collinear & (s1 * s2 <= 0) & (s3 * s4 <= 0)
    # collinear pairs: overlap of the projections on edge i
    ei = qi - pi
    ti = np.sum(ei * ei, axis=1)
    tp = np.sum((pj - pi) * ei, axis=1)
    tq = np.sum((qj - pi) * ei, axis=1)
    lo, hi = np.minimum(tp, tq), np.maximum(tp, tq)
    eps = _REL_TOL * scale * L[I]
    overlap = collinear & (hi >= -eps) & (lo <= ti + eps)
    hit = general | overlap
    if np.any(hit):
        k = int(np.flatnonzero(hit)[0])
        a, b = int(I[k]), int(J[k])
        if general[k]:
            r = e[a]
            s = e[b]
            den = r[0] * s[1] - r[1] * s[0]
            t = ((p[b, 0] - p[a, 0]) * s[1] - (p[b, 1] - p[a, 1]) * s[0]) / den
            x = p[a] + t * r
            how = "cross" if (s1[k] * s2[k] < 0 and s3[k] * s4[k] < 0) else "touch"
        else:
            x = p[b] if -eps[k] <= tp[k] <= ti[k] + eps[k] else q[b]
            how = "overlap"
        raise ValueError(
            f"polygon.vertices must form a simple (non-self-intersecting) outline: edges {a} and {b} {how} "
            f"at ({_g(x[0])}, {_g(x[1])}); edge k joins vertex k to vertex k+1")


def _parse_open_edges(open_edges, n: int) -> list[int]:
    if open_edges is None:
        return []
    if isinstance(open_edges, (int, np.integer)) and not isinstance(open_edges, bool):
        open_edges = (open_edges,)
    out: list[int] = []
    for k in list(open_edges):
        if isinstance(k, (bool, np.bool_)) or not (
                isinstance(k, (int, np.integer))
                or (isinstance(k, (float, np.floating)) and math.isfinite(k) and float(k).is_integer())):
            raise ValueError(f"polygon.open_edges must be integer edge indices within [0, {n - 1}], got {k!r}")
        k = int(k)
        if not 0 <= k < n:
            raise ValueError(f"polygon.open_edges must be edge indices within [0, {n - 1}], got {k}")
        if k in out:
            raise ValueError(f"polygon.open_edges must not repeat an edge, got edge {k} twice")
        out.append(k)
    if len(out) >= n:
        raise ValueError(f"polygon.open_edges must leave at least one wall edge, got all {n} edges open")
    return out


@dataclass(frozen=True, init=False)
class Polygon(Section):
    r"""Arbitrary simple polygon, optionally with open (free-surface) edges.

    .. math::

        A = \tfrac12 \sum_k (x_k y_{k+1} - x_{k+1} y_k), \quad
        P_\mathrm{wall} = \sum_{k \notin \mathrm{open}} |\mathbf{v}_{k+1} - \mathbf{v}_k|, \quad
        D_h = 4A/P_\mathrm{wall}

    Parameters
    ----------
    vertices : sequence of (x, y)   outline vertices [m], >= 3, each once (the outline closes
                                    itself); clockwise input is accepted and stored
                                    counter-clockwise with vertex 0 kept first
    open_edges : sequence of int    indices of open edges in the given order (edge k joins vertex k
                                    to k+1); renumbered if the order is reversed

    Notes
    -----
    Rejected: fewer than 3 vertices, coincident vertices, all vertices collinear (zero area), and
    self-intersecting outlines (the message names the two edges, in the input numbering).

    Corners are the vertices with interior angle below 180 deg whose two adjacent edges are walls.

    Inscribed radius: largest circle inside the closed polygon, from shapely's
    ``maximum_inscribed_circle`` (GEOS, grid refinement of the distance to the boundary) with a
    tolerance of 1e-10 times the bounding-box size. The circle found always fits (a lower bound), but the
    search can stop short of that tolerance for some orientations: 3.8e-6 relative measured on an
    axis-aligned pentagon (tests/test_sections.py).

    ``length_scale``: with exactly one open edge, the depth of the section measured normal to that
    edge (largest vertex distance from its line; equals the depth of a :class:`Groove` given by its
    vertices); otherwise the hydraulic diameter 4A/P_wall.

    Examples
    --------
    >>> p = Polygon([(0, 0), (0, 1), (1, 1), (1, 0)])        # clockwise square, normalised
    >>> p.vertices
    ((0.0, 0.0), (1.0, 0.0), (1.0, 1.0), (0.0, 1.0))
    >>> p.hydraulic_diameter, round(p.inscribed_radius, 12)
    (1.0, 0.5)
    """

    kind: ClassVar[str] = "polygon"
    label: ClassVar[str] = "polygon (from vertices)"
    vertices: tuple[tuple[float, float], ...] = _param("vertices", "vertices (x, y)")
    open_edge_indices: tuple[int, ...] = _param("edges", "open edges", name="open_edges", default=())

    def __init__(self, vertices, open_edges=(), *, open_edge_indices=None):
        if open_edge_indices is not None:     # used by dataclasses.replace
            open_edges = open_edge_indices
        v = _parse_vertices(vertices)
        n = v.shape[0]
        oe = _parse_open_edges(open_edges, n)
        span = v.max(axis=0) - v.min(axis=0)
        scale = float(np.hypot(span[0], span[1]))
        _check_simple(v, scale)
        a = _signed_area(v)
        if abs(a) <= _REL_TOL * scale**2:      # pragma: no cover - guarded by the checks above
            raise ValueError("polygon.vertices must enclose an area > 0 m^2, got zero area")
        if a < 0:                             # clockwise: reverse, keep vertex 0 first
            order = [(-k) % n for k in range(n)]
            v = v[order]
            oe = [(n - 1 - k) % n for k in oe]
        _set(self, "vertices", tuple((float(x), float(y)) for x, y in v))
        _set(self, "open_edge_indices", tuple(sorted(oe)))

    @classmethod
    def _from_params(cls, params: dict[str, Any]) -> "Polygon":
        table = _fields_of(cls)
        _check_keys(cls.kind, params, [f.name for f in table], [f.name for f in table if f.required])
        return cls(params["vertices"], params.get("open_edges", ()))

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind,
                "vertices": [[x, y] for x, y in self.vertices],
                "open_edges": list(self.open_edge_indices)}

    # ---- geometry ---------------------------------------------------------------------------
    def outline(self) -> np.ndarray:
        return np.array(self.vertices, dtype=float)

    def open_edges(self) -> tuple[int, ...]:
        return self.open_edge_indices

    @cached_property
    def edge_lengths(self) -> np.ndarray:
        """Length of each edge k (vertex k to k+1) [m]."""
        v = self.outline()
        return np.linalg.norm(np.roll(v, -1, axis=0) - v, axis=1)

    @cached_property
    def interior_angles(self) -> np.ndarray:
        """Interior angle at each vertex [rad], in (0, 2 pi); they sum to (n - 2) pi."""
        v = self.outline()
        e = np.roll(v, -1, axis=0) - v
        e_in = np.roll(e, 1, axis=0)
        turn = np.arctan2(e_in[:, 0] * e[:, 1] - e_in[:, 1] * e[:, 0], np.sum(e_in * e, axis=1))
        return np.pi - turn

    @cached_property
    def area(self) -> float:
        return _signed_area(self.outline())

    @cached_property
    def wetted_perimeter(self) -> float:
        L = self.edge_lengths
        wall = np.ones(L.size, dtype=bool)
        wall[list(self.open_edge_indices)] = False
        return float(np.sum(L[wall]))

    @cached_property
    def open_perimeter(self) -> float:
        return float(np.sum(self.edge_lengths[list(self.open_edge_indices)])) if self.open_edge_indices else 0.0

    @cached_property
    def inscribed_radius(self) -> float:
        import shapely

        v = self.outline()
        span = v.max(axis=0) - v.min(axis=0)
        tol = _MIC_REL_TOL * float(max(span))
        line = shapely.maximum_inscribed_circle(shapely.Polygon(v), tol)
        return float(line.length)

    @cached_property
    def corners(self) -> tuple[Corner, ...]:
        n = len(self.vertices)
        open_set = set(self.open_edge_indices)
        out = []
        for i, ang in enumerate(self.interior_angles):
            if ang >= math.pi - 1e-12:
                continue
            if (i - 1) % n in open_set or i in open_set:
                continue
            out.append(Corner(i, self.vertices[i], float(ang) / 2.0))
        return tuple(out)

    @cached_property
    def length_scale(self) -> float:
        """Depth normal to the single open edge; otherwise the hydraulic diameter [m]."""
        if len(self.open_edge_indices) == 1:
            k = self.open_edge_indices[0]
            v = self.outline()
            a, b = v[k], v[(k + 1) % len(v)]
            t = (b - a) / np.linalg.norm(b - a)
            d = np.abs((v[:, 0] - a[0]) * t[1] - (v[:, 1] - a[1]) * t[0])
            return float(d.max())
        return self.hydraulic_diameter

    @property
    def length_scale_name(self) -> str:
        return "depth normal to the open side" if len(self.open_edge_indices) == 1 else "hydraulic diameter"
