"""How each thing on a regime chart looks: one table, keyed by names, for the exports and the dashboard.

A boundary keeps its colour and dash pattern wherever it appears (every case, every revision,
every view), because the style is looked up by the boundary model's registry name, never by its
position in the chart's list of lines. Adding a fitted line to a revision therefore leaves the
colours of the other lines as they were. The same holds for regime fills (by regime name) and for
test-point markers (by platform class).

- Built-in boundary models have a fixed entry in :data:`BOUNDARY_STYLES`; every pair of colour and
  dash pattern in that table is different.
- Any other name (a custom line of a case file, a line fitted from test points) gets a colour and
  a dash pattern from a hash of the name (:func:`boundary_style`): the same name gives the same
  style on every machine and in every session. Lines fitted from test points (names starting with
  ``fitted_``) are orange, so they stand out as data-derived.
- Colours come from the colour-blind-safe palette of Okabe & Ito ("Color Universal Design", 2008);
  the dash pattern (lines) and the hatch (regime fills) are a second cue that survives grey print.
- On one chart, two names whose hashes meet are told apart by :func:`boundary_styles` /
  :func:`regime_styles`: the built-in entries and the first name in sorted order keep their own
  style, the other takes the next free one (rare, and still independent of the order of lines).

Dash patterns are tuples of on/off lengths in points (empty: solid), valid as they are for bokeh
(as a space-separated string, :func:`bokeh_dash`) and for matplotlib (:func:`mpl_linestyle`).
Standard library plus :mod:`lowgmap.physics.studies.platforms` (platform names and aliases).
"""
from __future__ import annotations

import hashlib
from typing import Iterable, NamedTuple

__all__ = [
    "OKABE_ITO", "LINE_COLOURS", "FILL_COLOURS", "HATCHES", "DASHES", "INVALID_DASH", "BOUNDARY_STYLES",
    "REGIME_STYLES", "PLATFORM_MARKERS", "GENERIC_MARKER", "OPERATING_POINT_COLOUR", "DISAGREE_COLOUR",
    "BoundaryStyle", "RegimeStyle", "PointMarker", "boundary_style", "boundary_styles", "regime_style",
    "regime_styles", "platform_marker", "mpl_linestyle", "bokeh_dash", "dash_name",
]

#: Okabe & Ito (2008) colour-blind-safe palette, by name.
OKABE_ITO = {
    "black": "#000000", "orange": "#E69F00", "sky blue": "#56B4E9", "bluish green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish purple": "#CC79A7",
}

#: Line colours, in hash order (yellow is left out: it does not show on a light fill).
LINE_COLOURS = tuple(OKABE_ITO[k] for k in ("black", "blue", "vermillion", "bluish green", "reddish purple",
                                            "orange", "sky blue"))

#: Fill colours of regimes, in hash order (drawn faint, with a hatch as the second cue).
FILL_COLOURS = tuple(OKABE_ITO[k] for k in ("sky blue", "orange", "bluish green", "yellow", "reddish purple",
                                            "blue", "vermillion")) + ("#999999",)

#: Hatches of regime fills (matplotlib notation; every one has a bokeh equivalent).
HATCHES = ("", "//", "..", "\\\\", "xx", "++", "--", "oo")

#: Dash patterns of boundary lines by name: on/off lengths in points (empty: solid). None is dotted:
#: dots are kept for the parts of a line outside its source's validity range (:data:`INVALID_DASH`).
DASHES: dict[str, tuple[int, ...]] = {
    "solid": (),
    "dashed": (9, 4),
    "dash-dot": (9, 3, 2, 3),
    "long dash": (16, 5),
    "dash-dot-dot": (9, 3, 2, 3, 2, 3),
}

#: The parts of a line outside its source's validity range: dotted, in the line's own colour, faint.
INVALID_DASH: tuple[int, ...] = (1, 3)

#: Operating point star, and the ring around test points that disagree with the chart.
OPERATING_POINT_COLOUR = OKABE_ITO["vermillion"]
DISAGREE_COLOUR = "#B00000"


class BoundaryStyle(NamedTuple):
    """Colour (hex) and dash pattern (on/off lengths in points; empty: solid) of a boundary line."""

    colour: str
    dash: tuple[int, ...]


class RegimeStyle(NamedTuple):
    """Fill colour (hex) and hatch (matplotlib notation) of a regime region."""

    colour: str
    hatch: str


class PointMarker(NamedTuple):
    """Marker of a test-point platform class: matplotlib code, bokeh name, words for the key."""

    mpl: str
    bokeh: str
    label: str


def _b(colour: str, dash: str) -> BoundaryStyle:
    return BoundaryStyle(OKABE_ITO[colour], DASHES[dash])


#: Fixed styles of the built-in boundary models (registry names of
#: :data:`lowgmap.physics.models.boundary.BOUNDARY_MODELS`). No two entries are alike.
BOUNDARY_STYLES: dict[str, BoundaryStyle] = {
    # round tubes and ducts (lowgmap.physics.models.tube)
    "bubble_slug_dukler_1988": _b("black", "solid"),
    "slug_annular_dukler_1988": _b("blue", "dashed"),
    "bubble_slug_jayawardena_1997": _b("vermillion", "dash-dot"),
    "slug_transitional_zhao_rezkallah_1993": _b("reddish purple", "long dash"),
    "transitional_annular_zhao_rezkallah_1993": _b("bluish green", "dash-dot-dot"),
    # corners and open channels (lowgmap.physics.models.corner)
    "corner_confinement": _b("blue", "solid"),
    "corner_separation": _b("vermillion", "dashed"),
    "corner_merging": _b("bluish green", "dash-dot"),
    "corner_blow_through": _b("black", "long dash"),
    "open_channel_ingestion": _b("reddish purple", "dash-dot-dot"),
}

if len(set(BOUNDARY_STYLES.values())) != len(BOUNDARY_STYLES):  # pragma: no cover - guards the table
    raise RuntimeError("two built-in boundary models share a style")


def _r(colour: str, hatch: str) -> RegimeStyle:
    return RegimeStyle(OKABE_ITO[colour], hatch)


#: Fixed styles of the regimes the built-in models name (each family's regimes all differ).
REGIME_STYLES: dict[str, RegimeStyle] = {
    # sequence of the void-fraction and Suratman lines
    "dispersed bubbles": _r("sky blue", ""),
    "elongated bubbles / slugs": _r("orange", "//"),
    "annular (gas core)": _r("bluish green", ".."),
    # sequence of the Weber-number lines
    "bubbles and slugs (surface tension dominated)": _r("sky blue", "\\\\"),
    "transitional slug–annular": _r("yellow", "xx"),
    "annular (inertia dominated)": _r("bluish green", "oo"),
    # corner family
    "isolated bubbles carried through": _r("sky blue", ""),
    "isolated bubbles separated": _r("orange", "//"),
    "merging bubbles separated": _r("bluish green", ".."),
    "merging bubbles carried through": _r("yellow", "\\\\"),
    "gas blow-through": _r("reddish purple", "xx"),
    "free-surface collapse / gas ingestion": _r("blue", "++"),
}

#: Test-point marker per platform class (:data:`lowgmap.physics.studies.platforms.PLATFORMS`).
PLATFORM_MARKERS: dict[str, PointMarker] = {
    "short drop tower": PointMarker("v", "inverted_triangle", "short drop tower"),
    "drop tube": PointMarker("s", "square", "drop tube"),
    "launched drop": PointMarker("^", "triangle", "launched drop"),
    "parabolic flight": PointMarker("D", "diamond", "parabolic flight"),
    "sounding rocket": PointMarker("P", "plus", "sounding rocket"),
    "orbital station": PointMarker("h", "hex", "orbital station"),
}

#: Marker of a point whose platform is not one of the built-in classes (or not given).
GENERIC_MARKER = PointMarker("o", "circle", "other or unstated platform")


def _hash(name: str) -> int:
    return int.from_bytes(hashlib.blake2b(str(name).encode("utf-8"), digest_size=8).digest(), "big")


_DASH_ORDER = tuple(DASHES.values())
_BUILTIN_LINE_STYLES = frozenset(BOUNDARY_STYLES.values())
#: Styles left for lines that are not built in, in a fixed order (colour-major).
_FREE_LINE_STYLES = tuple(BoundaryStyle(c, d) for c in LINE_COLOURS for d in _DASH_ORDER
                          if BoundaryStyle(c, d) not in _BUILTIN_LINE_STYLES)
_FITTED_LINE_STYLES = tuple(s for s in _FREE_LINE_STYLES if s.colour == OKABE_ITO["orange"])


def _line_candidates(name: str) -> tuple[BoundaryStyle, ...]:
    """Styles ``name`` may take, in order of preference (its own hashed style first)."""
    if name in BOUNDARY_STYLES:
        return (BOUNDARY_STYLES[name],)
    pool = _FITTED_LINE_STYLES if str(name).startswith("fitted_") else _FREE_LINE_STYLES
    rest = tuple(s for s in _FREE_LINE_STYLES if s not in pool)
    k = _hash(name) % len(pool)
    return pool[k:] + pool[:k] + rest


def boundary_style(name: str) -> BoundaryStyle:
    """Colour and dash pattern of the boundary model called ``name`` (fixed per name).

    Built-in models have a fixed entry in :data:`BOUNDARY_STYLES`; other names are hashed into the
    styles the built-in ones leave free (lines fitted from test points, ``fitted_...``, in orange).

    Examples
    --------
    >>> boundary_style("bubble_slug_dukler_1988")
    BoundaryStyle(colour='#000000', dash=())
    >>> boundary_style("corner_separation").dash
    (9, 4)
    >>> boundary_style("fitted_dispersed_bubbles_elongated_bubbles") == boundary_style(
    ...     "fitted_dispersed_bubbles_elongated_bubbles")                    # same name, same style
    True
    >>> boundary_style("fitted_dispersed_bubbles_elongated_bubbles").colour   # fitted lines: orange
    '#E69F00'
    """
    return _line_candidates(str(name))[0]


def boundary_styles(names: Iterable[str]) -> dict[str, BoundaryStyle]:
    """Styles of the lines of one chart, all different: :func:`boundary_style`, with hash clashes resolved.

    Built-in names keep their entry; the other names, taken in sorted order, keep their own hashed
    style unless an earlier name holds it, then take the next free one. The result does not depend
    on the order of ``names``.

    >>> s = boundary_styles(["slug_annular_dukler_1988", "bubble_slug_dukler_1988"])
    >>> s["slug_annular_dukler_1988"] == boundary_style("slug_annular_dukler_1988")
    True
    """
    names = list(dict.fromkeys(str(n) for n in names))
    out: dict[str, BoundaryStyle] = {n: BOUNDARY_STYLES[n] for n in names if n in BOUNDARY_STYLES}
    taken = set(out.values())
    for n in sorted(n for n in names if n not in BOUNDARY_STYLES):
        cands = _line_candidates(n)
        style = next((s for s in cands if s not in taken), cands[0])
        out[n] = style
        taken.add(style)
    return {n: out[n] for n in names}


_FREE_REGIME_STYLES = tuple(RegimeStyle(c, h) for h in HATCHES for c in FILL_COLOURS)


def _regime_candidates(name: str) -> tuple[RegimeStyle, ...]:
    if name in REGIME_STYLES:
        return (REGIME_STYLES[name],) + _FREE_REGIME_STYLES
    k = _hash("regime:" + name) % len(_FREE_REGIME_STYLES)
    return _FREE_REGIME_STYLES[k:] + _FREE_REGIME_STYLES[:k]


def regime_style(name: str) -> RegimeStyle:
    """Fill colour and hatch of the regime called ``name`` (fixed per name; unknown names hashed).

    >>> regime_style("dispersed bubbles")
    RegimeStyle(colour='#56B4E9', hatch='')
    >>> regime_style("wet") == regime_style("wet")
    True
    """
    return _regime_candidates(str(name))[0]


def regime_styles(names: Iterable[str]) -> dict[str, RegimeStyle]:
    """Styles of the regimes of one chart, all different (as :func:`boundary_styles` does for lines).

    >>> s = regime_styles(["annular (gas core)", "dispersed bubbles"])
    >>> s["dispersed bubbles"].colour != s["annular (gas core)"].colour
    True
    """
    names = list(dict.fromkeys(str(n) for n in names))
    out = {n: REGIME_STYLES[n] for n in names if n in REGIME_STYLES}
    taken = set()
    for n in [n for n in names if n in REGIME_STYLES]:  # built-in clashes across families: first keeps it
        if out[n] in taken:
            out[n] = next(s for s in _regime_candidates(n) if s not in taken)
        taken.add(out[n])
    for n in sorted(n for n in names if n not in REGIME_STYLES):
        cands = _regime_candidates(n)
        out[n] = next((s for s in cands if s not in taken), cands[0])
        taken.add(out[n])
    return {n: out[n] for n in names}


def platform_marker(platform) -> PointMarker:
    """Marker of a test point's platform (name or alias of a class of facility; else the generic one).

    >>> platform_marker("Short drop-tower, ~2 s").mpl, platform_marker("balloon").mpl
    ('v', 'o')
    """
    from lowgmap.physics.studies.platforms import find_platform

    p = find_platform(platform) if platform else None
    return PLATFORM_MARKERS.get(p.name, GENERIC_MARKER) if p is not None else GENERIC_MARKER


def dash_name(dash) -> str:
    """Words for a dash pattern (for a key): 'solid', 'dashed', ..., or 'dotted' for :data:`INVALID_DASH`."""
    dash = tuple(dash)
    if dash == INVALID_DASH:
        return "dotted"
    return next((k for k, v in DASHES.items() if v == dash), "dashed")


def mpl_linestyle(dash):
    """A dash pattern (tuple, or a bokeh-style string ``"9 4"`` / ``"solid"``) as a matplotlib linestyle.

    Lengths are absolute points (draw with ``lines.scale_dashes`` off to keep them so).

    >>> mpl_linestyle(()), mpl_linestyle("9 4"), mpl_linestyle((9, 4))
    ('-', (0, (9, 4)), (0, (9, 4)))
    """
    if isinstance(dash, str):
        dash = () if dash in ("", "solid") else tuple(int(x) for x in dash.split())
    dash = tuple(dash)
    return "-" if not dash else (0, dash)


def bokeh_dash(dash) -> str:
    """A dash pattern as bokeh's ``line_dash`` string: 'solid' or space-separated lengths.

    >>> bokeh_dash(()), bokeh_dash((9, 3, 2, 3))
    ('solid', '9 3 2 3')
    """
    dash = tuple(dash)
    return "solid" if not dash else " ".join(str(int(x)) for x in dash)
