"""lowgmap application layer: CLI, dashboard, exports and file formats (units live here)."""

if __name__ != "lowgmap.app":  # pragma: no cover - one module, one name
    raise ImportError("the app folder installs as lowgmap.app: `pip install -e .`, then `import lowgmap.app`")

from importlib.metadata import PackageNotFoundError, version as _version

try:
    __version__ = _version("lowgmap")
except PackageNotFoundError:  # running from a source tree without installation
    __version__ = "0.1.0"

CAUTION = ("Preliminary design aid only: not a substitute for qualification testing. Follow the applicable "
           "standards, local codes and licensed engineering review.")
