"""Tests for lowgmap.app.files.testpoints: reading test-point files (CSV, Excel, text, bytes), row checks, file errors.

Unit factors are checked against definitions (SI Brochure: 1 L = 1e-3 m^3, 1 min = 60 s; CGPM 1901:
g0 = 9.80665 m/s^2; SEMI E12 standard conditions for sccm). The sample files are INVENTED data and serve
only as inputs, never as check values.
"""
from __future__ import annotations

import hashlib
import io
import math
import os
import re
from pathlib import Path

import numpy as np
import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lowgmap.app.files.testpoints import (FIELDS, POINT_COLUMNS, TEMPLATE_HEADER, RowProblem, TestPointError, TestPointSet,
                            field_aliases, read_test_points, template_text, unknown_regimes,
                            with_platform_conditions, write_template)
from lowgmap.app.files.units import parse_flow

SAMPLES = Path(__file__).resolve().parent.parent / "sample_cases"
ML_MIN = 1e-6 / 60.0        # 1 mL/min in m^3/s (SI Brochure: 1 L = 1e-3 m^3, 1 min = 60 s)
G0 = 9.80665                # standard gravity [m/s^2] (CGPM 1901)
HEAD = "liquid_flow [mL/min],gas_flow [mL/min]"


def read(text, **kw) -> TestPointSet:
    return read_test_points(text, **kw)


def errors_of(text, **kw) -> list[str]:
    with pytest.raises(TestPointError) as info:
        read_test_points(text, **kw)
    return info.value.problems


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


# ------------------------------------------------------------------------------------ sample files

def test_sample_drop_tower_points_read_cleanly():
    path = SAMPLES / "drop_tower_points.csv"
    assert path.read_text(encoding="utf-8").startswith("# INVENTED")
    tps = read_test_points(path)
    assert len(tps.points) == 25 and tps.problems == []
    assert list(tps.points.columns) == POINT_COLUMNS
    assert set(tps.columns.values()) == set(FIELDS)
    assert tps.source_name == "drop_tower_points.csv"
    first = tps.points.iloc[0]
    # two comment lines, header on line 3, first data row on line 4
    assert first["row"] == 4 and first["test_id"] == "DT-01"
    assert first["ql_m3_s"] == pytest.approx(120 * ML_MIN, rel=1e-12)
    assert first["qg_m3_s"] == pytest.approx(2.0 * ML_MIN, rel=1e-12)
    assert first["g_m_s2"] == pytest.approx(1e-3 * G0, rel=1e-12)
    assert first["duration_s"] == 2.2
    assert set(tps.points["observed_regime"]) == {"dispersed bubbles", "elongated bubbles / slugs",
                                                   "annular (gas core)"}  # chart names
    assert tps.points["platform"].nunique() >= 5
    flows = np.r_[tps.points["ql_m3_s"], tps.points["qg_m3_s"]] / ML_MIN
    assert flows.min() >= 0.1 - 1e-9 and flows.max() <= 500 + 1e-9
    # rows without their own g and duration get NaN here, the platform's figures via with_platform_conditions
    dt05 = tps.points.set_index("test_id").loc["DT-05"]
    assert math.isnan(dt05["g_m_s2"]) and math.isnan(dt05["duration_s"])
    full = with_platform_conditions(tps).set_index("test_id")
    # short drop tower: 2.0 s (short end of 2-2.5 s), upper end 1e-3 g (typical figures, from memory)
    assert full.loc["DT-05", "g_used_m_s2"] == pytest.approx(1e-3 * G0)
    assert full.loc["DT-05", "duration_used_s"] == 2.0
    assert full.loc["DT-03", "g_used_m_s2"] == pytest.approx(5e-4 * G0)  # the point's own value wins


def test_sample_malformed_points_report_each_bad_row():
    tps = read_test_points(SAMPLES / "malformed_points.csv")
    assert tps.points["test_id"].tolist() == ["M-01", "M-08", "M-11"]
    by_row = {}
    for p in tps.problems:
        by_row.setdefault(p.row, []).append(p)
    assert "not a number" in by_row[5][0].message and by_row[5][0].value == "about 50"
    assert "must be > 0, got -40" in by_row[6][0].message
    assert by_row[7][0].column == "gas_flow [mL/min]" and "> 0" in by_row[7][0].message
    assert "also used on row(s) 9" in by_row[8][0].message
    assert "also used on row(s) 8" in by_row[9][0].message
    assert "missing value" in by_row[10][0].message
    assert by_row[11][0].severity == "warning" and "not in the built-in table" in by_row[11][0].message
    assert "must be >= 0" in by_row[12][0].message
    assert "unit in the column header" in by_row[13][0].message
    assert tps.rejected_rows == [5, 6, 7, 8, 9, 10, 12, 13]
    assert "8 row(s) set aside" in tps.summary()
    table = tps.problems_table()
    assert list(table.columns) == ["row", "column", "value", "message", "severity"] and len(table) == 9


def test_files_are_not_modified(tmp_path):
    paths = [SAMPLES / "drop_tower_points.csv", SAMPLES / "malformed_points.csv"]
    own = tmp_path / "points.csv"
    own.write_bytes(b"\xef\xbb\xbfliquid_flow [mL/min];gas_flow [mL/min]\r\n1,5;2\r\n")
    xlsx = tmp_path / "points.xlsx"
    wb = openpyxl.Workbook()
    wb.active.append(["liquid_flow [mL/min]", "gas_flow [mL/min]"])
    wb.active.append([1.0, 2.0])
    wb.save(xlsx)
    paths += [own, xlsx]
    before = {p: (sha256(p), os.stat(p).st_mtime_ns) for p in paths}
    for p in paths:
        read_test_points(p)
        read_test_points(str(p))
    assert {p: (sha256(p), os.stat(p).st_mtime_ns) for p in paths} == before


# ------------------------------------------------------------------------------------ file-level errors

@pytest.mark.parametrize("text,match", [
    ("", "the file is empty"),
    ("\n\n   \n", "the file is empty"),
    ("# only a comment\n# and another\n", "the file is empty"),
    (HEAD + "\n", r"header \(line 1\) is followed by no data rows"),
    ("# c\n\n" + HEAD + "\n\n", r"header \(line 3\) is followed by no data rows"),
    ("liquid_flow [mL/min],notes\n1,x\n", r"required column\(s\) missing: gas_flow\."),
    ("a,b,c\n1,2,3\n", r"required column\(s\) missing: liquid_flow, gas_flow"),
    ("1.5,2.0\n3,4\n", r"no header: the first line \(line 1\) holds numbers"),
    ("liquid_flow [blorps/min],gas_flow [mL/min]\n1,2\n",
     r"column 'liquid_flow \[blorps/min\]': unknown unit 'blorps/min'"),
    ("liquid_flow [mL/min],gas_flow [m/s]\n1,2\n", "'m/s' is not a volumetric flow unit"),
    ("liquid_flow [mL/min],gas_flow [mL/min],residual_acceleration [s]\n1,2,3\n", "'s' is not a acceleration unit"),
    ("liquid_flow [mL/min],gas_flow [mL/min],duration [kg]\n1,2,3\n", "'kg' is not a time unit"),
    ("liquid_flow,gas_flow [mL/min]\n1,2\n", r"column 'liquid_flow' \(liquid_flow\) has no unit"),
    ("liquid_flow [mL/min],gas_flow [sccm]\n1,2\n", "needs the local gas pressure and temperature"),
    ("liquid_flow [sccm],gas_flow [mL/min]\n1,2\n", "valid for gas flow only"),
    ("Q_L [mL/min],liquid flow (mL/min),gas_flow [mL/min]\n1,2,3\n", "are both read as liquid_flow"),
    ("liquid_flow [mL/min],gas_flow [mL/min]\n1,2\x00\n", "NUL characters"),
])
def test_file_level_errors(text, match):
    problems = errors_of(text)
    assert any(re.search(match, p) for p in problems), problems


def test_file_error_lists_every_problem_at_once():
    problems = errors_of("liquid_flow [blorp],gas_flow [furlong],residual_acceleration\n1,2,3\n")
    assert len(problems) == 3
    err = TestPointError(problems, "x.csv")
    assert str(err).startswith("x.csv: cannot read test points:") and str(err).count("\n  - ") == 3
    assert isinstance(err, ValueError)


def test_too_large_for_text_bytes_and_path(tmp_path):
    text = HEAD + "\n1,2\n"
    path = tmp_path / "p.csv"
    path.write_text(text)
    for src in (text, text.encode(), path):
        with pytest.raises(TestPointError, match="more than the limit of 10 bytes"):
            read_test_points(src, max_bytes=10)


def test_path_errors_and_binary_formats(tmp_path):
    with pytest.raises(TestPointError, match="file not found"):
        read_test_points(tmp_path / "absent.csv")
    with pytest.raises(TestPointError, match="file not found"):
        read_test_points(str(tmp_path / "absent.csv"))
    with pytest.raises(TestPointError, match="old Excel .xls"):
        read_test_points(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 20)
    with pytest.raises(TestPointError, match="not a readable .xlsx"):
        read_test_points(b"PK\x03\x04 not really a zip")
    with pytest.raises(TypeError, match="source must be"):
        read_test_points(12.5)


def test_mapping_errors_are_listed():
    problems = errors_of("Qliq (ml/min),Qgas\n1,2\n", mapping={"Qx": "liquid_flow", "Qgas": "gas_flo [L/min]"})
    assert any("mapping names column 'Qx', which is not in the file" in p for p in problems)
    assert any("'gas_flo [L/min]', which is not a field" in p for p in problems)
    with pytest.raises(TypeError, match="mapping"):
        read_test_points(HEAD + "\n1,2\n", mapping=["liquid_flow"])


# ------------------------------------------------------------------------------------ row problems

@pytest.mark.parametrize("cell,match", [
    ("abc", "liquid_flow is not a number: 'abc'"),
    ("-1", "liquid_flow must be > 0, got -1"),
    ("0", "liquid_flow must be > 0, got 0"),
    ("0.0", "liquid_flow must be > 0"),
    ("", "missing value: liquid_flow is required"),
    ("n/a", "missing value"),
    ("nan", "liquid_flow must be a finite number"),
    ("inf", "liquid_flow must be a finite number"),
    ("-Infinity", "liquid_flow must be a finite number"),
    ("1e400", "liquid_flow must be a finite number"),
    ("5 mL/min", "write the unit in the column header"),
    ("1,5", r"decimal comma\?"),  # quoted so the comma stays inside the field
])
def test_row_problem_catalogue(cell, match):
    value = f'"{cell}"' if "," in cell else cell
    tps = read(f"test_id,{HEAD}\nA,1,2\nB,{value},3\nC,4,5\n")
    assert tps.points["test_id"].tolist() == ["A", "C"]
    assert len(tps.problems) == 1
    p = tps.problems[0]
    assert (p.row, p.column, p.value, p.severity) == (3, "liquid_flow [mL/min]", cell, "error")
    assert re.search(match, p.message), p.message
    assert str(p).startswith("row 3, liquid_flow [mL/min]: ")


@pytest.mark.parametrize("header,cell,match", [
    ("residual_acceleration [g0]", "-1e-4", "residual_acceleration must be >= 0"),
    ("residual_acceleration [g0]", "x", "residual_acceleration is not a number"),
    ("low_g_duration [s]", "0", "low_g_duration must be > 0"),
    ("low_g_duration [s]", "-2", "low_g_duration must be > 0"),
    ("low_g_duration [s]", "inf", "low_g_duration must be a finite number"),
])
def test_optional_number_columns_checked_when_present(header, cell, match):
    tps = read(f"{HEAD},{header}\n1,2,{cell}\n1,2,\n")
    assert tps.points["row"].tolist() == [3]           # empty optional value: kept, NaN
    assert math.isnan(tps.points.iloc[0]["g_m_s2"]) and math.isnan(tps.points.iloc[0]["duration_s"])
    assert [p.row for p in tps.problems] == [2] and match in tps.problems[0].message
    assert tps.problems[0].column == header


def test_both_flows_bad_gives_two_problems_same_row():
    tps = read(f"{HEAD}\n-1,abc\n2,3\n")
    assert [(p.row, p.column) for p in tps.problems] == [(2, "liquid_flow [mL/min]"), (2, "gas_flow [mL/min]")]
    assert tps.rejected_rows == [2] and len(tps.points) == 1


def test_duplicate_ids_name_every_other_row():
    tps = read(f"test_id,{HEAD}\nA,1,2\nB,1,2\nA,3,4\nC,1,1\nA,5,6\n")
    assert tps.points["test_id"].tolist() == ["B", "C"]
    msgs = {p.row: p.message for p in tps.problems}
    assert set(msgs) == {2, 4, 6}
    assert "row(s) 4, 6" in msgs[2] and "row(s) 2, 6" in msgs[4] and "row(s) 2, 4" in msgs[6]
    assert all("'A'" in m for m in msgs.values())


def test_many_duplicates_message_is_bounded():
    rows = "\n".join("A,1,2" for _ in range(50))
    tps = read(f"test_id,{HEAD}\n{rows}\n")
    assert len(tps.points) == 0 and len(tps.problems) == 50
    assert "and 44 more" in tps.problems[0].message


def test_missing_ids_are_generated_from_row_numbers():
    tps = read(f"# c\ntest_id,{HEAD}\n,1,2\nX,1,2\n")
    assert tps.points["test_id"].tolist() == ["#3", "X"]
    assert read(f"{HEAD}\n1,2\n").points["test_id"].tolist() == ["#2"]


def test_unknown_platform_is_a_warning_and_aliases_are_normalised():
    tps = read(f"{HEAD},platform\n1,2,Parabolic\n1,2,Short Drop-Tower\n1,2,balloon\n1,2,\n")
    assert tps.points["platform"].tolist() == ["parabolic flight", "short drop tower", "balloon", ""]
    assert [(p.row, p.severity) for p in tps.problems] == [(4, "warning")]
    assert tps.errors == [] and len(tps.warnings) == 1


def test_empty_regime_is_a_warning():
    tps = read(f"{HEAD},regime\n1,2,annular\n1,2,\n")
    assert len(tps.points) == 2
    assert [(p.row, p.severity) for p in tps.problems] == [(3, "warning")]


def test_row_longer_than_header_is_set_aside():
    tps = read(f"{HEAD}\n1,5,2\n3,4\n1,2,,\n")
    assert tps.points["row"].tolist() == [3, 4]       # trailing empty fields are harmless
    p = tps.problems[0]
    assert p.row == 2 and "has 3 values but the header has 2 columns" in p.message and "decimal comma" in p.message


def test_short_rows_miss_required_values():
    tps = read(f"{HEAD},notes\n1\n1,2\n")
    assert tps.points["row"].tolist() == [3]
    assert tps.problems[0].row == 2 and "missing value: gas_flow" in tps.problems[0].message


# ------------------------------------------------------------------------------------ formats

def test_semicolon_with_decimal_comma():
    tps = read("liquid_flow [mL/min];gas_flow [mL/min];notes\n1,5;2,25;\"a;b\"\n10;3;x\n")
    assert tps.delimiter == ";" and tps.decimal == ","
    assert tps.points["ql_m3_s"].tolist() == pytest.approx([1.5 * ML_MIN, 10 * ML_MIN], rel=1e-12)
    assert tps.points["qg_m3_s"].tolist() == pytest.approx([2.25 * ML_MIN, 3 * ML_MIN], rel=1e-12)
    assert tps.points["notes"].tolist() == ["a;b", "x"]


def test_semicolon_with_decimal_point_and_forced_decimal():
    tps = read("liquid_flow [mL/min];gas_flow [mL/min]\n1.5;2\n")
    assert tps.decimal == "." and tps.points["ql_m3_s"].iloc[0] == pytest.approx(1.5 * ML_MIN)
    assert read("liquid_flow [mL/min]|gas_flow [mL/min]\n1,5|2\n", delimiter="|",
                decimal=",").points["ql_m3_s"].iloc[0] == pytest.approx(1.5 * ML_MIN)


def test_tab_delimited_with_decimal_comma_and_bom():
    tps = read("\ufeffliquid_flow [mL/min]\tgas_flow [mL/min]\n1,5\t2\n")
    assert tps.delimiter == "\t" and tps.decimal == ","
    assert tps.points["ql_m3_s"].iloc[0] == pytest.approx(1.5 * ML_MIN, rel=1e-12)


@pytest.mark.parametrize("encoding", ["utf-8-sig", "utf-8", "utf-16", "cp1252"])
def test_byte_encodings(encoding):
    text = "liquid_flow [µL/min],gas_flow [mL/min],notes\r\n1000,2,café\r\n"
    tps = read_test_points(text.encode(encoding))
    assert tps.source_name == "uploaded file"
    assert tps.points["ql_m3_s"].iloc[0] == pytest.approx(1 * ML_MIN, rel=1e-12)
    assert tps.points["notes"].iloc[0] == "café" and tps.points["row"].iloc[0] == 2


def test_comments_blank_lines_quotes_and_line_numbers():
    text = ("# comment 1\n"
            "\n"
            "  # indented comment\n"
            f"test_id,{HEAD},notes\n"        # line 4
            "A,1,2,\"quoted, with comma\"\n"  # line 5
            "\n"
            "# a comment between rows, \"with a quote\n"
            "B,3,4,\"two\n"                   # line 8, the field spans lines 8-9
            "lines\"\n"
            "C,-5,6,bad\n"                    # line 10
            " , , , \n"                       # blank record
            "D,7,8,\"say \"\"hi\"\"\"\n")     # line 12
    tps = read(text)
    assert tps.points["row"].tolist() == [5, 8, 12]
    assert tps.points["notes"].tolist() == ["quoted, with comma", "two\nlines", 'say "hi"']
    assert [p.row for p in tps.problems] == [10]


def test_crlf_and_cr_line_ends():
    for nl in ("\r\n", "\r"):
        tps = read(nl.join([HEAD, "1,2", "", "3,4", "-1,1"]) + nl)
        assert tps.points["row"].tolist() == [2, 4] and tps.problems[0].row == 5


def test_excel_file_and_bytes(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append([])                                     # row 1 empty
    ws.append(["# INVENTED demonstration data"])      # row 2 comment
    ws.append(["Test ID", "Liquid flow (L/min)", "Gas flow (mL/min)", "Regime", "Platform", "g [g0]"])  # row 3
    ws.append(["X1", 0.12, 2, "annular", "sounding rocket", 1e-4])   # row 4
    ws.append(["X2", "text", 2, "annular", "sounding rocket", None])  # row 5
    ws.append(["X3", 0.5, 7.5, None, None, None])                      # row 6
    path = tmp_path / "points.xlsx"
    wb.save(path)
    for src in (path, path.read_bytes()):
        tps = read_test_points(src)
        assert tps.delimiter is None
        assert tps.points["row"].tolist() == [4, 6]
        assert tps.points["ql_m3_s"].tolist() == pytest.approx([0.12e-3 / 60, 0.5e-3 / 60], rel=1e-12)
        assert tps.points["g_m_s2"].iloc[0] == pytest.approx(1e-4 * G0, rel=1e-12)
        assert tps.errors[0].row == 5 and "not a number" in tps.errors[0].message
    with pytest.raises(TestPointError, match="sheet 3 does not exist"):
        read_test_points(path, sheet=3)
    with pytest.raises(TestPointError, match="no sheet 'data'"):
        read_test_points(path, sheet="data")


def test_file_like_object():
    tps = read_test_points(io.BytesIO(f"{HEAD}\n1,2\n".encode()), name="upload.csv")
    assert tps.source_name == "upload.csv" and len(tps.points) == 1


# ------------------------------------------------------------------------------------ headers, units, mapping

@pytest.mark.parametrize("header", [
    "liquid_flow [mL/min],gas_flow [mL/min]",
    "Liquid Flow (mL/min), Gas Flow (ml/min)",
    "Q_L [mL/min];QG [mL/min]",
    "ql [ml/min]\tq_gas [cm^3/min]",
    "LIQUID-FLOW-RATE [mL/min],gas volumetric flow [cc/min]",
])
def test_header_recognition(header):
    delim = "\t" if "\t" in header else (";" if ";" in header else ",")
    tps = read(f"{header}\n12{delim}3\n")
    assert tps.points["ql_m3_s"].iloc[0] == pytest.approx(12 * ML_MIN, rel=1e-12)
    assert tps.points["qg_m3_s"].iloc[0] == pytest.approx(3 * ML_MIN, rel=1e-12)
    assert set(tps.columns.values()) == {"liquid_flow", "gas_flow"}


@pytest.mark.parametrize("unit,factor", [
    ("L/min", 1e-3 / 60),          # SI Brochure: 1 L = 1e-3 m^3
    ("m^3/s", 1.0),
    ("m³/h", 1 / 3600),
    ("uL/s", 1e-9),
    ("cm^3/min", ML_MIN),
])
def test_flow_units(unit, factor):
    tps = read(f"liquid_flow [{unit}],gas_flow [{unit}]\n2,3\n")
    assert tps.points["ql_m3_s"].iloc[0] == pytest.approx(2 * factor, rel=1e-12)
    assert tps.units["liquid_flow"] == unit


@pytest.mark.parametrize("unit,factor", [("g0", G0), ("g", G0), ("G", G0), ("m/s^2", 1.0), ("mm/s^2", 1e-3)])
def test_acceleration_units(unit, factor):
    # 'g' in an acceleration column is read as standard gravity (CGPM 1901), not gram
    tps = read(f"{HEAD},residual_acceleration [{unit}]\n1,2,0.5\n")
    assert tps.points["g_m_s2"].iloc[0] == pytest.approx(0.5 * factor, rel=1e-12)


def test_duration_units():
    tps = read(f"{HEAD},duration [min],\n1,2,3\n")
    assert tps.points["duration_s"].iloc[0] == pytest.approx(180.0)


def test_standard_gas_units_need_and_use_pressure_and_temperature():
    # SEMI E12: 1 sccm = 1 cm^3/min at 0 degC and 101.325 kPa; ideal gas Q = Q_std (p_std/p)(T/T_std)
    tps = read("liquid_flow [mL/min],gas_flow [sccm]\n1,100\n", pressure=2 * 101325.0, temperature=273.15)
    assert tps.points["qg_m3_s"].iloc[0] == pytest.approx(50 * ML_MIN, rel=1e-12)
    tps2 = read("liquid_flow [mL/min],gas_flow [slpm]\n1,1\n", pressure="1 atm", temperature="20 degC")
    assert tps2.points["qg_m3_s"].iloc[0] == pytest.approx(1e-3 / 60 * 293.15 / 273.15, rel=1e-12)
    assert tps2.points["qg_m3_s"].iloc[0] == pytest.approx(
        parse_flow("1 slpm", gas=True, pressure=101325.0, temperature=293.15), rel=1e-12)
    with pytest.raises(ValueError, match="pressure"):
        read("liquid_flow [mL/min],gas_flow [sccm]\n1,100\n", pressure=-1.0, temperature=273.15)


def test_mapping_of_non_standard_headers():
    text = "Run,Qliq (ml/min),Qgas,Seen in video,Rig\nR1,1,2,bubbly,short drop tower\n"
    tps = read(text, mapping={"Qliq": "liquid_flow", "Qgas": "gas_flow [L/min]", "Seen in video": "observed_regime",
                              "rig": "platform"})
    p = tps.points.iloc[0]
    assert p["ql_m3_s"] == pytest.approx(ML_MIN, rel=1e-12)       # unit from the header
    assert p["qg_m3_s"] == pytest.approx(2e-3 / 60, rel=1e-12)     # unit from the mapping
    assert p["observed_regime"] == "bubbly" and p["platform"] == "short drop tower" and p["test_id"] == "R1"
    assert tps.columns == {"Run": "test_id", "Qliq (ml/min)": "liquid_flow", "Qgas": "gas_flow",
                           "Seen in video": "observed_regime", "Rig": "platform"}
    assert tps.units == {"liquid_flow": "ml/min", "gas_flow": "L/min"}


def test_mapping_unit_override_and_ignore():
    text = "liquid_flow [mL/min],gas_flow [mL/min],Q_L [L/min],comment\n6,2,1,x\n"
    tps = read(text, mapping={"liquid_flow [mL/min]": None, "Q_L [L/min]": "liquid_flow [mL/min]"})
    assert tps.points["ql_m3_s"].iloc[0] == pytest.approx(1 * ML_MIN, rel=1e-12)   # mapping unit wins
    assert "liquid_flow [mL/min]" not in tps.columns and tps.columns["comment"] == "notes"
    # an explicit mapping wins over an automatically recognised column for the same field
    tps2 = read(text, mapping={"Q_L [L/min]": "liquid_flow"})
    assert tps2.points["ql_m3_s"].iloc[0] == pytest.approx(1e-3 / 60, rel=1e-12)
    assert "liquid_flow [mL/min]" in tps2.ignored_columns


def test_unrecognised_columns_are_listed():
    tps = read(f"{HEAD},temperature [degC],operator\n1,2,20,me\n")
    assert tps.ignored_columns == ["temperature [degC]", "operator"]


def test_field_aliases_are_unique_and_cover_fields():
    seen = {}
    for fld, names in field_aliases().items():
        assert names[0] == fld
        for n in names:
            key = "".join(ch for ch in n.lower() if ch.isalnum())
            assert seen.setdefault(key, fld) == fld, n


# ------------------------------------------------------------------------------------ regimes, template

def test_regime_map_and_unknown_regimes():
    text = f"{HEAD},regime\n1,2,Bubbly\n1,2,slug  flow\n1,2,annular\n1,2,churn\n"
    chart = ["dispersed bubbles", "elongated bubbles / slugs", "annular"]
    raw = read(text)
    assert unknown_regimes(raw, chart) == ["Bubbly", "slug flow", "churn"]
    tps = read(text, regime_map={"bubbly": "dispersed bubbles", "SLUG FLOW": "elongated bubbles / slugs"})
    assert tps.points["observed_regime"].tolist() == ["dispersed bubbles", "elongated bubbles / slugs", "annular",
                                                      "churn"]
    assert unknown_regimes(tps, chart) == ["churn"]
    assert unknown_regimes(tps.points, chart + ["churn"]) == []


def test_template_round_trip(tmp_path):
    path = write_template(tmp_path / "template.csv")
    assert path.read_text(encoding="utf-8") == template_text() and TEMPLATE_HEADER in template_text()
    with pytest.raises(FileExistsError):
        write_template(path)
    write_template(path, overwrite=True)
    with pytest.raises(TestPointError, match="no data rows"):
        read_test_points(path)
    with open(path, "a", encoding="utf-8") as fh:
        fh.write("T1,10,1,annular,parabolic flight,1e-2,20,\n")
    tps = read_test_points(path)
    assert tps.points["test_id"].tolist() == ["T1"] and tps.problems == []
    assert set(tps.columns.values()) == set(FIELDS)


# ------------------------------------------------------------------------------------ large file

def test_hundred_thousand_rows_with_bad_rows_at_known_lines():
    n = 100_000
    rng = np.random.default_rng(7)
    ql = rng.uniform(0.1, 500.0, n)
    qg = rng.uniform(0.1, 500.0, n)
    lines = [f"{i},{a!r},{b!r},annular,parabolic flight" for i, (a, b) in enumerate(zip(ql.tolist(), qg.tolist()))]
    bad = {10: "x", 5_000: "-1", 99_999: ""}   # data index -> liquid cell
    for i, cell in bad.items():
        lines[i] = f"{i},{cell},1,annular,parabolic flight"
    text = "test_id,liquid_flow [mL/min],gas_flow [mL/min],regime,platform\n" + "\n".join(lines) + "\n"
    tps = read(text)
    assert len(tps.points) == n - len(bad)
    assert [p.row for p in tps.problems] == [i + 2 for i in sorted(bad)]
    good = np.setdiff1d(np.arange(n), list(bad))
    np.testing.assert_allclose(tps.points["ql_m3_s"].to_numpy(), ql[good] * ML_MIN, rtol=1e-12)
    np.testing.assert_array_equal(tps.points["row"].to_numpy(), good + 2)


# ------------------------------------------------------------------------------------ property-based

def _never_crashes(src, **kw):
    try:
        out = read_test_points(src, **kw)
    except TestPointError:
        return None
    assert isinstance(out, TestPointSet)
    assert list(out.points.columns) == POINT_COLUMNS
    assert all(isinstance(p, RowProblem) for p in out.problems)
    assert (out.points["ql_m3_s"] > 0).all() and (out.points["qg_m3_s"] > 0).all()
    assert np.isfinite(out.points[["ql_m3_s", "qg_m3_s"]].to_numpy()).all()
    return out


FAST = settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@FAST
@given(st.text(max_size=300))
def test_random_text_never_crashes(text):
    _never_crashes(text)


@FAST
@given(st.binary(max_size=300))
def test_random_bytes_never_crash(data):
    _never_crashes(data)


_CELL = st.one_of(
    st.sampled_from(["", "1", "0", "-2", "1,5", "2.5e-3", "nan", "inf", "abc", "n/a", '"', '""', "a,b", "#",
                     "12 mL/min", "parabolic flight", "annular", " ", "\t", ";"]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.text(alphabet="0123456789.,-+eE;\t\" #abc\n", max_size=8),
)
_HEADER_CELL = st.sampled_from([
    "liquid_flow [mL/min]", "gas_flow [mL/min]", "gas_flow [sccm]", "Q_L (L/min)", "qg [m^3/s]", "regime",
    "platform", "g [g0]", "duration [s]", "test_id", "notes", "id", "x", "", "liquid_flow", "gas_flow [bad]",
    "residual_acceleration [m]"])


@FAST
@given(st.lists(_HEADER_CELL, min_size=1, max_size=7),
       st.lists(st.lists(_CELL, max_size=8), max_size=12),
       st.sampled_from([",", ";", "\t"]),
       st.booleans())
def test_random_csv_like_tables_never_crash(header, rows, delim, with_conditions):
    text = "\n".join(delim.join(r) for r in [header, *rows])
    kw = {"pressure": 101325.0, "temperature": 293.15} if with_conditions else {}
    _never_crashes(text, **kw)


_LIQ = [("liquid_flow", "mL/min", ML_MIN), ("Q_L", "L/min", 1e-3 / 60), ("liquid flow rate", "m^3/s", 1.0)]
_GAS = [("gas_flow", "mL/min", ML_MIN), ("QG", "L/h", 1e-3 / 3600), ("gas flow", "uL/s", 1e-9)]
_pos = st.floats(min_value=1e-6, max_value=1e6, allow_nan=False, allow_infinity=False)


@FAST
@given(st.lists(st.tuples(_pos, _pos, st.sampled_from(["annular", "dispersed bubbles", "a, b"])), min_size=1,
                max_size=30),
       st.sampled_from(_LIQ), st.sampled_from(_GAS), st.sampled_from([",", ";", "\t"]),
       st.booleans(), st.booleans(), st.integers(0, 3))
def test_random_valid_tables_are_read_exactly(points, liq, gas, delim, brackets, bom, n_comments):
    decimal_comma = delim == ";"
    fmt = (lambda x: repr(x).replace(".", ",")) if decimal_comma else repr
    lb, rb = ("[", "]") if brackets else ("(", ")")
    header = delim.join([f"{liq[0]} {lb}{liq[1]}{rb}", f"{gas[0]} {lb}{gas[1]}{rb}", "regime"])
    body = [delim.join([fmt(a), fmt(b), f'"{r}"']) for a, b, r in points]
    text = ("\ufeff" if bom else "") + "# note\n" * n_comments + header + "\n" + "\n".join(body) + "\n"
    tps = read_test_points(text)
    assert tps.problems == [] and len(tps.points) == len(points)
    assert tps.points["row"].tolist() == list(range(n_comments + 2, n_comments + 2 + len(points)))
    np.testing.assert_allclose(tps.points["ql_m3_s"], [a * liq[2] for a, _, _ in points], rtol=1e-12)
    np.testing.assert_allclose(tps.points["qg_m3_s"], [b * gas[2] for _, b, _ in points], rtol=1e-12)
    assert tps.points["observed_regime"].tolist() == [r for _, _, r in points]
