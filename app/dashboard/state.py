"""Session state of the dashboard: the case being edited, its study (chart, point, margins, test points).

No bokeh or panel widgets here: this is a ``param.Parameterized`` model that views bind to. Each
browser session gets its own :class:`Session` (built by the server's factory function), so two users
never share state. Case inputs are kept as the text a person types (numbers with units) in a copy
of the case-file document; every change re-validates the whole case with :mod:`lowgmap.app.files.casefile`, the
same path the CLI uses. An invalid entry leaves the last good case and chart in place and files the
problem under its input group.

Everything the views show comes from one :class:`lowgmap.physics.studies.study.Study`
(:attr:`Session.study`): the chart pane draws its chart, the margin table shows its margins, the
test-point panel its agreement, and the exports receive the study itself, so the chart is never
rebuilt for an export. Expensive work (building the chart) happens only when the case changes;
moving the operating point only computes the margins of the new point on the same chart
(:meth:`Study.with_point`).
"""
from __future__ import annotations

import copy
import dataclasses
import math
from dataclasses import dataclass

import param
import tomlkit

from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.studies.study import Study, run_study

from lowgmap.app.files.casefile import CaseDocument, CaseFileError, build_case, dumps_case, loads_case
from lowgmap.app.files.units import UnitError, convert, parse_flow

__all__ = ["Session", "GROUPS", "group_of"]

#: Input groups as an engineer thinks of them: (key, title, case-file tables/keys in the group).
GROUPS = (
    ("fluid", "Fluid and temperature", ("fluid",)),
    ("section", "Cross-section and length", ("section", "conduit.length")),
    ("wetting", "Wetting", ("wetting",)),
    ("gravity", "Residual acceleration", ("conduit.residual_acceleration",)),
    ("models", "Boundary models and constants", ("models", "custom_boundaries")),
    ("chart", "Chart ranges, axes and units", ("chart",)),
    ("point", "Operating point", ("operating_point",)),
)


def group_of(path: str) -> str:
    """Input group key of a case-file key path (for placing a message next to its field)."""
    best, best_len = "case", -1
    for key, _, prefixes in GROUPS:
        for p in prefixes:
            if (path == p or path.startswith(p + ".") or path.startswith(p + "[")) and len(p) > best_len:
                best, best_len = key, len(p)
    if path == "conduit":
        return "section"
    return best


@dataclass(frozen=True)
class MarginRow:
    name: str
    label: str
    source: str
    role: str
    ql_up: float | None
    ql_down: float | None
    qg_up: float | None
    qg_down: float | None
    log_distance: float | None


class Session(param.Parameterized):
    """One browser session's case, chart, operating point and margins (all read from :attr:`study`)."""

    doc = param.Parameter(doc="the last valid CaseDocument")
    study = param.ClassSelector(class_=Study, doc="Study of the last valid case at the current operating point")
    chart = param.Parameter(doc="chart of the last valid case (the study's chart)")
    problems = param.Dict(default={}, doc="group key -> list of problem strings from the last edit")
    ql = param.Number(default=None, allow_None=True, doc="operating-point liquid flow [m^3/s]")
    qg = param.Number(default=None, allow_None=True, doc="operating-point gas flow [m^3/s]")
    margins = param.Parameter(doc="PointMargins of the operating point (the study's margins)")
    test_points = param.Parameter(doc="the test points compared with the chart (TestPointSet or table), or None")
    required_margin = param.Number(default=0.2, bounds=(0, 0.99), doc="required symmetric margin (fraction)")
    show_uncertainty = param.Boolean(default=False)
    revision_counter = param.Integer(default=0, doc="increments on every successful case rebuild")

    def __init__(self, doc: CaseDocument, **params):
        super().__init__(**params)
        self.data = copy.deepcopy(doc.data)
        self.base_dir = doc.path.parent if doc.path else None
        self.source_name = doc.path.name if doc.path else "case.toml"
        self._apply_doc(doc)

    # ------------------------------------------------------------------------------- case edits
    def get(self, path: str, default=""):
        """Text of a case-file value by dotted path ("fluid.temperature")."""
        node = self.data
        for part in path.split("."):
            if not isinstance(node, dict) or part not in node:
                return default
            node = node[part]
        return node.unwrap() if hasattr(node, "unwrap") else node

    def edit(self, changes: dict[str, object]) -> bool:
        """Apply text edits {dotted path: value or None to remove}; rebuild the case if valid.

        Returns True when the case was valid and the chart was rebuilt. On failure, the edits are
        rolled back, the problems are filed by group, and the last good chart stays.
        """
        trial = copy.deepcopy(self.data)
        for path, value in changes.items():
            *parents, key = path.split(".")
            node = trial
            for p in parents:
                if p not in node:
                    node[p] = tomlkit.table()
                node = node[p]
            if value is None:
                if key in node:
                    del node[key]
            else:
                node[key] = value
        text = dumps_case(trial)
        try:
            doc = loads_case(text, source=self.source_name, base_dir=self.base_dir)
        except CaseFileError as exc:
            grouped: dict[str, list[str]] = {}
            for p in exc.problems:
                grouped.setdefault(group_of(p.path), []).append(str(p))
            self.problems = grouped
            return False
        try:
            chart = Chart.build(doc.case)
        except ValueError as exc:  # e.g. a model constant out of range
            self.problems = {"models": [str(exc)]}
            return False
        self.data = doc.data
        self._apply_doc(doc, chart)
        return True

    def load_text(self, text: str, name: str = "uploaded case") -> bool:
        """Replace the whole case by an uploaded case file (validated first)."""
        try:
            doc = loads_case(text, source=name, base_dir=self.base_dir)
            chart = Chart.build(doc.case)
        except CaseFileError as exc:
            self.problems = {"case": [str(p) for p in exc.problems]}
            return False
        except ValueError as exc:
            self.problems = {"case": [str(exc)]}
            return False
        self.data = doc.data
        self.source_name = name
        self._apply_doc(doc, chart)
        return True

    def case_text(self) -> str:
        """The current (valid) case as case-file text, for download."""
        return dumps_case(self.data)

    def _apply_doc(self, doc: CaseDocument, chart: Chart | None = None):
        study = run_study(doc.case, chart=chart, points=self.test_points)
        op = doc.case.operating_point
        with param.parameterized.batch_call_watchers(self):
            self.doc = doc
            self.study = study
            self.chart = study.chart
            self.problems = {}
            self.required_margin = doc.settings.required_margin
            if op is not None:
                self.ql, self.qg = op.ql, op.qg
            elif self.ql is None:
                fr = doc.case.flow_range
                self.ql = math.sqrt(fr.ql_min * fr.ql_max)
                self.qg = math.sqrt(fr.qg_min * fr.qg_max)
            self.revision_counter += 1
        self.update_margins()

    # ------------------------------------------------------------------------------ the point
    def move_point(self, ql: float, qg: float, *, write_back: bool = True) -> None:
        """Move the operating point (SI) and recompute its margins (no chart rebuild)."""
        if not (ql > 0 and qg > 0 and math.isfinite(ql) and math.isfinite(qg)):
            raise ValueError(f"operating point must have positive finite flows, got Q_L={ql!r}, Q_G={qg!r}")
        with param.parameterized.batch_call_watchers(self):
            self.ql, self.qg = float(ql), float(qg)
        if write_back:
            st = self.doc.settings
            op = self.data.setdefault("operating_point", tomlkit.table())
            op["liquid_flow"] = f"{convert(ql, 'flow', st.liquid_flow_unit):.6g} {st.liquid_flow_unit}"
            op["gas_flow"] = f"{convert(qg, 'flow', st.gas_flow_unit):.6g} {st.gas_flow_unit}"
        self.update_margins()

    def parse_point_text(self, ql_text: str, qg_text: str) -> tuple[float, float]:
        """Typed operating-point fields (text with units; sccm/slpm allowed for gas) -> SI."""
        f = self.doc.case.fluid
        ql = parse_flow(ql_text, "liquid flow", gas=False)
        qg = parse_flow(qg_text, "gas flow", gas=True, pressure=f.pressure, temperature=f.temperature)
        for name, v in (("liquid flow", ql), ("gas flow", qg)):
            if not v > 0:
                raise UnitError(f"{name} must be > 0, got {v:g} m^3/s")
        return ql, qg

    def regime_at(self, ql: float, qg: float) -> str:
        return self.chart.regime_at(ql, qg) if self.chart is not None else ""

    def update_margins(self) -> None:
        """Move the study to the session's point (margins only; the chart is kept) and publish its margins."""
        study = self.study
        if study is None or self.ql is None:
            self.margins = None
            return
        if study.point != (self.ql, self.qg):
            study = study.with_point(self.ql, self.qg)
        with param.parameterized.batch_call_watchers(self):
            self.study = study
            self.margins = study.margins

    def set_test_points(self, points) -> None:
        """Compare ``points`` (a TestPointSet, or None to drop them) with the chart; kept across case edits."""
        with param.parameterized.batch_call_watchers(self):
            self.test_points = points
            self.study = self.study.with_test_points(points)

    def export_settings(self):
        """Chart settings for an export: the case's, with the required margin the person has set."""
        return dataclasses.replace(self.doc.settings, required_margin=self.required_margin)

    def robust_point(self, regime: str):
        """Move the point to the most robust point of ``regime``; returns the RobustPoint."""
        from lowgmap.physics.chart.margins import robust_point

        rp = robust_point(self.chart, regime)
        self.move_point(rp.ql, rp.qg)
        return rp

    # ------------------------------------------------------------------------------ uncertainty
    def flow_uncertainty_box(self) -> tuple[float, float, float, float] | None:
        """(ql_lo, ql_hi, qg_lo, qg_hi) [m^3/s]: ±1 size of the case's flow-rate uncertainties."""
        if self.ql is None:
            return None
        box = [self.ql, self.ql, self.qg, self.qg]
        for u in self.doc.uncertainties:
            if u.target not in ("liquid_flow", "gas_flow"):
                continue
            base = self.ql if u.target == "liquid_flow" else self.qg
            d = u.size * base if u.relative else u.size
            i = 0 if u.target == "liquid_flow" else 2
            box[i], box[i + 1] = max(base - d, base * 1e-3), base + d
        return tuple(box) if (box[0] != box[1] or box[2] != box[3]) else None
