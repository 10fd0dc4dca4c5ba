"""The review pack as a multi-page PDF, laid out with matplotlib (headless, no other PDF library).

The pages are A4: text pages in portrait (headings, paragraphs, lists and tables, wrapped to the
page and broken across pages with the table header repeated) and the chart on a landscape page of
its own (the PNG of :func:`lowgmap.app.outputs.exports.chart_bytes`, embedded at its own
resolution). Every page carries the case, the revision, the page number, the version and the
caution line. The text is real text (TrueType fonts embedded), so the document can be searched and
read back. Document metadata: Title, Subject (the case title), Keywords (the revision), Author, Creator
("lowgmap VERSION").

The content is a :class:`lowgmap.app.outputs.report.ReviewPack`; this module only lays it out, as the
HTML template does, so the two documents hold the same words and numbers.
"""
from __future__ import annotations

import io
import re
from dataclasses import dataclass, field

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.backends.backend_pdf import PdfPages  # noqa: E402
from matplotlib.font_manager import FontProperties  # noqa: E402
from matplotlib.patches import Rectangle  # noqa: E402
from matplotlib.textpath import TextToPath  # noqa: E402

from lowgmap.app.outputs.report import FAIL_COLOUR  # noqa: E402

__all__ = ["report_pdf", "review_pdf", "pdf_metadata"]

_A4 = (8.27, 11.69)                 # portrait [in]
_MARGIN_X, _TOP, _BOTTOM = 0.65, 0.7, 0.85
_WIDTH = _A4[0] - 2 * _MARGIN_X
_PT = 1 / 72.0                      # inch per point
_INK, _GREY, _RULE = "#111111", "#555555", "#999999"


# =============================================================================================
# measuring and wrapping text

_MEASURE = TextToPath()
_WIDTHS: dict = {}


def _bars(bold: bool) -> float:
    return _MEASURE.get_text_width_height_descent("||", _font(10.0, bold), ismath=False)[0]


def _font(size: float, bold: bool = False) -> FontProperties:
    return FontProperties(family="DejaVu Sans", size=size, weight="bold" if bold else "normal")


def _width(text: str, size: float, bold: bool = False) -> float:
    """Width of ``text`` [in] in DejaVu Sans (the font matplotlib ships and embeds): the sum of the
    advance widths of its characters (kerning left out; :func:`wrap` keeps a little room for it)."""
    table = _WIDTHS.get(bold)
    if table is None:
        table = _WIDTHS[bold] = {}
    w = 0.0
    for ch in text:
        a = table.get(ch)
        if a is None:
            a = table[ch] = _MEASURE.get_text_width_height_descent(f"|{ch}|", _font(10.0, bold), ismath=False)[0] \
                - _BAR[bold]
        w += a
    return w * size / 10.0 * _PT


_BAR = {False: _bars(False), True: _bars(True)}


def _split_long(word: str, width: float, size: float, bold: bool) -> list[str]:
    """A word wider than the line cut into pieces that fit: after an underscore or a slash where
    possible (model names, paths), else between characters (long DOIs)."""
    parts = re.findall(r"[^_/]*[_/]|[^_/]+$", word) or [word]
    out, cur = [], ""
    for part in parts:
        if cur and _width(cur + part, size, bold) > width:
            out.append(cur)
            cur = ""
        if _width(part, size, bold) > width:
            for ch in part:
                if cur and _width(cur + ch, size, bold) > width:
                    out.append(cur)
                    cur = ""
                cur += ch
        else:
            cur += part
    return out + ([cur] if cur else [])


def _tokens(para: str) -> list[str]:
    """Words of a paragraph; a lone '%' stays with its number ('±20 %' is never broken)."""
    out: list[str] = []
    for w in para.split(" "):
        if w in ("%", "%)", "%);", "%,", "%.", "%:") and out:
            out[-1] += " " + w
        else:
            out.append(w)
    return out


def wrap(text: str, width: float, size: float, bold: bool = False) -> list[str]:
    """Lines of ``text`` no wider than ``width`` [in] at ``size`` [pt] (greedy, by words)."""
    width *= 0.96                    # room for the hinting and kerning of the drawn text
    lines: list[str] = []
    for para in str(text).split("\n"):
        words = _tokens(para)
        cur = ""
        for word in words:
            trial = word if not cur else f"{cur} {word}"
            if _width(trial, size, bold) <= width:
                cur = trial
                continue
            if cur:
                lines.append(cur)
            if _width(word, size, bold) > width:
                pieces = _split_long(word, width, size, bold)
                lines += pieces[:-1]
                cur = pieces[-1] if pieces else ""
            else:
                cur = word
        lines.append(cur)
    return lines


# =============================================================================================
# blocks: measured once, drawn at a position

@dataclass
class _Text:
    """Lines of one style; ``colour`` per line may be overridden by ``colours``."""

    lines: list
    size: float
    bold: bool = False
    colour: str = _INK
    indent: float = 0.0
    space_before: float = 0.0
    space_after: float = 0.06
    keep_with_next: bool = False

    @property
    def line_height(self) -> float:
        return self.size * 1.32 * _PT

    def height(self) -> float:
        return self.space_before + len(self.lines) * self.line_height + self.space_after


@dataclass
class _Table:
    header: list
    rows: list                       # list of (cells, colours or None)
    widths: list                     # column widths [in]
    size: float = 7.5
    space_after: float = 0.12
    cell_lines: list = field(default_factory=list)

    @property
    def line_height(self) -> float:
        return self.size * 1.28 * _PT

    def measure(self) -> None:
        pad = 0.05
        self.cell_lines = [[wrap(str(c), w - 2 * pad, self.size, True) for c, w in zip(self.header, self.widths)]]
        for cells, _ in self.rows:
            self.cell_lines.append([wrap(str(c), w - 2 * pad, self.size) for c, w in zip(cells, self.widths)])

    def row_height(self, i: int) -> float:
        return max(len(c) for c in self.cell_lines[i]) * self.line_height + 0.05


class _Layout:
    """Pages of positioned blocks; a page is a list of (block, y_top, extra) with y from the page top."""

    def __init__(self):
        self.pages: list[list] = [[]]
        self.y = _TOP

    @property
    def room(self) -> float:
        return _A4[1] - _BOTTOM - self.y

    def new_page(self) -> None:
        self.pages.append([])
        self.y = _TOP

    def text(self, block: _Text) -> None:
        lh = block.line_height
        first = True
        remaining = list(block.lines)
        while remaining:
            need = (block.space_before if first else 0) + lh
            if block.keep_with_next and first:
                need += 4 * lh               # a heading is not left alone at the foot of a page
            if self.room < need and self.pages[-1]:
                self.new_page()
            if first:
                self.y += block.space_before
            n = max(1, int((self.room + 1e-9) // lh))
            part, remaining = remaining[:n], remaining[n:]
            self.pages[-1].append(("text", block, part, self.y))
            self.y += len(part) * lh
            if remaining:
                self.new_page()
            first = False
        self.y += block.space_after

    def table(self, table: _Table) -> None:
        table.measure()
        head_h = table.row_height(0)
        rows = list(range(1, len(table.cell_lines)))
        if self.room < head_h + (table.row_height(rows[0]) if rows else 0) and self.pages[-1]:
            self.new_page()
        i = 0
        while True:
            chunk, h = [], head_h
            while i < len(rows) and (h + table.row_height(rows[i]) <= self.room or not chunk):
                h += table.row_height(rows[i])
                chunk.append(rows[i])
                i += 1
            self.pages[-1].append(("table", table, chunk, self.y))
            self.y += h
            if i >= len(rows):
                break
            self.new_page()
        self.y += table.space_after


# =============================================================================================
# the pack as blocks

def _h1(text):
    return _Text(wrap(text, _WIDTH, 15, True), 15, True, space_after=0.08)


def _h2(text):
    return _Text(wrap(text, _WIDTH, 11.5, True), 11.5, True, space_before=0.14, space_after=0.07,
                 keep_with_next=True)


def _h3(text):
    return _Text(wrap(text, _WIDTH, 9.5, True), 9.5, True, space_before=0.06, space_after=0.04, keep_with_next=True)


def _p(text, size=8.5, colour=_INK, bold=False, indent=0.0, space_after=0.06):
    return _Text(wrap(text, _WIDTH - indent, size, bold), size, bold, colour, indent, space_after=space_after)


def _bullets(items, size=8.5, colour=_INK):
    out = []
    for t in items:
        lines = wrap(str(t), _WIDTH - 0.18, size)
        out.append(_Text(["•  " + lines[0]] + ["    " + ln for ln in lines[1:]], size, False, colour, 0.05,
                         space_after=0.03))
    return out


def _cols(fracs):
    total = sum(fracs)
    return [_WIDTH * f / total for f in fracs]


def _blocks(pack) -> list:
    """The text pages' content, in reading order (the chart page goes after the verdicts)."""
    b: list = [_h1(pack.title)]
    meta = (f"Review pack · case file {pack.case_file or '(not given)'} · revision {pack.revision}"
            + (f" · author {pack.author}" if pack.author else "") + f" · {pack.date} · lowgmap {pack.version}"
            + (" · INVENTED demonstration case" if pack.invented else ""))
    b.append(_p(meta, 8.5, _GREY))
    if pack.description:
        b.append(_p(pack.description))
    b.append(_p(f"CAUTION: {pack.caution}", 8.5, "#8B0000", True))
    b.append(_h2("Verdicts"))
    rows = [([v.label, v.status, v.detail], [None, FAIL_COLOUR if v.failing else None, None]) for v in pack.verdicts]
    b.append(_Table(["check", "verdict", "on what"], rows, _cols([2.2, 3.5, 4.3]), size=9))
    b.append(_p(pack.headline, 9, FAIL_COLOUR if pack.failing else _INK, True))
    if pack.verdict_basis:
        b.append(_p("Basis. " + pack.verdict_basis, 8))
    if pack.verdict_limits:
        b.append(_p("What the verdict does not cover:", 8, bold=True))
        b += _bullets(pack.verdict_limits, 8)
    b.append(_h2("Operating point and margins"))
    b.append(_Table(["quantity", "value"], [([k, v], None) for k, v in pack.point_rows], _cols([2.2, 7.8]),
                    size=8.5))
    if pack.margin_rows:
        b.append(_Table(["boundary", "Q_L up", "Q_L down", "Q_G up", "Q_G down", "log dist."],
                        [(list(r), None) for r in pack.margin_rows], _cols([3.6, 1.35, 1.35, 1.35, 1.35, 0.9]),
                        size=7.5))
        b.append(_p(pack.margin_note, 7.5, _GREY))
    b.append(("chart",))
    b.append(_h2("Case inputs"))
    b.append(_p(pack.inputs_note, 8, _GREY))
    b.append(_Table(["entry", "as written", "value used"], [(list(r), None) for r in pack.inputs],
                    _cols([3.0, 3.6, 3.4]), size=8))
    b.append(_h3("Fluid properties used"))
    b.append(_Table(["property", "value"], [(list(r), None) for r in pack.fluid_rows], _cols([2.2, 7.8]), size=8))
    b.append(_h3("Geometry and gravity"))
    b += _bullets(pack.geometry, 8.5)
    b.append(_h2("Boundary models"))
    if pack.scheme:
        b.append(_p(f"Regimes from the lines: {pack.scheme}."))
    for m in pack.models:
        b.append(_Text(wrap(f"{m['label']} ({m['name']})", _WIDTH, 8.5, True), 8.5, True, space_before=0.04,
                       space_after=0.02, keep_with_next=True))
        for k, v in (("role", f"{m['role']}; family: {m['family']}"), ("regimes (less gas → more gas)", m["regimes"]),
                     ("constants used", m["constants"]), ("changed from the defaults", m["changed"]),
                     ("source", m["citation"])):
            b.append(_p(f"{k}: {v}", 7.5, indent=0.15, space_after=0.015))
    if not pack.models:
        b.append(_p("No boundary model applies to this case."))
    b.append(_h3("Constants: value used, default, allowed range, uncertainty band and source"))
    if pack.constants:
        b.append(_p("Band: the range over which the constant is uncertain (the chart draws each line's band, the "
                    "region the line sweeps as its constants move over their bands; the worst-case margin takes the "
                    "constants anywhere in them).", 7.5, _GREY))
        b.append(_Table(["model", "constant", "used", "default", "unit", "allowed range", "band", "why this band",
                         "source of the default", "meaning"], [(list(r), None) for r in pack.constants],
                        _cols([1.3, 1.1, 0.6, 0.72, 0.55, 0.85, 0.85, 1.8, 1.5, 1.25]), size=6.3))
    else:
        b.append(_p("No adjustable constants."))
    b.append(_h3("Validity ranges of the sources"))
    if pack.validity_ranges:
        b.append(_Table(["model", "range of the source data", "source"],
                        [(list(r), None) for r in pack.validity_ranges],
                        _cols([2.4, 3.4, 4.2]), size=7))
    else:
        b.append(_p("No validity range recorded."))
    b.append(_h2("Validity warnings"))
    b += _bullets(pack.warnings or ["none"], 8.5, "#8B0000" if pack.warnings else _INK)
    b.append(_h2("Test points"))
    a = pack.agreement
    if a is None:
        b.append(_p("No test points were compared with this chart."))
    else:
        b.append(_p(a.summary, 9, bold=True))
        if a.source:
            b.append(_p(f"Test-point file: {a.source}", 8, _GREY))
        b.append(_p(a.criteria, 8))
        if a.regime_map:
            b.append(_p("Labels mapped to chart regimes: " + "; ".join(f'"{k}" → "{v}"' for k, v in a.regime_map), 8))
        b.append(_h3("Rows and points set aside, and why"))
        if a.set_aside:
            b.append(_Table(["row or points", "set aside because", "reason"], [(list(r), None) for r in a.set_aside],
                            _cols([1.8, 1.8, 6.4]), size=7.5))
        else:
            b.append(_p("None."))
        b.append(_h3("Every point"))
        b.append(_Table(["test id", "Q_L", "Q_G", "platform", "observed", "chart", "valid", "result"],
                        [(list(r), [None] * 7 + [FAIL_COLOUR if r[7] == "DIFFERS" else None]) for r in a.points],
                        _cols([0.9, 1.1, 1.1, 1.3, 1.7, 1.7, 0.6, 1.6]), size=7))
        for name, (head, rows) in (("valid points", a.confusion_valid), ("all points", a.confusion_all)):
            b.append(_h3(f"Confusion matrix, {name} (rows observed, columns chart)"))
            n = len(head)
            b.append(_Table(head, [(r, None) for r in rows], _cols([2.4] + [max(1.0, 7.6 / max(n - 1, 1))] * (n - 1)),
                            size=7))
        if a.disagreeing:
            b.append(_h3("Disagreeing points by boundary (log distance to the line)"))
            for label, items in a.disagreeing:
                b.append(_p(label, 8, bold=True))
                b += _bullets(items, 7.5)
    b.append(_h2("Assumptions"))
    b += _bullets(pack.assumptions, 8)
    b.append(_h2("Revision history"))
    b.append(_p(pack.history_note))
    if pack.history:
        b.append(_Table(["revision", "replaced on", "change", "models and constants in force"],
                        [([h["revision"], h["date"], h["change"], "; ".join(h["models"] + h["other"])], None)
                         for h in pack.history], _cols([0.9, 1.2, 3.6, 4.3]), size=7.5))
    b.append(_p(f"CAUTION: {pack.caution}", 8.5, "#8B0000", True))
    return b


# =============================================================================================
# drawing

def _draw_text(fig, block: _Text, lines, y_top) -> None:
    lh = block.line_height
    for k, line in enumerate(lines):
        y = _A4[1] - y_top - (k + 0.78) * lh
        fig.text(_MARGIN_X + block.indent, y, line, transform=fig.dpi_scale_trans, fontsize=block.size,
                 fontweight="bold" if block.bold else "normal", color=block.colour, family="DejaVu Sans",
                 parse_math=False, va="baseline")


def _draw_table(fig, table: _Table, chunk, y_top) -> None:
    tr = fig.dpi_scale_trans
    lh = table.line_height
    pad = 0.05
    y = y_top
    for idx in [0] + list(chunk):
        h = table.row_height(idx)
        x = _MARGIN_X
        top = _A4[1] - y
        if idx == 0:
            fig.add_artist(Rectangle((x, top - h), sum(table.widths), h, transform=tr, facecolor="#EEEEEE",
                                     edgecolor="none"))
        colours = None if idx == 0 else table.rows[idx - 1][1]
        for j, (lines, w) in enumerate(zip(table.cell_lines[idx], table.widths)):
            colour = (colours[j] if colours and colours[j] else _INK)
            bold = idx == 0 or colour != _INK
            for k, line in enumerate(lines):
                fig.text(x + pad, top - 0.025 - (k + 0.8) * lh, line, transform=tr, fontsize=table.size,
                         fontweight="bold" if bold else "normal", color=colour, family="DejaVu Sans",
                         parse_math=False, va="baseline")
            x += w
        fig.add_artist(Rectangle((_MARGIN_X, top - h), sum(table.widths), h, transform=tr, facecolor="none",
                                 edgecolor=_RULE, linewidth=0.4))
        x = _MARGIN_X
        for w in table.widths[:-1]:
            x += w
            fig.add_artist(Rectangle((x, top - h), 0, h, transform=tr, facecolor="none", edgecolor=_RULE,
                                     linewidth=0.4))
        y += h


def _footer(fig, pack, page: int, pages: int, size) -> None:
    w, _ = size
    tr = fig.dpi_scale_trans
    left = (f"{pack.case_title} · revision {pack.revision} · {pack.date} · lowgmap {pack.version}")
    for k, line in enumerate(wrap(left, w - 2 * _MARGIN_X - 1.0, 7)):
        fig.text(_MARGIN_X, 0.55 - k * 0.12, line, transform=tr, fontsize=7, color=_GREY, parse_math=False)
    fig.text(w - _MARGIN_X, 0.55, f"page {page} of {pages}", transform=tr, fontsize=7, color=_GREY, ha="right",
             parse_math=False)
    for k, line in enumerate(wrap(f"CAUTION: {pack.caution}", w - 2 * _MARGIN_X, 6.5)):
        fig.text(_MARGIN_X, 0.3 - k * 0.11, line, transform=tr, fontsize=6.5, color="#8B0000", parse_math=False)


def _chart_page(fig, pack, png: bytes) -> None:
    import numpy as np
    from PIL import Image

    w, h = fig.get_size_inches()
    tr = fig.dpi_scale_trans
    fig.text(_MARGIN_X, h - 0.55, f"Regime chart — {pack.case_title}, revision {pack.revision}", transform=tr,
             fontsize=11.5, fontweight="bold", parse_math=False)
    fig.text(_MARGIN_X, h - 0.78, pack.headline, transform=tr, fontsize=9, fontweight="bold",
             color=FAIL_COLOUR if pack.failing else _INK, parse_math=False)
    with Image.open(io.BytesIO(png)) as im:        # 8-bit RGB on white: a quarter of the data of float RGBA
        rgba = im.convert("RGBA")
        img = np.asarray(Image.alpha_composite(Image.new("RGBA", rgba.size, "white"), rgba).convert("RGB"))
    ih, iw = img.shape[:2]
    box_w, box_h = w - 2 * _MARGIN_X, h - 0.95 - 0.8
    scale = min(box_w / iw, box_h / ih)
    dw, dh = iw * scale, ih * scale
    ax = fig.add_axes(((w - dw) / 2 / w, (0.8 + (box_h - dh) / 2) / h, dw / w, dh / h))
    ax.imshow(img, interpolation="none")
    ax.set_axis_off()


def pdf_metadata(pack) -> dict:
    """The document information of a review pack's PDF (no dates, so the same pack gives the same bytes)."""
    return {"Title": f"{pack.case_title} — review pack, revision {pack.revision}", "Author": pack.author or None,
            "Subject": pack.case_title, "Keywords": f"revision {pack.revision}",
            "Creator": f"lowgmap {pack.version}", "Producer": f"lowgmap {pack.version} (matplotlib)",
            "CreationDate": None, "ModDate": None}


def review_pdf(pack, chart_png: bytes | None) -> bytes:
    """The review pack as PDF bytes: text pages (A4 portrait) with the chart page (A4 landscape).

    Parameters
    ----------
    pack : ReviewPack          from :func:`lowgmap.app.outputs.report.review_pack`
    chart_png : bytes or None  the chart as PNG (:func:`lowgmap.app.outputs.exports.chart_bytes`); None
                               leaves the chart page out

    Returns
    -------
    bytes
    """
    from lowgmap.app.outputs.render import RENDER_LOCK

    buf = io.BytesIO()
    with RENDER_LOCK, plt.rc_context({"pdf.fonttype": 42, "font.family": "DejaVu Sans"}):
        with PdfPages(buf, metadata=pdf_metadata(pack)) as pdf:
            for fig in _figures(pack, chart_png):
                try:
                    pdf.savefig(fig)
                finally:
                    plt.close(fig)
    return buf.getvalue()


def _figures(pack, chart_png):
    """The pages as matplotlib figures, in order (the caller saves and closes each)."""
    blocks = _blocks(pack)
    split = next(i for i, blk in enumerate(blocks) if isinstance(blk, tuple))
    layouts = []
    for part in (blocks[:split], blocks[split + 1:]):
        lay = _Layout()
        for blk in part:
            if isinstance(blk, _Table):
                lay.table(blk)
            else:
                lay.text(blk)
        layouts.append(lay)
    landscape = (_A4[1], _A4[0])
    pages = [("text", p) for p in layouts[0].pages if p] + ([("chart", None)] if chart_png else []) + \
        [("text", p) for p in layouts[1].pages if p]
    for n, (kind, items) in enumerate(pages, start=1):
        size = landscape if kind == "chart" else _A4
        fig = plt.figure(figsize=size)
        if kind == "chart":
            _chart_page(fig, pack, chart_png)
        else:
            for what, block, part, y in items:
                (_draw_text if what == "text" else _draw_table)(fig, block, part, y)
        _footer(fig, pack, n, len(pages), size)
        yield fig


def report_pdf(source, *, test_points=None, settings=None, invented=None, document=None, point_file=None,
               date=None) -> bytes:
    """The review pack of ``source`` as PDF bytes (arguments as for
    :func:`lowgmap.app.outputs.exports.report_html`, which writes the same pack as HTML).

    A study is used as it is: the chart page is drawn from the study's chart, never rebuilt.
    """
    from lowgmap.app.outputs.exports import chart_bytes
    from lowgmap.app.outputs.report import review_inputs, review_pack

    study, st, inv = review_inputs(source, settings=settings, invented=invented, test_points=test_points)
    pack = review_pack(study, settings=st, invented=inv, document=document if document is not None else
                       (None if source is study else source), point_file=point_file, date=date)
    return review_pdf(pack, chart_bytes(study, "png", settings=st, invented=inv))
