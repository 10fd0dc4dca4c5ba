"""Test points: observed flow regimes from low-gravity tests (CSV or Excel) read into SI units.

A test-point file is a table with one row per observation: the liquid and gas flow rates, the regime
seen, and optionally the platform, residual acceleration, low-g duration, a test id and notes. Units
are written in the column header, e.g. ``liquid_flow [mL/min]`` or ``gas_flow (sccm)``.
:func:`read_test_points` reads such a file, checks every row, converts the numbers to SI and returns a
:class:`TestPointSet`: the good rows as a pandas DataFrame plus a list of :class:`RowProblem` (row number,
column, value, reason) for the rows set aside or worth a look. Problems that concern the whole file
(empty, no header, a required column missing, an unknown unit in a header, too large, not a regular
file) raise :class:`TestPointError` (an :class:`lowgmap.physics.validate.InputError`) listing all of them.

Row numbers
-----------
``row`` is the **line number in the file where the row starts, counting from 1 at the first line of
the file**, as a text editor shows it. Comment lines and blank lines count. In a file whose first line
is the header (as the template), the header is line 1 and the first data row is line 2. A quoted
field that spans lines makes its row start on the line of its opening. For Excel files ``row`` is the
worksheet row number (the number Excel shows at the left).

Validation of a data row
------------------------
*Errors* (the row is set aside, the others are kept):

- liquid or gas flow missing, not a number, not finite, or <= 0;
- residual acceleration or low-g duration present but not a number, not finite, or negative
  (duration: <= 0);
- more values than the header has columns (often a decimal comma in a comma-separated file);
- a quote that is not closed: a quoted field may span lines, but when the lines it would take in look
  like rows of their own (as many delimiters as the header) or the file ends inside it, the row where it
  opens is set aside and the next line is read as a row;
- a test id used on more than one row: every row carrying it is set aside, and each problem names the
  other rows, since lowgmap cannot tell which one is right.

*Warnings* (the row is kept):

- a platform name that is not in the built-in table (:mod:`lowgmap.physics.studies.platforms`); the point keeps the
  name as written and needs its own residual acceleration and duration for Bond numbers and times;
- an empty observed regime in a file that has a regime column;
- fewer values than the header has columns (CSV), when the missing ones are optional: they are read as
  empty. When a required value is missing the row is an error and the message says how many values it has.

Empty cells and the markers ``-``, ``n/a``, ``na``, ``none`` mean "no value". ``nan`` and ``inf``
are read as numbers and rejected as not finite.

Limits
------
A file is read only when it is a regular file (never a directory, named pipe or device) of at most
``max_bytes`` (:data:`MAX_BYTES`, 20 MB) with at most ``max_rows`` data rows (:data:`MAX_ROWS`, one
million) and :data:`MAX_COLUMNS` columns; both limits are checked before the rows are split into fields,
and an uploaded file (bytes) is held to the same limits. A message quotes at most :data:`QUOTE_CHARS`
characters of a cell or line (longer text is cut with "…"), and the text of a :class:`TestPointError`
lists at most :data:`MAX_PROBLEMS_SHOWN` problems (all of them stay in its ``problems``).

Clean CSV lines are split by pandas' C parser in one pass; the checks run on whole columns (numpy and
pandas), once per distinct value where a column repeats values, so a million rows read in seconds.
Lines with a quoted field left open (an unclosed quote, a field spanning lines) are split one by one
with the standard library's :mod:`csv` rules. Row problems are kept column by column
(:class:`RowProblems`) and made into :class:`RowProblem` objects only when looked at, so a file of a
million bad rows stays within memory (``tests/perf/bench_testpoints.py`` measures speed and memory).
"""
from __future__ import annotations

import codecs
import csv
import io
import math
import operator
import os
import re
import stat
import zipfile
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from lowgmap.physics.studies.platforms import find_platform, points_conditions
from lowgmap.physics.validate import InputError, InputTypeError, positive

from lowgmap.app.files.atomic import write_atomic
from lowgmap.app.files.units import STANDARD_FLOW_UNITS, UnitError, check_unit, parse_flow, to_si, ureg

__all__ = [
    "FIELDS", "REQUIRED_FIELDS", "POINT_COLUMNS", "TEMPLATE_HEADER", "RowProblem", "RowProblems", "TestPointError",
    "TestPointSet", "read_test_points", "unknown_regimes", "with_platform_conditions", "write_template",
    "template_text", "field_aliases", "MAX_BYTES", "MAX_ROWS", "MAX_COLUMNS", "QUOTE_CHARS", "MAX_PROBLEMS_SHOWN",
]

#: Largest file read, in bytes (default of ``max_bytes``); an .xlsx may unpack to 10 times this.
MAX_BYTES = 20_000_000
#: Most data rows read from one file (default of ``max_rows``).
MAX_ROWS = 1_000_000
#: Most columns a header may have.
MAX_COLUMNS = 1_000
#: Most characters of a cell or line quoted in a message; longer text is cut with "…".
QUOTE_CHARS = 200
#: Most problems written out in the text of a :class:`TestPointError` (``problems`` keeps all).
MAX_PROBLEMS_SHOWN = 20


@dataclass(frozen=True)
class _Field:
    kind: str            # "flow", "acceleration", "time" or "text"
    required: bool
    example_unit: str
    aliases: tuple[str, ...]


#: Canonical fields of a test-point file: kind, whether required, an example unit and accepted header names.
FIELDS: dict[str, _Field] = {
    "liquid_flow": _Field("flow", True, "mL/min", (
        "liquid flow", "liquid flow rate", "liquid volume flow", "liquid volumetric flow",
        "liquid volumetric flow rate", "Q_L", "QL", "Q_liq", "Q_liquid", "liq flow")),
    "gas_flow": _Field("flow", True, "mL/min", (
        "gas flow", "gas flow rate", "gas volume flow", "gas volumetric flow", "gas volumetric flow rate",
        "Q_G", "QG", "Q_gas")),
    "observed_regime": _Field("text", False, "", (
        "observed regime", "regime", "flow regime", "observed flow regime", "flow pattern", "pattern",
        "observed pattern", "observation")),
    "platform": _Field("text", False, "", ("platform", "facility", "carrier", "test platform")),
    "residual_acceleration": _Field("acceleration", False, "g0", (
        "residual acceleration", "residual g", "g level", "gravity level", "acceleration", "g", "g_res")),
    "low_g_duration": _Field("time", False, "s", (
        "low-g duration", "duration", "low g time", "low-g time", "microgravity time", "microgravity duration",
        "test duration")),
    "test_id": _Field("text", False, "", (
        "test id", "id", "point id", "point", "run", "run id", "test", "test no", "test number", "point no")),
    "notes": _Field("text", False, "", ("notes", "note", "comment", "comments", "remarks", "remark")),
}

#: Fields every file must have.
REQUIRED_FIELDS = tuple(k for k, f in FIELDS.items() if f.required)

#: Columns of :attr:`TestPointSet.points`, all SI.
POINT_COLUMNS = ["row", "test_id", "ql_m3_s", "qg_m3_s", "observed_regime", "platform", "g_m_s2", "duration_s",
                 "notes"]

#: Header line of the template (comma-separated).
TEMPLATE_HEADER = ("test_id,liquid_flow [mL/min],gas_flow [mL/min],observed_regime,platform,"
                   "residual_acceleration [g0],low_g_duration [s],notes")

_MISSING = {"", "-", "\u2013", "\u2014", "n/a", "na", "none"}
_NUMBER_KINDS = ("flow", "acceleration", "time")
_KIND_WORDS = {"flow": "volumetric flow", "acceleration": "acceleration", "time": "time"}
_ENDS = {"liquid_flow": ("> 0", lambda x: x > 0), "gas_flow": ("> 0", lambda x: x > 0),
         "residual_acceleration": (">= 0", lambda x: x >= 0), "low_g_duration": ("> 0", lambda x: x > 0)}
_HEADER_UNIT = re.compile(r"^(?P<name>.*?)\s*(?:\[(?P<u1>[^\[\]]*)\]|\((?P<u2>[^()]*)\))\s*$", re.S)
_COMMA_DECIMAL = r"[-+]?\d*,\d+(?:[eE][-+]?\d+)?"
_COMMA_DECIMAL_RE = re.compile(_COMMA_DECIMAL)
_NUM_WITH_TEXT = re.compile(r"^[-+]?(?:\d+[.,]?\d*|[.,]\d+)(?:[eE][-+]?\d+)?\s*\S")
_PATH_SUFFIXES = {".csv", ".tsv", ".txt", ".dat", ".xlsx", ".xlsm", ".xls"}
_EXCEL_SUFFIXES = {".xlsx", ".xlsm"}
_MAX_LISTED = 5


def _norm(name: str) -> str:
    name = str(name)
    if len(name) > 1000:  # no field name is that long ("#" never appears in a normalised name)
        return "#long"
    return re.sub(r"[^a-z0-9]", "", name.lower())


_ALIASES: dict[str, str] = {}
for _name, _f in FIELDS.items():
    for _a in (_name, *_f.aliases):
        _ALIASES[_norm(_a)] = _name


def field_aliases() -> dict[str, list[str]]:
    """Accepted header names of each canonical field (matched ignoring case, spaces and punctuation)."""
    return {k: [k, *f.aliases] for k, f in FIELDS.items()}


# --------------------------------------------------------------------------------------------- results

def _clip(text, limit: int = QUOTE_CHARS) -> str:
    """``text`` cut to ``limit`` characters with "…" and its full length, for quoting in a message.

    >>> _clip("x" * 500, 10)
    'xxxxxxxxxx… (500 characters)'
    """
    if type(text) is not str:
        text = str(text)
    if len(text) <= limit:
        return text
    return f"{text[:limit]}… ({len(text):,} characters)"


def _listing(names, limit: int = 12, width: int = 60) -> str:
    """Some names quoted and comma-separated: at most ``limit`` of them, each cut to ``width`` characters."""
    names = [n for n in names if n]
    shown = ", ".join(repr(_clip(n, width)) for n in names[:limit]) or "(none)"
    if len(names) > limit:
        shown += f" and {len(names) - limit:,} more"
    return shown


@dataclass(frozen=True, slots=True)
class RowProblem:
    """Something wrong (``severity="error"``: row set aside) or doubtful (``"warning"``: row kept) in one row.

    ``row`` is the file line number (see the module notes), ``column`` the column header as written in the
    file (``"(row)"`` for the row as a whole), ``value`` the cell text (cut to about :data:`QUOTE_CHARS`
    characters, as the message).
    """

    row: int
    column: str
    value: str
    message: str
    severity: str = "error"

    def __str__(self) -> str:
        tag = "" if self.severity == "error" else f" ({self.severity})"
        return f"row {self.row}, {self.column}: {self.message}{tag}"


class RowProblems(Sequence):
    """The row problems of a file: a read-only sequence of :class:`RowProblem`, stored column by column.

    A file of a million bad rows has millions of problems; they are kept as arrays (row, column, value,
    kind of message, severity) and each :class:`RowProblem`, with its message, is made when it is looked
    at. The sequence compares equal to a list of the same problems.

    >>> p = RowProblem(3, "gas_flow [mL/min]", "-1", "gas_flow must be > 0, got -1")
    >>> probs = RowProblems.from_list([p])
    >>> len(probs), probs[0].row, probs == [p]
    (1, 3, True)
    """

    __slots__ = ("_rows", "_cols", "_values", "_kinds", "_texts", "_errors", "_names", "_specs")

    def __init__(self, rows, cols, values, kinds, texts, errors, names, specs):
        self._rows = np.asarray(rows, dtype=np.int64)
        self._cols = np.asarray(cols, dtype=np.int32)
        self._values = values                                # object array: the value shown
        self._kinds = np.asarray(kinds, dtype=np.int32)      # index into specs: how the message is made
        self._texts = texts                                  # object array: the message where it is given
        self._errors = np.asarray(errors, dtype=bool)
        self._names = list(names)
        self._specs = list(specs)

    @classmethod
    def from_list(cls, problems) -> RowProblems:
        """The sequence holding ``problems`` (RowProblem objects), in their order."""
        problems = list(problems)
        names: dict[str, int] = {}
        cols = [names.setdefault(p.column, len(names)) for p in problems]
        return cls([p.row for p in problems], cols, _objects([p.value for p in problems]), [0] * len(problems),
                   _objects([p.message for p in problems]), [p.severity == "error" for p in problems], names,
                   [("given",)])

    def __len__(self) -> int:
        return int(self._rows.size)

    def _make(self, r, c, v, kind, text, e) -> RowProblem:
        return RowProblem(r, self._names[c], v, _render(self._specs[kind], v, text), "error" if e else "warning")

    def __getitem__(self, k):
        if isinstance(k, slice):
            return self._take(np.arange(len(self))[k])
        n = len(self)
        k = operator.index(k)
        if not -n <= k < n:
            raise IndexError("row problem index out of range")
        return self._make(int(self._rows[k]), int(self._cols[k]), self._values[k], int(self._kinds[k]),
                          self._texts[k], bool(self._errors[k]))

    def __iter__(self):
        for item in zip(self._rows.tolist(), self._cols.tolist(), self._values, self._kinds.tolist(), self._texts,
                        self._errors.tolist()):
            yield self._make(*item)

    def __eq__(self, other):
        if isinstance(other, (list, tuple, RowProblems)):
            return len(self) == len(other) and all(a == b for a, b in zip(self, other))
        return NotImplemented

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        if len(self) <= 20:
            return repr(list(self))
        return f"<{len(self):,} row problems, from row {self._rows.min()} to row {self._rows.max()}>"

    def __reduce__(self):
        return type(self), (self._rows, self._cols, self._values, self._kinds, self._texts, self._errors,
                            self._names, self._specs)

    def _take(self, idx) -> RowProblems:
        return RowProblems(self._rows[idx], self._cols[idx], self._values[idx], self._kinds[idx], self._texts[idx],
                           self._errors[idx], self._names, self._specs)

    def where(self, severity: str) -> RowProblems:
        """The problems of one severity ("error" or "warning"), in order."""
        return self._take(np.flatnonzero(self._errors == (severity == "error")))

    def rows(self, severity: str | None = None) -> np.ndarray:
        """Row numbers of the problems (of one severity when given), in order."""
        if severity is None:
            return self._rows.copy()
        return self._rows[self._errors == (severity == "error")]

    def table(self) -> pd.DataFrame:
        """The problems as a table: row, column, value, message, severity."""
        messages = [_render(self._specs[k], v, t) for k, v, t in zip(self._kinds.tolist(), self._values, self._texts)]
        return pd.DataFrame({"row": self._rows, "column": _objects(self._names)[self._cols] if len(self) else [],
                             "value": self._values, "message": _objects(messages),
                             "severity": np.where(self._errors, "error", "warning").astype(object)},
                            columns=["row", "column", "value", "message", "severity"])


def _render(spec: tuple, value: str, text) -> str:
    """The message of one problem from its kind: ("given",) the text stored with it; ("same", message);
    ("format", template with {v} for the value); ("not_number", field, decimal mark)."""
    tag = spec[0]
    if tag == "given":
        return text
    if tag == "same":
        return spec[1]
    if tag == "format":
        return spec[1].format(v=value)
    return _not_number_message(spec[1], value, spec[2])


class TestPointError(InputError):
    """The file cannot be read as test points; ``problems`` lists every reason.

    An :class:`lowgmap.physics.validate.InputError` (so a :class:`ValueError`): the user's file is wrong. The
    message lists at most :data:`MAX_PROBLEMS_SHOWN` problems, then how many more there are.

    >>> err = TestPointError([f"problem {i}" for i in range(25)], "big.csv")
    >>> len(err.problems), str(err).splitlines()[-1]
    (25, '  (and 5 more)')
    """

    __test__ = False  # not a pytest test class

    def __init__(self, problems: list[str] | str, source: str = "test points"):
        self.problems = [problems] if isinstance(problems, str) else list(problems)
        self.source = source
        shown = self.problems[:MAX_PROBLEMS_SHOWN]
        lines = "\n".join(f"  - {_clip(p, 1000)}" for p in shown)
        if len(self.problems) > len(shown):
            lines += f"\n  (and {len(self.problems) - len(shown):,} more)"
        super().__init__(f"{_clip(source)}: cannot read test points:\n{lines}")

    def __reduce__(self):  # keep problems and source through pickling (worker processes)
        return type(self), (self.problems, self.source)


@dataclass
class TestPointSet:
    """Test points read from one file.

    Attributes
    ----------
    points : DataFrame        the valid rows, columns :data:`POINT_COLUMNS` (SI units):
                              ``row`` file line number; ``test_id`` (``"#<row>"`` when the file gives none);
                              ``ql_m3_s``, ``qg_m3_s`` actual volumetric flows [m^3/s]; ``observed_regime``
                              (after ``regime_map``); ``platform`` (built-in name when recognised, else as
                              written); ``g_m_s2`` [m/s^2] and ``duration_s`` [s] (NaN when absent); ``notes``
    problems : RowProblems    errors (rows set aside) and warnings (rows kept), sorted by row: a read-only
                              sequence of :class:`RowProblem` (equal to a list of the same problems)
    columns : dict            file column header -> canonical field it was read as
    source_name : str         file name, or "text" / "uploaded file"
    units : dict              canonical field -> unit it was read in
    ignored_columns : list    file columns not used
    delimiter : str or None   CSV delimiter found (None for Excel)
    decimal : str             decimal mark used for numbers ("." or ",")
    """

    __test__ = False  # not a pytest test class

    points: pd.DataFrame
    problems: Sequence[RowProblem]
    columns: dict[str, str]
    source_name: str
    units: dict[str, str] = field(default_factory=dict)
    ignored_columns: list[str] = field(default_factory=list)
    delimiter: str | None = None
    decimal: str = "."

    def _problems(self) -> RowProblems:
        if not isinstance(self.problems, RowProblems):
            self.problems = RowProblems.from_list(self.problems)
        return self.problems

    @property
    def errors(self) -> RowProblems:
        """The problems that set a row aside."""
        return self._problems().where("error")

    @property
    def warnings(self) -> RowProblems:
        """The problems of rows that are kept."""
        return self._problems().where("warning")

    @property
    def rejected_rows(self) -> list[int]:
        """File line numbers of the rows set aside."""
        return np.unique(self._problems().rows("error")).tolist()

    def problems_table(self) -> pd.DataFrame:
        """The problems as a table (row, column, value, message, severity), for display."""
        return self._problems().table()

    def summary(self) -> str:
        """One line: points read, rows set aside, warnings."""
        rej = np.unique(self._problems().rows("error"))
        text = f"{len(self.points)} test point(s) read from {_clip(self.source_name)}"
        if rej.size:
            shown = ", ".join(map(str, rej[:10].tolist())) + (", ..." if rej.size > 10 else "")
            text += f"; {rej.size} row(s) set aside (rows {shown})"
        n_warn = int(self._problems().rows("warning").size)
        if n_warn:
            text += f"; {n_warn} warning(s)"
        return text


# --------------------------------------------------------------------------------------------- reading

def read_test_points(source, *, mapping: dict | None = None, regime_map: dict | None = None,
                     pressure=None, temperature=None, max_bytes: int = MAX_BYTES, max_rows: int = MAX_ROWS,
                     name: str | None = None, delimiter: str | None = None, decimal: str | None = None,
                     sheet=0) -> TestPointSet:
    """Read test points from a CSV or Excel (.xlsx) file, text or uploaded bytes.

    Parameters
    ----------
    source : str, os.PathLike, bytes or file-like
        A path (``Path``, or a one-line ``str`` naming an existing file or ending in .csv/.tsv/.txt/.dat/
        .xlsx/.xlsm), the file's text (``str``; anything with a line break is text), or its bytes (e.g. a
        browser upload). Excel is recognised by the .xlsx/.xlsm suffix or by the zip signature of the bytes.
        A path must name a regular file (not a directory, named pipe or device).
    mapping : dict, optional
        ``{"file column": "canonical field"}`` for headers lowgmap does not recognise; the value may carry
        a unit that overrides the header's, e.g. ``{"Qliq": "liquid_flow [mL/min]"}``; ``None`` (or
        ``"ignore"``) as value ignores the column. Keys match the header exactly, then ignoring case, then without its unit.
    regime_map : dict, optional
        ``{"file label": "chart regime name"}`` (labels matched ignoring case and repeated spaces).
    pressure, temperature : float [Pa], [K] or text with unit (``"1.2 bar"``, ``"20 degC"``)
        Local gas conditions; needed only when a gas flow column is in standard units (sccm, slpm, slm,
        sccs), which are converted to actual flow with :func:`lowgmap.app.files.units.parse_flow`.
    max_bytes : int
        Larger sources raise :class:`TestPointError` before they are read (for .xlsx, the unpacked size may
        be 10 times this). Default :data:`MAX_BYTES` (20 MB).
    max_rows : int
        Files with more data rows raise :class:`TestPointError`, found by counting the non-blank lines
        before any row is split into fields. Default :data:`MAX_ROWS` (one million).
    name : str, optional
        Name shown in messages (and, for bytes, a file name whose suffix tells the format).
    delimiter : str, optional
        Force the CSV delimiter; by default it is found from the header line (comma, semicolon or tab).
    decimal : {".", ","}, optional
        Force the decimal mark; by default a comma is taken when the delimiter is not a comma and the
        number columns hold values like ``1,5``.
    sheet : int or str
        Excel worksheet (index or name); default the first.

    Returns
    -------
    TestPointSet

    Raises
    ------
    TestPointError
        File-level problems, all listed: not a regular file, too large, too many rows or columns, empty, no
        header, no data rows, required column missing, a column named twice, a unit unknown or of the wrong
        kind, a standard gas unit without pressure and temperature, a mapping naming an absent column or an
        unknown field.
    lowgmap.physics.validate.InputError
        A keyword argument out of range (``max_bytes``, ``max_rows``, ``decimal``, ``delimiter``, ``pressure``,
        ``temperature``); :class:`lowgmap.physics.validate.InputTypeError` for one of the wrong type.

    Examples
    --------
    >>> text = "liquid_flow [mL/min],gas_flow [mL/min],observed_regime\\n12,0.5,dispersed bubbles\\n-3,1,annular\\n"
    >>> tps = read_test_points(text)
    >>> tps.points["row"].tolist(), (tps.points["ql_m3_s"] * 6e7).round(9).tolist()  # m^3/s -> mL/min
    ([2], [12.0])
    >>> tps.points["observed_regime"].tolist()
    ['dispersed bubbles']
    >>> print(tps.problems[0])
    row 3, liquid_flow [mL/min]: liquid_flow must be > 0, got -3
    """
    for what, limit in (("max_bytes", max_bytes), ("max_rows", max_rows)):
        if isinstance(limit, bool) or not isinstance(limit, (int, np.integer)):
            raise InputTypeError(f"{what} must be a whole number > 0, got {limit!r}")
        if limit <= 0:
            raise InputError(f"{what} must be a whole number > 0, got {limit!r}")
    if decimal not in (None, ".", ","):
        raise InputError(f"decimal must be '.' or ',', got {decimal!r}")
    if delimiter is not None and (not isinstance(delimiter, str) or len(delimiter) != 1 or delimiter in '"\n\r'):
        raise InputError(f"delimiter must be one character (not a quote or line break), got {delimiter!r}")
    p, t = _gas_conditions(pressure, temperature)
    mapping = _check_str_dict(mapping, "mapping", allow_none_values=True)
    regime_map = _check_str_dict(regime_map, "regime_map")

    source_name, kind, payload = _load(source, name, max_bytes)
    if kind == "excel":
        header, header_row, body = _excel_table(payload, sheet, source_name, max_bytes, max_rows)
        delim = None
        width = len(header)
    else:
        table = _CsvTable(payload, delimiter, source_name, max_rows)
        del payload
        delim = table.delimiter
        header, header_row = table.header, table.header_row
        width = len(header)
    if width > MAX_COLUMNS:
        raise TestPointError(f"the header (line {header_row}) has {width:,} columns, more than the limit of "
                             f"{MAX_COLUMNS:,}; is this a test-point file?", source_name)
    header = [h.strip() for h in header]
    cols, ignored, file_problems = _resolve_columns(header, mapping or {}, header_row)
    factors, units = {}, {}
    for fld, (j, unit) in cols.items():
        if FIELDS[fld].kind in _NUMBER_KINDS:
            try:
                factors[fld] = _unit_factor(fld, header[j], unit, p, t)
                units[fld] = unit.strip()
            except _BadUnit as exc:
                file_problems.append(str(exc))
    if file_problems:
        raise TestPointError(file_problems, source_name)
    if kind != "excel":
        body = table.body(sorted({j for j, _ in cols.values()}))
        del table
    if len(body.rows) == 0 and not body.problems:
        raise TestPointError(f"the header (line {header_row}) is followed by no data rows", source_name)
    return _check_rows(body, header, header_row, cols, factors, units, ignored, source_name, delim, decimal,
                       regime_map)


def _check_rows(body, header, header_row, cols, factors, units, ignored, source_name, delim, decimal,
                regime_map) -> TestPointSet:
    """The row checks, column by column over all rows at once; returns the :class:`TestPointSet`.

    Cells of a column that repeats a few values (regime, platform, g level...) are checked once per
    distinct value. Only the rows with a problem are visited one by one, to write their messages.
    """
    data_rows = body.rows
    n = len(data_rows)
    width = len(header)
    bad = np.zeros(n, dtype=bool)
    order = {h: k for k, h in enumerate(header)}
    names: dict[str, int] = {}                 # column shown -> code
    specs: dict[tuple, int] = {("given",): 0}  # message kind (see _render) -> code
    batches: list[tuple] = []  # problems, a batch per check: rows, column, values, kind, given texts, is error

    def add_rows(rows, col, values, messages, severity="error"):
        """One batch of problems of one column. ``messages``: one text for all, a message kind (see
        :func:`_render`), or one text per row."""
        k = len(rows)
        if isinstance(messages, str):
            messages = ("same", messages)
        if isinstance(messages, tuple):
            kind, texts = specs.setdefault(messages, len(specs)), _fill(None, k)
        else:
            kind, texts = 0, _fill(messages, k)
        batches.append((np.asarray(rows, dtype=np.int64), np.full(k, names.setdefault(col, len(names)), np.int32),
                        _fill(values, k), np.full(k, kind, np.int32), texts, np.full(k, severity == "error")))

    def add(idx, col, values, messages, severity="error"):
        add_rows(data_rows[idx], col, values, messages, severity)

    if body.problems:  # lines that could not be split: (row, line as shown, reason)
        rows, shown, reasons = zip(*body.problems)
        add_rows(rows, "(row)", list(shown), list(reasons))

    # rows longer than the header (extra values that are not empty)
    if body.wide:
        hint = (" (a decimal comma in a comma-separated file? quote the number or use ';' as delimiter)"
                if delim == "," else "")
        idx = np.array(sorted(body.wide), dtype=np.int64)
        add(idx, "(row)", [body.wide[i] for i in idx.tolist()],
            _shared(body.nfields[idx].tolist(), lambda nf: f"has {nf:,} values but the header has {width:,} "
                                                          f"columns{hint}"))
        bad[idx] = True

    # rows shorter than the header (CSV): optional values missing -> warning; required ones -> in the error
    eff_width = max((j + 1 for j, h in enumerate(header) if h), default=0)
    short = (body.nfields < eff_width) if delim is not None else np.zeros(n, dtype=bool)
    required_cut = np.zeros(n, dtype=bool)
    for fld in REQUIRED_FIELDS:
        required_cut |= short & (body.nfields <= cols[fld][0])
    idx = np.flatnonzero(short & ~required_cut)
    if idx.size:
        nfs = body.nfields[idx].tolist()
        add(idx, "(row)", _shared(nfs, lambda nf: f"{nf} value(s)"),
            _shared(nfs, lambda nf: f"has {nf} value(s) but the header has {eff_width} columns; the missing values "
                                    "are read as empty"), "warning")

    uses: dict[int, int] = {}
    for j, _ in cols.values():
        uses[j] = uses.get(j, 0) + 1

    def take(fld):
        """The cells of a field's column; the column is dropped from ``body`` after its last use."""
        j = cols[fld][0]
        uses[j] -= 1
        return body.cells[j] if uses[j] else body.cells.pop(j)

    # numbers: parsed once (per distinct value where values repeat); texts kept only for the rows with problems
    numbers: dict[str, tuple[np.ndarray, np.ndarray, object]] = {}
    for fld in [f for f in cols if FIELDS[f].kind in _NUMBER_KINDS]:
        numbers[fld] = _number_column(take(fld))
    if decimal is None:
        decimal = "."
        if delim not in (None, ","):
            for num, nan_idx, text_of in numbers.values():
                if nan_idx.size and pd.Series(text_of.at(nan_idx), dtype=object).str.fullmatch(_COMMA_DECIMAL).any():
                    decimal = ","
                    break
    values: dict[str, np.ndarray] = {}
    for fld in list(numbers):
        num, nan_idx, text_of = numbers.pop(fld)
        col = header[cols[fld][0]]
        if decimal == "," and nan_idx.size:
            fixed = pd.Series(text_of.at(nan_idx), dtype=object).str.replace(",", ".", regex=False).to_numpy(object)
            num[nan_idx] = _to_float(fixed)
            nan_idx = nan_idx[np.isnan(num[nan_idx])]
        missing = np.zeros(n, dtype=bool)
        not_number = np.zeros(n, dtype=bool)
        if nan_idx.size:
            low = pd.Series(text_of.at(nan_idx), dtype=object).str.lower()
            miss_sub = low.isin(list(_MISSING)).to_numpy(dtype=bool)
            nan_text = low.str.fullmatch(r"[-+]?nan").to_numpy(dtype=bool)
            missing[nan_idx[miss_sub]] = True
            not_number[nan_idx[~miss_sub & ~nan_text]] = True
        not_finite = ~missing & ~not_number & ~np.isfinite(num)
        rel, ok_fn = _ENDS[fld]
        with np.errstate(invalid="ignore"):
            out_of_range = np.isfinite(num) & ~ok_fn(num)
        if FIELDS[fld].required:
            idx = np.flatnonzero(missing)
            if idx.size:
                base = f"missing value: {fld} is required"
                cuts = (body.nfields[idx] * required_cut[idx]).tolist()   # 0: the row is not short
                add(idx, col, text_of.at(idx),
                    _shared(cuts, lambda nf: base + (f" (the row has {nf} value(s), the header has {eff_width} "
                                                     "columns)" if nf else "")))
                bad |= missing
        for mask, kind in ((not_number, ("not_number", fld, decimal)),
                           (not_finite, ("format", f"{fld} must be a finite number, got {{v}}")),
                           (out_of_range, ("format", f"{fld} must be {rel}, got {{v}}"))):
            idx = np.flatnonzero(mask)
            if idx.size:
                (shown,) = text_of.each(idx, _clip)
                add(idx, col, shown, kind)
                bad |= mask
        values[fld] = np.where(missing | not_number | not_finite | out_of_range, np.nan, num * factors[fld])
        del num, nan_idx, text_of  # the column's texts go with them

    empty_text = np.full(n, "", dtype=object)

    # test ids: given ones must be unique; rows without one get "#<row>"
    if "test_id" in cols:
        ids = _text_column(take("test_id"))
        given = ids != ""
        dup = pd.Series(ids, dtype=object).duplicated(keep=False).to_numpy(dtype=bool) & given
        if dup.any():
            col = header[cols["test_id"][0]]
            idx = np.flatnonzero(dup)
            id_texts, id_messages = _duplicate_id_problems(ids, idx, data_rows)
            add(idx, col, id_texts, id_messages)
            bad |= dup
        test_id = ids
        none = np.flatnonzero(~given)
        if none.size:
            test_id[none] = ["#" + str(r) for r in data_rows[none].tolist()]
    else:
        test_id = np.array(["#" + str(r) for r in data_rows.tolist()] or [], dtype=object)

    # platforms: canonical name when recognised; unknown names are a warning
    if "platform" in cols:
        codes, plat_names = pd.factorize(_text_column(take("platform"), collapse=True))
        found = [find_platform(v) if v else None for v in plat_names]
        platform = _objects([pl.name if pl else v for v, pl in zip(plat_names, found)])[codes]
        unknown = np.array([bool(v) and pl is None for v, pl in zip(plat_names, found)] or [], dtype=bool)
        if unknown.any():
            shown = _objects([_clip(v) for v in plat_names])
            texts = _objects([f"platform {v!r} is not in the built-in table; the point is kept, give its "
                              "residual_acceleration and low_g_duration" for v in shown])
            idx = np.flatnonzero(unknown[codes])
            g = codes[idx]
            add(idx, header[cols["platform"][0]], shown[g], texts[g], "warning")
    else:
        platform = empty_text

    # observed regime, through regime_map
    if "observed_regime" in cols:
        regime = _text_column(take("observed_regime"), collapse=True)
        if regime_map:
            norm_map = {" ".join(k.split()).lower(): v for k, v in regime_map.items()}
            codes, labels = pd.factorize(regime)
            regime = _objects([norm_map.get(v.lower(), v) for v in labels])[codes]
        idx = np.flatnonzero(regime == "")
        if idx.size:
            add(idx, header[cols["observed_regime"][0]], "", "no observed regime given; the point is kept without one",
                "warning")
    else:
        regime = empty_text

    notes = _text_column(take("notes")) if "notes" in cols else empty_text
    nan = np.full(n, np.nan)
    keep = ~bad
    points = pd.DataFrame({
        "row": data_rows[keep],
        "test_id": pd.Series(test_id[keep], dtype=object),
        "ql_m3_s": values["liquid_flow"][keep],
        "qg_m3_s": values["gas_flow"][keep],
        "observed_regime": pd.Series(regime[keep], dtype=object),
        "platform": pd.Series(platform[keep], dtype=object),
        "g_m_s2": values.get("residual_acceleration", nan)[keep],
        "duration_s": values.get("low_g_duration", nan)[keep],
        "notes": pd.Series(notes[keep], dtype=object),
    }, columns=POINT_COLUMNS)
    problems = _sorted_problems(batches, names, [order.get(c, -1) for c in names], specs)
    return TestPointSet(points=points, problems=problems,
                        columns={header[j]: fld for fld, (j, _) in sorted(cols.items(), key=lambda kv: kv[1][0])},
                        source_name=source_name, units=units, ignored_columns=ignored, delimiter=delim,
                        decimal=decimal)


def _sorted_problems(batches: list, names, column_order, specs) -> RowProblems:
    """The problems of all batches (emptied on the way) by row, then in the order of the file's columns
    ("(row)" first); one field at a time, so that little is held twice."""
    specs = sorted(specs, key=specs.get)
    if not batches:
        return RowProblems([], [], _objects([]), [], _objects([]), [], [], specs)
    fields = [list(f) for f in zip(*batches)]
    batches.clear()
    rows = np.concatenate(fields[0])
    cols = np.concatenate(fields[1])
    fields[0] = fields[1] = None
    rank = np.lexsort((np.asarray(column_order, dtype=np.int64)[cols], rows))
    rows, cols = rows[rank], cols[rank]
    out = []
    for k in (2, 3, 4, 5):
        part = np.concatenate(fields[k])
        fields[k] = None
        out.append(part[rank])
        del part
    return RowProblems(rows, cols, out[0], out[1], out[2], out[3], names, specs)


def _fill(items, k: int) -> np.ndarray:
    """``k`` texts as an object array: ``items`` is one text (or None) for all, or k of them."""
    if items is None or isinstance(items, str):
        out = np.empty(k, dtype=object)
        out[:] = items  # the same text object in every place
        return out
    if isinstance(items, np.ndarray) and items.dtype == object:
        return items
    return _objects(list(items))


def _shared(keys: list, make) -> list[str]:
    """``make(key)`` for each key, one text per distinct key (rows with the same problem share one message)."""
    made: dict = {}
    return [made[k] if k in made else made.setdefault(k, make(k)) for k in keys]


def _objects(items: list) -> np.ndarray:
    """A 1-d object array of the given texts."""
    out = np.empty(len(items), dtype=object)
    out[:] = items
    return out


def _strip(cells: np.ndarray) -> np.ndarray:
    """Cell texts without surrounding white space (object array)."""
    return _objects([c.strip() for c in cells.tolist()])


def _distinct(cells: np.ndarray):
    """``(codes, distinct values)`` when the column repeats a few values (judged on a sample), else None."""
    n = len(cells)
    if n > 4000:
        sample = cells[:: n // 2000]
        if len(pd.unique(sample)) * 4 > len(sample):
            return None
    return pd.factorize(cells)


def _text_column(cells: np.ndarray, collapse: bool = False) -> np.ndarray:
    """Cell texts stripped (and with runs of white space made one space), once per distinct value."""
    enc = _distinct(cells)
    if enc is None:
        out = _strip(cells)
        if not collapse:
            return out
        enc = pd.factorize(out)
    codes, uniques = enc
    if collapse:
        return _objects([" ".join(u.split()) for u in uniques.tolist()])[codes]
    return _strip(uniques)[codes]


class _Texts:
    """The stripped texts of a column's cells, looked up for the rows with a problem.

    ``texts[codes]`` are the cells when the column repeats a few values (then ``each`` works once per
    distinct value), else ``cells`` (stripped on demand).
    """

    def __init__(self, cells=None, texts=None, codes=None, known_idx=None, known=None):
        self.cells, self.texts, self.codes = cells, texts, codes
        self.known_idx, self.known = known_idx, known  # cells already stripped (those that are not numbers)

    def at(self, idx) -> np.ndarray:
        if self.codes is not None:
            return self.texts[self.codes[idx]]
        if self.known_idx is None or not self.known_idx.size:
            return _strip(self.cells[idx])
        pos = np.minimum(np.searchsorted(self.known_idx, idx), self.known_idx.size - 1)
        hit = self.known_idx[pos] == idx
        if hit.all():
            return self.known[pos]
        out = np.empty(len(idx), dtype=object)
        out[hit] = self.known[pos[hit]]
        out[~hit] = _strip(self.cells[idx[~hit]])
        return out

    def each(self, idx, *fns) -> list[np.ndarray]:
        """``[fn(text) for the cells idx]`` for each of the functions ``fns``."""
        if self.codes is not None:
            distinct, where = np.unique(self.codes[idx], return_inverse=True)
            texts = self.texts[distinct].tolist()
            return [_objects([fn(v) for v in texts])[where.reshape(-1)] for fn in fns]
        texts = self.at(idx).tolist()
        return [_objects([fn(v) for v in texts]) for fn in fns]


def _number_column(cells: np.ndarray):
    """Floats of a column (NaN where not a number), the NaN positions, and the column's :class:`_Texts`."""
    enc = _distinct(cells)
    if enc is not None:
        codes, uniques = enc
        texts = _strip(uniques)
        num = _to_float(texts)[codes]
        return num, np.flatnonzero(np.isnan(num)), _Texts(texts=texts, codes=codes)
    num = _to_float(cells)  # pandas reads numbers with surrounding blanks; others are retried stripped
    nan_idx = np.flatnonzero(np.isnan(num))
    known = _strip(cells[nan_idx])
    changed = np.fromiter((a is not b for a, b in zip(known.tolist(), cells[nan_idx].tolist())), dtype=bool,
                          count=nan_idx.size)
    if changed.any():
        num[nan_idx[changed]] = _to_float(known[changed])
        keep = np.isnan(num[nan_idx])
        nan_idx, known = nan_idx[keep], known[keep]
    return num, nan_idx, _Texts(cells=cells, known_idx=nan_idx, known=known)


def _to_float(cells: np.ndarray) -> np.ndarray:
    """Cell texts as floats (a new array); NaN where a cell is not a number.

    Numbers are read as :func:`pandas.to_numeric` reads them. When every cell is a plain number (ASCII, no
    ``_`` digit separator, which Python's ``float`` would take but pandas not) numpy converts the column in
    one step; otherwise pandas does, with NaN for the cells that are not numbers.
    """
    if len(cells) == 0:
        return np.zeros(0)
    joined = "".join(cells.tolist())
    if joined.isascii() and "_" not in joined:
        try:
            return cells.astype(float)
        except (ValueError, TypeError, OverflowError):
            pass
    del joined
    num = pd.to_numeric(pd.Series(cells, dtype=object), errors="coerce")
    try:
        return np.array(num, dtype=float)
    except (OverflowError, TypeError, ValueError):  # pragma: no cover - to_numeric gives floats or ints
        return np.array([_float_or_nan(v) for v in num], dtype=float)


def _float_or_nan(v) -> float:  # pragma: no cover - fallback of _to_float
    try:
        return float(v)
    except (OverflowError, TypeError, ValueError):
        return math.nan


def _duplicate_id_problems(ids, idx, data_rows) -> tuple[np.ndarray, np.ndarray]:
    """Values and messages for the rows ``idx`` (ascending) whose test id is used on other rows, each naming up
    to five of the others. Beyond a group's first six rows every row names the same five, so those share one
    message (linear time, one text per group and a few more)."""
    codes, uniques = pd.factorize(ids[idx])
    order = np.argsort(codes, kind="stable")          # rows of each group together, ascending
    rows = data_rows[idx][order]
    starts = np.flatnonzero(np.r_[True, np.diff(codes[order]) != 0])
    sizes = np.diff(np.r_[starts, order.size])
    labels = _objects([_clip(u) for u in uniques])
    messages = np.empty(order.size, dtype=object)

    def text(label, others, more):
        listed = ", ".join(map(str, others)) + (f" and {more:,} more" if more > 0 else "")
        return f"test id {label!r} is also used on row(s) {listed}; ids must be unique (all rows with this id are set aside)"

    for g, (start, size) in enumerate(zip(starts.tolist(), sizes.tolist())):
        head = rows[start:start + min(size, _MAX_LISTED + 1)].tolist()
        label = labels[codes[order[start]]]
        if size > _MAX_LISTED + 1:
            messages[start + len(head):start + size] = text(label, head[:_MAX_LISTED], size - 1 - _MAX_LISTED)
        for k, r in enumerate(head):
            others = (head[:k] + head[k + 1:])[:_MAX_LISTED]
            messages[start + k] = text(label, others, size - 1 - len(others))
    back = np.empty_like(order)
    back[order] = np.arange(order.size)
    return labels[codes], messages[back]


def _not_number_message(fld: str, value: str, decimal: str) -> str:
    """Message for a cell that is not a number (``value`` as quoted: already cut to length)."""
    msg = f"{fld} is not a number: {value!r}"
    if decimal == "." and _COMMA_DECIMAL_RE.fullmatch(value):
        msg += " (decimal comma? pass decimal=',' or use ';' as delimiter)"
    elif _NUM_WITH_TEXT.match(value):
        msg += " (write the unit in the column header, not in the cell)"
    return msg


# --------------------------------------------------------------------------------------------- helpers

class _BadUnit(Exception):
    pass


def _check_str_dict(d, what: str, allow_none_values: bool = False):
    if d is None:
        return None
    if not isinstance(d, dict):
        raise InputTypeError(f"{what} must be a dict of text to text, got {type(d).__name__}")
    for k, v in d.items():
        if not isinstance(k, str) or not (isinstance(v, str) or (allow_none_values and v is None)):
            raise InputTypeError(f"{what} must map text to text, got {_clip(repr(k))}: {_clip(repr(v))}")
    return d


def _gas_conditions(pressure, temperature):
    p = t = None
    try:
        if pressure is not None:
            p = to_si(pressure, "pressure", "pressure", default_unit="Pa") if isinstance(pressure, str) else pressure
            p = positive("pressure", p, "Pa")
        if temperature is not None:
            t = to_si(temperature, "temperature", "temperature", default_unit="K") \
                if isinstance(temperature, str) else temperature
            t = positive("temperature", t, "K")
    except UnitError as exc:  # a unit error is the user's input error too
        if isinstance(exc, InputError):
            raise
        raise InputError(str(exc)) from None
    return p, t


def _split_header(text: str) -> tuple[str, str | None]:
    if len(text) > 1000:  # not a column name; keep the pattern below off very long text
        return text.strip(), None
    m = _HEADER_UNIT.match(text)
    if m and m.group("name").strip():
        unit = m.group("u1") if m.group("u1") is not None else m.group("u2")
        return m.group("name").strip(), unit.strip()
    return text.strip(), None


def _resolve_columns(header: list[str], mapping: dict, header_row: int):
    """Map file columns to fields: ``{field: (column index, unit or None)}``, ignored headers, problems."""
    problems: list[str] = []
    parsed = [_split_header(h) for h in header]
    cols: dict[str, tuple[int, str | None]] = {}
    by_mapping: set[int] = set()
    listing = _listing(header)
    for key, target in mapping.items():
        j = _find_column(key, header, parsed)
        if j is None:
            problems.append(f"mapping names column {_clip(key)!r}, which is not in the file; the file's columns "
                            f"are {listing}")
            continue
        if j < 0:
            problems.append(f"mapping key {_clip(key)!r} matches more than one column; use the full header text")
            continue
        by_mapping.add(j)
        if target is None or _norm(target) in ("ignore", ""):
            continue
        t_name, t_unit = _split_header(target)
        fld = _ALIASES.get(_norm(t_name))
        if fld is None:
            problems.append(f"mapping sends column {_clip(key)!r} to {_clip(target)!r}, which is not a field; "
                            f"fields are {', '.join(FIELDS)}")
            continue
        if fld in cols:
            problems.append(f"mapping sends two columns to {fld}: {_clip(header[cols[fld][0]])!r} and "
                            f"{_clip(header[j])!r}")
            continue
        cols[fld] = (j, t_unit if t_unit else parsed[j][1])
    mapped_fields = set(cols)
    ignored: list[str] = []
    for j, (nm, unit) in enumerate(parsed):
        if j in by_mapping or not header[j]:
            continue
        fld = _ALIASES.get(_norm(nm))
        if fld is None or fld in mapped_fields:
            ignored.append(header[j])
            continue
        if fld in cols:
            problems.append(f"columns {_clip(header[cols[fld][0]])!r} and {_clip(header[j])!r} are both read as "
                            f"{fld}; rename one, or choose with mapping={{{_clip(header[j])!r}: None}}")
            continue
        cols[fld] = (j, unit)
    missing = [f for f in REQUIRED_FIELDS if f not in cols]
    if missing:
        cells = [h for h in header if h]
        if cells and all(_is_number(h) for h in cells):
            problems.insert(0, f"no header: the first line (line {header_row}) holds numbers, not column names; "
                               f"start the file with a header such as: {TEMPLATE_HEADER}")
        else:
            names = "; ".join(f"{f}: {', '.join(repr(a) for a in [f, *FIELDS[f].aliases])}" for f in missing)
            example = f"{missing[0]} [{FIELDS[missing[0]].example_unit}]"
            problems.append(
                f"required column(s) missing: {', '.join(missing)}. The header (line {header_row}) has "
                f"{listing}. Accepted names, ignoring case, spaces and punctuation ({names}), with the unit in "
                f"brackets, e.g. {example!r}; or map a column, e.g. mapping={{'your column': {example!r}}}")
    return cols, ignored, problems


def _find_column(key: str, header: list[str], parsed) -> int | None:
    k = key.strip()
    for test in (lambda j: header[j] == k,
                 lambda j: header[j].casefold() == k.casefold(),
                 lambda j: parsed[j][0].casefold() == k.casefold()):
        hits = [j for j in range(len(header)) if header[j] and test(j)]
        if len(hits) == 1:
            return hits[0]
        if len(hits) > 1:
            return -1
    return None


def _is_number(text: str) -> bool:
    if len(text) > 400:
        return False
    try:
        float(text.replace(",", "."))
        return True
    except ValueError:
        return False


def _unit_factor(fld: str, column: str, unit: str | None, p, t) -> float:
    """SI value of one header unit of a number field; raise _BadUnit with a message naming the column."""
    spec = FIELDS[fld]
    example = f"'{fld} [{spec.example_unit}]'"
    column = _clip(column)
    if unit is None or not unit.strip():
        raise _BadUnit(f"column {column!r} ({fld}) has no unit; write it in the header, e.g. {example}, or "
                       f"give it with mapping={{{column!r}: {fld + ' [' + spec.example_unit + ']'!r}}}")
    u = unit.strip().replace("\u00b2", "^2").replace("\u00b3", "^3")
    if fld == "residual_acceleration" and u in ("g", "G", "g_0"):
        u = "g0"  # 'g' in an acceleration column means standard gravity, not gram
    shown = _clip(u)
    key = u.lower()
    if key in STANDARD_FLOW_UNITS:
        if fld != "gas_flow":
            raise _BadUnit(f"column {column!r}: {u!r} is a standard-volume unit, valid for gas flow only; give "
                           f"{fld} as a volume per time, e.g. {example}")
        if p is None or t is None:
            raise _BadUnit(f"column {column!r}: standard-volume unit {u!r} needs the local gas pressure and "
                           "temperature; pass pressure= and temperature= to convert to actual flow")
        try:
            return parse_flow(f"1 {u}", f"column {column!r}", gas=True, pressure=p, temperature=t)
        except (UnitError, ValueError) as exc:  # pragma: no cover - p, t validated above
            raise _BadUnit(_clip(str(exc), 400)) from None
    kind = spec.kind
    word = _KIND_WORDS[kind]
    try:
        ureg.parse_units(u)
    except Exception:
        raise _BadUnit(f"column {column!r}: unknown unit {shown!r} (expected a {word} unit such as "
                       f"{spec.example_unit!r})") from None
    try:
        check_unit(u, kind, f"column {column!r}")
        factor = to_si(f"1 {u}", kind, f"column {column!r}")
    except Exception:
        raise _BadUnit(f"column {column!r}: {shown!r} is not a {word} unit (expected e.g. {spec.example_unit!r})") \
            from None
    if not (math.isfinite(factor) and factor > 0):
        raise _BadUnit(f"column {column!r}: unit {shown!r} cannot be used (factor {factor!r})")
    return factor


# --------------------------------------------------------------------------------------------- loading

def _looks_like_path(s: str) -> bool:
    if "\n" in s or "\r" in s or len(s) > 4096:
        return False
    try:
        return Path(s).suffix.lower() in _PATH_SUFFIXES or os.path.lexists(s)
    except (ValueError, OSError):
        return False


def _load(source, name, max_bytes):
    """Return (source name, "csv" | "excel", bytes), within ``max_bytes``; CSV as UTF-8 without a BOM."""
    if hasattr(source, "read") and not isinstance(source, (str, bytes, os.PathLike)):
        label = name or "uploaded file"
        parts, size = [], 0
        while size <= max_bytes:  # never more than the limit (a stream may be endless)
            part = source.read(max_bytes + 1 - size)
            if not part:
                break
            parts.append(part)
            size += len(part)
        data = parts[0] if len(parts) == 1 else ("" if parts and isinstance(parts[0], str) else b"").join(parts)
        if isinstance(data, str):
            if len(data) > max_bytes:
                raise TestPointError(_too_large(None, max_bytes), label)
            return _from_text(data, label, max_bytes)
        if not isinstance(data, (bytes, bytearray, memoryview)):
            raise InputTypeError(f"the file object gave {type(data).__name__}, not bytes or text")
        return _from_bytes(bytes(data), label, max_bytes, exact=len(data) <= max_bytes)
    if isinstance(source, (bytes, bytearray, memoryview)):
        return _from_bytes(bytes(source), name or "uploaded file", max_bytes)
    if isinstance(source, os.PathLike) or (isinstance(source, str) and _looks_like_path(source)):
        path = Path(source)
        label = name or path.name
        data = _read_regular_file(path, label, max_bytes)
        return _from_bytes(data, label, max_bytes, suffix=path.suffix.lower())
    if isinstance(source, str):
        return _from_text(source, name or "text", max_bytes)
    raise InputTypeError(f"source must be a path, text, bytes or a file object, got {type(source).__name__}")


def _from_text(source: str, label: str, max_bytes: int):
    size = len(source) if len(source) * 4 <= max_bytes else len(source.encode("utf-8", "replace"))
    if size > max_bytes:
        raise TestPointError(_too_large(size, max_bytes), label)
    text = source[1:] if source.startswith("\ufeff") else source
    _check_text(text, label)
    return label, "csv", text.encode("utf-8", "replace")  # lone surrogates -> '?'


def _file_kind(mode: int) -> str:
    for test, what in ((stat.S_ISDIR, "a directory"), (stat.S_ISFIFO, "a named pipe (FIFO)"),
                       (stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"),
                       (stat.S_ISSOCK, "a socket")):
        if test(mode):
            return what
    return "not a regular file"


def _read_regular_file(path: Path, label: str, max_bytes: int) -> bytes:
    """The bytes of ``path``: a regular file of at most ``max_bytes``, checked before it is opened for reading.

    The file is opened without blocking (a named pipe put in its place meanwhile cannot hang the read) and
    checked again on the open handle; it is only read, never modified.
    """
    shown = _clip(str(path))
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise TestPointError(f"file not found: {shown!r}", label) from None
    except (OSError, ValueError) as exc:
        raise TestPointError(f"cannot read {shown!r}: {getattr(exc, 'strerror', None) or exc}", label) from None

    def refuse(mode):
        return TestPointError(f"{shown!r} is {_file_kind(mode)}, not a regular file; test points are read only "
                              "from regular files (.csv, .tsv, .txt, .xlsx)", label)

    if not stat.S_ISREG(st.st_mode):
        raise refuse(st.st_mode)
    if st.st_size > max_bytes:
        raise TestPointError(_too_large(st.st_size, max_bytes), label)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0) | getattr(os, "O_NOCTTY", 0)
    try:
        fd = os.open(path, flags)
    except OSError as exc:
        raise TestPointError(f"cannot read {shown!r}: {exc.strerror or exc}", label) from None
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise refuse(st.st_mode)
        chunks, size = [], 0
        while size <= max_bytes:  # one read in the usual case (the size is known)
            want = st.st_size - size + 1 if size < st.st_size else 1 << 20
            chunk = os.read(fd, min(want, max_bytes + 1 - size, 1 << 30))
            if not chunk:
                break
            chunks.append(chunk)
            size += len(chunk)
    except OSError as exc:
        raise TestPointError(f"cannot read {shown!r}: {exc.strerror or exc}", label) from None
    finally:
        os.close(fd)
    if size > max_bytes:  # the file grew after it was measured
        raise TestPointError(_too_large(None, max_bytes), label)
    return chunks[0] if len(chunks) == 1 else b"".join(chunks)


def _too_large(size, max_bytes):
    if size is None:
        return f"the file is larger than the limit of {max_bytes:,} bytes; split it, or raise max_bytes"
    return f"the file is {size:,} bytes, more than the limit of {max_bytes:,} bytes; split it, or raise max_bytes"


def _from_bytes(data: bytes, label: str, max_bytes: int, suffix: str | None = None, exact: bool = True):
    if len(data) > max_bytes:
        raise TestPointError(_too_large(len(data) if exact else None, max_bytes), label)
    if suffix is None:
        suffix = Path(label).suffix.lower()
    if data[:4] == b"PK\x03\x04" or suffix in _EXCEL_SUFFIXES:
        return label, "excel", data
    if data[:8] == b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" or suffix == ".xls":
        raise TestPointError("old Excel .xls format is not read; save the sheet as .xlsx or CSV", label)
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        text = data.decode("utf-16", errors="replace")
    else:
        if data.startswith(codecs.BOM_UTF8):
            data = data[3:]
        if _is_utf8(data):  # the usual case: the bytes are used as they are
            if b"\x00" in data:
                _check_text("\x00", label)
            return label, "csv", data
        for enc in ("cp1252", "latin-1"):
            try:
                text = data.decode(enc)
                break
            except UnicodeDecodeError:
                continue
    text = text[1:] if text.startswith("\ufeff") else text
    _check_text(text, label)
    return label, "csv", text.encode("utf-8", "replace")


def _is_utf8(data: bytes) -> bool:
    """Whether ``data`` is valid UTF-8 (checked in pieces, without a copy of the whole text)."""
    dec = codecs.getincrementaldecoder("utf-8")()
    view = memoryview(data)
    try:
        for a in range(0, len(data), 1 << 20):
            dec.decode(view[a:a + (1 << 20)])
        dec.decode(b"", final=True)
    except UnicodeDecodeError:
        return False
    return True


def _check_text(text: str, label: str):
    if "\x00" in text:
        raise TestPointError("the file holds NUL characters: it is not a text (CSV) file; save it as CSV "
                             "(UTF-8) or .xlsx", label)


# --------------------------------------------------------------------------------------------- CSV

def _outside_quotes(line: str) -> str:
    return re.sub(r'"[^"]*"?', "", line)


def _sniff(lines: list[str]) -> str:
    """Delimiter from the header line, checked against the next lines: tab, ';' or ','."""
    header = _outside_quotes(lines[0])
    best, best_score = ",", (-1, -1)
    for d in ("\t", ";", ","):
        c = header.count(d)
        if c == 0:
            continue
        agree = sum(_outside_quotes(ln).count(d) == c for ln in lines[1:21])
        score = (agree, c)
        if score > best_score:
            best, best_score = d, score
    return best


def _first_lines(data: bytes, count: int = 21) -> list[str]:
    """The first ``count`` non-blank lines of ``data`` (no list of all of them; blank runs are skipped whole)."""
    out: list[str] = []
    pos, n = 0, len(data)
    while pos < n and len(out) < count:
        m = _NOT_BLANK.search(data, pos)
        if m is None:
            break
        start = data.rfind(b"\n", 0, m.start()) + 1
        end = data.find(b"\n", m.start())
        if end < 0:
            end = n
        line = data[start:end].decode("utf-8", "replace")
        if line.strip():
            out.append(line)
        pos = end + 1
    return out


@dataclass
class _Body:
    """The data records of a table, column by column.

    rows : line (CSV) or worksheet row (Excel) number of each non-blank record
    nfields : number of values of each record
    cells : column index -> cell text of each record ("" where the record is shorter)
    wide : record index -> record text, for records with non-empty values beyond the header's columns
    problems : lines that could not be split into fields (set aside before the row checks): (line number,
               the line as shown, reason)
    """

    rows: np.ndarray
    nfields: np.ndarray
    cells: dict[int, np.ndarray]
    wide: dict[int, str]
    problems: list[tuple[int, str, str]]


def _blank(fields) -> bool:
    return not "".join(fields).strip()


def _body_from_records(records: list[list[str]], rows: list[int], width: int, used, sep: str) -> _Body:
    """A :class:`_Body` from records split in Python (list of lists)."""
    cells = {j: np.array([r[j] if j < len(r) else "" for r in records] or [], dtype=object) for j in used}
    wide = {k: sep.join(r) for k, r in enumerate(records) if len(r) > width and not _blank(r[width:])}
    return _Body(rows=np.asarray(rows, dtype=np.int64), nfields=np.fromiter(map(len, records), np.int64,
                                                                            len(records)),
                 cells=cells, wide={k: _clip(v) for k, v in wide.items()}, problems=[])


_UNCLOSED = ('unclosed quote: the field opened with " on this line {how}; the row is set aside and the next line '
             'is read as a row of its own. Close the quote (a quote inside a quoted field is written "")')
_NEVER_CLOSED = _UNCLOSED.format(how="is never closed")
_NOT_CLOSED = _UNCLOSED.format(how="is not closed on it")
_NEXT_IS_ROW = _UNCLOSED.format(how="is not closed on it (the next line looks like a row of its own)")


def _parse_record(line, n_lines: int, i: int, delim: str, thr: int | None):
    """Split the record that starts on line ``i`` (0-based) with the :mod:`csv` rules.

    ``line(k)`` gives line k without its line break. Returns ``(fields, lines used, None)`` or
    ``(None, 1, reason)`` when the line cannot be split: a quote never closed, or closed only after taking in
    a line with ``thr`` or more delimiters (a row of its own, so the quote was not meant to span lines).
    """
    first = line(i)
    if '"' not in first:
        return first.split(delim), 1, None

    def feed():
        for k in range(i, n_lines):
            yield line(k) + "\n"

    reader = csv.reader(feed(), delimiter=delim, quotechar='"', doublequote=True, strict=True)
    try:
        fields = next(reader)
    except StopIteration:  # pragma: no cover - the line is not empty
        return [], 1, None
    except csv.Error as exc:
        msg = str(exc)
        if "field larger than field limit" in msg:
            return None, 1, f"a field is longer than {csv.field_size_limit():,} characters"
        if "end of data" in msg:
            return None, 1, _NEVER_CLOSED
        if reader.line_num <= 1 and first.count('"') % 2 == 0:
            # a quote inside the line that strict rules refuse (e.g. "a"b): read the line as it stands
            try:
                return next(csv.reader([first], delimiter=delim, quotechar='"', strict=False)), 1, None
            except csv.Error as exc2:
                return None, 1, f"cannot split the line into fields ({_clip(exc2)})"
        return None, 1, _NOT_CLOSED
    used = reader.line_num
    if used > 1 and thr is not None:
        for k in range(i + 1, i + used):
            if line(k).count(delim) >= thr:
                if k == i + 1:
                    return None, 1, _NEXT_IS_ROW
                return None, 1, _UNCLOSED.format(how=f"is not closed on it (line {k + 1} looks like a row of "
                                                     "its own)")
    return fields, used, None


def _single_line(text: str, delim: str):
    """Fields of one line without a record-spanning quote: (fields, None) or (None, reason)."""
    if '"' not in text:
        return text.split(delim), None
    try:
        return next(csv.reader([text], delimiter=delim, quotechar='"', doublequote=True, strict=False)), None
    except csv.Error as exc:
        if "field larger than field limit" in str(exc):
            return None, f"a field is longer than {csv.field_size_limit():,} characters"
        return None, f"cannot split the line into fields ({_clip(exc)})"  # pragma: no cover


# bytes that are certainly part of a value: ASCII, not white space, not a quote (delimiter removed per file)
_CONTENT = np.ones(256, dtype=bool)
_CONTENT[128:] = False
_CONTENT[[ord(c) for c in ' \t\n\r\x0b\x0c\x1c\x1d\x1e\x1f"']] = False
# bytes that may be part of a value: quotes and non-ASCII (white space such as U+00A0 or text)
_MAYBE = np.zeros(256, dtype=bool)
_MAYBE[128:] = True
_MAYBE[ord('"')] = True
# for counting non-blank lines: 1 line break, 2 anything but white space
_EVENT = np.full(256, 2, dtype=np.uint8)
_EVENT[[ord(c) for c in ' \t\r\x0b\x0c\x1c\x1d\x1e\x1f']] = 0
_EVENT[10] = 1
_CHUNK = 1 << 21
_BLANK_BYTES = b" \t\x0b\x0c\x1c\x1d\x1e\x1f"
_MAYBE_BYTES = bytes(range(128, 256)) + b'"'
_NOT_BLANK = re.compile(rb"[^ \t\n\x0b\x0c\x1c-\x1f]")
_COMMENT_FIRST = re.compile(rb"\A[ \t]*#[^\n]*")
_COMMENT_NEXT = re.compile(rb"\n[ \t]*#[^\n]*")


def _count_nonblank_lines(b: np.ndarray) -> int:
    """Number of lines holding anything but white space, in chunks (bounded memory)."""
    count, prev_nl = 0, True
    for a in range(0, b.size, _CHUNK):
        ev = _EVENT[b[a:a + _CHUNK]]
        ev = ev[ev != 0]
        if ev.size == 0:
            continue
        count += int(np.count_nonzero((ev[1:] == 2) & (ev[:-1] == 1))) + int(ev[0] == 2 and prev_nl)
        prev_nl = bool(ev[-1] == 1)
    return count


def _count_per_line(mask: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Number of True values of ``mask`` in each line (lines begin at ``starts``), in chunks."""
    out = np.zeros(starts.size, dtype=np.int64)
    for a in range(0, mask.size, _CHUNK):
        pos = np.flatnonzero(mask[a:a + _CHUNK])
        if pos.size:
            line = np.searchsorted(starts, pos + a, side="right") - 1
            lo = int(line[0])
            out[lo:int(line[-1]) + 1] += np.bincount(line - lo)
    return out


class _CsvTable:
    """A CSV file (UTF-8 bytes) split into its header and, on request, its data records.

    The bytes are measured first with numpy (line breaks, quotes, delimiters) and the row limit checked,
    before any line is split. Lines whose quotes are balanced and placed as the :mod:`csv` rules expect
    (opening at the start of a field, closing at its end, ``""`` inside), and lines whose quotes all sit
    inside unquoted fields (kept as written by both parsers), are "clean": each is one record, and they are
    split together by pandas' C parser. The other lines (a quoted field left open at the end of the line,
    or closed and followed by more text) are split one record at a time with :func:`_parse_record`, which
    also decides whether a quoted field may span lines.
    """

    def __init__(self, data: bytes, delimiter, label: str, max_rows: int):
        self.label = label
        if b"\r" in data:
            data = data.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
        if b"#" in data:  # comment lines become blank lines, so line numbers stay right
            data = _COMMENT_FIRST.sub(b"", _COMMENT_NEXT.sub(b"\n", data), count=1)
        self.data = data
        b = np.frombuffer(data, dtype=np.uint8)
        self.b = b
        n = b.size
        # the row limit, before anything else is done per line
        if data.count(b"\n") >= max_rows + 1:
            lines = _count_nonblank_lines(b)
            if lines - 1 > max_rows:
                raise TestPointError(f"the file has {lines - 1:,} data lines after the header, more than the limit "
                                     f"of {max_rows:,} rows; split it, or raise max_rows", label)
        first = _first_lines(data)
        if not first:
            raise TestPointError("the file is empty (only blank or comment lines, no header and no data)", label)
        self.delimiter = delim = delimiter or _sniff(first)
        # lines: [starts[k], ends[k]) without the line break
        idx_type = np.int32 if n < 2**31 - 1 else np.int64
        nl = np.flatnonzero(b == 10).astype(idx_type)
        starts = np.empty(nl.size + 1, dtype=idx_type)
        starts[0] = 0
        starts[1:] = nl + 1
        ends = np.empty_like(starts)
        ends[:-1] = nl
        ends[-1] = n
        if b[-1] == 10:
            starts, ends = starts[:-1], ends[:-1]
        del nl
        self.starts, self.ends = starts, ends
        self.n_lines = L = starts.size
        d = ord(delim) if ord(delim) < 128 else None
        self.kind = self._line_kinds(d)
        # quotes: which lines are clean, and the delimiters outside quoted fields on clean lines
        clean = np.ones(L, dtype=bool)
        opener = np.zeros(L, dtype=bool)
        inside = None
        q = np.flatnonzero(b == 34)
        if d is None:  # a delimiter outside ASCII: every line is split in Python
            clean[:] = False
        elif q.size:
            qline = np.searchsorted(starts, q, side="right") - 1
            qcount = np.bincount(qline, minlength=L)
            first_q = np.concatenate(([0], np.cumsum(qcount)[:-1]))
            is_open = (np.arange(q.size) - first_q[qline]) % 2 == 0
            prev = b[np.maximum(q - 1, 0)]
            ok_open = (q == starts[qline]) | (prev == d) | (prev == 34)
            nxt = b[np.minimum(q + 1, n - 1)]
            ok_close = (q + 1 == ends[qline]) | (nxt == d) | (nxt == 34)
            ok = np.where(is_open, ok_open, ok_close)
            clean = qcount % 2 == 0
            clean[qline[~ok]] = False
            opener = np.zeros(L, dtype=bool)  # a quote at the start of a field: a quoted field begins there
            opener[qline[(q == starts[qline]) | (prev == d)]] = True
            on_clean = clean[qline]
            delta = np.zeros(n + 1, dtype=np.int8)
            delta[q[on_clean & is_open]] += 1
            delta[q[on_clean & ~is_open] + 1] -= 1
            inside = np.cumsum(delta[:n], dtype=np.int8)
            clean |= ~opener  # quotes only inside unquoted fields: kept as written, one line one record
            del qline, qcount, first_q, is_open, prev, ok_open, nxt, ok_close, ok, on_clean, delta
        del q
        self.clean = clean
        self.opener = opener if d is not None else np.ones(L, dtype=bool)
        if d is not None:
            dmask = b == d
            if inside is not None:
                dmask &= inside == 0
            self.nfields = (_count_per_line(dmask, starts) + 1).astype(np.int32)
            del dmask
        else:
            self.nfields = np.zeros(L, dtype=np.int32)
        del inside
        self._find_header()

    def _line_kinds(self, d) -> np.ndarray:
        """Per line: 0 blank (white space and delimiters only), 1 holds a value, 2 doubtful (only quotes or
        characters outside ASCII besides blanks: split in Python to tell)."""
        b, starts, ends = self.b, self.starts, self.ends
        content = _CONTENT.copy()
        if d is not None:
            content[d] = False
        kind = content[b[np.minimum(starts, b.size - 1)]].astype(np.uint8)  # a value at the start of the line
        kind[starts == ends] = 0
        rest = np.flatnonzero((kind == 0) & (starts != ends))
        if rest.size > 10_000:  # many lines to look into: all lines at once
            has = np.logical_or.reduceat(content[b], starts)
            maybe = np.logical_or.reduceat(_MAYBE[b], starts)
            kind = np.where(has, 1, np.where(maybe, 2, 0)).astype(np.uint8)
            kind[starts == ends] = 0
            return kind
        blanks = _BLANK_BYTES + (bytes([d]) if d is not None else b"")
        data = self.data
        for i in rest.tolist():
            left = data[int(starts[i]):int(ends[i])].translate(None, blanks)
            if left:
                kind[i] = 1 if left.translate(None, _MAYBE_BYTES) else 2
        return kind

    def line(self, k: int) -> str:
        return self.data[int(self.starts[k]):int(self.ends[k])].decode("utf-8")

    def _find_header(self):
        """The first non-blank record is the header."""
        k = 0
        for cand in np.flatnonzero(self.kind != 0).tolist():
            if cand < k:
                continue
            k = cand
            text = self.line(k)
            thr = max(1, text.count(self.delimiter))
            fields, used, problem = _parse_record(self.line, self.n_lines, k, self.delimiter, thr)
            if problem is not None:
                raise TestPointError(f"line {k + 1} (the header): {problem.split(';')[0]}", self.label)
            if not _blank(fields):
                self.header, self.header_row, self.body_first = fields, k + 1, k + used
                return
            k += used
        raise TestPointError("the file is empty (only blank or comment lines, no header and no data)", self.label)

    def body(self, used: list[int]) -> _Body:
        """The data records, with the cells of the columns ``used``."""
        width = len(self.header)
        thr = max(1, width - 1)
        L, first, delim = self.n_lines, self.body_first, self.delimiter
        taken = np.zeros(L, dtype=bool)  # lines split in Python (or set aside)
        py_lines: list[int] = []
        py_fields: list[list[str]] = []
        problems: list[tuple[int, str, str]] = []
        # lines with odd quotes: record by record
        next_free = first
        for i in (np.flatnonzero(~self.clean[first:]) + first).tolist():
            if i < next_free:
                continue
            if not self.opener[i]:  # quotes only inside unquoted fields: kept as written (csv rules)
                fields, n_used, problem = self.line(i).split(delim), 1, None
            else:
                fields, n_used, problem = _parse_record(self.line, L, i, delim, thr)
            taken[i:i + n_used] = True
            next_free = i + n_used
            if problem is not None:
                problems.append((i + 1, _clip(self.line(i)), problem))
            elif not _blank(fields):
                py_lines.append(i)
                py_fields.append(fields)
        # clean lines: blank ones dropped; long or doubtful ones split in Python; the rest by the C parser
        rest = np.zeros(L, dtype=bool)
        rest[first:] = True
        rest &= ~taken
        blank = self.kind == 0
        doubtful = self.kind == 2
        wide = self.nfields > width
        for i in np.flatnonzero(rest & (doubtful | wide)).tolist():
            fields, problem = _single_line(self.line(i), delim)
            if problem is not None:
                problems.append((i + 1, _clip(self.line(i)), problem))
            elif not _blank(fields):
                py_lines.append(i)
                py_fields.append(fields)
        c_lines = np.flatnonzero(rest & ~blank & ~doubtful & ~wide)
        c_cells = self._c_parse(c_lines, width, used)
        if c_cells is None:  # the C parser disagreed with the measured lines: split them in Python too
            for i in c_lines.tolist():
                fields, problem = _single_line(self.line(i), delim)
                if problem is not None:  # pragma: no cover - clean lines split
                    problems.append((i + 1, _clip(self.line(i)), problem))
                else:
                    py_lines.append(i)
                    py_fields.append(fields)
            c_lines = c_lines[:0]
            c_cells = {j: np.zeros(0, dtype=object) for j in used}
        if not py_lines:
            return _Body(rows=c_lines.astype(np.int64) + 1, nfields=self.nfields[c_lines].astype(np.int64),
                         cells=c_cells, wide={}, problems=problems)
        py_body = _body_from_records(py_fields, [i + 1 for i in py_lines], width, used, delim)
        lines = np.concatenate([c_lines.astype(np.int64), np.asarray(py_lines, dtype=np.int64)])
        order = np.argsort(lines, kind="stable")
        nfields = np.concatenate([self.nfields[c_lines].astype(np.int64), py_body.nfields])[order]
        cells = {j: np.concatenate([c_cells[j], py_body.cells[j]])[order] for j in used}
        where = np.empty_like(order)
        where[order] = np.arange(order.size)
        wide_text = {int(where[c_lines.size + k]): text for k, text in py_body.wide.items()}
        return _Body(rows=lines[order] + 1, nfields=nfields, cells=cells, wide=wide_text, problems=problems)

    def _c_parse(self, c_lines: np.ndarray, width: int, used: list[int]):
        """Cells of the clean lines ``c_lines`` (columns ``used``) split by pandas' C parser; None if it disagrees.

        When every line of the file is clean and none is longer than the header, the whole file goes to the
        parser as it is (one row per line, no copy) and the rows of ``c_lines`` are taken from the result;
        otherwise the bytes of those lines are gathered first.
        """
        if c_lines.size == 0:
            return {j: np.zeros(0, dtype=object) for j in used}
        b, n = self.b, self.b.size
        whole = bool(self.clean.all()) and int(self.nfields.max()) <= width
        if whole:
            chunk, expect = self.data, self.n_lines
        else:
            seg_end = np.minimum(self.ends[c_lines].astype(np.int64) + 1, n)
            delta = np.zeros(n + 1, dtype=np.int8)
            delta[self.starts[c_lines]] += 1
            delta[seg_end] -= 1
            keep = np.cumsum(delta[:n], dtype=np.int8).view(bool)
            chunk, expect = b[keep].tobytes(), c_lines.size
            del delta, keep
        try:
            frame = pd.read_csv(io.BytesIO(chunk), sep=self.delimiter, header=None, names=list(range(width)),
                                usecols=used, index_col=False, dtype=object, na_filter=False,
                                keep_default_na=False, skip_blank_lines=False, quotechar='"', doublequote=True,
                                quoting=csv.QUOTE_MINIMAL, skipinitialspace=False, comment=None, engine="c",
                                encoding="utf-8")
        except (pd.errors.ParserError, ValueError):  # pragma: no cover - safety net
            return None
        del chunk
        if len(frame) != expect:  # pragma: no cover - safety net
            return None
        if whole:
            return {j: frame[j].to_numpy(dtype=object)[c_lines] for j in used}
        return {j: frame[j].to_numpy(dtype=object) for j in used}


# --------------------------------------------------------------------------------------------- Excel

def _cell_text(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return str(v).upper()
    if isinstance(v, float):
        return repr(v)
    return str(v)


def _excel_table(data: bytes, sheet, label: str, max_bytes: int, max_rows: int):
    """Header, header row and :class:`_Body` of a worksheet (rows counted as they are read)."""
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as zf:
            unpacked = sum(i.file_size for i in zf.infolist())
    except (zipfile.BadZipFile, OSError, ValueError, EOFError):
        raise TestPointError("not a readable .xlsx file (the zip container is damaged)", label) from None
    if unpacked > 10 * max_bytes:
        raise TestPointError(_too_large(unpacked, 10 * max_bytes) + " (unpacked .xlsx)", label)
    try:
        import openpyxl
        wb = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True)
    except Exception as exc:
        raise TestPointError(f"not a readable .xlsx file ({type(exc).__name__}: {_clip(exc)})", label) from None
    try:
        if isinstance(sheet, int):
            if not 0 <= sheet < len(wb.worksheets):
                raise TestPointError(f"the workbook has {len(wb.worksheets)} sheet(s); sheet {sheet} does not exist",
                                     label)
            ws = wb.worksheets[sheet]
        else:
            if sheet not in wb.sheetnames:
                raise TestPointError(f"no sheet {_clip(sheet)!r}; sheets are {_listing(wb.sheetnames)}", label)
            ws = wb[sheet]
        records, rows = [], []
        for r, values in enumerate(ws.iter_rows(min_row=1, values_only=True), start=1):
            cells = [_cell_text(v) for v in values]
            while cells and not cells[-1].strip():
                cells.pop()
            if not cells or not any(c.strip() for c in cells) or cells[0].lstrip().startswith("#"):
                continue
            if len(records) > max_rows:
                raise TestPointError(f"the sheet has more than {max_rows:,} data rows, the limit; split it, or "
                                     "raise max_rows", label)
            records.append(cells)
            rows.append(r)
    except TestPointError:
        raise
    except Exception as exc:
        raise TestPointError(f"cannot read the worksheet ({type(exc).__name__}: {_clip(exc)})", label) from None
    finally:
        wb.close()
    if not records:
        raise TestPointError("the file is empty (only blank or comment lines, no header and no data)", label)
    header = records[0]
    if len(header) > MAX_COLUMNS:
        raise TestPointError(f"the header (row {rows[0]}) has {len(header):,} columns, more than the limit of "
                             f"{MAX_COLUMNS:,}; is this a test-point file?", label)
    width = len(header)
    body = _body_from_records(records[1:], rows[1:], width, range(width), ", ")
    return header, rows[0], body


# --------------------------------------------------------------------------------------------- other tools

def unknown_regimes(points, chart_regimes) -> list[str]:
    """Observed regime labels that are not among ``chart_regimes`` (in order of first appearance).

    These need an entry in ``regime_map``. Empty labels are not listed.

    >>> df = pd.DataFrame({"observed_regime": ["bubbly", "annular", "bubbly", ""]})
    >>> unknown_regimes(df, ["dispersed bubbles", "annular"])
    ['bubbly']
    """
    df = points.points if isinstance(points, TestPointSet) else points
    known = set(chart_regimes)
    labels = pd.unique(df["observed_regime"].astype(str))
    return [str(x) for x in labels if x and x not in known]


def with_platform_conditions(points) -> pd.DataFrame:
    """Copy of the points with ``g_used_m_s2`` and ``duration_used_s``: the point's own values, else its platform's.

    NaN where neither is known (see :func:`lowgmap.physics.studies.platforms.points_conditions`).
    """
    df = (points.points if isinstance(points, TestPointSet) else points).copy()
    g, d = points_conditions(df["platform"].tolist(), df["g_m_s2"].to_numpy(float),
                             df["duration_s"].to_numpy(float))
    df["g_used_m_s2"] = g
    df["duration_used_s"] = d
    return df


def template_text() -> str:
    """Text of an empty test-point file: explanatory comments and the header line."""
    return (
        "# lowgmap test points. One row per observation; lines starting with # are comments.\n"
        "# Units go in the header, in [brackets]: flows e.g. mL/min, L/min, m^3/s; gas flow may be sccm or slpm\n"
        "# (then give the local pressure and temperature when reading). residual_acceleration in g0 or m/s^2,\n"
        "# low_g_duration in s. Only liquid_flow and gas_flow are required; delete unused columns.\n"
        f"# platform: a built-in class (see `lowgmap.physics.studies.platforms.platform_names()`), or the name of\n"
        "# your own facility with residual_acceleration and low_g_duration given on each of its rows.\n"
        f"{TEMPLATE_HEADER}\n")


def write_template(path, *, overwrite: bool = False) -> Path:
    """Write :func:`template_text` to ``path`` atomically (:func:`lowgmap.app.files.atomic.write_atomic`).

    An existing file is replaced only with ``overwrite``; otherwise :class:`FileExistsError`.
    """
    return write_atomic(path, template_text(), overwrite=overwrite)
