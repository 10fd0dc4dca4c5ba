"""Test points: observed flow regimes from low-gravity tests (CSV or Excel) read into SI units.

A test-point file is a table with one row per observation: the liquid and gas flow rates, the regime
seen, and optionally the platform, residual acceleration, low-g duration, a test id and notes. Units
are written in the column header, e.g. ``liquid_flow [mL/min]`` or ``gas_flow (sccm)``.
:func:`read_test_points` reads such a file, checks every row, converts the numbers to SI and returns a
:class:`TestPointSet`: the good rows as a pandas DataFrame plus a list of :class:`RowProblem` (row number,
column, value, reason) for the rows set aside or worth a look. Problems that concern the whole file
(empty, no header, a required column missing, an unknown unit in a header, too large) raise
:class:`TestPointError` listing all of them.

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
- a test id used on more than one row: every row carrying it is set aside, and each problem names the
  other rows, since lowgmap cannot tell which one is right.

*Warnings* (the row is kept):

- a platform name that is not in the built-in table (:mod:`lowgmap.physics.studies.platforms`); the point keeps the
  name as written and needs its own residual acceleration and duration for Bond numbers and times;
- an empty observed regime in a file that has a regime column.

Empty cells and the markers ``-``, ``n/a``, ``na``, ``none`` mean "no value". ``nan`` and ``inf``
are read as numbers and rejected as not finite.
"""
from __future__ import annotations

import csv
import io
import itertools
import math
import os
import re
import zipfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from lowgmap.physics.studies.platforms import find_platform, points_conditions
from lowgmap.physics.validate import positive

from lowgmap.app.files.atomic import write_atomic
from lowgmap.app.files.units import STANDARD_FLOW_UNITS, UnitError, check_unit, parse_flow, to_si, ureg

__all__ = [
    "FIELDS", "REQUIRED_FIELDS", "POINT_COLUMNS", "TEMPLATE_HEADER", "RowProblem", "TestPointError",
    "TestPointSet", "read_test_points", "unknown_regimes", "with_platform_conditions", "write_template",
    "template_text", "field_aliases",
]


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
_COMMENT_LINE = re.compile(r"(?m)^[ \t]*#[^\n]*")
_COMMA_DECIMAL = r"[-+]?\d*,\d+(?:[eE][-+]?\d+)?"
_NUM_WITH_TEXT = re.compile(r"^[-+]?(?:\d+[.,]?\d*|[.,]\d+)(?:[eE][-+]?\d+)?\s*\S")
_PATH_SUFFIXES = {".csv", ".tsv", ".txt", ".dat", ".xlsx", ".xlsm", ".xls"}
_EXCEL_SUFFIXES = {".xlsx", ".xlsm"}
_MAX_LISTED = 5


def _norm(name: str) -> str:
    return re.sub(r"[^a-z0-9]", "", str(name).lower())


_ALIASES: dict[str, str] = {}
for _name, _f in FIELDS.items():
    for _a in (_name, *_f.aliases):
        _ALIASES[_norm(_a)] = _name


def field_aliases() -> dict[str, list[str]]:
    """Accepted header names of each canonical field (matched ignoring case, spaces and punctuation)."""
    return {k: [k, *f.aliases] for k, f in FIELDS.items()}


# --------------------------------------------------------------------------------------------- results

@dataclass(frozen=True)
class RowProblem:
    """Something wrong (``severity="error"``: row set aside) or doubtful (``"warning"``: row kept) in one row.

    ``row`` is the file line number (see the module notes), ``column`` the column header as written in the
    file, ``value`` the cell text.
    """

    row: int
    column: str
    value: str
    message: str
    severity: str = "error"

    def __str__(self) -> str:
        tag = "" if self.severity == "error" else f" ({self.severity})"
        return f"row {self.row}, {self.column}: {self.message}{tag}"


class TestPointError(ValueError):
    """The file cannot be read as test points; ``problems`` lists every reason."""

    __test__ = False  # not a pytest test class

    def __init__(self, problems: list[str] | str, source: str = "test points"):
        self.problems = [problems] if isinstance(problems, str) else list(problems)
        self.source = source
        lines = "\n".join(f"  - {p}" for p in self.problems)
        super().__init__(f"{source}: cannot read test points:\n{lines}")


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
    problems : list of RowProblem   errors (rows set aside) and warnings (rows kept), sorted by row
    columns : dict            file column header -> canonical field it was read as
    source_name : str         file name, or "text" / "uploaded file"
    units : dict              canonical field -> unit it was read in
    ignored_columns : list    file columns not used
    delimiter : str or None   CSV delimiter found (None for Excel)
    decimal : str             decimal mark used for numbers ("." or ",")
    """

    __test__ = False  # not a pytest test class

    points: pd.DataFrame
    problems: list[RowProblem]
    columns: dict[str, str]
    source_name: str
    units: dict[str, str] = field(default_factory=dict)
    ignored_columns: list[str] = field(default_factory=list)
    delimiter: str | None = None
    decimal: str = "."

    @property
    def errors(self) -> list[RowProblem]:
        return [p for p in self.problems if p.severity == "error"]

    @property
    def warnings(self) -> list[RowProblem]:
        return [p for p in self.problems if p.severity != "error"]

    @property
    def rejected_rows(self) -> list[int]:
        """File line numbers of the rows set aside."""
        return sorted({p.row for p in self.problems if p.severity == "error"})

    def problems_table(self) -> pd.DataFrame:
        """The problems as a table (row, column, value, message, severity), for display."""
        return pd.DataFrame([p.__dict__ for p in self.problems],
                            columns=["row", "column", "value", "message", "severity"])

    def summary(self) -> str:
        """One line: points read, rows set aside, warnings."""
        rej = self.rejected_rows
        text = f"{len(self.points)} test point(s) read from {self.source_name}"
        if rej:
            shown = ", ".join(map(str, rej[:10])) + (", ..." if len(rej) > 10 else "")
            text += f"; {len(rej)} row(s) set aside (rows {shown})"
        if self.warnings:
            text += f"; {len(self.warnings)} warning(s)"
        return text


# --------------------------------------------------------------------------------------------- reading

def read_test_points(source, *, mapping: dict | None = None, regime_map: dict | None = None,
                     pressure=None, temperature=None, max_bytes: int = 20_000_000, name: str | None = None,
                     delimiter: str | None = None, decimal: str | None = None, sheet=0) -> TestPointSet:
    """Read test points from a CSV or Excel (.xlsx) file, text or uploaded bytes.

    Parameters
    ----------
    source : str, os.PathLike, bytes or file-like
        A path (``Path``, or a one-line ``str`` naming an existing file or ending in .csv/.tsv/.txt/.dat/
        .xlsx/.xlsm), the file's text (``str``; anything with a line break is text), or its bytes (e.g. a
        browser upload). Excel is recognised by the .xlsx/.xlsm suffix or by the zip signature of the bytes.
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
        Larger sources raise :class:`TestPointError` (for .xlsx, the unpacked size may be 10 times this).
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
        File-level problems, all listed: too large, empty, no header, no data rows, required column
        missing, a column named twice, a unit unknown or of the wrong kind, a standard gas unit without
        pressure and temperature, a mapping naming an absent column or an unknown field.

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
    if max_bytes is None or max_bytes <= 0:
        raise ValueError(f"max_bytes must be > 0, got {max_bytes!r}")
    if decimal not in (None, ".", ","):
        raise ValueError(f"decimal must be '.' or ',', got {decimal!r}")
    if delimiter is not None and (not isinstance(delimiter, str) or len(delimiter) != 1 or delimiter in '"\n\r'):
        raise ValueError(f"delimiter must be one character (not a quote or line break), got {delimiter!r}")
    p, t = _gas_conditions(pressure, temperature)
    mapping = _check_str_dict(mapping, "mapping", allow_none_values=True)
    regime_map = _check_str_dict(regime_map, "regime_map")

    source_name, kind, payload = _load(source, name, max_bytes)
    if kind == "excel":
        records, rows = _excel_records(payload, sheet, source_name, max_bytes)
        delim = None
    else:
        records, rows, delim = _csv_records(payload, delimiter, source_name)
    if not records:
        raise TestPointError("the file is empty (only blank or comment lines, no header and no data)", source_name)

    header = [h.strip() for h in records[0]]
    header_row = rows[0]
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
    if len(records) == 1:
        raise TestPointError(f"the header (line {header_row}) is followed by no data rows", source_name)

    data_rows = np.asarray(rows[1:], dtype=np.int64)
    body = records[1:]
    lengths = set(map(len, body))
    if len(lengths) > 1:  # pad short rows (missing trailing fields) with empty cells
        longest = max(lengths)
        body = [r if len(r) == longest else r + [""] * (longest - len(r)) for r in body]
    frame = pd.DataFrame(body)
    width = len(header)
    problems: list[RowProblem] = []
    bad = np.zeros(len(data_rows), dtype=bool)

    # rows longer than the header
    if frame.shape[1] > width:
        extra = frame.iloc[:, width:].fillna("").astype(str)
        has_extra = (extra.apply(lambda c: c.str.strip() != "")).any(axis=1).to_numpy()
        n_fields = np.fromiter(map(len, records[1:]), dtype=np.int64, count=len(data_rows))
        for i in np.flatnonzero(has_extra):
            hint = " (a decimal comma in a comma-separated file? quote the number or use ';' as delimiter)" \
                if delim == "," else ""
            problems.append(RowProblem(int(data_rows[i]), "(row)", str(delim or "").join(records[1 + i]),
                f"has {int(n_fields[i])} values but the header has {width} columns{hint}"))
        bad |= has_extra

    def raw(fld):
        j = cols[fld][0]
        if j >= frame.shape[1]:
            return pd.Series([""] * len(frame), dtype=object)
        return frame[j].fillna("").astype(str).str.strip()

    raws = {fld: raw(fld) for fld in cols}
    if decimal is None:
        decimal = "."
        if delim not in (None, ","):
            for fld in cols:
                if FIELDS[fld].kind in _NUMBER_KINDS and raws[fld].str.fullmatch(_COMMA_DECIMAL).any():
                    decimal = ","
                    break

    values: dict[str, np.ndarray] = {}
    for fld in cols:
        if FIELDS[fld].kind not in _NUMBER_KINDS:
            continue
        col = header[cols[fld][0]]
        s = raws[fld]
        low = s.str.lower()
        missing = low.isin(_MISSING).to_numpy()
        t_num = s.str.replace(",", ".", regex=False) if decimal == "," else s
        num = pd.to_numeric(t_num, errors="coerce").astype(float).to_numpy()
        is_nan_text = low.str.fullmatch(r"[-+]?nan").to_numpy()
        not_number = np.isnan(num) & ~missing & ~is_nan_text
        not_finite = ~missing & ~not_number & ~np.isfinite(num)
        rel, ok_fn = _ENDS[fld]
        with np.errstate(invalid="ignore"):
            out_of_range = np.isfinite(num) & ~ok_fn(num)
        checks = [(not_number, lambda v: _not_number_message(fld, v, decimal, delim)),
                  (not_finite, lambda v: f"{fld} must be a finite number, got {v}"),
                  (out_of_range, lambda v: f"{fld} must be {rel}, got {v}")]
        if FIELDS[fld].required:
            checks.insert(0, (missing, lambda v: f"missing value: {fld} is required"))
        for mask, msg in checks:
            idx = np.flatnonzero(mask)
            if len(idx):
                sv = s.to_numpy()
                problems.extend(RowProblem(int(data_rows[i]), col, sv[i], msg(sv[i])) for i in idx)
                bad |= mask
        values[fld] = np.where(missing | not_number | not_finite | out_of_range, np.nan, num * factors[fld])

    n = len(data_rows)
    empty_text = pd.Series([""] * n, dtype=object)

    # test ids: given ones must be unique; rows without one get "#<row>"
    if "test_id" in cols:
        ids = raws["test_id"]
        given = ids != ""
        dup = (ids.duplicated(keep=False) & given).to_numpy()
        if dup.any():
            col = header[cols["test_id"][0]]
            groups = pd.Series(data_rows[dup]).groupby(ids.to_numpy()[dup]).agg(list)
            for i in np.flatnonzero(dup):
                others = [r for r in groups[ids.iat[i]] if r != data_rows[i]]
                listed = ", ".join(map(str, others[:_MAX_LISTED])) + (
                    f" and {len(others) - _MAX_LISTED} more" if len(others) > _MAX_LISTED else "")
                problems.append(RowProblem(int(data_rows[i]), col, ids.iat[i],
                                           f"test id {ids.iat[i]!r} is also used on row(s) {listed}; ids must be "
                                           "unique (all rows with this id are set aside)"))
            bad |= dup
        test_id = ids.where(given, "#" + pd.Series(data_rows).astype(str))
    else:
        test_id = "#" + pd.Series(data_rows).astype(str)

    # platforms: canonical name when recognised; unknown names are a warning
    if "platform" in cols:
        plat_raw = _collapse_spaces(raws["platform"])
        names = {v: find_platform(v) for v in pd.unique(plat_raw) if v}
        canon = {v: (pl.name if pl else v) for v, pl in names.items()}
        platform = plat_raw.map(canon).fillna("")
        unknown = [v for v, pl in names.items() if pl is None]
        if unknown:
            col = header[cols["platform"][0]]
            mask = plat_raw.isin(unknown).to_numpy()
            pv = plat_raw.to_numpy()
            problems.extend(RowProblem(int(data_rows[i]), col, pv[i],
                                       f"platform {pv[i]!r} is not in the built-in table; the point is kept, give "
                                       "its residual_acceleration and low_g_duration", "warning")
                            for i in np.flatnonzero(mask))
    else:
        platform = empty_text

    # observed regime, through regime_map
    if "observed_regime" in cols:
        regime = _collapse_spaces(raws["observed_regime"])
        if regime_map:
            norm_map = {" ".join(k.split()).lower(): v for k, v in regime_map.items()}
            mapped = regime.str.lower().map(norm_map)
            regime = mapped.where(mapped.notna(), regime)
        empty = (regime == "").to_numpy()
        if empty.any():
            col = header[cols["observed_regime"][0]]
            problems.extend(RowProblem(int(data_rows[i]), col, "", "no observed regime given; the point is kept "
                                       "without one", "warning") for i in np.flatnonzero(empty))
    else:
        regime = empty_text

    notes = raws["notes"] if "notes" in cols else empty_text
    nan = np.full(n, np.nan)
    keep = ~bad
    points = pd.DataFrame({
        "row": data_rows[keep],
        "test_id": test_id.to_numpy()[keep],
        "ql_m3_s": values["liquid_flow"][keep],
        "qg_m3_s": values["gas_flow"][keep],
        "observed_regime": regime.to_numpy()[keep],
        "platform": platform.to_numpy()[keep],
        "g_m_s2": values.get("residual_acceleration", nan)[keep],
        "duration_s": values.get("low_g_duration", nan)[keep],
        "notes": notes.to_numpy()[keep],
    }, columns=POINT_COLUMNS)
    for c in ("test_id", "observed_regime", "platform", "notes"):
        points[c] = points[c].astype(object)
    order = {h: k for k, h in enumerate(header)}
    problems.sort(key=lambda pr: (pr.row, order.get(pr.column, -1)))
    return TestPointSet(points=points, problems=problems,
                        columns={header[j]: fld for fld, (j, _) in sorted(cols.items(), key=lambda kv: kv[1][0])},
                        source_name=source_name, units=units, ignored_columns=ignored, delimiter=delim,
                        decimal=decimal)


def _collapse_spaces(s: pd.Series) -> pd.Series:
    """Runs of white space -> one space (computed once per distinct value)."""
    return s.map({u: " ".join(u.split()) for u in pd.unique(s)})


def _not_number_message(fld: str, value: str, decimal: str, delim) -> str:
    msg = f"{fld} is not a number: {value!r}"
    if decimal == "." and re.fullmatch(_COMMA_DECIMAL, value):
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
        raise TypeError(f"{what} must be a dict of text to text, got {type(d).__name__}")
    for k, v in d.items():
        if not isinstance(k, str) or not (isinstance(v, str) or (allow_none_values and v is None)):
            raise TypeError(f"{what} must map text to text, got {k!r}: {v!r}")
    return d


def _gas_conditions(pressure, temperature):
    p = t = None
    if pressure is not None:
        p = to_si(pressure, "pressure", "pressure", default_unit="Pa") if isinstance(pressure, str) else pressure
        p = positive("pressure", p, "Pa")
    if temperature is not None:
        t = to_si(temperature, "temperature", "temperature", default_unit="K") \
            if isinstance(temperature, str) else temperature
        t = positive("temperature", t, "K")
    return p, t


def _split_header(text: str) -> tuple[str, str | None]:
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
    listing = ", ".join(repr(h) for h in header if h) or "(none)"
    for key, target in mapping.items():
        j = _find_column(key, header, parsed)
        if j is None:
            problems.append(f"mapping names column {key!r}, which is not in the file; the file's columns are {listing}")
            continue
        if j < 0:
            problems.append(f"mapping key {key!r} matches more than one column; use the full header text")
            continue
        by_mapping.add(j)
        if target is None or _norm(target) in ("ignore", ""):
            continue
        t_name, t_unit = _split_header(target)
        fld = _ALIASES.get(_norm(t_name))
        if fld is None:
            problems.append(f"mapping sends column {key!r} to {target!r}, which is not a field; fields are "
                            f"{', '.join(FIELDS)}")
            continue
        if fld in cols:
            problems.append(f"mapping sends two columns to {fld}: {header[cols[fld][0]]!r} and {header[j]!r}")
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
            problems.append(f"columns {header[cols[fld][0]]!r} and {header[j]!r} are both read as {fld}; rename "
                            f"one, or choose with mapping={{{header[j]!r}: None}}")
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
    try:
        float(text.replace(",", "."))
        return True
    except ValueError:
        return False


def _unit_factor(fld: str, column: str, unit: str | None, p, t) -> float:
    """SI value of one header unit of a number field; raise _BadUnit with a message naming the column."""
    spec = FIELDS[fld]
    example = f"'{fld} [{spec.example_unit}]'"
    if unit is None or not unit.strip():
        raise _BadUnit(f"column {column!r} ({fld}) has no unit; write it in the header, e.g. {example}, or "
                       f"give it with mapping={{{column!r}: {fld + ' [' + spec.example_unit + ']'!r}}}")
    u = unit.strip().replace("\u00b2", "^2").replace("\u00b3", "^3")
    if fld == "residual_acceleration" and u in ("g", "G", "g_0"):
        u = "g0"  # 'g' in an acceleration column means standard gravity, not gram
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
            raise _BadUnit(str(exc)) from None
    kind = spec.kind
    word = _KIND_WORDS[kind]
    try:
        ureg.parse_units(u)
    except Exception:
        raise _BadUnit(f"column {column!r}: unknown unit {u!r} (expected a {word} unit such as "
                       f"{spec.example_unit!r})") from None
    try:
        check_unit(u, kind, f"column {column!r}")
        factor = to_si(f"1 {u}", kind, f"column {column!r}")
    except Exception:
        raise _BadUnit(f"column {column!r}: {u!r} is not a {word} unit (expected e.g. {spec.example_unit!r})") \
            from None
    if not (math.isfinite(factor) and factor > 0):
        raise _BadUnit(f"column {column!r}: unit {u!r} cannot be used (factor {factor!r})")
    return factor


def _looks_like_path(s: str) -> bool:
    if "\n" in s or "\r" in s or len(s) > 4096:
        return False
    try:
        return Path(s).suffix.lower() in _PATH_SUFFIXES or os.path.isfile(s)
    except (ValueError, OSError):
        return False


def _load(source, name, max_bytes):
    """Return (source name, "text" | "excel", text or bytes)."""
    if hasattr(source, "read") and not isinstance(source, (str, bytes, os.PathLike)):
        source = source.read()
        name = name or "uploaded file"
    if isinstance(source, (bytes, bytearray, memoryview)):
        return _from_bytes(bytes(source), name or "uploaded file", max_bytes)
    if isinstance(source, os.PathLike) or (isinstance(source, str) and _looks_like_path(source)):
        path = Path(source)
        label = name or path.name
        if not path.is_file():
            raise TestPointError(f"file not found: {str(path)!r}" if not path.exists()
                                 else f"{str(path)!r} is not a file", label)
        size = path.stat().st_size
        if size > max_bytes:
            raise TestPointError(_too_large(size, max_bytes), label)
        with open(path, "rb") as fh:  # read only: the file is never modified
            data = fh.read(max_bytes + 1)
        return _from_bytes(data, label, max_bytes, suffix=path.suffix.lower())
    if isinstance(source, str):
        label = name or "text"
        size = len(source) if len(source) * 4 <= max_bytes else len(source.encode("utf-8", "replace"))
        if size > max_bytes:
            raise TestPointError(_too_large(size, max_bytes), label)
        text = source[1:] if source.startswith("\ufeff") else source
        _check_text(text, label)
        return label, "text", text
    raise TypeError(f"source must be a path, text, bytes or a file object, got {type(source).__name__}")


def _too_large(size, max_bytes):
    return (f"the file is {size:,} bytes, more than the limit of {max_bytes:,} bytes; split it, or raise "
            "max_bytes")


def _from_bytes(data: bytes, label: str, max_bytes: int, suffix: str | None = None):
    if len(data) > max_bytes:
        raise TestPointError(_too_large(len(data), max_bytes), label)
    if suffix is None:
        suffix = Path(label).suffix.lower()
    if data[:4] == b"PK\x03\x04" or suffix in _EXCEL_SUFFIXES:
        return label, "excel", data
    if data[:8] == b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" or suffix == ".xls":
        raise TestPointError("old Excel .xls format is not read; save the sheet as .xlsx or CSV", label)
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        text = data.decode("utf-16", errors="replace")
    else:
        for enc in ("utf-8-sig", "cp1252", "latin-1"):
            try:
                text = data.decode(enc)
                break
            except UnicodeDecodeError:
                continue
    text = text[1:] if text.startswith("\ufeff") else text
    _check_text(text, label)
    return label, "text", text


def _check_text(text: str, label: str):
    if "\x00" in text:
        raise TestPointError("the file holds NUL characters: it is not a text (CSV) file; save it as CSV "
                             "(UTF-8) or .xlsx", label)


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


def _csv_records(text: str, delimiter, label):
    text = text.replace("\r\n", "\n").replace("\r", "\n")
    text = _COMMENT_LINE.sub("", text)  # comment lines become blank lines, so line numbers stay right
    first = list(itertools.islice((ln for ln in text.split("\n") if ln.strip()), 21))
    if not first:
        return [], [], delimiter or ","
    delim = delimiter or _sniff(first)
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delim, quotechar='"', doublequote=True,
                        strict=False)
    records, starts = [], []
    prev = 0
    try:
        for rec in reader:
            start = prev + 1
            prev = reader.line_num
            if "".join(rec).strip():
                records.append(rec)
                starts.append(start)
    except csv.Error as exc:
        raise TestPointError(f"line {prev + 1}: cannot split the line into fields ({exc})", label) from None
    return records, starts, delim


def _cell_text(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return str(v).upper()
    if isinstance(v, float):
        return repr(v)
    return str(v)


def _excel_records(data: bytes, sheet, label: str, max_bytes: int):
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as zf:
            unpacked = sum(i.file_size for i in zf.infolist())
    except (zipfile.BadZipFile, OSError, ValueError):
        raise TestPointError("not a readable .xlsx file (the zip container is damaged)", label) from None
    if unpacked > 10 * max_bytes:
        raise TestPointError(_too_large(unpacked, 10 * max_bytes) + " (unpacked .xlsx)", label)
    try:
        import openpyxl
        wb = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True)
    except Exception as exc:
        raise TestPointError(f"not a readable .xlsx file ({type(exc).__name__}: {exc})", label) from None
    try:
        if isinstance(sheet, int):
            if not 0 <= sheet < len(wb.worksheets):
                raise TestPointError(f"the workbook has {len(wb.worksheets)} sheet(s); sheet {sheet} does not exist",
                                     label)
            ws = wb.worksheets[sheet]
        else:
            if sheet not in wb.sheetnames:
                raise TestPointError(f"no sheet {sheet!r}; sheets are {', '.join(map(repr, wb.sheetnames))}", label)
            ws = wb[sheet]
        records, rows = [], []
        for r, values in enumerate(ws.iter_rows(min_row=1, values_only=True), start=1):
            cells = [_cell_text(v) for v in values]
            while cells and not cells[-1].strip():
                cells.pop()
            if not cells or not any(c.strip() for c in cells) or cells[0].lstrip().startswith("#"):
                continue
            records.append(cells)
            rows.append(r)
    except TestPointError:
        raise
    except Exception as exc:
        raise TestPointError(f"cannot read the worksheet ({type(exc).__name__}: {exc})", label) from None
    finally:
        wb.close()
    return records, rows


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
        f"# platform names: see `lowgmap.physics.studies.platforms.platform_names()`.\n"
        f"{TEMPLATE_HEADER}\n")


def write_template(path, *, overwrite: bool = False) -> Path:
    """Write :func:`template_text` to ``path`` atomically (:func:`lowgmap.app.files.atomic.write_atomic`).

    An existing file is replaced only with ``overwrite``; otherwise :class:`FileExistsError`.
    """
    return write_atomic(path, template_text(), overwrite=overwrite)
