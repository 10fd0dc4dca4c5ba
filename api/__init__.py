"""lowgmap: regime charts, margins and test-point reconciliation for bubbly flow in low-gravity conduits.

The public Python surface for scripts and notebooks. Everything here is loaded on first use, so
``import lowgmap`` is quick and pulls in no numerical library until a name is touched.

>>> import lowgmap
>>> doc = lowgmap.load_case(lowgmap.sample_case_path("condensate_line"))
>>> chart = lowgmap.build_chart(doc.case)
>>> op = doc.case.operating_point
>>> m = lowgmap.point_margins(chart, op.ql, op.qg)
>>> m.regime
'dispersed bubbles'

Names (each documented where it lives):

========================  ================================================================
loading a case            :func:`load_case`, :func:`loads_case`, :func:`sample_case_path`,
                          :class:`Case`, :class:`FlowRange`, :class:`OperatingPoint`
gravity and orientation   :class:`Orientation`, :func:`gravity_level`, :class:`GravityLevel`,
                          :data:`GRAVITY_LEVELS`, :func:`with_conduit`
the chart                 :func:`build_chart`, :class:`Chart`, :func:`boundary_models`
margins                   :func:`point_margins`, :func:`envelope_check`, :func:`robust_point`
uncertainty               :func:`monte_carlo`, :class:`Uncertainty`
test points               :func:`read_test_points`, :func:`agreement`,
                          :class:`ValidityCriteria`, :func:`calibrate`,
                          :func:`fit_empirical_boundary`
design exploration        :func:`sweep`, :func:`grid`, :func:`zipped`, :func:`optimize_design`,
                          :class:`DesignGoal`, :class:`DesignVariable`,
                          :class:`DesignConstraint`
exports                   :func:`write_chart`, :func:`chart_bytes`, :func:`report_html`
dashboard                 :func:`create_app` (the per-session app factory), :func:`serve`
========================  ================================================================
"""
from __future__ import annotations

import importlib

if __name__ != "lowgmap":  # pragma: no cover - guard against importing the source folder directly
    raise ImportError("this folder is the package 'lowgmap': install it (pip install -e .) and `import lowgmap`")

#: public name -> (module, attribute)
_EXPORTS = {
    "load_case": ("lowgmap.app.files.casefile", "load_case"),
    "loads_case": ("lowgmap.app.files.casefile", "loads_case"),
    "sample_case_path": ("lowgmap.app.files.casefile", "sample_case_path"),
    "Case": ("lowgmap.physics.case", "Case"),
    "FlowRange": ("lowgmap.physics.case", "FlowRange"),
    "OperatingPoint": ("lowgmap.physics.case", "OperatingPoint"),
    "Orientation": ("lowgmap.physics.case", "Orientation"),
    "gravity_level": ("lowgmap.physics.properties.gravity", "gravity_level"),
    "GravityLevel": ("lowgmap.physics.properties.gravity", "GravityLevel"),
    "GRAVITY_LEVELS": ("lowgmap.physics.properties.gravity", "GRAVITY_LEVELS"),
    "with_conduit": ("lowgmap.app.files.casefile", "with_conduit"),
    "Chart": ("lowgmap.physics.chart.composition", "Chart"),
    "build_chart": ("lowgmap.physics.chart.composition", "build_chart"),
    "boundary_models": ("lowgmap.physics.models.boundary", "model_names"),
    "point_margins": ("lowgmap.physics.chart.margins", "point_margins"),
    "envelope_check": ("lowgmap.physics.chart.margins", "envelope_check"),
    "robust_point": ("lowgmap.physics.chart.margins", "robust_point"),
    "monte_carlo": ("lowgmap.physics.studies.uncertainty", "monte_carlo"),
    "Uncertainty": ("lowgmap.physics.studies.uncertainty", "Uncertainty"),
    "read_test_points": ("lowgmap.app.files.testpoints", "read_test_points"),
    "agreement": ("lowgmap.physics.studies.agreement", "agreement"),
    "ValidityCriteria": ("lowgmap.physics.studies.agreement", "ValidityCriteria"),
    "calibrate": ("lowgmap.physics.studies.calibration", "calibrate"),
    "fit_empirical_boundary": ("lowgmap.physics.studies.calibration", "fit_empirical_boundary"),
    "sweep": ("lowgmap.physics.studies.sweep", "sweep"),
    "grid": ("lowgmap.physics.studies.sweep", "grid"),
    "zipped": ("lowgmap.physics.studies.sweep", "zipped"),
    "optimize_design": ("lowgmap.physics.studies.design", "optimize_design"),
    "DesignGoal": ("lowgmap.physics.studies.design", "DesignGoal"),
    "DesignVariable": ("lowgmap.physics.studies.design", "DesignVariable"),
    "DesignConstraint": ("lowgmap.physics.studies.design", "DesignConstraint"),
    "write_chart": ("lowgmap.app.outputs.exports", "write_chart"),
    "chart_bytes": ("lowgmap.app.outputs.exports", "chart_bytes"),
    "report_html": ("lowgmap.app.outputs.exports", "report_html"),
    "create_app": ("lowgmap.app.dashboard", "create_app"),
    "serve": ("lowgmap.app.dashboard", "serve"),
    "CAUTION": ("lowgmap.app", "CAUTION"),
    "__version__": ("lowgmap.app", "__version__"),
}

__all__ = sorted(n for n in _EXPORTS if not n.startswith("_"))


def __getattr__(name: str):
    try:
        module, attr = _EXPORTS[name]
    except KeyError:
        raise AttributeError(f"module 'lowgmap' has no attribute {name!r}") from None
    value = getattr(importlib.import_module(module), attr)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__():
    return sorted(set(globals()) | set(_EXPORTS))
