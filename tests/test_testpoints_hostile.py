"""Hostile and damaged test-point files: lowgmap.app.files.testpoints must answer with a short message or a
row problem, never a traceback, a hang, a silent merge of rows or an unbounded read.

Each test names the defect it guards against. CSV rules are those of RFC 4180 (Shafranovich, 2005,
"Common Format and MIME Type for Comma-Separated Values (CSV) Files", section 2: a field in double quotes
may hold delimiters and line breaks, and a quote inside it is written twice). The behaviour of a named pipe
opened for reading without blocking is that of POSIX.1-2017, open(). All file contents here are INVENTED
inputs; the expected values are the numbers written into them, converted with the SI Brochure
(1 L = 1e-3 m^3, 1 min = 60 s).
"""
from __future__ import annotations

import io
import json
import os
import pickle
import subprocess
import sys
import textwrap

import numpy as np
import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lowgmap.app.files import testpoints as tp
from lowgmap.app.files.testpoints import (MAX_BYTES, MAX_PROBLEMS_SHOWN, MAX_ROWS, QUOTE_CHARS, TestPointError,
                                          TestPointSet, read_test_points)
from lowgmap.physics.validate import InputError, InputTypeError

ML_MIN = 1e-6 / 60.0   # 1 mL/min in m^3/s (SI Brochure: 1 L = 1e-3 m^3, 1 min = 60 s)
HEAD = "test_id,liquid_flow [mL/min],gas_flow [mL/min],notes"
SHORT = 2_000          # longest whole message this project accepts for a hostile file [characters]


def problems_by_row(tps: TestPointSet) -> dict[int, list]:
    out: dict[int, list] = {}
    for p in tps.problems:
        out.setdefault(p.row, []).append(p)
    return out


# ------------------------------------------------------------------------------------ unclosed quotes

@pytest.mark.parametrize("body,bad_row,kept", [
    # the quote runs into a later quoted field: strict splitting stops there
    ('A,1,2,"no closing quote\nB,3,4,fine\nC,5,6,"ok"\n', 2, {3: "B", 4: "C"}),
    # the quote is "closed" at the end of the next row, which it would take in whole
    ('A,1,2,"no closing quote\nB,3,4,fine"\nC,5,6,x\n', 2, {3: "B", 4: "C"}),
    # the quote is never closed: the file ends inside it
    ('A,1,2,x\nB,3,4,"never closed\n', 3, {2: "A"}),
])
def test_unclosed_quote_is_a_row_problem_not_a_merge(body, bad_row, kept):
    # bug: an unterminated CSV quote swallowed the next row(s) into one field, without a row problem
    tps = read_test_points(f"{HEAD}\n{body}")
    assert dict(zip(tps.points["row"], tps.points["test_id"])) == kept
    problems = problems_by_row(tps)[bad_row]
    assert len(problems) == 1 and problems[0].severity == "error" and problems[0].column == "(row)"
    assert "unclosed quote" in problems[0].message
    assert bad_row in tps.rejected_rows


def test_quoted_fields_that_span_lines_are_still_one_row():
    # guards the fix above against refusing real multi-line fields (RFC 4180, section 2, rule 6)
    text = (f"{HEAD}\n"
            'A,1,2,"first line\nsecond line, with a comma"\n'   # rows 2-3
            'B,3,4,"say ""hi"""\n'                                # row 4
            'C,5,6,"a\n\nblank line inside"\n')                   # rows 5-7
    tps = read_test_points(text)
    assert tps.problems == []
    assert tps.points["row"].tolist() == [2, 4, 5]
    assert tps.points["notes"].tolist() == ["first line\nsecond line, with a comma", 'say "hi"',
                                            "a\n\nblank line inside"]


def test_quote_inside_an_unquoted_field_is_kept_as_written():
    # bug guard: a stray quote mid-field (inches, a typo) must neither merge rows nor drop the row
    tps = read_test_points(f'{HEAD}\nA,1,2,12" pipe\nB,3,4,"x"y\nC,5,6,z\n')
    assert tps.problems == []
    assert tps.points["notes"].tolist() == ['12" pipe', "xy", "z"]


# ------------------------------------------------------------------------------------ ragged rows

def test_ragged_rows_are_reported():
    # bug: rows with too many or too few values were padded or split silently
    text = (f"{HEAD}\n"
            "A,1,2\n"          # row 2: notes missing -> warning, kept
            "B,3,4,x,y\n"      # row 3: one value too many -> error
            "C,5\n"            # row 4: gas flow missing -> error naming the count
            "D,6,7,,\n"        # row 5: a trailing empty value is harmless
            "E,8,9,z\n")       # row 6: complete
    tps = read_test_points(text)
    assert tps.points["test_id"].tolist() == ["A", "D", "E"]
    by_row = problems_by_row(tps)
    assert set(by_row) == {2, 3, 4}
    (short,) = by_row[2]
    assert short.severity == "warning" and "has 3 value(s) but the header has 4 columns" in short.message
    (wide,) = by_row[3]
    assert wide.severity == "error" and "has 5 values but the header has 4 columns" in wide.message
    (cut,) = by_row[4]
    assert cut.column == "gas_flow [mL/min]" and "missing value: gas_flow is required" in cut.message
    assert "the row has 2 value(s), the header has 4 columns" in cut.message


# ------------------------------------------------------------------------------------ bounded messages

def _write(tmp_path, data: bytes):
    path = tmp_path / "hostile.csv"
    path.write_bytes(data)
    return path


@pytest.mark.parametrize("shape", ["one cell", "commas", "quoted cell", "header and one huge cell"])
def test_one_line_15_mb_file_gives_a_short_message(tmp_path, shape):
    # bug: a one-line 15 MB file gave a 37 MB error message (every cell quoted in full)
    big = 15_000_000
    data = {"one cell": b"q" * big,
            "commas": b"q," * (big // 2),
            "quoted cell": b'"' + b"q" * big,
            "header and one huge cell": b"liquid_flow [mL/min],gas_flow [mL/min]\n" + b"7" * big}[shape]
    path = _write(tmp_path, data)
    try:
        tps = read_test_points(path)
    except TestPointError as exc:
        text = str(exc)
    else:
        text = "\n".join(str(p) for p in tps.problems) + tps.summary()
        assert all(len(p.value) < QUOTE_CHARS + 50 for p in tps.problems)
    assert 0 < len(text) < SHORT, text[:300]


def test_long_cell_is_quoted_cut_with_its_length():
    # bug: row messages quoted whole cells, however long
    cell = "x" * 50_000
    tps = read_test_points(f"liquid_flow [mL/min],gas_flow [mL/min]\n{cell},1\n2,3\n")
    (p,) = tps.problems
    assert len(p.message) < 400 and "… (50,000 characters)" in p.message
    assert p.value == "x" * QUOTE_CHARS + "… (50,000 characters)"


def test_file_error_lists_at_most_a_few_problems_but_keeps_all():
    # bug: the whole-file error wrote every problem into its text
    problems = [f"problem number {i}" for i in range(12_345)]
    err = TestPointError(problems, "x.csv")
    assert err.problems == problems
    text = str(err)
    assert text.count("\n  - ") == MAX_PROBLEMS_SHOWN and text.endswith(f"(and {12_345 - MAX_PROBLEMS_SHOWN:,} more)")
    assert len(text) < SHORT


def test_error_type_is_the_projects_input_error_and_survives_pickling():
    # bug: TestPointError was a bare ValueError (not the user-error type), and pickling (worker processes) lost
    # its problem list
    err = TestPointError(["a", "b"], "f.csv")
    assert isinstance(err, InputError) and isinstance(err, ValueError)
    back = pickle.loads(pickle.dumps(err))
    assert type(back) is TestPointError and back.problems == ["a", "b"] and back.source == "f.csv"
    assert str(back) == str(err)


def test_keyword_errors_are_input_errors():
    # bug: bad keyword values raised bare TypeError/ValueError, shown as internal errors
    with pytest.raises(InputError, match="max_rows"):
        read_test_points("x", max_rows=0)
    with pytest.raises(InputTypeError, match="max_bytes"):
        read_test_points("x", max_bytes="20 MB")
    with pytest.raises(InputTypeError, match="source must be"):
        read_test_points(12.5)
    with pytest.raises(InputTypeError, match="mapping"):
        read_test_points("x", mapping=["liquid_flow"])


def test_problems_of_many_bad_rows_are_kept_as_data():
    # bug: every bad row made several problem objects with their own message texts (a file of a million bad
    # rows needed 2 GB); the problems are now kept column by column and made when looked at
    n = 20_000
    text = "test_id,liquid_flow [mL/min],gas_flow [mL/min],regime,platform\n" + "".join(
        f"A,x{i},-{i}\n" for i in range(n))
    tps = read_test_points(text)
    assert len(tps.points) == 0 and len(tps.problems) == 5 * n
    first = [str(p) for p in tps.problems[:5]]
    assert first == [
        "row 2, (row): has 3 value(s) but the header has 5 columns; the missing values are read as empty (warning)",
        f"row 2, test_id: test id 'A' is also used on row(s) 3, 4, 5, 6, 7 and {n - 6:,} more; ids must be unique "
        "(all rows with this id are set aside)",
        "row 2, liquid_flow [mL/min]: liquid_flow is not a number: 'x0'",
        "row 2, gas_flow [mL/min]: gas_flow must be > 0, got -0",
        "row 2, regime: no observed regime given; the point is kept without one (warning)"]
    assert str(tps.problems[-3]) == f"row {n + 1}, liquid_flow [mL/min]: liquid_flow is not a number: 'x{n - 1}'"
    assert tps.rejected_rows == list(range(2, n + 2))
    assert len(tps.errors) == 3 * n and len(tps.warnings) == 2 * n
    assert tps.summary().endswith(f"{n} row(s) set aside (rows 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, ...); {2 * n} warning(s)")
    back = pickle.loads(pickle.dumps(tps.problems))
    assert back == tps.problems and back[-1] == tps.problems[-1]
    table = tps.problems_table()
    assert table.shape == (5 * n, 5) and table["message"].iloc[2] == "liquid_flow is not a number: 'x0'"


# ------------------------------------------------------------------------------------ regular files only

_REFUSE_SCRIPT = textwrap.dedent("""
    import json, os, stat, sys
    from lowgmap.app.files import testpoints as tp
    paths = json.loads(sys.argv[1])
    out = {}
    for key, path in paths.items():
        try:
            tp.read_test_points(path)
            out[key] = "read"
        except tp.TestPointError as exc:
            out[key] = str(exc)
    # a named pipe put where a regular file was measured: the check on the open handle refuses it
    real_stat = os.stat
    regular = real_stat(sys.argv[2])
    tp.os.stat = lambda p, *a, **k: regular
    try:
        tp.read_test_points(paths["fifo"])
        out["swapped"] = "read"
    except tp.TestPointError as exc:
        out["swapped"] = str(exc)
    finally:
        tp.os.stat = real_stat
    print(json.dumps(out))
""")


def test_fifo_device_and_directory_are_refused_without_reading(tmp_path):
    # bugs: reading /dev/zero ended in MemoryError; reading a named pipe never returned. The read runs in a
    # child process with a timeout, so a regression fails here instead of hanging the test run.
    fifo = tmp_path / "points.csv"
    os.mkfifo(fifo)
    regular = tmp_path / "regular.csv"
    regular.write_text("liquid_flow [mL/min],gas_flow [mL/min]\n1,2\n")
    paths = {"fifo": str(fifo), "zero": "/dev/zero", "folder": str(tmp_path)}
    run = subprocess.run([sys.executable, "-c", _REFUSE_SCRIPT, json.dumps(paths), str(regular)],
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr[-2000:]
    out = json.loads(run.stdout)
    assert "is a named pipe (FIFO), not a regular file" in out["fifo"]
    assert "'/dev/zero' is a character device, not a regular file" in out["zero"]
    assert "is a directory, not a regular file" in out["folder"]
    assert "is a named pipe (FIFO), not a regular file" in out["swapped"]
    assert all(len(v) < SHORT for v in out.values())


def test_size_is_checked_before_the_file_is_read(tmp_path, monkeypatch):
    # bug: the size limit was applied after reading; an oversized file is refused from its size alone
    path = tmp_path / "big.csv"
    with open(path, "wb") as fh:
        fh.truncate(MAX_BYTES + 1)          # sparse: no data written

    def no_read(*args):
        raise AssertionError("the file was read")

    monkeypatch.setattr(tp.os, "read", no_read)
    with pytest.raises(TestPointError, match=f"more than the limit of {MAX_BYTES:,} bytes"):
        read_test_points(path)


def test_stream_is_read_only_up_to_the_limit():
    # bug: a file object was read whole (an endless stream never returned)
    asked = []

    class Endless(io.RawIOBase):
        def read(self, size=-1):
            asked.append(size)
            assert size is not None and 0 <= size <= 1000 + 1
            return (b"1,2\n" * (size // 4 + 1))[:size]

    with pytest.raises(TestPointError, match="larger than the limit of 1,000 bytes"):
        read_test_points(Endless(), max_bytes=1000)
    assert asked == [1001]


# ------------------------------------------------------------------------------------ row limit

def _rows(n: int) -> str:
    return "liquid_flow [mL/min],gas_flow [mL/min]\n" + "".join(f"{i + 1},2\n\n" for i in range(n))


def test_row_limit_counts_rows_not_blank_lines():
    # bug: no row limit (a 300,000-row file took 374 s and 3.35 GB)
    assert MAX_ROWS == 1_000_000
    assert len(read_test_points(_rows(100), max_rows=100).points) == 100   # 201 lines, 100 rows
    for src in (_rows(101), _rows(101).encode()):                          # text and an upload
        with pytest.raises(TestPointError, match="101 data lines after the header, more than the limit of 100"):
            read_test_points(src, max_rows=100)


def test_row_limit_is_checked_before_any_line_is_split(monkeypatch):
    # bug: an oversized file was parsed whole before being refused
    def boom(*args, **kwargs):
        raise AssertionError("a line was split")

    monkeypatch.setattr(tp, "_parse_record", boom)
    monkeypatch.setattr(tp.pd, "read_csv", boom)
    with pytest.raises(TestPointError, match="more than the limit of 50 rows"):
        read_test_points(_rows(51), max_rows=50)


def test_row_limit_for_excel_sheets(tmp_path):
    # bug: the same limit must hold for .xlsx files
    wb = openpyxl.Workbook()
    wb.active.append(["liquid_flow [mL/min]", "gas_flow [mL/min]"])
    for i in range(12):
        wb.active.append([i + 1.0, 2.0])
    path = tmp_path / "points.xlsx"
    wb.save(path)
    assert len(read_test_points(path, max_rows=12).points) == 12
    with pytest.raises(TestPointError, match="more than 10 data rows"):
        read_test_points(path, max_rows=10)


# ------------------------------------------------------------------------------------ a large mixed file

def test_hundred_thousand_rows_with_quotes_comments_and_bad_rows():
    # bug guard for the fast path: clean lines go through pandas' C parser, odd ones through the csv module;
    # line numbers and values must come out the same as in a file read line by line
    n = 100_000
    rng = np.random.default_rng(3)
    ql = np.round(rng.uniform(0.1, 500.0, n), 4)
    qg = np.round(rng.uniform(0.1, 500.0, n), 4)
    lines = ["# INVENTED rig log", HEAD]
    row_of = {}
    qls, qgs = ql.tolist(), qg.tolist()
    for i in range(n):
        if i % 10_000 == 5:
            lines.append("")                                     # a blank line
        note = f'"run {i}, camera B"' if i % 3 == 0 else f"run {i}"
        if i == 50_000:
            note = '"two\nlines"'
        row_of[i] = len(lines) + 1
        lines.append(f"T{i},{qls[i]!r},{qgs[i]!r},{note}")
    lines.append('BAD,1,2,"never closed')
    tps = read_test_points("\n".join(lines) + "\n")
    assert len(tps.points) == n
    last_line = len(lines) + 1                                   # one element of `lines` holds two lines
    assert [(p.row, "unclosed quote" in p.message) for p in tps.problems] == [(last_line, True)]
    pts = tps.points.set_index("test_id")
    for i in (0, 1, 5, 9_999, 10_005, 50_000, 50_001, n - 1):
        row = pts.loc[f"T{i}"]
        assert row["row"] == row_of[i] + (1 if i > 50_000 else 0)
        assert row["ql_m3_s"] == pytest.approx(ql[i] * ML_MIN, rel=1e-12)
        assert row["qg_m3_s"] == pytest.approx(qg[i] * ML_MIN, rel=1e-12)
    assert pts.loc["T3", "notes"] == "run 3, camera B" and pts.loc["T50000", "notes"] == "two\nlines"
    np.testing.assert_allclose(tps.points["ql_m3_s"].to_numpy(), ql * ML_MIN, rtol=1e-12)


# ------------------------------------------------------------------------------------ fuzzing

FUZZ = settings(max_examples=120, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


def _only_input_errors(src, **kw):
    """Read ``src``; anything but a result or one of the project's input errors fails the test."""
    try:
        out = read_test_points(src, **kw)
    except InputError as exc:          # TestPointError is one
        assert len(str(exc)) < 20_000
        return None
    assert isinstance(out, TestPointSet)
    assert np.isfinite(out.points[["ql_m3_s", "qg_m3_s"]].to_numpy()).all()
    assert (out.points[["ql_m3_s", "qg_m3_s"]].to_numpy() > 0).all()
    return out


@FUZZ
@given(st.binary(max_size=400))
def test_fuzz_random_bytes(data):
    # bug class: an exception other than the input-error types (a traceback for the user) on arbitrary bytes
    _only_input_errors(data)
    _only_input_errors(b"liquid_flow [mL/min],gas_flow [mL/min]\n" + data)


_CHARS = st.sampled_from(list('0123456789.,;\t"\n\r #-+eEna/') + ["\xa0", "\u00e9", "\x0c", "\x1c", '""'])


@FUZZ
@given(st.lists(_CHARS, max_size=300).map("".join), st.sampled_from([",", ";", "\t"]))
def test_fuzz_csv_like_text(body, delim):
    # bug class: quotes, line breaks and delimiters in odd places raising something else than an input error
    header = delim.join(["test_id", "liquid_flow [mL/min]", "gas_flow [mL/min]", "regime", "notes"])
    _only_input_errors(header + "\n" + body)
    _only_input_errors(body)


_CELL = st.lists(_CHARS, max_size=8).map("".join)


@FUZZ
@given(st.lists(st.lists(_CELL, min_size=0, max_size=7), min_size=1, max_size=12), st.sampled_from([",", ";", "\t"]))
def test_fuzz_fast_path_agrees_with_the_csv_module(rows, delim):
    # bug class: pandas' C parser and the csv module splitting the same clean lines differently. With the C
    # parser switched off every line is split by the csv module; both reads must give the same table.
    text = "\n".join(delim.join(r) for r in [["test_id", "liquid_flow [mL/min]", "gas_flow [mL/min]", "notes"],
                                             *rows])
    fast = _only_input_errors(text)
    real = tp._CsvTable._c_parse
    tp._CsvTable._c_parse = lambda self, *args: None
    try:
        slow = _only_input_errors(text)
    finally:
        tp._CsvTable._c_parse = real
    assert (fast is None) == (slow is None)
    if fast is not None:
        assert fast.points.equals(slow.points) and fast.problems == slow.problems
