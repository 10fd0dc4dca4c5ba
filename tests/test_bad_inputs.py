"""A catalogue of bad and hostile inputs to the command line: each one must end in a one-line message
naming the field, option or path, with exit code 2, no traceback, no input file changed and no
output file written or replaced.

Tables, one row per input:

* ``CASE_ROWS``: case files with a value of the wrong kind (a list where text belongs, a date as a
  unit, a number where a table belongs, a table where a number belongs), out of the physical
  bounds (a diameter of 1e300 mm, NaN, inf, 200 g0), too many entries, too long texts, broken syntax;
  checked by ``lowgmap check`` and, for a share of them, by a computing command (``margin``), which
  must refuse what ``check`` refuses.
* ``FILE_ROWS``: paths that are not readable case or study files (missing, a folder, ``/dev/zero``,
  too large, not UTF-8).
* ``OPTION_ROWS``: command-line options out of range (flows, sample counts, workers, an address that
  is not this machine's, a closed scheduler port).
* ``STUDY_ROWS``: SWEEP and GOAL files (10**12 steps, 10**9 screening points, grids past the design
  limit, type confusion).
* ``OUTPUT_ROWS``: output paths that exist (no ``--force``), have an unknown suffix, are folders,
  lie under a file, or are the command's own input.

Every command runs in this process through :func:`lowgmap.app.cli.main`; a named pipe given as an
input runs in a subprocess with a timeout as a guard (it must be refused at once, not read). The
fuzz tests at the end feed random TOML documents and random mutations of the sample cases to the
case loader: only lowgmap's own input errors may come out. The expected messages are lowgmap's own
wording (regression pins of the messages, [calc] in the sense of the project's rules); the limits
are documented in the README ("Limits and errors").
"""
from __future__ import annotations

import datetime
import hashlib
import math
import os
import re
import subprocess
import sys
from dataclasses import dataclass, field
from pathlib import Path

import pytest
import tomlkit
from hypothesis import HealthCheck, given, settings, strategies as st

from lowgmap.app.cli import main
from lowgmap.app.files.casefile import SAMPLE_DIR, loads_case, sample_case_path
from lowgmap.physics.validate import InputError

TUBE = sample_case_path("condensate_line").read_text(encoding="utf-8")
GROOVE = sample_case_path("cryogenic_groove").read_text(encoding="utf-8")
POLYGON = sample_case_path("drop_tower_silicone").read_text(encoding="utf-8")
POINTS = (SAMPLE_DIR / "drop_tower_points.csv").read_text(encoding="utf-8")

SWEEP = """\
[sweep]
required_margin = "30 %"
[[variables]]
name = "size"
from = "6 mm"
to = "30 mm"
steps = 3
[[variables]]
name = "length"
values = ["0.5 m", "1.5 m"]
"""

GOAL = """\
[goal]
liquid_flow = ["0.6 L/min", "0.9 L/min"]
gas_flow = ["1.5 L/min", "1.8 L/min"]
regime = "elongated bubbles / slugs"
starts = 1
screen = 8
max_evaluations = 20
[[variables]]
name = "size"
low = "6 mm"
high = "30 mm"
"""


def sub(text: str, old: str, new: str) -> str:
    """``text`` with the first ``old`` replaced (``old`` must be there: a row that edits nothing fails)."""
    assert old in text, old
    return text.replace(old, new, 1)


def drop_table(text: str, name: str) -> str:
    """``text`` without the table ``[name]`` (its header and keys up to the next table)."""
    out = re.sub(rf"(?ms)^\[{re.escape(name)}\]\n.*?(?=^\[|\Z)", "", text)
    assert out != text, name
    return out


def top(text: str, line: str) -> str:
    """``line`` added at the top level (before the first table)."""
    return sub(text, "\n[fluid]", f"\n{line}\n\n[fluid]")


# ================================================================================================ running
@dataclass
class Row:
    """One bad input: the command line (``{case}`` etc. stand for files in the row's folder), the
    words the message must contain, the exit code, and the files of the folder."""

    id: str
    argv: list
    needles: tuple
    code: int = 2
    files: dict = field(default_factory=dict)       # name -> text (or bytes) written before the run
    existing: tuple = ()                             # output files that exist before the run


def _folder_files(folder: Path) -> dict:
    """Path -> SHA-256 of every file under ``folder`` (folders and special files listed by kind)."""
    out = {}
    for p in sorted(folder.rglob("*")):
        if p.is_symlink() or not p.exists():
            out[str(p)] = "link"
        elif p.is_dir():
            out[str(p)] = "dir"
        elif p.is_file():
            out[str(p)] = hashlib.sha256(p.read_bytes()).hexdigest()
        else:
            out[str(p)] = "special"
    return out


def _prepare(tmp: Path, row: Row) -> list:
    files = {"case.toml": TUBE, "sweep.toml": SWEEP, "goal.toml": GOAL, "points.csv": POINTS}
    files.update(row.files)
    for name, content in files.items():
        p = tmp / name
        p.parent.mkdir(parents=True, exist_ok=True)
        if content is None:
            continue
        if isinstance(content, bytes):
            p.write_bytes(content)
        else:
            p.write_text(content, encoding="utf-8")
    for name in row.existing:
        (tmp / name).write_bytes(b"an existing file that must not be replaced\n")
    return [str(a).format(case=tmp / "case.toml", sweep=tmp / "sweep.toml", goal=tmp / "goal.toml",
                          points=tmp / "points.csv", tmp=tmp) for a in row.argv]


def run_cli(capsys, argv) -> tuple[int, str, str]:
    """Exit code, stdout and stderr of ``lowgmap argv`` (argparse's own exits included)."""
    try:
        code = main(list(argv))
    except SystemExit as exc:
        code = exc.code if isinstance(exc.code, int) else 2
    out, err = capsys.readouterr()
    return code, out, err


def check_row(row: Row, tmp_path: Path, capsys) -> str:
    argv = _prepare(tmp_path, row)
    before = _folder_files(tmp_path)
    code, out, err = run_cli(capsys, argv)
    assert code == row.code, f"exit {code}, expected {row.code}\nstdout: {out[-2000:]}\nstderr: {err[-2000:]}"
    for needle in row.needles:
        assert needle in err, f"{needle!r} not in the message:\n{err}"
    assert "Traceback" not in err and "Traceback" not in out, err
    assert "internal error" not in err, err
    assert len(err) < 20_000, f"message of {len(err)} characters"
    # nothing written, replaced or left behind: every file as before (inputs and existing outputs)
    assert _folder_files(tmp_path) == before
    return err


# ============================================================================================ case files
# (id, base text, old, new, words of the message); each runs `lowgmap check`
C = [
    # --- a value of the wrong kind
    ("liquid-list", TUBE, 'liquid = "water"', 'liquid = ["water"]', ("fluid.liquid",)),
    ("liquid-number", TUBE, 'liquid = "water"', "liquid = 5", ("fluid.liquid",)),
    ("liquid-table", TUBE, 'liquid = "water"', 'liquid = {name = "water"}', ("fluid.liquid",)),
    ("liquid-long", TUBE, 'liquid = "water"', f'liquid = "{"w" * 300}"', ("fluid.liquid", "at most 200")),
    ("liquid-empty", TUBE, 'liquid = "water"', 'liquid = " "', ("fluid.liquid", "missing or empty")),
    ("gas-list", TUBE, 'gas = "air"', 'gas = ["air"]', ("fluid.gas",)),
    ("gas-date", TUBE, 'gas = "air"', "gas = 1979-05-27", ("fluid.gas",)),
    ("temperature-date", TUBE, 'temperature = "22 degC"', "temperature = 1979-05-27", ("fluid.temperature",)),
    ("temperature-datetime", TUBE, 'temperature = "22 degC"', "temperature = 1979-05-27T07:32:00Z",
     ("fluid.temperature",)),
    ("temperature-time", TUBE, 'temperature = "22 degC"', "temperature = 07:32:00", ("fluid.temperature",)),
    ("temperature-list", TUBE, 'temperature = "22 degC"', 'temperature = ["22 degC"]', ("fluid.temperature",)),
    ("temperature-bool", TUBE, 'temperature = "22 degC"', "temperature = true", ("fluid.temperature",)),
    ("temperature-bare", TUBE, 'temperature = "22 degC"', "temperature = 22", ("fluid.temperature", "no unit")),
    ("temperature-huge", TUBE, 'temperature = "22 degC"', 'temperature = "1e300 degC"', ("fluid.temperature",)),
    ("temperature-below-zero-K", TUBE, 'temperature = "22 degC"', 'temperature = "-300 degC"',
     ("fluid.temperature",)),
    ("temperature-out-of-source", TUBE, 'temperature = "22 degC"', 'temperature = "500 degC"',
     ("fluid.temperature",)),
    ("pressure-table", TUBE, 'pressure = "101.3 kPa"', "pressure = {value = 1}", ("fluid.pressure",)),
    ("pressure-zero", TUBE, 'pressure = "101.3 kPa"', 'pressure = "0 kPa"', ("fluid.pressure", "[1 Pa, 100 MPa]")),
    ("pressure-huge", TUBE, 'pressure = "101.3 kPa"', 'pressure = "1e300 kPa"', ("fluid.pressure", "100 MPa")),
    ("pressure-1GPa", TUBE, 'pressure = "101.3 kPa"', 'pressure = "1e9 Pa"', ("fluid.pressure",)),
    ("pressure-length", TUBE, 'pressure = "101.3 kPa"', 'pressure = "101.3 mm"', ("fluid.pressure",)),
    ("overrides-number", TUBE, 'pressure = "101.3 kPa"', 'pressure = "101.3 kPa"\noverrides = 5',
     ("fluid.overrides",)),
    ("overrides-sigma-huge", TUBE, 'pressure = "101.3 kPa"', 'pressure = "101.3 kPa"\noverrides = {sigma = "1e300 N/m"}',
     ("fluid.overrides.sigma", "N/m")),
    ("overrides-density-negative", TUBE, 'pressure = "101.3 kPa"',
     'pressure = "101.3 kPa"\noverrides = {rho_l = "-1 kg/m^3"}', ("fluid.overrides.rho_l",)),
    ("overrides-unknown", TUBE, 'pressure = "101.3 kPa"', 'pressure = "101.3 kPa"\noverrides = {colour = "red"}',
     ("fluid.overrides.colour",)),
    ("liquid-source-number", TUBE, 'pressure = "101.3 kPa"', 'pressure = "101.3 kPa"\nliquid_source = 5',
     ("fluid.liquid_source",)),
    ("diameter-list", TUBE, 'diameter = "12.7 mm"', 'diameter = ["12.7 mm"]', ("section.diameter",)),
    ("diameter-date", TUBE, 'diameter = "12.7 mm"', "diameter = 1979-05-27", ("section.diameter",)),
    ("diameter-bare", TUBE, 'diameter = "12.7 mm"', "diameter = 12.7", ("section.diameter", "no unit")),
    ("diameter-table", TUBE, 'diameter = "12.7 mm"', 'diameter = {value = "12.7 mm"}', ("section.diameter",)),
    ("diameter-1e300mm", TUBE, 'diameter = "12.7 mm"', 'diameter = "1e300 mm"',
     ("section.diameter", "[1 µm, 1 km]", "line 19")),
    ("diameter-nan", TUBE, 'diameter = "12.7 mm"', 'diameter = "nan mm"', ("section.diameter",)),
    ("diameter-inf", TUBE, 'diameter = "12.7 mm"', 'diameter = "inf mm"', ("section.diameter",)),
    ("diameter-toml-nan", TUBE, 'diameter = "12.7 mm"', "diameter = nan", ("section.diameter",)),
    ("diameter-toml-inf", TUBE, 'diameter = "12.7 mm"', "diameter = inf", ("section.diameter",)),
    ("diameter-overflow", TUBE, 'diameter = "12.7 mm"', 'diameter = "1e400 mm"', ("section.diameter", "finite")),
    ("diameter-negative", TUBE, 'diameter = "12.7 mm"', 'diameter = "-12.7 mm"', ("section.diameter",)),
    ("diameter-zero", TUBE, 'diameter = "12.7 mm"', 'diameter = "0 mm"', ("section.diameter",)),
    ("diameter-sub-micron", TUBE, 'diameter = "12.7 mm"', 'diameter = "0.5 um"', ("section.diameter", "1 µm")),
    ("diameter-2km", TUBE, 'diameter = "12.7 mm"', 'diameter = "2 km"', ("section.diameter", "1 km")),
    ("diameter-time", TUBE, 'diameter = "12.7 mm"', 'diameter = "12.7 s"', ("section.diameter", "time")),
    ("diameter-empty", TUBE, 'diameter = "12.7 mm"', 'diameter = ""', ("section.diameter",)),
    ("diameter-long-text", TUBE, 'diameter = "12.7 mm"', f'diameter = "12.7 {" " * 300}mm"',
     ("section.diameter", "at most 200 characters")),
    ("diameter-spaces-attack", TUBE, 'diameter = "12.7 mm"', f'diameter = "1 {" " * 100_000}x y"',
     ("section.diameter",)),
    ("kind-list", TUBE, 'kind = "circle"', 'kind = ["circle"]', ("section.kind",)),
    ("kind-number", TUBE, 'kind = "circle"', "kind = 5", ("section.kind",)),
    ("kind-table", TUBE, 'kind = "circle"', "kind = {a = 1}", ("section.kind",)),
    ("kind-unknown", TUBE, 'kind = "circle"', 'kind = "hexagon"', ("section.kind", "circle")),
    ("contact-angle-200", TUBE, 'contact_angle = "40 deg"', 'contact_angle = "200 deg"',
     ("wetting.contact_angle", "180")),
    ("contact-angle-negative", TUBE, 'contact_angle = "40 deg"', 'contact_angle = "-5 deg"',
     ("wetting.contact_angle",)),
    ("contact-angle-huge", TUBE, 'contact_angle = "40 deg"', 'contact_angle = "1e300 deg"',
     ("wetting.contact_angle",)),
    ("contact-angle-bare", TUBE, 'contact_angle = "40 deg"', "contact_angle = 40", ("wetting.contact_angle",)),
    ("contact-angle-length", TUBE, 'contact_angle = "40 deg"', 'contact_angle = "40 mm"',
     ("wetting.contact_angle", "not an angle")),
    ("length-1e300", TUBE, 'length = "1.5 m"', 'length = "1e300 mm"', ("conduit.length", "1 km")),
    ("length-tiny", TUBE, 'length = "1.5 m"', 'length = "1e-300 m"', ("conduit.length", "1 µm")),
    ("length-5km", TUBE, 'length = "1.5 m"', 'length = "5 km"', ("conduit.length",)),
    ("length-date", TUBE, 'length = "1.5 m"', "length = 1979-05-27", ("conduit.length",)),
    ("length-inf", TUBE, 'length = "1.5 m"', "length = inf", ("conduit.length",)),
    ("g-1e300", TUBE, 'residual_acceleration = "1e-6 g0"', 'residual_acceleration = "1e300 g0"',
     ("conduit.residual_acceleration", "[0, 100 g0]")),
    ("g-negative", TUBE, 'residual_acceleration = "1e-6 g0"', 'residual_acceleration = "-1e-6 g0"',
     ("conduit.residual_acceleration",)),
    ("g-200g0", TUBE, 'residual_acceleration = "1e-6 g0"', 'residual_acceleration = "200 g0"',
     ("conduit.residual_acceleration", "100 g0")),
    ("g-nan", TUBE, 'residual_acceleration = "1e-6 g0"', 'residual_acceleration = "nan g0"',
     ("conduit.residual_acceleration",)),
    ("g-list", TUBE, 'residual_acceleration = "1e-6 g0"', 'residual_acceleration = ["1e-6 g0"]',
     ("conduit.residual_acceleration",)),
    ("g-speed", TUBE, 'residual_acceleration = "1e-6 g0"', 'residual_acceleration = "1 m/s"',
     ("conduit.residual_acceleration",)),
    ("chart-range-text", TUBE, 'liquid_flow = ["20 mL/min", "40 L/min"]', 'liquid_flow = "20 mL/min"',
     ("chart.liquid_flow",)),
    ("chart-range-three", TUBE, 'liquid_flow = ["20 mL/min", "40 L/min"]',
     'liquid_flow = ["20 mL/min", "1 L/min", "40 L/min"]', ("chart.liquid_flow",)),
    ("chart-range-reversed", TUBE, 'liquid_flow = ["20 mL/min", "40 L/min"]', 'liquid_flow = ["40 L/min", "20 mL/min"]',
     ("ql_min",)),
    ("chart-range-huge", TUBE, 'liquid_flow = ["20 mL/min", "40 L/min"]', 'liquid_flow = ["20 mL/min", "1e300 L/min"]',
     ("chart.liquid_flow[1]", "m^3/s")),
    ("chart-gas-sccm-huge", TUBE, 'gas_flow = ["5 mL/min", "100 L/min"]', 'gas_flow = ["5 mL/min", "1e300 sccm"]',
     ("chart.gas_flow[1]",)),
    ("chart-range-dates", TUBE, 'gas_flow = ["5 mL/min", "100 L/min"]', "gas_flow = [1979-05-27, 1980-05-27]",
     ("chart.gas_flow[0]",)),
    ("axes-number", TUBE, 'axes = "flow"', "axes = 5", ("chart.axes",)),
    ("axes-list", TUBE, 'axes = "flow"', 'axes = ["flow"]', ("chart.axes",)),
    ("log-axes-text", TUBE, "log_axes = true", 'log_axes = "yes"', ("chart.log_axes",)),
    ("flow-unit-date", TUBE, 'liquid_flow_unit = "L/min"', "liquid_flow_unit = 1979-05-27",
     ("chart.liquid_flow_unit",)),
    ("flow-unit-list", TUBE, 'liquid_flow_unit = "L/min"', 'liquid_flow_unit = ["L/min"]',
     ("chart.liquid_flow_unit",)),
    ("flow-unit-mass", TUBE, 'liquid_flow_unit = "L/min"', 'liquid_flow_unit = "kg"', ("chart.liquid_flow_unit",)),
    ("required-margin-150", TUBE, 'required_margin = "30 %"', 'required_margin = "150 %"',
     ("chart.required_margin", "[0, 1)")),
    ("required-margin-table", TUBE, 'required_margin = "30 %"', "required_margin = {a = 1}",
     ("chart.required_margin",)),
    ("required-margin-negative", TUBE, 'required_margin = "30 %"', "required_margin = -0.1",
     ("chart.required_margin",)),
    ("intended-regime-number", TUBE, 'intended_regime = "dispersed bubbles"', 'intended_regime = 5',
     ("chart.intended_regime",)),
    ("intended-regime-long", TUBE, 'intended_regime = "dispersed bubbles"', f'intended_regime = "{"r" * 300}"',
     ("chart.intended_regime",)),
    ("op-liquid-1e300", TUBE, 'liquid_flow = "3 L/min"', 'liquid_flow = "1e300 L/min"',
     ("operating_point.liquid_flow", "[1e-15, 1000] m^3/s")),
    ("op-liquid-sccm", TUBE, 'liquid_flow = "3 L/min"', 'liquid_flow = "3 sccm"',
     ("operating_point.liquid_flow", "gas")),
    ("op-gas-1e300-sccm", TUBE, 'gas_flow = "400 sccm"', 'gas_flow = "1e300 sccm"', ("operating_point.gas_flow",)),
    ("op-gas-negative", TUBE, 'gas_flow = "400 sccm"', 'gas_flow = "-400 sccm"', ("operating_point.gas_flow",)),
    ("op-liquid-list", TUBE, 'liquid_flow = "3 L/min"', 'liquid_flow = ["3 L/min"]', ("operating_point.liquid_flow",)),
    ("op-liquid-date", TUBE, 'liquid_flow = "3 L/min"', "liquid_flow = 1979-05-27", ("operating_point.liquid_flow",)),
    ("op-liquid-1e12-L/min", TUBE, 'liquid_flow = "3 L/min"', 'liquid_flow = "1e12 L/min"',
     ("operating_point.liquid_flow",)),
    ("uncertainty-500pct", TUBE, 'liquid_flow = "5 %"', 'liquid_flow = "500 %"',
     ("operating_point.uncertainty.liquid_flow", "100")),
    ("uncertainty-number", TUBE, 'liquid_flow = "5 %"', "liquid_flow = 5", ("operating_point.uncertainty.liquid_flow",)),
    ("uncertainty-distribution", TUBE, 'distribution = "uniform"', 'distribution = "triangle"',
     ("operating_point.uncertainty.gas_flow", "triangle")),
    ("uncertainty-distribution-number", TUBE, 'distribution = "uniform"', "distribution = 5",
     ("operating_point.uncertainty.gas_flow",)),
    ("uncertainty-size-huge", TUBE, 'surface_tension = "3 %"', 'surface_tension = "1e300 N/m"',
     ("operating_point.uncertainty.surface_tension",)),
    ("uncertainty-unknown", TUBE, 'surface_tension = "3 %"', 'surface_tension = "3 %"\ncolour = "5 %"',
     ("operating_point.uncertainty.colour",)),
    ("uncertainty-half-angle-of-a-tube", TUBE, 'surface_tension = "3 %"', 'surface_tension = "3 %"\nhalf_angle = "1 deg"',
     ("operating_point.uncertainty.half_angle", "corner half-angle")),
    ("uncertainty-not-table", TUBE,
     '[operating_point.uncertainty]\nliquid_flow = "5 %"\ngas_flow = { size = "10 %", distribution = "uniform" }\n'
     'surface_tension = "3 %"', "uncertainty = 5", ("operating_point.uncertainty",)),
    # --- tables, texts and versions
    ("schema-version-2", TUBE, "schema_version = 1", "schema_version = 2", ("schema_version",)),
    ("schema-version-true", TUBE, "schema_version = 1", "schema_version = true", ("schema_version",)),
    ("schema-version-text", TUBE, "schema_version = 1", 'schema_version = "1"', ("schema_version",)),
    ("title-number", TUBE, 'title = "Condensate', 'title = 5\nxtitle = "Condensate', ("title",)),
    ("title-long", TUBE, 'title = "Condensate', f'title = "{"t" * 300}Condensate', ("title", "at most 200")),
    ("description-long", TUBE, 'description = "', f'description = "{"d" * 6000}', ("description", "5,000")),
    ("invented-text", TUBE, "invented = true", 'invented = "yes"', ("invented",)),
    ("unknown-top-key", TUBE, "invented = true", "invented = true\ncolour = \"red\"", ("colour", "unknown key")),
    ("conduit-unknown-key", TUBE, 'length = "1.5 m"', 'length = "1.5 m"\nwidth = "1 m"', ("conduit.width",)),
]
# a number, text or list where a table belongs
for _name, _value in (("fluid", "5"), ("section", '"circle"'), ("wetting", "[1, 2]"), ("conduit", "1e300"),
                      ("chart", "true"), ("operating_point", '"3 L/min"')):
    C.append((f"{_name}-not-a-table", drop_table(TUBE, _name), "invented = true", f"invented = true\n{_name} = {_value}",
              (_name,)))
C += [
    ("table-missing", drop_table(TUBE, "wetting"), "invented = true", "invented = true", ("wetting", "missing")),
    # --- models and empirical boundaries
    ("models-number", TUBE, "invented = true", "invented = true\nmodels = 5", ("models",)),
    ("models-name-number", TUBE, "invented = true", "invented = true\nmodels = [{name = 5}]", ("models[0].name",)),
    ("models-unknown", TUBE + '\n[[models]]\nname = "no_such_model"\n', "", "",
     ("models[0].name", "unknown boundary model")),
    ("models-constants-number", TUBE + '\n[[models]]\nname = "bubble_slug_dukler_1988"\nconstants = 5\n', "", "",
     ("models[0].constants",)),
    ("models-constant-huge", TUBE + '\n[[models]]\nname = "bubble_slug_dukler_1988"\nconstants = {alpha_c = 1e300}\n',
     "", "", ("models[0].constants", "alpha_c")),
    ("models-constant-unknown", TUBE + '\n[[models]]\nname = "bubble_slug_dukler_1988"\nconstants = {beta = 1}\n',
     "", "", ("models[0].constants", "beta")),
    ("models-constant-text", TUBE + '\n[[models]]\nname = "bubble_slug_dukler_1988"\nconstants = {alpha_c = "x"}\n',
     "", "", ("models[0].constants.alpha_c",)),
    ("models-twice", TUBE + '\n[[models]]\nname = "bubble_slug_dukler_1988"\n[[models]]\nname = "bubble_slug_dukler_1988"\n',
     "", "", ("models[1].name", "twice")),
    ("models-does-not-apply", TUBE + '\n[[models]]\nname = "bubble_slug_taitel_1980"\n', "", "",
     ("models[0].name", "does not apply")),
    ("models-too-many", TUBE + '\n[[models]]\nname = "bubble_slug_dukler_1988"\n' * 51, "", "", ("models", "at most 50")),
    ("custom-boundaries-number", TUBE, "invented = true", "invented = true\ncustom_boundaries = 5",
     ("custom_boundaries",)),
    ("custom-boundary-unit-number",
     TUBE + '\n[[custom_boundaries]]\nname = "mine"\nkind = "power_law"\na = 1.0\nb = 1.0\nflow_unit = 5\n'
     'regime_below = "x"\nregime_above = "y"\n', "", "", ("custom_boundaries[0].flow_unit",)),
    ("custom-boundary-exponent-overflow",
     TUBE + '\n[[custom_boundaries]]\nname = "mine"\nkind = "power_law"\na = 1.0\nb = 1e300\nflow_unit = "L/min"\n'
     'regime_below = "x"\nregime_above = "y"\n', "", "", ("custom_boundaries[0].b", "[-10, 10]")),
    ("custom-boundary-points-many",
     TUBE + '\n[[custom_boundaries]]\nname = "mine"\nkind = "table"\nflow_unit = "L/min"\nregime_below = "x"\n'
     'regime_above = "y"\npoints = [' + ", ".join(f"[{i + 1}, {i + 2}]" for i in range(1001)) + "]\n", "", "",
     ("custom_boundaries[0].points", "1,000")),
    ("test-points-text", TUBE, "invented = true", 'invented = true\ntest_points = {files = "x.csv"}',
     ("test_points.files",)),
    ("test-points-number", TUBE, "invented = true", "invented = true\ntest_points = {files = [5]}",
     ("test_points.files[0]",)),
    # --- syntax and structure
    ("syntax-unclosed-string", TUBE, 'diameter = "12.7 mm"', 'diameter = "12.7 mm', ("(syntax)", "not valid TOML")),
    ("syntax-duplicate-key", TUBE, 'diameter = "12.7 mm"', 'diameter = "12.7 mm"\ndiameter = "1 mm"', ("(syntax)",)),
    ("syntax-deep-nesting", TUBE, "invented = true", "invented = true\nx = " + "[" * 5000 + "]" * 5000,
     ("(syntax)",)),
    ("syntax-nul-bytes", "\x00" * 64, "", "", ("(syntax)",)),
    ("empty-file", "", "", "", ("schema_version", "missing")),
    # --- sections with corners and vertices
    ("groove-half-angle-95", GROOVE, 'half_angle = "15 deg"', 'half_angle = "95 deg"', ("section.half_angle",)),
    ("groove-half-angle-huge", GROOVE, 'half_angle = "15 deg"', 'half_angle = "1e300 deg"', ("section.half_angle",)),
    ("groove-depth-huge", GROOVE, 'depth = "4 mm"', 'depth = "1e300 mm"', ("section.depth", "1 km")),
    ("groove-depth-date", GROOVE, 'depth = "4 mm"', "depth = 1979-05-27", ("section.depth",)),
    ("polygon-unit-list", POLYGON, 'vertices_unit = "mm"', 'vertices_unit = ["mm"]', ("section.vertices_unit",)),
    ("polygon-unit-date", POLYGON, 'vertices_unit = "mm"', "vertices_unit = 1979-05-27", ("section.vertices_unit",)),
    ("polygon-unit-mass", POLYGON, 'vertices_unit = "mm"', 'vertices_unit = "kg"', ("section.vertices_unit",)),
    ("polygon-vertices-number", POLYGON, "vertices = [[0, 0], [10, 0], [7, 6], [3, 6]]", "vertices = 5",
     ("section.vertices",)),
    ("polygon-vertex-triple", POLYGON, "vertices = [[0, 0], [10, 0], [7, 6], [3, 6]]",
     "vertices = [[0, 0, 1], [10, 0], [7, 6], [3, 6]]", ("section.vertices[0]",)),
    ("polygon-vertex-huge", POLYGON, "vertices = [[0, 0], [10, 0], [7, 6], [3, 6]]",
     'vertices = [["1e300 mm", 0], [10, 0], [7, 6], [3, 6]]', ("section.vertices[0]", "1 km")),
    ("polygon-vertex-nan", POLYGON, "vertices = [[0, 0], [10, 0], [7, 6], [3, 6]]",
     "vertices = [[nan, 0], [10, 0], [7, 6], [3, 6]]", ("section.vertices[0]",)),
    ("polygon-vertices-many", POLYGON, "vertices = [[0, 0], [10, 0], [7, 6], [3, 6]]",
     "vertices = [" + ", ".join(f"[{math.cos(k / 1001 * 2 * math.pi):.6f}, {math.sin(k / 1001 * 2 * math.pi):.6f}]"
                                for k in range(1001)) + "]", ("section.vertices", "at most 1,000")),
    ("polygon-open-edges-text", POLYGON, "vertices = [[0, 0], [10, 0], [7, 6], [3, 6]]",
     'vertices = [[0, 0], [10, 0], [7, 6], [3, 6]]\nopen_edges = "top"', ("section.open_edges",)),
    ("regular-polygon-1e9-sides", TUBE, 'kind = "circle"\ndiameter = "12.7 mm"',
     'kind = "regular_polygon"\nn_sides = 1000000000\nside = "1 mm"', ("section.n_sides", "at most 1,000")),
    ("regular-polygon-sides-float", TUBE, 'kind = "circle"\ndiameter = "12.7 mm"',
     'kind = "regular_polygon"\nn_sides = 6.5\nside = "1 mm"', ("section.n_sides", "whole number")),
    ("regular-polygon-sides-text", TUBE, 'kind = "circle"\ndiameter = "12.7 mm"',
     'kind = "regular_polygon"\nn_sides = "six"\nside = "1 mm"', ("section.n_sides",)),
]

CASE_ROWS = [Row(f"case-{cid}", ["check", "{case}"], needles, files={"case.toml": sub(base, old, new) if old else base})
             for cid, base, old, new, needles in C]
#: a computing command must refuse what check refuses: `margin` on every fourth case row
CASE_ROWS += [Row(f"margin-{r.id[5:]}", ["margin", "{case}"], r.needles, files=r.files) for r in CASE_ROWS[::4]]


# ============================================================================================ files
FILE_ROWS = [
    Row("file-missing", ["check", "{tmp}/none.toml"], ("no such file", "none.toml")),
    Row("file-missing-folder", ["check", "{tmp}/nowhere/case.toml"], ("no such file", "nowhere")),
    Row("file-folder", ["check", "{tmp}/folder"], ("folder",), files={"folder/x": "x"}),
    Row("file-under-a-file", ["check", "{case}/x.toml"], ("no such file",)),
    Row("file-dev-zero", ["check", "/dev/zero"], ("/dev/zero", "character device")),
    Row("file-dev-null-margin", ["margin", "/dev/null"], ("/dev/null", "character device")),
    Row("file-too-large", ["check", "{case}"], ("at most 1 MB",), files={"case.toml": TUBE + "#" * 1_200_000}),
    Row("file-not-utf8", ["check", "{case}"], ("not UTF-8", "line 6"),
        files={"case.toml": sub(TUBE, 'revision = "A"', 'revision = "\xe9"').encode("latin-1")}),
    Row("file-binary", ["check", "{case}"], ("not UTF-8",), files={"case.toml": bytes(range(256)) * 4}),
    Row("sweep-file-missing", ["sweep", "{case}", "{tmp}/none.toml", "--quiet"], ("no such sweep file",)),
    Row("sweep-file-folder", ["sweep", "{case}", "{tmp}/folder", "--quiet"], ("folder",), files={"folder/x": "x"}),
    Row("sweep-file-too-large", ["sweep", "{case}", "{sweep}", "--quiet"], ("at most 1 MB",),
        files={"sweep.toml": SWEEP + "#" * 1_100_000}),
    Row("sweep-file-dev-zero", ["sweep", "{case}", "/dev/zero", "--quiet"], ("character device",)),
    Row("goal-file-missing", ["design", "{case}", "{tmp}/none.toml", "--quiet"], ("no such goal file",)),
    Row("goal-file-not-utf8", ["design", "{case}", "{goal}", "--quiet"], ("not UTF-8",),
        files={"goal.toml": b"\xff\xfe\x00bad"}),
    Row("points-missing", ["compare", "{case}", "{tmp}/none.csv"], ("test-point file not found",)),
    Row("points-folder", ["compare", "{case}", "{tmp}/folder"], ("folder",), files={"folder/x": "x"}),
    Row("points-device", ["compare", "{case}", "/dev/zero"], ("not a regular file",)),
]


# ============================================================================================ options
OPTION_ROWS = [
    Row("margin-ql-mass", ["margin", "{case}", "--ql", "3 kg"], ("--ql",)),
    Row("margin-qg-word", ["margin", "{case}", "--qg", "fast"], ("--qg",)),
    Row("margin-ql-negative", ["margin", "{case}", "--ql=-3 L/min"], ("--ql", "> 0")),
    Row("margin-qg-1e12", ["margin", "{case}", "--qg", "1e12 L/min"], ("--qg", "[1e-15, 1000] m^3/s")),
    Row("margin-ql-overflow", ["margin", "{case}", "--ql", "1e400 L/min"], ("--ql", "finite")),
    Row("margin-ql-empty", ["margin", "{case}", "--ql", ""], ("--ql",)),
    Row("robust-regime", ["robust", "{case}", "--regime", "slug"], ("unknown regime 'slug'",)),
    Row("robust-range-reversed", ["robust", "{case}", "--regime", "dispersed bubbles", "--ql-range", "5 L/min",
                                  "1 L/min"], ("--ql-range",)),
    Row("robust-range-huge", ["robust", "{case}", "--regime", "dispersed bubbles", "--qg-range", "1 L/min",
                              "1e300 L/min"], ("--qg-range", "m^3/s")),
    Row("uncertainty-samples-1", ["uncertainty", "{case}", "--samples", "1"], ("--samples",)),
    Row("uncertainty-samples-1e8", ["uncertainty", "{case}", "--samples", "100000000"], ("--samples", "10,000,000")),
    Row("uncertainty-samples-2e9-text", ["uncertainty", "{case}", "--samples", "2e9"], ("--samples",)),
    Row("uncertainty-samples-default-draws", ["uncertainty", "{case}", "--samples", "10000000"],
        ("--chart-draws", "100,000")),
    Row("uncertainty-draws-0", ["uncertainty", "{case}", "--chart-draws", "0"], ("--chart-draws",)),
    Row("uncertainty-draws-1e6", ["uncertainty", "{case}", "--chart-draws", "1000000"], ("--chart-draws", "100,000")),
    Row("uncertainty-seed-negative", ["uncertainty", "{case}", "--seed", "-1"], ("--seed",)),
    Row("uncertainty-regime", ["uncertainty", "{case}", "--samples", "10", "--regime", "fizzy", "--quiet"],
        ("unknown regime",)),
    Row("corner-half-angle", ["corner", "--half-angle", "95 deg", "--contact-angle", "10 deg"], ("half_angle",)),
    Row("corner-contact-angle", ["corner", "--half-angle", "30 deg", "--contact-angle", "200 deg"], ("contact_angle",)),
    Row("corner-radius-negative", ["corner", "--half-angle", "30 deg", "--contact-angle", "10 deg", "--radius",
                                   "-1 mm"], ("--radius",)),
    Row("corner-radius-huge", ["corner", "--half-angle", "30 deg", "--contact-angle", "10 deg", "--radius",
                               "1e300 mm"], ("--radius", "1 km")),
    Row("corner-angle-nan", ["corner", "--half-angle", "nan deg", "--contact-angle", "10 deg"], ("--half-angle",)),
    Row("limit-entrance-negative", ["limit", "{case}", "--entrance-loss", "-1"], ("--entrance-loss",)),
    Row("limit-entrance-nan", ["limit", "{case}", "--entrance-loss", "nan"], ("--entrance-loss",)),
    Row("limit-entrance-huge", ["limit", "{case}", "--entrance-loss", "1e9"], ("--entrance-loss", "100")),
    Row("limit-closed-section", ["limit", "{case}"], ("open channels",)),
    Row("sweep-workers-0", ["sweep", "{case}", "{sweep}", "--workers", "0", "--quiet"], ("--workers", "[1, 256]")),
    Row("sweep-workers-negative", ["sweep", "{case}", "{sweep}", "--workers", "-3", "--quiet"], ("--workers",)),
    Row("sweep-workers-huge", ["sweep", "{case}", "{sweep}", "--workers", "100000", "--quiet"], ("--workers",)),
    Row("sweep-workers-and-scheduler", ["sweep", "{case}", "{sweep}", "--workers", "2", "--scheduler",
                                        "tcp://127.0.0.1:1"], ("not allowed with",)),
    Row("sweep-scheduler-closed-port", ["sweep", "{case}", "{sweep}", "--scheduler", "tcp://127.0.0.1:1", "--quiet"],
        ("--scheduler", "tcp://127.0.0.1:1")),
    Row("sweep-scheduler-no-port", ["sweep", "{case}", "{sweep}", "--scheduler", "tcp://127.0.0.1", "--quiet"],
        ("--scheduler",)),
    Row("calibrate-starts-0", ["calibrate", "{case}", "{points}", "--fit", "bubble_slug_dukler_1988.alpha_c",
                               "--starts", "0"], ("--starts",)),
    Row("calibrate-starts-huge", ["calibrate", "{case}", "{points}", "--fit", "bubble_slug_dukler_1988.alpha_c",
                                  "--starts", "1000000"], ("--starts", "100")),
    Row("calibrate-folds-1", ["calibrate", "{case}", "{points}", "--fit", "bubble_slug_dukler_1988.alpha_c",
                              "--folds", "1"], ("--folds",)),
    Row("calibrate-folds-huge", ["calibrate", "{case}", "{points}", "--fit", "bubble_slug_dukler_1988.alpha_c",
                                 "--folds", "1000000"], ("--folds",)),
    Row("calibrate-neither", ["calibrate", "{case}", "{points}"], ("either --fit",)),
    Row("calibrate-unknown-model", ["calibrate", "{case}", "{points}", "--fit", "no_such_model.alpha_c"],
        ("no_such_model",)),
    Row("compare-length-huge", ["compare", "{case}", "{points}", "--length", "1e300 m"], ("--length", "1 km")),
    Row("compare-bond-nan", ["compare", "{case}", "{points}", "--bond-max", "nan"], ("bond_max",)),
    Row("compare-map-form", ["compare", "{case}", "{points}", "--map", "annular"], ("LABEL=REGIME",)),
    Row("serve-port", ["serve", "{case}", "--port", "70000"], ("--port", "65535")),
    Row("serve-address-foreign", ["serve", "{case}", "--address", "203.0.113.77", "--port", "0"],
        ("--address", "not an address of this machine")),
    Row("serve-address-unresolvable", ["serve", "{case}", "--address", "no-such-host.invalid", "--port", "0"],
        ("--address",)),
    Row("serve-bad-case", ["serve", "{case}"], ("section.diameter",),
        files={"case.toml": sub(TUBE, 'diameter = "12.7 mm"', 'diameter = "1e300 mm"')}),
    Row("chart-axes-choice", ["chart", "{case}", "-o", "{tmp}/c.png", "--axes", "sideways"], ("--axes",)),
    Row("samples-unknown", ["samples", "--copy", "{tmp}/s", "no_such_sample"], ("no_such_sample",)),
]


# ============================================================================================ study files
def _sweep(old, new):
    return {"sweep.toml": sub(SWEEP, old, new)}


def _goal(old, new):
    return {"goal.toml": sub(GOAL, old, new)}


S = ["sweep", "{case}", "{sweep}", "--quiet"]
G = ["design", "{case}", "{goal}", "--quiet"]
STUDY_ROWS = [
    Row("sweep-steps-1e12", S, ("variables[0].steps", "10,000"), files=_sweep("steps = 3", "steps = 1000000000000")),
    Row("sweep-steps-0", S, ("variables[0].steps",), files=_sweep("steps = 3", "steps = 0")),
    Row("sweep-steps-float", S, ("variables[0].steps",), files=_sweep("steps = 3", "steps = 2.5")),
    Row("sweep-steps-text", S, ("variables[0].steps",), files=_sweep("steps = 3", 'steps = "3"')),
    Row("sweep-values-many", S, ("variables[1].values", "10,000"),
        files=_sweep('values = ["0.5 m", "1.5 m"]', "values = [" + ", ".join(['"1 m"'] * 10_001) + "]")),
    Row("sweep-grid-too-big", S, ("variables", "400 x 400", "100,000"),
        files={"sweep.toml": sub(sub(SWEEP, "steps = 3", "steps = 400"), 'values = ["0.5 m", "1.5 m"]',
                                 'from = "0.5 m"\nto = "1.5 m"\nsteps = 400')}),
    Row("sweep-paired-lengths", S, ("same number of values",),
        files={"sweep.toml": sub(SWEEP, 'required_margin = "30 %"', 'required_margin = "30 %"\ncombine = "paired"')}),
    Row("sweep-combine-list", S, ("sweep.combine",), files=_sweep('required_margin = "30 %"',
                                                                   'required_margin = "30 %"\ncombine = ["grid"]')),
    Row("sweep-from-huge", S, ("variables[0].from", "1 km"), files=_sweep('from = "6 mm"', 'from = "1e300 mm"')),
    Row("sweep-to-nan", S, ("variables[0].to",), files=_sweep('to = "30 mm"', 'to = "nan mm"')),
    Row("sweep-name-number", S, ("variables[0].name",), files=_sweep('name = "size"', "name = 5")),
    Row("sweep-name-unknown", S, ("variables[0].name", "unknown sweep variable"),
        files=_sweep('name = "size"', 'name = "colour"')),
    Row("sweep-spacing", S, ("variables[0].spacing",), files=_sweep("steps = 3", 'steps = 3\nspacing = "cubic"')),
    Row("sweep-spacing-list", S, ("variables[0].spacing",), files=_sweep("steps = 3", 'steps = 3\nspacing = ["log"]')),
    Row("sweep-unit-number", S, ("variables[0].unit",), files=_sweep("steps = 3", "steps = 3\nunit = 5")),
    Row("sweep-table-number", S, ("sweep",), files={"sweep.toml": "sweep = 5\n" + SWEEP.split("\n", 2)[2]}),
    Row("sweep-variables-number", S, ("variables",), files={"sweep.toml": "variables = 5\n"}),
    Row("sweep-mc-1e9", S, ("monte_carlo.samples", "100,000"),
        files={"sweep.toml": SWEEP + "[monte_carlo]\nsamples = 1000000000\n"}),
    Row("sweep-mc-one", S, ("monte_carlo.samples",), files={"sweep.toml": SWEEP + "[monte_carlo]\nsamples = 1\n"}),
    Row("sweep-mc-text", S, ("monte_carlo",), files={"sweep.toml": 'monte_carlo = "lots"\n' + SWEEP}),
    Row("sweep-chunk-0", S, ("sweep.chunk_size",), files=_sweep('required_margin = "30 %"',
                                                                 'required_margin = "30 %"\nchunk_size = 0')),
    Row("sweep-envelope-huge", S, ("envelope.liquid_flow[1]",),
        files={"sweep.toml": SWEEP + '[envelope]\nliquid_flow = ["1 L/min", "1e300 L/min"]\ngas_flow = ["1 L/min", '
                                     '"2 L/min"]\n'}),
    Row("sweep-envelope-number", S, ("envelope",), files={"sweep.toml": "envelope = 5\n" + SWEEP}),
    Row("sweep-required-margin", S, ("sweep.required_margin",), files=_sweep('"30 %"', '"200 %"')),
    Row("sweep-syntax", S, ("(syntax)",), files=_sweep("steps = 3", "steps = = 3")),
    Row("goal-screen-1e9", G, ("goal.screen", "100,000"), files=_goal("screen = 8", "screen = 1000000000")),
    Row("goal-starts-0", G, ("goal.starts",), files=_goal("starts = 1", "starts = 0")),
    Row("goal-starts-huge", G, ("goal.starts", "100"), files=_goal("starts = 1", "starts = 1000")),
    Row("goal-evaluations-1e9", G, ("goal.max_evaluations",),
        files=_goal("max_evaluations = 20", "max_evaluations = 1000000000")),
    Row("goal-planned-too-many", G, ("goal", "1,000,000"),
        files=_goal("starts = 1\nscreen = 8\nmax_evaluations = 20", "starts = 100\nscreen = 8\nmax_evaluations = 10000")),
    Row("goal-seed-negative", G, ("goal.seed",), files=_goal("starts = 1", "starts = 1\nseed = -1")),
    Row("goal-fluids-number", G, ("goal.fluids",), files=_goal("starts = 1", "starts = 1\nfluids = 5")),
    Row("goal-fluids-date", G, ("goal.fluids[0]",), files=_goal("starts = 1", "starts = 1\nfluids = [1979-05-27]")),
    Row("goal-constraints-number", G, ("constraints",), files={"goal.toml": "constraints = 5\n" + GOAL}),
    Row("goal-low-huge", G, ("variables[0].low",), files=_goal('low = "6 mm"', 'low = "1e300 mm"')),
    Row("goal-scale", G, ("variables[0].scale",), files=_goal('high = "30 mm"', 'high = "30 mm"\nscale = "cubic"')),
    Row("goal-required-margin", G, ("goal.required_margin",),
        files=_goal("starts = 1", 'starts = 1\nrequired_margin = "150 %"')),
    Row("goal-table-number", G, ("goal",), files={"goal.toml": "goal = 5\n"}),
    Row("goal-variables-many", G, ("variables", "at most 20"),
        files={"goal.toml": GOAL + '[[variables]]\nname = "length"\nlow = "1 m"\nhigh = "2 m"\n' * 20}),
]


# ============================================================================================ outputs
OUTPUT_ROWS = [
    Row("chart-exists", ["chart", "{case}", "-o", "{tmp}/old.png"], ("old.png", "exists", "--force"),
        existing=("old.png",)),
    Row("chart-suffix", ["chart", "{case}", "-o", "{tmp}/c.gif"], (".png, .svg or .pdf",)),
    Row("chart-no-suffix", ["chart", "{case}", "-o", "{tmp}/chart"], ("-o",)),
    Row("chart-folder", ["chart", "{case}", "-o", "{tmp}/out.png"], ("is a folder",), files={"out.png/x": "x"}),
    Row("chart-under-a-file", ["chart", "{case}", "-o", "{tmp}/points.csv/c.png"], ("is a file, not a folder",)),
    Row("chart-deep-under-a-file", ["chart", "{case}", "-o", "{tmp}/points.csv/a/b/c.png"],
        ("is a file, not a folder",)),
    Row("chart-exists-bad-case", ["chart", "{case}", "-o", "{tmp}/old.svg"], ("--force",), existing=("old.svg",),
        files={"case.toml": "garbage"}),
    Row("sweep-csv-exists", S + ["-o", "{tmp}/results.csv"], ("results.csv", "--force"), existing=("results.csv",)),
    Row("sweep-over-test-points", S + ["-o", "{points}"], ("points.csv", "--force")),
    Row("sweep-xlsx", S + ["-o", "{tmp}/x.xlsx"], ("-o must end in .csv or .parquet",)),
    Row("sweep-csv-folder", S + ["-o", "{tmp}/dir.csv"], ("is a folder",), files={"dir.csv/x": "x"}),
    Row("sweep-csv-under-a-file", S + ["-o", "{case}/r.csv"], ("is a file, not a folder",)),
    Row("sweep-plot-exists", S + ["--plot", "{tmp}/map.png"], ("map.png", "--force"), existing=("map.png",)),
    Row("sweep-plot-suffix", S + ["--plot", "{tmp}/map.jpg"], ("--plot", ".png, .svg or .pdf")),
    Row("sweep-empty-output", S + ["-o", ""], ("-o",)),
    Row("design-plot-exists", G + ["--plot", "{tmp}/best.png"], ("best.png", "--force"), existing=("best.png",)),
    Row("design-plot-suffix", G + ["--plot", "{tmp}/best.bmp"], ("--plot",)),
    Row("calibrate-exists", ["calibrate", "{case}", "{points}", "--fit", "bubble_slug_dukler_1988.alpha_c", "-o",
                             "{tmp}/new.toml"], ("new.toml", "--force"), existing=("new.toml",)),
    Row("calibrate-over-the-case", ["calibrate", "{case}", "{points}", "--fit", "bubble_slug_dukler_1988.alpha_c",
                                    "-o", "{case}", "--force"], ("also an input",)),
    Row("calibrate-suffix", ["calibrate", "{case}", "{points}", "--fit", "bubble_slug_dukler_1988.alpha_c", "-o",
                             "{tmp}/new.txt"], (".toml",)),
    Row("samples-copy-exists", ["samples", "--copy", "{tmp}/s", "condensate_line"], ("--force",),
        files={"s/condensate_line.toml": "mine"}),
    Row("samples-copy-under-a-file", ["samples", "--copy", "{case}", "condensate_line"], ("case.toml",)),
]

ALL_ROWS = CASE_ROWS + FILE_ROWS + OPTION_ROWS + STUDY_ROWS + OUTPUT_ROWS


def test_the_catalogue_is_large_and_its_rows_are_distinct():
    assert len(ALL_ROWS) >= 150, len(ALL_ROWS)
    ids = [r.id for r in ALL_ROWS]
    assert len(set(ids)) == len(ids), sorted({i for i in ids if ids.count(i) > 1})
    assert len({(tuple(r.argv), tuple(sorted((k, str(v)) for k, v in r.files.items()))) for r in ALL_ROWS}) \
        == len(ALL_ROWS)


@pytest.mark.parametrize("row", ALL_ROWS, ids=lambda r: r.id)
def test_bad_input_ends_in_a_message(row, tmp_path, capsys):
    check_row(row, tmp_path, capsys)


# ============================================================================================ named pipes
_PIPE_RUNNER = """\
import sys
from lowgmap.app.cli import main
for argv in (sys.argv[1:2] and [["check", sys.argv[1]], ["sweep", sys.argv[2], sys.argv[1], "--quiet"],
                                ["design", sys.argv[2], sys.argv[1], "--quiet"]]):
    print("EXIT", main(argv), file=sys.stderr, flush=True)
"""


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes are POSIX")
def test_a_named_pipe_is_refused_at_once(tmp_path):
    # a named pipe as the case, the sweep and the goal file; it must be refused without waiting for a
    # writer (one interpreter runs the three commands; the timeout guards against a hang only)
    fifo = tmp_path / "pipe.toml"
    os.mkfifo(fifo)
    case = tmp_path / "case.toml"
    case.write_text(TUBE, encoding="utf-8")
    proc = subprocess.run([sys.executable, "-c", _PIPE_RUNNER, str(fifo), str(case)], capture_output=True,
                          text=True, timeout=120, stdin=subprocess.DEVNULL)
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr.count("EXIT 2") == 3, proc.stderr
    assert proc.stderr.count("named pipe") == 3 and "pipe.toml" in proc.stderr
    assert "Traceback" not in proc.stderr


# ============================================================================================ --force and writes
def test_force_replaces_atomically_and_leaves_no_temporary(tmp_path, capsys):
    case = tmp_path / "case.toml"
    case.write_text(TUBE, encoding="utf-8")
    out = tmp_path / "chart.svg"
    out.write_text("old", encoding="utf-8")
    code, _, err = run_cli(capsys, ["chart", str(case), "-o", str(out), "--force"])
    assert code == 0, err
    assert out.read_text(encoding="utf-8").startswith("<?xml")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["case.toml", "chart.svg"]
    assert case.read_text(encoding="utf-8") == TUBE


def test_sweep_prints_an_estimate_and_refuses_to_overwrite(tmp_path, capsys):
    (tmp_path / "case.toml").write_text(TUBE, encoding="utf-8")
    (tmp_path / "sweep.toml").write_text(SWEEP, encoding="utf-8")
    out = tmp_path / "r.csv"
    argv = ["sweep", str(tmp_path / "case.toml"), str(tmp_path / "sweep.toml"), "-o", str(out)]
    code, _, err = run_cli(capsys, argv)
    assert code == 0, err
    assert re.search(r"about 6 designs, estimated (under 1 s|~\d)", err), err
    first = out.read_bytes()
    code, _, err = run_cli(capsys, argv)
    assert code == 2 and "--force" in err and out.read_bytes() == first


# ============================================================================================ internal errors
def test_an_internal_error_is_one_line_with_a_report_hint(monkeypatch, tmp_path, capsys):
    import lowgmap.app.cli.section as section

    def broken(args):
        raise RuntimeError("a defect")

    monkeypatch.setattr(section, "run", broken)
    case = str(sample_case_path("condensate_line"))
    code, out, err = run_cli(capsys, ["section", case])
    assert code == 1
    assert err.strip() == ("lowgmap section: internal error (RuntimeError: a defect); please report it with the "
                           "command line and the case file; run with --debug for the details")
    assert "Traceback" not in err
    code, _, err = run_cli(capsys, ["--debug", "section", case])
    assert code == 1 and "Traceback" in err and "RuntimeError: a defect" in err
    code, _, err = run_cli(capsys, ["section", case, "--debug"])       # --debug may follow the command
    assert code == 1 and "Traceback" in err


@pytest.mark.parametrize("exc, code, needle", [
    (ValueError("plain value error"), 1, "internal error (ValueError: plain value error)"),  # no longer a user error
    (MemoryError(), 1, "internal error (MemoryError)"),
    (InputError("length must be > 0"), 2, "lowgmap section: length must be > 0"),
    (PermissionError(13, "Permission denied", "/root/x.toml"), 2, "/root/x.toml: Permission denied"),
    (KeyboardInterrupt(), 130, "interrupted"),
])
def test_error_types_decide_the_exit_code(monkeypatch, capsys, exc, code, needle):
    import lowgmap.app.cli.section as section

    def broken(args):
        raise exc

    monkeypatch.setattr(section, "run", broken)
    got, _, err = run_cli(capsys, ["section", str(sample_case_path("condensate_line"))])
    assert got == code and needle in err and "Traceback" not in err


def test_user_error_types_are_input_errors_and_value_errors():
    from lowgmap.app.cli import CliError
    from lowgmap.app.files.problems import CaseFileError
    from lowgmap.app.files.reading import FileReadError
    from lowgmap.app.files.units import UnitError

    for cls in (CliError, CaseFileError, FileReadError, UnitError):
        assert issubclass(cls, InputError) and issubclass(cls, ValueError), cls


# ============================================================================================ check = compute
@pytest.mark.parametrize("old, new", [
    ('diameter = "12.7 mm"', 'diameter = "1 um"'),
    ('diameter = "12.7 mm"', 'diameter = "1 km"'),
    ('length = "1.5 m"', 'length = "1 um"'),
    ('residual_acceleration = "1e-6 g0"', 'residual_acceleration = "100 g0"'),
    ('residual_acceleration = "1e-6 g0"', 'residual_acceleration = "0 g0"'),
    ('liquid_flow = "3 L/min"', 'liquid_flow = "1000 m^3/s"'),
    ('gas_flow = "400 sccm"', 'gas_flow = "1e-15 m^3/s"'),
])
def test_what_check_accepts_margin_computes(tmp_path, capsys, old, new):
    # bounds of the case file: a case `check` calls valid is one `margin` computes (exit 0), never a defect
    case = tmp_path / "case.toml"
    case.write_text(sub(TUBE, old, new), encoding="utf-8")
    code, _, err = run_cli(capsys, ["check", str(case)])
    assert code == 0, err
    code, out, err = run_cli(capsys, ["margin", str(case), "--json"])
    assert code == 0, err
    assert "Traceback" not in err


# ============================================================================================ fuzzing
_KEYS = ["schema_version", "title", "fluid", "liquid", "gas", "temperature", "pressure", "section", "kind",
         "diameter", "half_angle", "depth", "vertices", "vertices_unit", "n_sides", "wetting", "contact_angle",
         "conduit", "length", "residual_acceleration", "chart", "liquid_flow", "gas_flow", "operating_point",
         "uncertainty", "models", "name", "constants", "custom_boundaries", "test_points", "files", "overrides",
         "required_margin", "axes", "size", "distribution"]
_QUANTITY = st.builds(lambda x, u: f"{x} {u}",
                      st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(-10 ** 30, 10 ** 30)),
                      st.sampled_from(["mm", "m", "km", "um", "deg", "rad", "degC", "K", "kPa", "Pa", "g0", "m/s^2",
                                       "L/min", "mL/min", "sccm", "%", "N/m", "kg/m^3", "mPa*s", "s", "", "m^3/s"]))
_SCALAR = st.one_of(
    st.none(), st.booleans(), st.integers(-2 ** 63, 2 ** 63 - 1), st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=30), _QUANTITY, st.sampled_from(["water", "air", "circle", "groove", "polygon", "flow"]),
    st.dates(), st.datetimes(timezones=st.just(datetime.timezone.utc)), st.times())
_VALUE = st.recursive(_SCALAR, lambda inner: st.one_of(st.lists(inner, max_size=4),
                                                        st.dictionaries(st.sampled_from(_KEYS), inner, max_size=4)),
                      max_leaves=12)
_DOCUMENT = st.dictionaries(st.sampled_from(_KEYS), _VALUE, max_size=8)


def _loads_only_input_errors(text: str) -> None:
    try:
        loads_case(text)
    except InputError:
        pass


def _toml(data) -> str | None:
    """TOML text of ``data`` (None for what TOML cannot hold: None values, mixed arrays...)."""
    try:
        return tomlkit.dumps(_no_none(data))
    except Exception:
        return None


def _no_none(obj):
    if isinstance(obj, dict):
        return {k: _no_none(v) for k, v in obj.items() if v is not None}
    if isinstance(obj, list):
        return [_no_none(v) for v in obj if v is not None]
    return obj


@settings(max_examples=120, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(_DOCUMENT)
def test_fuzz_random_documents_give_only_input_errors(data):
    text = _toml(data)
    if text is not None:
        _loads_only_input_errors(text)


_SAMPLES = {p.name: tomlkit.parse(p.read_text(encoding="utf-8")).unwrap() for p in sorted(SAMPLE_DIR.glob("*.toml"))}


def _leaf_paths(obj, path=()):
    if path:
        yield path
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from _leaf_paths(v, path + (k,))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield from _leaf_paths(v, path + (i,))


@settings(max_examples=150, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(st.sampled_from(sorted(_SAMPLES)), st.data())
def test_fuzz_mutated_samples_give_only_input_errors(name, data):
    import copy

    doc = copy.deepcopy(_SAMPLES[name])
    paths = list(_leaf_paths(doc))
    for _ in range(data.draw(st.integers(1, 3))):
        path = data.draw(st.sampled_from(paths))
        parent = doc
        try:
            for p in path[:-1]:
                parent = parent[p]
            action = data.draw(st.sampled_from(["replace", "replace", "delete", "add"]))
            if action == "delete":
                del parent[path[-1]]
            elif action == "add" and isinstance(parent, dict):
                parent[data.draw(st.sampled_from(_KEYS))] = data.draw(_VALUE)
            else:
                parent[path[-1]] = data.draw(_VALUE)
        except (KeyError, IndexError, TypeError):
            continue                                    # an earlier mutation removed or replaced the path
    text = _toml(doc)
    if text is not None:
        _loads_only_input_errors(text)


@settings(max_examples=150, deadline=None, derandomize=True)
@given(st.text(max_size=400))
def test_fuzz_random_text_gives_only_input_errors(text):
    _loads_only_input_errors(text)


@settings(max_examples=200, deadline=None, derandomize=True)
@given(st.one_of(_QUANTITY, st.text(max_size=60), _SCALAR),
       st.sampled_from(["length", "flow", "angle", "temperature", "pressure", "acceleration", "dimensionless"]))
def test_fuzz_quantities_give_only_unit_errors(value, kind):
    from lowgmap.app.files.units import UnitError, to_si

    try:
        x = to_si(value, kind, "field")
    except UnitError as exc:
        assert "field" in str(exc)
    else:
        assert math.isfinite(x)

