"""lowgmap physics: low-gravity two-phase conduit models.

Pure functions and small frozen dataclasses, SI units inside. Nothing here imports a user-interface
package (panel, bokeh, pint): units are converted at the edges in :mod:`app`.
"""

if __name__ != "lowgmap.physics":  # pragma: no cover - one module, one name
    raise ImportError("the physics folder installs as lowgmap.physics: `pip install -e .`, then `import lowgmap.physics`")

