"""Reading a user's input file: regular files only, with a size limit, one message per failure.

Every reader of lowgmap's text inputs (case files, SWEEP and GOAL files) opens the file through
:func:`read_text_file`. It refuses, with a one-line message that names the path, what is not a
regular file (a folder, a named pipe, a device such as ``/dev/zero``, a socket) and a file larger
than its limit, *before* reading a byte of it: a named pipe is opened without waiting for a writer,
and a file that grows while it is read is cut at the limit and refused. Failures raise
:class:`FileReadError`, an :class:`~lowgmap.physics.validate.InputError`: the command line shows the
message and ends with exit code 2.

Limits (bytes): :data:`MAX_CASE_BYTES` for case files, :data:`MAX_STUDY_BYTES` for SWEEP and GOAL
files (1 MB each; the bundled samples are about 2 kB).
"""
from __future__ import annotations

import errno
import os
import stat
from pathlib import Path

from lowgmap.physics.validate import InputError

__all__ = ["FileReadError", "read_text_file", "read_bytes_file", "MAX_CASE_BYTES", "MAX_STUDY_BYTES",
           "describe_size"]

#: Largest case file read [bytes] (1 MB).
MAX_CASE_BYTES = 1_000_000
#: Largest SWEEP or GOAL file read [bytes] (1 MB).
MAX_STUDY_BYTES = 1_000_000

_KINDS = ((stat.S_ISDIR, "a folder"), (stat.S_ISFIFO, "a named pipe (FIFO)"), (stat.S_ISCHR, "a character device"),
          (stat.S_ISBLK, "a block device"), (stat.S_ISSOCK, "a socket"))


class FileReadError(InputError):
    """A user's input file cannot be read (missing, not a regular file, too large, not text).

    ``path`` is the file named; the message names it and says what is wrong.
    """

    def __init__(self, message: str, path: str | os.PathLike = ""):
        super().__init__(message)
        self.path = str(path)


def describe_size(n: int) -> str:
    """A byte count as a person reads it.

    >>> describe_size(1_000_000), describe_size(15_300_000), describe_size(512)
    ('1 MB', '15.3 MB', '512 bytes')
    """
    if n >= 1_000_000:
        return f"{n / 1e6:.3g} MB"
    if n >= 10_000:
        return f"{n / 1e3:.3g} kB"
    return f"{n} bytes"


def read_bytes_file(path: str | os.PathLike, *, what: str = "file", max_bytes: int = MAX_CASE_BYTES) -> bytes:
    """The content of a regular file of at most ``max_bytes`` bytes; :class:`FileReadError` otherwise.

    Parameters
    ----------
    path : str or path-like
    what : str         what the file is, for messages ("case file", "sweep file")
    max_bytes : int    size limit [bytes]

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> (folder / "a.toml").write_bytes(b"x = 1\\n")
    6
    >>> read_bytes_file(folder / "a.toml", what="case file")
    b'x = 1\\n'
    >>> read_bytes_file(folder, what="case file")
    Traceback (most recent call last):
    lowgmap.app.files.reading.FileReadError: ... is a folder, not a case file; give the path of a regular file
    """
    p = Path(path)
    try:
        # O_NONBLOCK: a named pipe opens at once instead of waiting for a writer (it is refused below)
        fd = os.open(p, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
                     | getattr(os, "O_BINARY", 0))
    except OSError as exc:
        raise FileReadError(_open_message(p, exc, what), p) from None
    try:
        st = os.fstat(fd)
        for test, name in _KINDS:
            if test(st.st_mode):
                raise FileReadError(f"{p} is {name}, not a {what}; give the path of a regular file", p)
        if not stat.S_ISREG(st.st_mode):
            raise FileReadError(f"{p} is not a regular file; give the path of a {what}", p)
        if st.st_size > max_bytes:
            raise FileReadError(f"{p} is {describe_size(st.st_size)}; a {what} may be at most "
                                f"{describe_size(max_bytes)}", p)
        chunks, total = [], 0
        while True:
            chunk = os.read(fd, min(1 << 20, max_bytes + 1 - total))
            if not chunk:
                break
            chunks.append(chunk)
            total += len(chunk)
            if total > max_bytes:
                raise FileReadError(f"{p} grew past {describe_size(max_bytes)} while it was read; a {what} may be "
                                    f"at most {describe_size(max_bytes)}", p)
        return b"".join(chunks)
    except OSError as exc:
        raise FileReadError(f"cannot read {p}: {exc.strerror or exc}", p) from None
    finally:
        os.close(fd)


def read_text_file(path: str | os.PathLike, *, what: str = "file", max_bytes: int = MAX_CASE_BYTES,
                   encoding: str = "utf-8-sig") -> str:
    """The text of a regular file of at most ``max_bytes`` bytes (UTF-8, a byte-order mark dropped).

    Raises :class:`FileReadError` naming the path for a missing file, a folder, a named pipe, a
    device, a file over the limit, and for bytes that are not text in ``encoding`` (with the
    position of the first one).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "case.toml"
    >>> _ = f.write_bytes(b"\\xef\\xbb\\xbftitle = 'a'\\n")
    >>> read_text_file(f, what="case file")
    "title = 'a'\\n"
    >>> read_text_file(f, what="case file", max_bytes=4)
    Traceback (most recent call last):
    lowgmap.app.files.reading.FileReadError: ... is 15 bytes; a case file may be at most 4 bytes
    """
    data = read_bytes_file(path, what=what, max_bytes=max_bytes)
    try:
        return data.decode(encoding)
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        raise FileReadError(f"{path} is not {encoding.replace('-sig', '').upper()} text: byte "
                            f"0x{data[exc.start]:02x} on line {line} cannot be read (save the file as UTF-8)",
                            path) from None


def _open_message(p: Path, exc: OSError, what: str) -> str:
    code = exc.errno
    if code == errno.ENOENT:
        parent = p.parent
        if str(parent) not in ("", ".") and not parent.exists():
            return f"no such file: {p} (the folder {parent} does not exist)"
        return f"no such file: {p}"
    if code == errno.EISDIR:
        return f"{p} is a folder, not a {what}; give the path of a regular file"
    if code == errno.ENOTDIR:
        return f"no such file: {p} (a part of the path is a file, not a folder)"
    if code in (errno.EACCES, errno.EPERM):
        return f"cannot read {p}: permission denied"
    if code == errno.ENAMETOOLONG:
        return f"cannot read {str(p)[:80]}...: the path is too long"
    if code == errno.ELOOP:
        return f"cannot read {p}: too many levels of symbolic links"
    return f"cannot read {p}: {exc.strerror or exc}"
