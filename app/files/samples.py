"""The bundled sample files: invented cases, test points and study files shipped with lowgmap.

They are package data of ``lowgmap.samples`` (the repository's ``sample_cases/`` folder), found through
:mod:`importlib.resources`, so they work the same from a source checkout, an editable install and a
wheel. ``lowgmap samples`` lists them and copies them into a working folder.
"""
from __future__ import annotations

import shutil
from importlib import resources
from pathlib import Path

__all__ = ["sample_dir", "sample_files", "sample_cases", "sample_path", "copy_samples"]

#: File kinds that are samples (the package's own ``__init__.py`` is not one).
_SUFFIXES = (".toml", ".csv", ".xlsx")


def sample_dir() -> Path:
    """Folder of the bundled samples (a real folder: lowgmap is installed unzipped)."""
    root = resources.files("lowgmap.samples")
    return Path(str(root))


def sample_files() -> list[str]:
    """Every bundled sample file, as a path relative to :func:`sample_dir` with ``/`` separators.

    >>> "condensate_line.toml" in sample_files() and "studies/design_goal.toml" in sample_files()
    True
    """
    root = sample_dir()
    return sorted(p.relative_to(root).as_posix() for p in root.rglob("*")
                  if p.is_file() and p.suffix in _SUFFIXES)


def sample_cases() -> list[str]:
    """Names of the bundled sample cases (case files at the top of the folder, without ``.toml``)."""
    return [f[:-5] for f in sample_files() if f.endswith(".toml") and "/" not in f]


def sample_path(name: str | None = None) -> Path:
    """Path of a bundled sample file: a case by name (``"wedge_separator"``, default the condensate-line
    tube case) or any sample file by its relative name (``"drop_tower_points.csv"``,
    ``"studies/design_goal.toml"``).

    Raises
    ------
    FileNotFoundError
        No such sample; the message lists the bundled ones.
    """
    name = name or "condensate_line"
    files = sample_files()
    for candidate in (name, f"{name}.toml"):
        if candidate in files:
            return sample_dir() / candidate
    raise FileNotFoundError(f"no bundled sample {name!r}; bundled: {', '.join(files)}")


def copy_samples(dest, names=None, *, overwrite: bool = False) -> list[Path]:
    """Copy bundled samples (default: all) into the folder ``dest``, keeping sub-folders.

    An existing file is never replaced unless ``overwrite``: otherwise nothing is copied and
    :class:`FileExistsError` names the files.
    """
    dest = Path(dest)
    if dest.exists() and not dest.is_dir():
        raise NotADirectoryError(f"{dest} is not a folder")
    chosen = sample_files() if not names else [sample_path(n).relative_to(sample_dir()).as_posix() for n in names]
    targets = [(sample_dir() / rel, dest / rel) for rel in chosen]
    existing = [str(t) for _, t in targets if t.exists()]
    if existing and not overwrite:
        raise FileExistsError(f"would replace {', '.join(existing)}: give --force to replace them")
    out = []
    for src, target in targets:
        target.parent.mkdir(parents=True, exist_ok=True)
        shutil.copyfile(src, target)
        out.append(target)
    return out
