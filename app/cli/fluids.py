"""`lowgmap fluids`: list the fluid names and property sources."""
from __future__ import annotations

from lowgmap.app.cli.common import EXIT_OK, emit

__all__ = ["add_arguments", "run"]


def add_arguments(parser) -> None:
    """``fluids`` takes only ``--json``."""


def run(args) -> int:
    from lowgmap.physics.properties import fluids

    names = fluids.fluid_names()
    data = {"sources": names, "user": "any liquid, with rho_l, mu_l and sigma given in [fluid.overrides]"}
    lines = ["Fluids lowgmap knows (use the name in [fluid] liquid/gas):"]
    for source, items in names.items():
        lines.append(f"\n{source} ({len(items)}):")
        lines.append("  " + ", ".join(items))
    lines.append("\nuser-defined: set liquid_source = \"user\" and give rho_l, mu_l, sigma (and rho_g, mu_g) "
                 "in [fluid.overrides].")
    emit(args, data, "\n".join(lines))
    return EXIT_OK
