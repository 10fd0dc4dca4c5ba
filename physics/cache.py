"""Persistent cache of expensive, deterministic results (tables of arrays) between processes.

Some results take seconds to compute and depend only on a few inputs: the open-channel Stokes
resistance tables per channel shape, the critical-flow tables per channel and length, resolved fluid
properties (whose library takes seconds to import). They are kept in memory by each module; this
module also keeps them on disk, so that the next command or the next dashboard server does not pay
for them again.

Rules:

* **Key.** A result is stored under a namespace (``"open_channel.stokes_table"``) and a key made from
  the exact inputs (floats by their ``repr``, which round-trips exactly) and the lowgmap version, so a
  new version never reads tables of an older one.
* **Never trusted when corrupt.** Each file holds its arrays and a SHA-256 digest of their bytes;
  a truncated, garbled or unreadable file is deleted, reported as a miss and rebuilt.
* **Atomic.** A file is written to a temporary name in the same folder, flushed to disk and renamed
  into place: a reader sees the old file, the new file or none, never a part. Two processes storing
  the same key at once each write a complete file; the last rename wins.
* **Bounded.** After each store the folder is trimmed to :func:`max_bytes` (oldest files first, by
  modification time; a hit refreshes it).
* **Off switch.** ``LOWGMAP_CACHE=off`` disables it; ``LOWGMAP_CACHE_DIR`` moves it (default: the
  user cache folder from platformdirs, e.g. ``~/.cache/lowgmap``); ``LOWGMAP_CACHE_MAX_MB`` bounds it
  (default 256 MB).

Only numpy arrays of numbers or strings are stored (``allow_pickle=False``): nothing executable is
ever loaded from the cache.
"""
from __future__ import annotations

import functools
import hashlib
import io
import os
import tempfile
import zipfile
from pathlib import Path
from typing import Callable, Mapping

import numpy as np

__all__ = ["enabled", "cache_dir", "max_bytes", "make_key", "load", "store", "cached_arrays", "info", "clear",
           "arrays_digest", "ENV_SWITCH", "ENV_DIR", "ENV_MAX_MB"]

ENV_SWITCH = "LOWGMAP_CACHE"
ENV_DIR = "LOWGMAP_CACHE_DIR"
ENV_MAX_MB = "LOWGMAP_CACHE_MAX_MB"
DEFAULT_MAX_MB = 256.0
SUFFIX = ".npz"
_DIGEST = "__sha256__"


@functools.lru_cache(maxsize=1)
def _version() -> str:
    """The installed version of lowgmap (read once per process: reading package metadata costs milliseconds)."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("lowgmap")
    except PackageNotFoundError:  # pragma: no cover - running from a source tree without installation
        return "0+unknown"


def enabled() -> bool:
    """Whether the persistent cache is in use (``LOWGMAP_CACHE`` is not off/0/no/false)."""
    return os.environ.get(ENV_SWITCH, "on").strip().lower() not in ("off", "0", "no", "false")


def cache_dir() -> Path:
    """Folder of the cache (``LOWGMAP_CACHE_DIR`` or the user cache folder), one sub-folder per version."""
    base = os.environ.get(ENV_DIR)
    if not base:
        import platformdirs

        base = platformdirs.user_cache_dir("lowgmap", appauthor=False)
    return Path(base) / f"v{_version()}"


def max_bytes() -> int:
    """Size bound of the cache folder [bytes] (``LOWGMAP_CACHE_MAX_MB``, default 256 MB)."""
    raw = os.environ.get(ENV_MAX_MB, "")
    try:
        mb = float(raw) if raw else DEFAULT_MAX_MB
    except ValueError:
        mb = DEFAULT_MAX_MB
    return int(max(mb, 0.0) * 1024 * 1024)


def _canonical(part) -> str:
    if isinstance(part, float) or isinstance(part, np.floating):
        return repr(float(part))
    if isinstance(part, (bool, np.bool_)):
        return repr(bool(part))
    if isinstance(part, (int, np.integer)):
        return repr(int(part))
    if isinstance(part, str):
        return repr(part)
    if part is None:
        return "None"
    if isinstance(part, Mapping):
        return "{" + ",".join(f"{_canonical(k)}:{_canonical(v)}" for k, v in sorted(part.items(), key=str)) + "}"
    if isinstance(part, (tuple, list)):
        return "(" + ",".join(_canonical(p) for p in part) + ")"
    if isinstance(part, np.ndarray):
        return f"array{part.dtype.str}{part.shape}:{hashlib.sha256(np.ascontiguousarray(part).tobytes()).hexdigest()}"
    fields = getattr(part, "__dataclass_fields__", None)
    if fields is not None:
        return type(part).__qualname__ + _canonical({name: getattr(part, name) for name in fields})
    raise TypeError(f"cache key part of type {type(part).__name__} has no exact text form")


def make_key(*parts) -> str:
    """A file-name-safe key from the exact values of ``parts`` (floats, ints, strings, tuples, mappings,
    arrays and dataclasses of those) and the lowgmap version.

    >>> make_key(0.1, "wedge") == make_key(0.1, "wedge")
    True
    >>> make_key(0.1, "wedge") == make_key(0.1000000001, "wedge")
    False
    """
    text = _version() + "|" + "|".join(_canonical(p) for p in parts)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:40]


def _path(namespace: str, key: str) -> Path:
    safe = "".join(c if c.isalnum() or c in "._-" else "_" for c in namespace)
    return cache_dir() / safe / f"{key}{SUFFIX}"


def _digest(arrays: Mapping[str, np.ndarray]) -> str:
    h = hashlib.sha256()
    for name in sorted(arrays):
        a = np.ascontiguousarray(arrays[name])
        h.update(name.encode("utf-8"))
        h.update(a.dtype.str.encode("ascii"))
        h.update(repr(a.shape).encode("ascii"))
        h.update(a.tobytes())
    return h.hexdigest()


def arrays_digest(arrays: Mapping[str, np.ndarray]) -> str:
    """SHA-256 of named arrays (names, dtypes, shapes and bytes, in name order): the check the cache files
    carry, also used for tables shipped with the package.

    >>> arrays_digest({"a": np.zeros(2)}) == arrays_digest({"a": np.zeros(2)})
    True
    """
    return _digest(arrays)


def _discard(path: Path) -> None:
    try:
        path.unlink()
    except OSError:
        pass


def load(namespace: str, key: str) -> dict[str, np.ndarray] | None:
    """The arrays stored under (namespace, key), or None (off, missing, or corrupt: then deleted)."""
    if not enabled():
        return None
    path = _path(namespace, key)
    try:
        raw = path.read_bytes()
    except OSError:
        return None
    try:
        with np.load(io.BytesIO(raw), allow_pickle=False) as z:
            arrays = {name: z[name] for name in z.files}
        stored = str(arrays.pop(_DIGEST))
        if stored != _digest(arrays):
            raise ValueError("digest mismatch")
    except (OSError, ValueError, KeyError, EOFError, zipfile.BadZipFile, UnicodeDecodeError):
        _discard(path)
        return None
    try:
        os.utime(path)                       # a hit keeps the file young for the size bound
    except OSError:
        pass
    return arrays


def store(namespace: str, key: str, arrays: Mapping[str, np.ndarray]) -> Path | None:
    """Write ``arrays`` under (namespace, key) atomically; None when the cache is off or not writable."""
    if not enabled():
        return None
    clean = {}
    for name, value in arrays.items():
        if name == _DIGEST or name.startswith("__"):
            raise ValueError(f"array name {name!r} is reserved")
        a = np.asarray(value)
        if a.dtype.kind not in "biufcU":
            raise TypeError(f"cache arrays must hold numbers or strings, got {a.dtype} for {name!r}")
        clean[name] = a
    path = _path(namespace, key)
    buf = io.BytesIO()
    payload = {**clean, _DIGEST: np.array(_digest(clean))}
    np.savez(buf, **payload)  # type: ignore[arg-type]  # (numpy's stub: a name could clash with allow_pickle)
    tmp = None
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=".tmp", dir=path.parent)
        with os.fdopen(fd, "wb") as fh:
            fh.write(buf.getvalue())
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
        tmp = None
    except OSError:
        return None                          # a read-only or full disk only costs the speed-up
    finally:
        if tmp is not None:
            _discard(Path(tmp))
    _trim(max_bytes())
    return path


def cached_arrays(namespace: str, key_parts: tuple, build: Callable[[], Mapping[str, np.ndarray]]
                  ) -> dict[str, np.ndarray]:
    """Load the arrays for ``key_parts`` from the cache, or ``build()`` them and store them.

    ``build`` must be deterministic in ``key_parts``: the cache returns its stored result instead.
    """
    key = make_key(namespace, *key_parts)
    hit = load(namespace, key)
    if hit is not None:
        return hit
    arrays = {name: np.asarray(value) for name, value in build().items()}
    store(namespace, key, arrays)
    return arrays


def _files() -> list[Path]:
    root = cache_dir().parent
    if not root.is_dir():
        return []
    return [p for p in root.rglob(f"*{SUFFIX}") if p.is_file()]


def _trim(limit: int) -> None:
    files = []
    for p in _files():
        try:
            st = p.stat()
        except OSError:
            continue
        files.append((st.st_mtime, st.st_size, p))
    total = sum(size for _, size, _ in files)
    if total <= limit:
        return
    for _, size, p in sorted(files, key=lambda f: f[0]):
        _discard(p)
        total -= size
        if total <= 0.8 * limit:
            break


def info() -> dict:
    """Where the cache is, whether it is on, how many files and bytes it holds (all versions)."""
    files = _files()
    size = 0
    for p in files:
        try:
            size += p.stat().st_size
        except OSError:
            pass
    return {"path": str(cache_dir().parent), "version_folder": str(cache_dir()), "enabled": enabled(),
            "files": len(files), "bytes": size, "max_bytes": max_bytes()}


def clear() -> int:
    """Delete every cache file (all versions); return how many were deleted."""
    n = 0
    for p in _files():
        try:
            p.unlink()
            n += 1
        except OSError:
            pass
    return n
