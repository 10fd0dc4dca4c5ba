r"""Fully developed axial Stokes flow in a conduit cross-section (finite elements).

A long straight conduit (or an open liquid filament along a wall) carries liquid at low Reynolds
number under a uniform axial pressure gradient :math:`G = -\mathrm{d}p/\mathrm{d}z`. The axial
velocity :math:`u(x, y)` obeys :math:`\mu \nabla^2 u = -G` on the liquid cross-section. Writing
:math:`u = (G/\mu)\, w` leaves a purely geometric problem for :math:`w` [m²]:

.. math::

    -\nabla^2 w = 1 \ \text{in the liquid}, \qquad
    w = 0 \ \text{on walls (no slip)}, \qquad
    \partial w / \partial n = 0 \ \text{on a shear-free liquid/gas interface}.

The cross-section is a closed loop of straight :class:`Line` and circular :class:`Arc` pieces
(a :class:`Domain`). :func:`solve_poisson` meshes it with triangles (boundary nodes on the true
arcs, quadratic elements with curved edges on arcs) and returns the area, the flux
:math:`\int w\,\mathrm{d}A` and the mean :math:`\bar w`, from which the dimensional mean velocity is
:math:`\bar u = (G/\mu)\,\bar w` and the flow rate :math:`Q = (G/\mu)\int w\,\mathrm{d}A`.

Accuracy (measured, see tests/test_stokes.py and physics/manual/corner.md): with the default mesh
the Fanning Poiseuille numbers of the circle, square, equilateral triangle and rectangles agree
with Shah & London (1978) to better than 0.01 %.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = ["Line", "Arc", "Domain", "FlowSolution", "solve_poisson", "fanning_poiseuille_number"]

_KINDS = ("wall", "free")


def _point(p, name):
    try:
        x, y = (float(v) for v in p)
    except (TypeError, ValueError):
        raise TypeError(f"{name} must be a pair of numbers (x, y) [m], got {p!r}") from None
    if not (math.isfinite(x) and math.isfinite(y)):
        raise ValueError(f"{name} must be finite, got {p!r}")
    return (x, y)


def _kind(kind):
    if kind not in _KINDS:
        raise ValueError(f"kind must be one of {_KINDS}, got {kind!r}")
    return kind


@dataclass(frozen=True)
class Line:
    """Straight boundary piece from ``p0`` to ``p1`` [m]; ``kind`` is "wall" (no slip) or "free"."""

    p0: tuple
    p1: tuple
    kind: str = "wall"

    def __post_init__(self):
        object.__setattr__(self, "p0", _point(self.p0, "p0"))
        object.__setattr__(self, "p1", _point(self.p1, "p1"))
        _kind(self.kind)
        if math.dist(self.p0, self.p1) == 0.0:
            raise ValueError(f"a Line needs two distinct end points, got p0 = p1 = {self.p0}")

    @property
    def length(self) -> float:
        """Length [m]."""
        return math.dist(self.p0, self.p1)

    def point(self, t):
        """Points at parameters ``t`` in [0, 1] (array (2, n))."""
        t = np.atleast_1d(np.asarray(t, dtype=float))
        p0, p1 = np.array(self.p0), np.array(self.p1)
        return p0[:, None] + (p1 - p0)[:, None] * t[None, :]

    def tangent(self, t):
        """Unit tangent at parameter ``t`` (in the direction of travel)."""
        d = np.subtract(self.p1, self.p0)
        return d / np.hypot(*d)

    def _green(self) -> float:
        (x0, y0), (x1, y1) = self.p0, self.p1
        return 0.5 * (x0 * y1 - x1 * y0)


@dataclass(frozen=True)
class Arc:
    """Circular boundary piece from ``p0`` to ``p1`` [m] around ``center``.

    The arc follows the shorter way round unless ``long=True``. A half circle (both ways equally
    long) is travelled counter-clockwise (clockwise with ``long=True``). ``p0 == p1`` with
    ``long=True`` is a full circle, counter-clockwise.
    """

    p0: tuple
    p1: tuple
    center: tuple
    kind: str = "wall"
    long: bool = False
    radius: float = field(init=False, repr=False)
    phi0: float = field(init=False, repr=False)
    sweep: float = field(init=False, repr=False)

    def __post_init__(self):
        p0 = _point(self.p0, "p0")
        p1 = _point(self.p1, "p1")
        c = _point(self.center, "center")
        object.__setattr__(self, "p0", p0)
        object.__setattr__(self, "p1", p1)
        object.__setattr__(self, "center", c)
        _kind(self.kind)
        r0, r1 = math.dist(p0, c), math.dist(p1, c)
        if r0 == 0.0:
            raise ValueError("an Arc needs p0 away from its center")
        if abs(r0 - r1) > 1e-9 * r0:
            raise ValueError(f"Arc end points must be equally far from the center: |p0-c| = {r0:.9g} m, "
                             f"|p1-c| = {r1:.9g} m")
        phi0 = math.atan2(p0[1] - c[1], p0[0] - c[0])
        phi1 = math.atan2(p1[1] - c[1], p1[0] - c[0])
        d = (phi1 - phi0) % (2 * math.pi)          # in [0, 2 pi)
        if math.dist(p0, p1) <= 1e-12 * r0:
            if not self.long:
                raise ValueError("an Arc with p0 == p1 is a full circle: pass long=True")
            d = 2 * math.pi
        else:
            if abs(d - math.pi) < 1e-12:
                d = math.pi                      # half circle: counter-clockwise
            elif d > math.pi:
                d -= 2 * math.pi                 # shorter way is clockwise
            if self.long:
                d = d - 2 * math.pi if d > 0 else d + 2 * math.pi
        object.__setattr__(self, "radius", 0.5 * (r0 + r1))
        object.__setattr__(self, "phi0", phi0)
        object.__setattr__(self, "sweep", d)

    @property
    def length(self) -> float:
        """Arc length [m]."""
        return self.radius * abs(self.sweep)

    def point(self, t):
        """Points at parameters ``t`` in [0, 1] (array (2, n)); t=0 and t=1 give p0 and p1 exactly."""
        t = np.atleast_1d(np.asarray(t, dtype=float))
        phi = self.phi0 + self.sweep * t
        out = np.vstack([self.center[0] + self.radius * np.cos(phi),
                         self.center[1] + self.radius * np.sin(phi)])
        out[:, t == 0.0] = np.array(self.p0)[:, None]
        out[:, t == 1.0] = np.array(self.p1)[:, None]
        return out

    def tangent(self, t):
        """Unit tangent at parameter ``t`` (in the direction of travel)."""
        phi = self.phi0 + self.sweep * t
        s = math.copysign(1.0, self.sweep)
        return np.array([-math.sin(phi), math.cos(phi)]) * s

    def _green(self) -> float:
        cx, cy = self.center
        r, a, b = self.radius, self.phi0, self.phi0 + self.sweep
        return 0.5 * (r * (cx * (math.sin(b) - math.sin(a)) - cy * (math.cos(b) - math.cos(a)))
                      + r * r * (b - a))


class Domain:
    """A closed cross-section: boundary pieces given in order around the loop.

    Each piece must start where the previous one ends and the last must end where the first
    starts (tolerance 1e-9 of the domain size); the loop may run either way round and must not
    cross itself.

    Examples
    --------
    >>> sq = Domain([Line((0, 0), (1, 0)), Line((1, 0), (1, 1)), Line((1, 1), (0, 1)), Line((0, 1), (0, 0))])
    >>> round(sq.area, 12), sq.perimeter
    (1.0, 4.0)
    """

    def __init__(self, pieces):
        pieces = tuple(pieces)
        if not pieces:
            raise ValueError("pieces must hold at least one Line or Arc")
        for i, pc in enumerate(pieces):
            if not isinstance(pc, (Line, Arc)):
                raise TypeError(f"pieces[{i}] must be a Line or an Arc, got {type(pc).__name__}")
        pts = np.array([pc.p0 for pc in pieces] + [pc.p1 for pc in pieces])
        size = float(np.ptp(pts, axis=0).max()) or max(pc.length for pc in pieces)
        tol = 1e-9 * size
        for i, pc in enumerate(pieces):
            nxt = pieces[(i + 1) % len(pieces)]
            gap = math.dist(pc.p1, nxt.p0)
            if gap > tol:
                raise ValueError(f"Domain does not close: pieces[{i}] ends at {pc.p1} but "
                                 f"pieces[{(i + 1) % len(pieces)}] starts at {nxt.p0} (gap {gap:.3g} m)")
        self.pieces = pieces
        # self-intersection check on a fine polyline
        from shapely.geometry import Polygon
        poly = Polygon(self._polyline(max_angle=math.pi / 90).T)
        if not poly.is_valid:
            raise ValueError("Domain boundary crosses itself")
        signed = sum(pc._green() for pc in pieces)
        if abs(signed) <= 1e-12 * size * size:
            raise ValueError("Domain encloses no area")
        self._orientation = 1.0 if signed > 0 else -1.0
        self.area = abs(signed)

    @property
    def perimeter(self) -> float:
        """Total boundary length [m]."""
        return sum(pc.length for pc in self.pieces)

    @property
    def wall_length(self) -> float:
        """Length of the no-slip (wall) pieces [m]."""
        return sum(pc.length for pc in self.pieces if pc.kind == "wall")

    @property
    def free_length(self) -> float:
        """Length of the liquid/gas interface pieces [m]."""
        return sum(pc.length for pc in self.pieces if pc.kind == "free")

    def _polyline(self, max_angle=math.pi / 90):
        chunks = []
        for pc in self.pieces:
            n = 1 if isinstance(pc, Line) else max(2, math.ceil(abs(pc.sweep) / max_angle))
            chunks.append(pc.point(np.linspace(0.0, 1.0, n + 1))[:, :-1])
        return np.hstack(chunks)

    def __repr__(self):
        return f"Domain({list(self.pieces)!r})"


@dataclass(frozen=True)
class FlowSolution:
    """Result of :func:`solve_poisson` (all lengths in the units of the domain, e.g. [m]).

    area : area of the meshed domain [m²] (curved elements; compare with ``Domain.area``)
    flux : integral of w over the section [m⁴]; flow rate Q = (-dp/dz)/mu * flux
    mean : flux / area [m²]; mean velocity u_mean = (-dp/dz)/mu * mean
    h : largest element size used [m]
    n_elements, n_dofs : mesh and system size
    """

    area: float
    flux: float
    mean: float
    h: float
    n_elements: int
    n_dofs: int


def fanning_poiseuille_number(domain: Domain, solution: FlowSolution, perimeter: float | None = None) -> float:
    r"""Fanning friction factor times Reynolds number, f·Re on the hydraulic diameter 4A/P.

    .. math:: f\,\mathrm{Re} = \frac{D_h^2\, A}{2 \int w\,\mathrm{d}A}, \qquad D_h = 4A/P

    Derivation: the axial force balance on a length of conduit gives the mean wall shear stress
    :math:`\tau_w = G A / P = G D_h / 4`; with :math:`f = 2\tau_w/(\rho \bar u^2)`,
    :math:`\mathrm{Re} = \rho \bar u D_h/\mu` and :math:`\bar u = (G/\mu)\,\bar w`,
    :math:`f\,\mathrm{Re} = 2\tau_w D_h/(\mu\bar u) = D_h^2/(2\bar w) = D_h^2 A / (2\,\mathrm{flux})`.

    Parameters
    ----------
    domain : Domain
    solution : FlowSolution   from :func:`solve_poisson` on ``domain``
    perimeter : float, optional   wetted perimeter P [m]; default: all of the boundary

    Examples
    --------
    >>> c = Domain([Arc((1, 0), (1, 0), (0, 0), long=True)])
    >>> round(fanning_poiseuille_number(c, solve_poisson(c)), 2)  # Shah & London (1978): 16
    16.0
    """
    P = domain.perimeter if perimeter is None else float(perimeter)
    dh = 4.0 * solution.area / P
    return dh * dh * solution.area / (2.0 * solution.flux)


# ----------------------------------------------------------------------------------------------
# mesh generation: graded boundary nodes, lattice interior nodes, Delaunay, spring smoothing,
# boundary recovery by splitting, then curved quadratic elements on arcs.
# ----------------------------------------------------------------------------------------------

_GRADE = 0.3         # growth of the element size with distance from a corner
_HMIN_RATIO = 0.1    # smallest element size at a corner, as a fraction of h
_MAX_ARC_STEP = math.pi / 12


def _vertices(domain):
    """Corner vertices of the loop where the boundary turns (position, turning angle)."""
    out = []
    n = len(domain.pieces)
    for i in range(n):
        a, b = domain.pieces[i], domain.pieces[(i + 1) % n]
        ta, tb = a.tangent(1.0), b.tangent(0.0)
        turn = math.atan2(ta[0] * tb[1] - ta[1] * tb[0], ta @ tb)
        if abs(turn) > 1e-3:
            out.append(b.p0)
    return np.array(out, dtype=float).reshape(-1, 2)


def _size_fn(h, verts):
    hmin = _HMIN_RATIO * h

    def s(x):  # x: (2, n)
        if len(verts) == 0:
            return np.full(x.shape[1], h)
        d = np.sqrt(((x[None, :, :] - verts[:, :, None]) ** 2).sum(axis=1)).min(axis=0)
        return np.minimum(h, hmin + _GRADE * d)
    return s


def _discretize(piece, size):
    """Parameters of the boundary nodes along one piece (graded by ``size``)."""
    m = 400
    t = np.linspace(0.0, 1.0, m + 1)
    x = piece.point(t)
    ds = np.hypot(*np.diff(x, axis=1))
    mid = piece.point(0.5 * (t[1:] + t[:-1]))
    cum = np.concatenate([[0.0], np.cumsum(ds / size(mid))])
    n = max(1, math.ceil(cum[-1] - 1e-9))
    if isinstance(piece, Arc):
        n = max(n, math.ceil(abs(piece.sweep) / _MAX_ARC_STEP))
    return np.interp(np.linspace(0.0, cum[-1], n + 1), cum, t)


def _lattice(x0, x1, y0, y1, a):
    ny = int(math.ceil((y1 - y0) / (a * math.sqrt(3) / 2))) + 2
    nx = int(math.ceil((x1 - x0) / a)) + 2
    j, i = np.mgrid[0:ny, 0:nx]
    x = x0 - a + a * (i + 0.5 * (j % 2))
    y = y0 - a + a * math.sqrt(3) / 2 * j
    return np.vstack([x.ravel(), y.ravel()])


def _build_mesh(domain, h):
    import shapely
    from scipy.spatial import Delaunay

    verts = _vertices(domain)
    size = _size_fn(h, verts)

    # boundary nodes
    bx, seg_piece, seg_t = [], [], []
    for k, pc in enumerate(domain.pieces):
        tt = _discretize(pc, size)
        pts = pc.point(tt)
        for j in range(len(tt) - 1):
            bx.append(pts[:, j])
            seg_piece.append(k)
            seg_t.append((tt[j], tt[j + 1]))

    def polygon_of(bx_list):
        return shapely.Polygon(np.array(bx_list))

    # boundary recovery loop wraps interior generation so splitting segments keeps things consistent
    for _attempt in range(12):
        B = np.array(bx).T                       # (2, nb), in loop order
        nb = B.shape[1]
        poly = polygon_of(bx)
        ring = poly.exterior
        # interior candidates from lattices of decreasing spacing
        xmin, ymin, xmax, ymax = poly.bounds
        cand = []
        hmin = _HMIN_RATIO * h
        a = h
        while True:
            if a == h:
                box = (xmin, xmax, ymin, ymax)
                P = _lattice(*box, a)
            else:
                r = (a * math.sqrt(2) - hmin) / _GRADE
                P = np.hstack([_lattice(v[0] - r, v[0] + r, v[1] - r, v[1] + r, a) for v in verts]) \
                    if len(verts) else np.zeros((2, 0))
            if P.shape[1]:
                s = size(P)
                lo = a / math.sqrt(2) if a / 2 >= hmin * 0.99 else 0.0
                hi = a * math.sqrt(2) if a < h else np.inf
                keep = (s > lo) & (s <= hi)
                cand.append(P[:, keep])
            if a / 2 < hmin * 0.99:
                break
            a /= 2
        P = np.hstack(cand)
        inside = shapely.contains_xy(poly, P[0], P[1])
        P = P[:, inside]
        dist = shapely.distance(ring, shapely.points(P[0], P[1]))
        P = P[:, dist > 0.45 * size(P)]
        # thin out nodes closer than half the local size (overlapping lattices); keep the first
        if P.shape[1] > 1:
            from scipy.spatial import cKDTree
            pairs = cKDTree(P.T).query_pairs(0.5 * h, output_type="ndarray")
            if len(pairs):
                sP = size(P)
                dd = np.hypot(*(P[:, pairs[:, 0]] - P[:, pairs[:, 1]]))
                pairs = pairs[dd < 0.5 * np.minimum(sP[pairs[:, 0]], sP[pairs[:, 1]])]
                keep = np.ones(P.shape[1], bool)
                for i, j in np.sort(pairs, axis=1):
                    if keep[i] and keep[j]:
                        keep[j] = False
                P = P[:, keep]

        # spring smoothing of interior nodes (boundary nodes fixed)
        for _it in range(8):
            X = np.hstack([B, P])
            tri = Delaunay(X.T).simplices
            c = X[:, tri].mean(axis=2)
            tri = tri[shapely.contains_xy(poly, c[0], c[1])]
            e = np.sort(np.vstack([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]]), axis=1)
            e = np.unique(e, axis=0)
            vec = X[:, e[:, 1]] - X[:, e[:, 0]]
            L = np.hypot(*vec)
            L0 = size(0.5 * (X[:, e[:, 0]] + X[:, e[:, 1]]))
            L0 = L0 * 1.2 * math.sqrt((L ** 2).sum() / (L0 ** 2).sum())
            F = np.maximum(L0 - L, 0.0) / np.maximum(L, 1e-300)
            Fv = vec * F
            tot = np.zeros_like(X)
            np.add.at(tot[0], e[:, 0], -Fv[0])
            np.add.at(tot[1], e[:, 0], -Fv[1])
            np.add.at(tot[0], e[:, 1], Fv[0])
            np.add.at(tot[1], e[:, 1], Fv[1])
            P = P + 0.2 * tot[:, nb:]
            if P.shape[1]:
                ok = shapely.contains_xy(poly, P[0], P[1])
                P = P[:, ok]
                dist = shapely.distance(ring, shapely.points(P[0], P[1]))
                P = P[:, dist > 0.3 * size(P)]

        X = np.hstack([B, P])
        tri = Delaunay(X.T).simplices
        # drop degenerate triangles, then those outside the loop
        d1 = X[:, tri[:, 1]] - X[:, tri[:, 0]]
        d2 = X[:, tri[:, 2]] - X[:, tri[:, 0]]
        ar = 0.5 * (d1[0] * d2[1] - d1[1] * d2[0])
        d3 = d2 - d1
        lmax2 = np.maximum(np.maximum((d1 ** 2).sum(0), (d2 ** 2).sum(0)), (d3 ** 2).sum(0))
        tri = tri[np.abs(ar) > 1e-9 * lmax2]      # drop flat slivers of (nearly) collinear nodes
        c = X[:, tri].mean(axis=2)
        tri = tri[shapely.contains_xy(poly, c[0], c[1])]
        # boundary recovery check
        e = np.sort(np.vstack([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]]), axis=1)
        have = set(map(tuple, e))
        missing = [j for j in range(nb) if tuple(sorted((j, (j + 1) % nb))) not in have]
        if not missing:
            # every edge used by one triangle only must be a boundary segment
            ee, cnt = np.unique(e, axis=0, return_counts=True)
            segset = {tuple(sorted((j, (j + 1) % nb))) for j in range(nb)}
            if {tuple(x) for x in ee[cnt == 1]} != segset:
                raise RuntimeError("mesh generation produced a hole or an overlap; try another h")
            break
        # split every missing boundary segment at its parameter midpoint (on the true curve)
        for j in sorted(missing, reverse=True):
            k = seg_piece[j]
            ta, tb = seg_t[j]
            tm = 0.5 * (ta + tb)
            pm = domain.pieces[k].point([tm])[:, 0]
            bx.insert(j + 1, pm)
            seg_piece.insert(j + 1, k)
            seg_t[j] = (ta, tm)
            seg_t.insert(j + 1, (tm, tb))
    else:
        raise RuntimeError("mesh generation could not recover the boundary; try a smaller h")

    # orient triangles counter-clockwise
    d1 = X[:, tri[:, 1]] - X[:, tri[:, 0]]
    d2 = X[:, tri[:, 2]] - X[:, tri[:, 0]]
    neg = d1[0] * d2[1] - d1[1] * d2[0] < 0
    tri[neg] = tri[neg][:, [0, 2, 1]]
    seg = {tuple(sorted((j, (j + 1) % nb))): (seg_piece[j], seg_t[j]) for j in range(nb)}
    return X, tri.T.copy(), seg


def _mesh(domain, h, order):
    from skfem import MeshTri, MeshTri2

    X, t, seg = _build_mesh(domain, h)
    m1 = MeshTri(np.ascontiguousarray(X), np.ascontiguousarray(t))
    bf = m1.boundary_facets()
    fac = np.sort(m1.facets[:, bf], axis=0)
    piece_of = np.empty(len(bf), dtype=int)
    tmid = np.empty(len(bf))
    for i in range(len(bf)):
        k, (ta, tb) = seg[(int(fac[0, i]), int(fac[1, i]))]
        piece_of[i] = k
        tmid[i] = 0.5 * (ta + tb)
    if order == 1:
        return m1, bf, piece_of
    m2 = MeshTri2.from_mesh(m1)
    doflocs = m2.doflocs.copy()
    nv = m1.p.shape[1]
    for i, f in enumerate(bf):
        pc = domain.pieces[piece_of[i]]
        if isinstance(pc, Arc):
            doflocs[:, nv + f] = pc.point([tmid[i]])[:, 0]
    m2 = MeshTri2(np.ascontiguousarray(doflocs), m1.t)
    return m2, bf, piece_of


def _default_h(domain):
    return 0.06 * math.sqrt(domain.area)


def solve_poisson(domain: Domain, interface: str = "free", h: float | None = None, order: int = 2) -> FlowSolution:
    r"""Solve the cross-section problem :math:`-\nabla^2 w = 1` for axial Stokes flow.

    .. math::

        -\nabla^2 w = 1, \quad w|_\text{wall} = 0, \quad
        \partial_n w|_\text{free} = 0 \ (\text{or } w|_\text{free} = 0 \text{ if interface="noslip"})

    Parameters
    ----------
    domain : Domain   the liquid cross-section (lengths [m], or any consistent unit)
    interface : {"free", "noslip"}   condition on the pieces of kind "free": shear-free
        (clean liquid/gas interface) or no-slip (e.g. a rigid or fully contaminated interface)
    h : float, optional   largest element size [m]; default 0.06·sqrt(area). Elements are graded
        down to h/10 at corners of the boundary.
    order : {1, 2}   polynomial order; 2 (default) uses quadratic triangles with curved edges on
        arcs (isoparametric), 1 linear triangles with straight edges.

    Returns
    -------
    FlowSolution
        area [m²], flux = ∫w dA [m⁴], mean = flux/area [m²], h [m], n_elements, n_dofs.
        Dimensional: mean velocity = (-dp/dz)/mu · mean, flow rate = (-dp/dz)/mu · flux.

    Notes
    -----
    Creeping (Stokes), fully developed, Newtonian, straight conduit of constant section.
    A domain with no wall piece and a shear-free interface has no unique solution (ValueError).
    Finite elements with scikit-fem (Gustafsson & McBain 2020); the mesh is made here: graded
    boundary nodes, a triangular lattice inside, Delaunay triangulation, spring smoothing and
    recovery of the boundary edges by splitting. Measured accuracy: see the module docstring.

    References
    ----------
    R. K. Shah and A. L. London, Laminar Flow Forced Convection in Ducts, Academic Press, 1978
    (check values). T. Gustafsson and G. D. McBain, "scikit-fem: A Python package for finite
    element assembly", J. Open Source Softw. 5(52):2369, 2020. doi:10.21105/joss.02369

    Examples
    --------
    >>> tri = Domain([Line((0, 0), (1, 0)), Line((1, 0), (0.5, 3 ** 0.5 / 2)), Line((0.5, 3 ** 0.5 / 2), (0, 0))])
    >>> s = solve_poisson(tri)
    >>> round(s.flux / (3 ** 0.5 / 320), 4)  # exact flux of the equilateral triangle, side 1
    1.0
    """
    from scipy.sparse.linalg import spsolve
    from skfem import Basis, BilinearForm, ElementTriP1, ElementTriP2, LinearForm, condense
    from skfem.helpers import dot, grad

    if not isinstance(domain, Domain):
        raise TypeError(f"domain must be a Domain, got {type(domain).__name__}")
    if interface not in ("free", "noslip"):
        raise ValueError(f"interface must be 'free' or 'noslip', got {interface!r}")
    if order not in (1, 2):
        raise ValueError(f"order must be 1 or 2, got {order!r}")
    h = _default_h(domain) if h is None else float(h)
    if not (math.isfinite(h) and h > 0):
        raise ValueError(f"h must be > 0 [m], got {h!r}")
    h = min(h, 0.5 * max(pc.length for pc in domain.pieces))
    dirichlet = {"wall"} if interface == "free" else {"wall", "free"}
    if not any(pc.kind in dirichlet for pc in domain.pieces):
        raise ValueError("domain needs at least one wall piece when interface='free' "
                         "(a fully shear-free section has no unique flow)")

    m, bf, piece_of = _mesh(domain, h, order)
    basis = Basis(m, ElementTriP2() if order == 2 else ElementTriP1())

    @BilinearForm
    def lap(u, v, _):
        return dot(grad(u), grad(v))

    @LinearForm
    def one(v, _):
        return v

    K = lap.assemble(basis)
    f = one.assemble(basis)
    dfac = bf[np.array([domain.pieces[k].kind in dirichlet for k in piece_of])]
    D = basis.get_dofs(facets=dfac).all()
    w = np.zeros(basis.N)
    A, b, x, I = condense(K, f, D=D)
    w[I] = spsolve(A.tocsc(), b)
    area = float(f.sum())
    flux = float(f @ w)
    return FlowSolution(area=area, flux=flux, mean=flux / area, h=h,
                        n_elements=int(m.t.shape[1]), n_dofs=int(basis.N))
