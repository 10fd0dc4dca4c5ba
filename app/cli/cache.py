"""`lowgmap cache`: where the persistent table cache is, how big it is; ``--clear`` empties it."""
from __future__ import annotations

from lowgmap.app.cli.common import EXIT_OK, emit

__all__ = ["add_arguments", "run"]


def add_arguments(parser) -> None:
    parser.add_argument("--clear", action="store_true", help="delete every cached table")


def run(args) -> int:
    from lowgmap.physics import cache

    cleared = cache.clear() if args.clear else None
    rep = cache.info()
    if cleared is not None:
        rep["cleared_files"] = cleared
    state = "on" if rep["enabled"] else f"off ({cache.ENV_SWITCH}={'off'})"
    lines = [f"Table cache: {rep['path']}",
             f"  {state}; {rep['files']} file(s), {rep['bytes'] / 1e6:.3g} MB of at most {rep['max_bytes'] / 1e6:.3g} MB",
             f"  this version's tables: {rep['version_folder']}",
             f"  environment: {cache.ENV_SWITCH}=off turns it off, {cache.ENV_DIR} moves it, "
             f"{cache.ENV_MAX_MB} bounds it"]
    if cleared is not None:
        lines.insert(0, f"deleted {cleared} cached file(s)")
    emit(args, rep, "\n".join(lines))
    return EXIT_OK
