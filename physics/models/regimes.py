r"""Regime schemes: how the region-defining lines of a chart make regimes, and the line pieces models draw.

A chart (:mod:`lowgmap.physics.chart.composition`) reads its regimes from a *scheme*: which of the
chosen boundary models define regions, which regime names they can produce, and how a point is
classified from the models' implicit functions (negative below a line, positive on or above it,
NaN where undefined). Two schemes are provided:

* :class:`ChainScheme` (:data:`CHAIN`), the sequence rule: each model separates ``regime_below``
  (less gas) from ``regime_above`` (more gas); the models are chained by these names in order of
  increasing gas fraction. The first usable model starts the sequence; a later model joins at the
  end when its ``regime_below`` is the last regime, or at the start when its ``regime_above`` is
  the first, provided its other regime is not in the sequence yet (repeated until none joins). A
  point takes ``regime_below`` of the first chained line it lies below, else ``regime_above`` of
  the last. A second model for a transition already chained is never chained.
* :class:`PartitionScheme`: a model family whose regimes form a two-dimensional partition supplies
  its member models and a vectorised *rule* from the members' implicit-function values to regime
  names (e.g. the corner family of :mod:`lowgmap.physics.models.corner`).

A model may also draw itself as parametric :class:`LinePiece` objects (``line_pieces``), which the
chart and the margins sample adaptively. Regimes carry flags (:class:`RegimeInfo`). These types
belong to the model layer: models import them from here, and the chart layer uses them.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable, Sequence

import numpy as np

if TYPE_CHECKING:
    from lowgmap.physics.models.boundary import BoundaryModel

__all__ = ["RegimeInfo", "LinePiece", "RegimeScheme", "ChainScheme", "PartitionScheme", "CHAIN"]


@dataclass(frozen=True)
class RegimeInfo:
    """A regime of a scheme: its name, whether it separates all the gas, and a sentence."""

    name: str
    separates_gas: bool = False
    description: str = ""


@dataclass(frozen=True)
class LinePiece:
    """One continuous piece of a boundary line, given parametrically.

    ``func(t)`` maps an array of parameter values in [t0, t1] to ``(ql, qg)`` arrays [m^3/s] (NaN
    where the piece has no point). The chart samples t adaptively (refining until chords in log-log
    axes are straight to a small fraction of the chart) and includes ``breakpoints`` (kinks) exactly.
    Lines of constant flow ratio are typically parametrised by t = log10 Q_L, lines Q_L = F(Q_G/Q_L)
    by t = log10(Q_G/Q_L). ``straight``: the piece is a straight segment in log-log axes from end to
    end (a line of constant ratio, t = log10 Q_L): the samplers take its two ends and nothing else.
    """

    t0: float
    t1: float
    func: Callable
    breakpoints: tuple = ()
    straight: bool = False


class RegimeScheme:
    """How the region-defining lines of a chart make regimes (base class).

    Sub-classes decide which of the chosen models define regions, the regime names, and the
    vectorised classification. :class:`ChainScheme` (the sequence rule) and
    :class:`PartitionScheme` (a rule on the signs of several lines) are provided.
    """

    name: str = ""
    kind: str = ""

    def region_indices(self, models: Sequence[BoundaryModel]) -> list[int]:
        """Indices of the region-defining models among ``models``, in the scheme's order."""
        raise NotImplementedError

    def regime_names(self, region_models) -> tuple[str, ...]:
        """Regime names the region-defining (model, constants) pairs can produce, in display order."""
        raise NotImplementedError

    def classify(self, case, region_models, regime_names, ql, qg) -> np.ndarray:
        """Regime names at flow rates already checked by :func:`lowgmap.physics.properties.groups.positive_flows`."""
        raise NotImplementedError

    def info(self, name: str) -> RegimeInfo:
        """Flags of a regime (default: none)."""
        return RegimeInfo(name)

    def notes(self, case, region_models) -> list[str]:
        """Sentences the chart puts at the top of its warnings (default: none)."""
        return []

    def bounding_indices(self, region_models, regime_names, regime: str) -> tuple[int, ...]:
        """Indices into ``region_models`` of the lines whose crossing can change the regime ``regime``."""
        raise NotImplementedError

    def conjunction(self, region_models, regime_names, regime: str) -> tuple[int, ...] | None:
        """Indices of the lines whose sides *all* decide ``regime``, when the regime is one side of each of them.

        A regime that is the intersection of one side of each of some lines (and does not depend on the
        others) is left exactly where the first of those lines is crossed, wherever along it: its margin is
        the smallest margin to any of those lines as a whole, with no need to find which parts of a line
        border the regime. None when the regime is not such an intersection (or not a regime of the lines).
        Default: None.
        """
        return None


class ChainScheme(RegimeScheme):
    """The sequence rule: lines chained by regime names in order of increasing gas fraction.

    See the module notes. A point's regime is ``regime_below`` of the first chained line it lies
    below, or ``regime_above`` of the last line; only lines 0..i can change the regime i.
    """

    name = "sequence rule"
    kind = "chain"

    def region_indices(self, models):
        return _sequence(list(models))

    def regime_names(self, region_models):
        if not region_models:
            return ()
        return tuple([region_models[0][0].regime_below] + [m.regime_above for m, _ in region_models])

    def classify(self, case, region_models, regime_names, ql, qg):
        n = len(region_models)
        idx = np.full(ql.shape, n, dtype=np.intp)
        decided = np.zeros(ql.shape, dtype=bool)
        for k, (model, consts) in enumerate(region_models):
            with np.errstate(invalid="ignore"):
                g = np.asarray(model.implicit(case, ql, qg, **dict(consts)), dtype=float)
            below = (g < 0) & ~decided
            idx[below] = k
            decided |= below
        names = np.array(list(regime_names) + [""]) if n else np.array([""])
        idx[~(np.isfinite(ql) & np.isfinite(qg))] = len(names) - 1
        return names[idx]

    def bounding_indices(self, region_models, regime_names, regime):
        names = list(regime_names)
        if regime not in names:
            return ()
        return tuple(range(min(names.index(regime) + 1, len(region_models))))

    def conjunction(self, region_models, regime_names, regime):
        """Regime i of the sequence is above lines 0..i-1 and below line i: always an intersection."""
        got = self.bounding_indices(region_models, regime_names, regime)
        return got if got else None


#: The sequence rule, used by charts whose models belong to no other scheme.
CHAIN = ChainScheme()


class PartitionScheme(RegimeScheme):
    r"""Regimes from the signs of several region-defining lines (a two-dimensional partition).

    Parameters
    ----------
    name : str                    plain name of the scheme (shown in reports)
    members : sequence of str     registry names of the models that define regions, in order
    regimes : sequence of RegimeInfo   every regime the rule can return, in display order
    rule : callable               ``rule(values) -> array of regime names``, vectorised, where
        ``values`` maps the name of each *chosen* member to its implicit-function values (negative
        below the line, positive above, NaN where undefined) at the points; members that were not
        chosen are absent, and the rule must cope (typically by treating the mechanism as absent)
    notes : callable, optional    ``notes(case, region_models) -> list of str`` (gravity checks,
        physical caveats) put at the top of the chart's warnings
    description : str             a sentence for reports

    Notes
    -----
    A point exactly on a line counts as above it (value 0), as with the sequence rule. The scheme
    also warns when a constant of the same name has different values in two of its lines (each line
    then uses its own value).

    Examples
    --------
    >>> import numpy as np
    >>> rule = lambda v: np.where(v["a"] >= 0, "right", "left")
    >>> sch = PartitionScheme("demo", ("a",), (RegimeInfo("left"), RegimeInfo("right", True)), rule)
    >>> sch.info("right").separates_gas
    True
    """

    kind = "partition"

    def __init__(self, name: str, members: Sequence[str], regimes: Sequence[RegimeInfo], rule: Callable,
                 notes: Callable | None = None, description: str = ""):
        self.name = str(name)
        self.members = tuple(members)
        self.regimes = tuple(regimes)
        self.rule = rule
        self._notes = notes
        self.description = description
        self._conjunctions: dict = {}
        names = [r.name for r in self.regimes]
        if len(set(names)) != len(names):
            raise ValueError(f"scheme {name}: regime names repeat: {names}")
        if len(set(self.members)) != len(self.members):
            raise ValueError(f"scheme {name}: member names repeat: {self.members}")

    def __repr__(self) -> str:
        return f"<PartitionScheme {self.name!r}>"

    def region_indices(self, models):
        pos = {m: i for i, m in enumerate(self.members)}
        idx = [i for i, m in enumerate(models) if getattr(m, "scheme", None) is self and m.name in pos]
        return sorted(idx, key=lambda i: pos[models[i].name])

    def regime_names(self, region_models):
        if not region_models:
            return ()
        _, out = self._on_patterns(tuple(m.name for m, _ in region_models))
        got = set(out.tolist())
        return tuple(r.name for r in self.regimes if r.name in got)

    def classify(self, case, region_models, regime_names, ql, qg):
        if not region_models:
            return np.full(ql.shape, "", dtype="<U1")
        values = {}
        for model, consts in region_models:
            with np.errstate(all="ignore"):
                values[model.name] = np.broadcast_to(
                    np.asarray(model.implicit(case, ql, qg, **dict(consts)), dtype=float), ql.shape)
        names = np.broadcast_to(np.asarray(self.rule(values)), ql.shape)
        bad = ~(np.isfinite(ql) & np.isfinite(qg))
        return np.where(bad, "", names)

    def info(self, name):
        for r in self.regimes:
            if r.name == name:
                return r
        return RegimeInfo(name)

    def notes(self, case, region_models):
        out = list(self._notes(case, region_models)) if self._notes is not None else []
        seen: dict[str, tuple[float, str]] = {}
        for m, consts in region_models:
            for k, v in consts:
                if k in seen and not math.isclose(seen[k][0], v, rel_tol=1e-12, abs_tol=0.0):
                    out.append(f"Constant {k} is {seen[k][0]:g} in {seen[k][1]} but {v:g} in {m.label}: "
                               f"each line uses its own value.")
                seen.setdefault(k, (v, m.label))
        return out

    def bounding_indices(self, region_models, regime_names, regime):
        return tuple(range(len(region_models))) if regime in regime_names else ()

    def conjunction(self, region_models, regime_names, regime):
        """From the rule on every sign pattern of the lines: the regime is an intersection of sides when the
        patterns giving it fix some lines' signs and leave every combination of the others (a sub-cube).

        >>> import numpy as np
        >>> class L:                                       # a stand-in line with a name
        ...     def __init__(self, name): self.name = name
        >>> rule = lambda v: np.where(v["a"] >= 0, "A", np.where(v["b"] >= 0, "B", "C"))
        >>> sch = PartitionScheme("demo", ("a", "b"), (RegimeInfo("A"), RegimeInfo("B"), RegimeInfo("C")), rule)
        >>> lines = ((L("a"), ()), (L("b"), ()))
        >>> [sch.conjunction(lines, ("A", "B", "C"), r) for r in ("A", "B", "C")]
        [(0,), (0, 1), (0, 1)]
        >>> rule2 = lambda v: np.where((v["a"] >= 0) | (v["b"] >= 0), "either", "neither")
        >>> sch2 = PartitionScheme("demo", ("a", "b"), (RegimeInfo("either"), RegimeInfo("neither")), rule2)
        >>> sch2.conjunction(lines, ("either", "neither"), "either") is None
        True
        """
        if regime not in regime_names or not region_models:
            return None
        names = tuple(m.name for m, _ in region_models)
        key = (names, regime)
        if key not in self._conjunctions:
            bits, out = self._on_patterns(names)
            sel = bits[out == regime]
            fixed = tuple(k for k in range(len(names)) if sel.size and np.all(sel[:, k] == sel[0, k]))
            self._conjunctions[key] = fixed if fixed and len(sel) == 2 ** (len(names) - len(fixed)) else None
        return self._conjunctions[key]

    def _on_patterns(self, names: tuple):
        """(bits, regimes): every sign pattern of the lines ``names`` (bit 1: on or above the line) and the regime
        the rule gives it."""
        n = len(names)
        bits = (np.arange(2 ** n)[:, None] >> np.arange(n)[None, :]) & 1
        return bits, np.asarray(self.rule({nm: bits[:, k] * 2.0 - 1.0 for k, nm in enumerate(names)}))


def _sequence(models: Sequence[BoundaryModel]) -> list[int]:
    """Indices of the region-defining models in order of increasing gas fraction (sequence rule)."""
    if not models:
        return []
    chain = [0]
    regimes = [models[0].regime_below, models[0].regime_above]
    pairs = {(models[0].regime_below, models[0].regime_above)}
    changed = True
    while changed:
        changed = False
        for i, m in enumerate(models):
            if i in chain or (m.regime_below, m.regime_above) in pairs:
                continue
            if m.regime_below == regimes[-1] and m.regime_above not in regimes:
                chain.append(i)
                regimes.append(m.regime_above)
            elif m.regime_above == regimes[0] and m.regime_below not in regimes:
                chain.insert(0, i)
                regimes.insert(0, m.regime_below)
            else:
                continue
            pairs.add((m.regime_below, m.regime_above))
            changed = True
    return chain
