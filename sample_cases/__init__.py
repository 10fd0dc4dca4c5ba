"""Bundled sample cases, test points and study files: invented scenarios for demonstration.

This folder installs as the data package ``lowgmap.samples``; read it through
:mod:`lowgmap.app.files.samples` (``lowgmap samples`` lists and copies the files).
"""
if __name__ != "lowgmap.samples":  # pragma: no cover - one module, one name
    raise ImportError("the sample_cases folder installs as lowgmap.samples: `pip install -e .`")
