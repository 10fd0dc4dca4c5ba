"""Uploads into the dashboard: size and row limits enforced before the transport limit, parsing off the loop.

A file reaches the server in chunks of :data:`CHUNK_BYTES` over the session's websocket (panel's
``FileDropper``, which shows the upload's progress), never as one message, so a large file never
meets the websocket's message limit (:data:`WEBSOCKET_MAX_MESSAGE_BYTES`, set by
:func:`lowgmap.app.dashboard.serve`): the browser refuses a file above :data:`UPLOAD_MAX_BYTES`
before sending anything ("File is too large"), and :class:`BoundedUpload` refuses it again on the
server at its first chunk (for a browser that skips the check), with a message next to the upload.
A test-point file is then checked for its number of lines (:data:`UPLOAD_MAX_ROWS`) before it is
parsed, and parsed on a worker thread (:func:`parse_test_points`).
"""
from __future__ import annotations

import panel as pn

__all__ = ["UPLOAD_MAX_BYTES", "UPLOAD_MAX_ROWS", "CASE_MAX_BYTES", "CHUNK_BYTES", "WEBSOCKET_MAX_MESSAGE_BYTES",
           "BoundedUpload", "too_many_rows", "parse_test_points", "limits_text"]

#: Largest test-point file the dashboard accepts [bytes] (decimal MB, as the browser counts them).
UPLOAD_MAX_BYTES = 10_000_000
#: Most data rows of a test-point file the dashboard reads (the command line reads larger files).
UPLOAD_MAX_ROWS = 100_000
#: Largest case file the dashboard opens [bytes].
CASE_MAX_BYTES = 1_000_000
#: Size of one upload chunk [bytes]: one websocket message each.
CHUNK_BYTES = 1_000_000
#: Largest websocket message the server accepts [bytes]: room for one chunk with its framing
#: (bokeh sends the chunk as a binary buffer; 4x covers a base64 fallback and the JSON header),
#: and far above every other message a page sends (field values are capped at 5000 characters).
WEBSOCKET_MAX_MESSAGE_BYTES = 4 * CHUNK_BYTES


def _mb(n: int) -> str:
    return f"{n / 1e6:g} MB"


def limits_text() -> str:
    """The upload limits in words (shown beside the test-point upload)."""
    return (f"CSV or Excel, at most {_mb(UPLOAD_MAX_BYTES)} and {UPLOAD_MAX_ROWS:,} rows "
            "(larger files: `lowgmap compare` on the command line).")


class BoundedUpload(pn.widgets.FileDropper):
    """A ``FileDropper`` that refuses files above ``max_bytes`` and hands each file to ``on_file``.

    The browser checks the size first (FilePond's ``maxFileSize``, the message "File is too large"
    with the limit); the server checks again at the first chunk and while chunks arrive, drops the
    chunks of a refused file and calls ``on_refused(name, size_at_least)``. Files are not kept in
    ``value`` (a session holds no copy of a file it has read): ``on_file(name, data: bytes)``.
    """

    def __init__(self, *, max_bytes: int, on_file, on_refused, **params):
        params.setdefault("chunk_size", CHUNK_BYTES)
        params.setdefault("multiple", False)
        params.setdefault("max_file_size", f"{max_bytes // 1000}KB")
        super().__init__(**params)
        self.max_bytes = int(max_bytes)
        self._on_file = on_file
        self._on_refused = on_refused
        self._chunks: dict[str, list[bytes]] = {}
        self._sizes: dict[str, int] = {}

    def _refuse(self, name: str, size: int) -> None:
        self._chunks.pop(name, None)
        self._sizes.pop(name, None)
        self._on_refused(name, size)

    def _process_event(self, event) -> None:
        if event.event_name != "upload_event":
            return  # a removed file: nothing is kept, nothing to drop
        data = event.data
        name = str(data.get("name") or "uploaded file")
        chunk, total = int(data["chunk"]), int(data["total_chunks"])
        if chunk == 1:
            self._chunks[name], self._sizes[name] = [], 0
            if (total - 1) * self.chunk_size > self.max_bytes:  # announced size above the limit
                self._refuse(name, (total - 1) * self.chunk_size)
                return
        if name not in self._chunks:
            return  # the rest of a refused file
        piece = data.get("data") or b""
        piece = piece.encode("utf-8") if isinstance(piece, str) else bytes(piece)
        self._sizes[name] += len(piece)
        if self._sizes[name] > self.max_bytes:
            self._refuse(name, self._sizes[name])
            return
        self._chunks[name].append(piece)
        if chunk >= total:
            content = b"".join(self._chunks.pop(name))
            self._sizes.pop(name, None)
            self._on_file(name, content)

    def close(self) -> None:
        """Drop partial uploads and the callbacks (the session ended)."""
        self._chunks.clear()
        self._sizes.clear()
        self._on_file = self._on_refused = lambda *a: None


def too_many_rows(data: bytes, name: str) -> str | None:
    """A message when a text file has more than :data:`UPLOAD_MAX_ROWS` data rows, else None.

    Counted as lines before parsing (a header and comment lines are allowed for); Excel files are
    checked after reading.
    """
    if name.lower().endswith((".xlsx", ".xls")):
        return None
    lines = data.count(b"\n") + (0 if data.endswith(b"\n") else 1)
    if lines > UPLOAD_MAX_ROWS + 50:
        return (f"{name} has {lines:,} lines; the dashboard reads at most {UPLOAD_MAX_ROWS:,} rows of test "
                "points. Split the file, or compare it with `lowgmap compare` on the command line.")
    return None


def parse_test_points(data: bytes, name: str, *, mapping=None, regime_map=None, pressure=None,
                      temperature=None):
    """Read an uploaded test-point file (worker thread): :func:`lowgmap.app.files.testpoints.read_test_points`."""
    from lowgmap.app.files.testpoints import read_test_points

    return read_test_points(data, name=name, mapping=mapping, regime_map=regime_map, pressure=pressure,
                            temperature=temperature, max_bytes=UPLOAD_MAX_BYTES)
