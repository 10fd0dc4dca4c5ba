"""Atomic file writes: a file is either the old one or the complete new one, never half written.

Every writer of lowgmap (case files, test-point templates, sweep tables, charts, reports) goes
through :func:`write_atomic`: the bytes go to a temporary file in the target's folder, are flushed
to disk (``fsync``), and the temporary file is renamed over the target with :func:`os.replace`
(atomic on POSIX and Windows when both are on one file system); the folder is flushed too, so the
rename itself survives a power cut. If anything fails, or the write is
interrupted, the temporary file is removed and the target is left as it was.

Standard library only.
"""
from __future__ import annotations

import os
import secrets
import stat
from pathlib import Path

__all__ = ["write_atomic"]


def write_atomic(path: str | os.PathLike, data: bytes | str, *, encoding: str = "utf-8",
                 overwrite: bool = True) -> Path:
    """Write ``data`` to ``path`` atomically; return the path written.

    Parameters
    ----------
    path : str or path-like    target file; missing parent folders are created
    data : bytes or str        the complete content; text is encoded with ``encoding`` as it is
                               (no newline translation)
    encoding : str             text encoding (default UTF-8)
    overwrite : bool           replace an existing file (default); with False an existing target
                               raises :class:`FileExistsError` and is left untouched

    Notes
    -----
    The new file gets the permissions of the file it replaces, or the usual permissions of a new
    file (0o666 less the process umask). An interrupted write (an exception, Ctrl+C) leaves no
    temporary file behind.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> write_atomic(folder / "notes" / "a.txt", "first\\n").read_text()
    'first\\n'
    >>> write_atomic(folder / "notes" / "a.txt", b"second").read_bytes()
    b'second'
    >>> sorted(p.name for p in (folder / "notes").iterdir())
    ['a.txt']
    """
    target = Path(path)
    payload = data.encode(encoding) if isinstance(data, str) else bytes(data)
    if not overwrite and target.exists():
        raise FileExistsError(f"{target} exists")
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = _open_temporary(target)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(payload)
            fh.flush()
            os.fsync(fh.fileno())
        try:
            os.chmod(tmp, stat.S_IMODE(os.stat(target).st_mode))
        except FileNotFoundError:
            pass
        if overwrite:
            os.replace(tmp, target)
        else:
            _link_new(tmp, target)
        _sync_folder(target.parent)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
    return target


def _sync_folder(folder: Path) -> None:
    """Flush the folder entry of the renamed file to disk (POSIX; a no-op where folders cannot be opened)."""
    try:
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _open_temporary(target: Path) -> tuple[int, str]:
    """A new hidden file beside ``target`` (created with 0o666 less the umask)."""
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
    while True:
        tmp = str(target.with_name(f".{target.name}.{secrets.token_hex(4)}.tmp"))
        try:
            return os.open(tmp, flags, 0o666), tmp
        except FileExistsError:  # pragma: no cover - a name drawn twice
            continue


def _link_new(tmp: str, target: Path) -> None:
    """Put ``tmp`` at ``target`` only if ``target`` does not exist (hard link, then drop ``tmp``)."""
    try:
        os.link(tmp, target)
    except FileExistsError:
        raise FileExistsError(f"{target} exists") from None
    except OSError:  # a file system without hard links: the check above has to do
        if target.exists():
            raise FileExistsError(f"{target} exists") from None
        os.replace(tmp, target)
        return
    os.unlink(tmp)
