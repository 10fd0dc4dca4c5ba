"""Case files: load, validate (all problems at once, with key paths and lines), save atomically."""
import math
import os

import pytest
import tomlkit
from hypothesis import HealthCheck, given, settings, strategies as st

from lowgmap.app.files.casefile import (SAMPLE_DIR, CaseFileError, dumps_case, load_case, loads_case, sample_case_path,
                          save_case)

SAMPLES = sorted(SAMPLE_DIR.glob("*.toml"))

GOOD = """\
schema_version = 1
title = "unit-test tube"
revision = "B"

[fluid]
liquid = "water"
gas = "air"
temperature = "20 degC"
pressure = "101.325 kPa"

[section]
kind = "circle"
diameter = "12.7 mm"

[wetting]
contact_angle = "30 deg"

[conduit]
length = "1 m"
residual_acceleration = "1e-5 g0"

[chart]
liquid_flow = ["10 mL/min", "10 L/min"]
gas_flow = ["10 mL/min", "10 L/min"]

[operating_point]
liquid_flow = "1 L/min"
gas_flow = "100 sccm"
"""


def test_there_are_at_least_three_invented_samples():
    assert len(SAMPLES) >= 3
    for p in SAMPLES:
        text = p.read_text()
        assert "INVENTED" in text.upper(), p
        assert load_case(p).invented, p


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_every_sample_case_loads(path):
    doc = load_case(path)
    c = doc.case
    assert c.length > 0 and c.g >= 0
    assert c.fluid.sigma > 0 and c.section.area > 0
    assert doc.path == path


def test_good_case_values_are_si():
    doc = loads_case(GOOD)
    c = doc.case
    assert c.section.hydraulic_diameter == pytest.approx(0.0127)
    assert c.wetting.contact_angle == pytest.approx(math.radians(30))
    assert c.g == pytest.approx(9.80665e-5)  # 1e-5 g0, g0 = 9.80665 m/s^2 (CGPM 1901)
    assert c.operating_point.ql == pytest.approx(1e-3 / 60)
    # 100 sccm at 20 degC, 101.325 kPa: ideal gas, reference 0 degC / 1 atm (SEMI E12)
    assert c.operating_point.qg == pytest.approx(100e-6 / 60 * 293.15 / 273.15)
    assert c.revision == "B"


def _problems(text):
    with pytest.raises(CaseFileError) as info:
        loads_case(text)
    return info.value.problems


def test_broken_case_reports_every_problem_with_path_value_and_line():
    bad = (GOOD.replace('diameter = "12.7 mm"', 'diameter = "-3 mm"')
               .replace('contact_angle = "30 deg"', 'contact_angle = "210 deg"')
               .replace('length = "1 m"', 'length = "2 s"')
               .replace('liquid = "water"', 'liquid = "unobtainium"'))
    probs = _problems(bad)
    paths = {p.path for p in probs}
    assert {"section.diameter", "wetting.contact_angle", "conduit.length", "fluid"} <= paths, probs
    by = {p.path: p for p in probs}
    assert "210" in by["wetting.contact_angle"].message and "180" in by["wetting.contact_angle"].message
    assert "time" in by["conduit.length"].message and "length" in by["conduit.length"].message
    assert "unobtainium" in by["fluid"].message
    assert "-3" in by["section.diameter"].message or "-0.003" in by["section.diameter"].message
    assert by["conduit.length"].line == 19
    assert by["wetting.contact_angle"].line == 16
    assert by["section.diameter"].line == 13


def test_missing_tables_and_keys_are_named():
    text = 'schema_version = 1\n[fluid]\nliquid = "water"\n'
    probs = _problems(text)
    msgs = {p.path: p.message for p in probs}
    assert "fluid.temperature" in msgs
    for table in ("section", "wetting", "conduit"):
        assert "missing table" in msgs[table]


def test_unknown_keys_and_schema_version():
    probs = _problems(GOOD.replace("schema_version = 1", "schema_version = 99\ncolour = \"red\""))
    msgs = {p.path: p.message for p in probs}
    assert "unsupported version" in msgs["schema_version"]
    assert "unknown key" in msgs["colour"]
    assert _problems(GOOD.replace("schema_version = 1\n", ""))[0].path == "schema_version"


def test_syntax_error_names_line():
    probs = _problems(GOOD.replace('revision = "B"', 'revision = "B'))
    assert probs[0].path == "(syntax)" and probs[0].line == 3


def test_standard_flow_rejected_for_liquid():
    probs = _problems(GOOD.replace('liquid_flow = "1 L/min"', 'liquid_flow = "100 sccm"'))
    assert probs[0].path == "operating_point.liquid_flow"
    assert "only valid for a gas" in probs[0].message


def test_bad_section_kind_and_polygon():
    probs = _problems(GOOD.replace('kind = "circle"', 'kind = "blob"'))
    assert probs[0].path == "section.kind" and "circle" in probs[0].message
    poly = GOOD.replace('kind = "circle"\ndiameter = "12.7 mm"',
                        'kind = "polygon"\nvertices_unit = "mm"\nvertices = [[0, 0], [1, 1], [1, 0], [0, 1]]')
    probs = _problems(poly)
    assert probs[0].path.startswith("section") and "cross" in probs[0].message.lower()


def test_chart_range_order_and_margin():
    probs = _problems(GOOD.replace('liquid_flow = ["10 mL/min", "10 L/min"]', 'liquid_flow = ["10 L/min", "1 L/min"]')
                      + 'required_margin = "150 %"\n'.replace("required", "x_required"))
    paths = {p.path for p in probs}
    assert "chart" in paths


def test_round_trip_is_exact_and_atomic(tmp_path):
    src = sample_case_path()
    doc = load_case(src)
    out = tmp_path / "copy.toml"
    doc.save(out)
    assert out.read_text() == src.read_text()  # byte-exact, comments kept
    assert load_case(out).case == doc.case


def test_save_is_atomic_when_interrupted(tmp_path, monkeypatch):
    target = tmp_path / "case.toml"
    target.write_text("original")
    data = tomlkit.parse(GOOD)

    def boom(*a, **k):
        raise KeyboardInterrupt("simulated interruption")

    monkeypatch.setattr(os, "replace", boom)
    with pytest.raises(KeyboardInterrupt):
        save_case(data, target)
    assert target.read_text() == "original"
    assert [p.name for p in tmp_path.iterdir()] == ["case.toml"]  # no temporary file left behind


def test_missing_file_is_a_clear_error(tmp_path):
    with pytest.raises(CaseFileError, match="no such file"):
        load_case(tmp_path / "nope.toml")


_names = st.text(alphabet=st.characters(whitelist_categories=("L", "N"), whitelist_characters=" -_"),
                 min_size=1, max_size=30)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(title=_names, diameter=st.floats(0.1, 100.0), theta=st.floats(0.0, 179.0),
       length=st.floats(0.01, 10.0), g=st.floats(0.0, 1.0), ql=st.floats(1.0, 100.0))
def test_round_trip_property(title, diameter, theta, length, g, ql):
    data = tomlkit.parse(GOOD)
    data["title"] = title
    data["section"]["diameter"] = f"{diameter!r} mm"
    data["wetting"]["contact_angle"] = f"{theta!r} deg"
    data["conduit"]["length"] = f"{length!r} m"
    data["conduit"]["residual_acceleration"] = f"{g!r} g0"
    data["operating_point"]["liquid_flow"] = f"{ql!r} mL/min"
    text = dumps_case(data)
    doc = loads_case(text)
    again = loads_case(dumps_case(doc.data))
    assert dumps_case(again.data) == text
    assert again.case == doc.case
    assert doc.case.section.hydraulic_diameter == pytest.approx(diameter * 1e-3)
    assert doc.case.title == title


def test_custom_boundaries_with_units_are_converted_and_checked():
    from lowgmap.physics.models.boundary import case_boundaries
    from lowgmap.physics.chart.composition import Chart

    # models_replace_defaults: this chart is the rig's own lines only (merged onto the tube defaults, the
    # tube regimes would join "few bubbles" / "many bubbles")
    text = "models_replace_defaults = true\n" + GOOD + '''
[[models]]
name = "rig_line"

[[custom_boundaries]]
name = "rig_line"
kind = "power_law"
a = 0.5
b = 1.0
flow_unit = "L/min"
regime_below = "few bubbles"
regime_above = "many bubbles"

[[custom_boundaries]]
name = "rig_table"
kind = "table"
points = [["1 L/min", "0.1 L/min"], ["10 L/min", "2 L/min"]]
regime_below = "few bubbles"
regime_above = "many bubbles"
'''
    doc = loads_case(text)
    lines = case_boundaries(doc.case)
    # Q_G = 0.5 Q_L with both in L/min is Q_G = 0.5 Q_L in SI when b = 1 (unit-free ratio)
    q = 2e-4
    assert lines["rig_line"].qg_of_ql(doc.case, q) == pytest.approx(0.5 * q)
    assert lines["rig_table"].qg_of_ql(doc.case, 1e-3 / 60) == pytest.approx(0.1e-3 / 60)
    chart = Chart.build(doc.case)
    assert chart.regime_names == ("few bubbles", "many bubbles")


def test_custom_boundary_problems_are_named():
    text = GOOD + '''
[[custom_boundaries]]
name = "bad"
kind = "table"
points = [["1 L/min", "0.1 s"]]
regime_below = "a"
regime_above = "b"

[[custom_boundaries]]
name = "bad2"
kind = "power_law"
a = 1.0
b = 1.0
flow_unit = "furlong"
regime_below = "a"
regime_above = "b"
'''
    probs = _problems(text)
    paths = {p.path for p in probs}
    assert "custom_boundaries[0].points[0]" in paths
    assert "custom_boundaries[1].flow_unit" in paths


# ------------------------------------------------------------------------- one table of section kinds
def test_section_kinds_and_fields_come_from_the_physics_table():
    # the case-file reader asks lowgmap.physics.geometry.sections for the kinds and their fields:
    # every required field of every kind is reported missing by name when left out
    from lowgmap.physics.geometry.sections import SECTION_KINDS, section_fields

    head, tail = GOOD.split('[section]\nkind = "circle"\ndiameter = "12.7 mm"\n')
    for kind in SECTION_KINDS:
        probs = _problems(f'{head}[section]\nkind = "{kind}"\n{tail}')
        missing = {p.path for p in probs if p.message.startswith("missing (required")}
        assert missing == {f"section.{f.name}" for f in section_fields(kind) if f.required}, kind
    probs = _problems(GOOD.replace('diameter = "12.7 mm"', 'diameter = "12.7 mm"\ndepth = "1 mm"'))
    assert probs[0].path == "section.depth" and "allowed here: diameter, kind, vertices_unit" in probs[0].message
    msg = _problems(GOOD.replace('kind = "circle"', 'kind = "blob"'))[0].message
    assert all(kind in msg for kind in SECTION_KINDS)


# ------------------------------------------------------------------------- atomic writes
def test_write_atomic_replaces_keeps_mode_and_can_refuse(tmp_path):
    from lowgmap.app.files.atomic import write_atomic

    target = tmp_path / "deep" / "case.toml"
    assert write_atomic(target, "title = \"é\"\n") == target            # folders created, text as UTF-8
    assert target.read_bytes() == "title = \"é\"\n".encode("utf-8")
    os.chmod(target, 0o640)
    write_atomic(target, b"\x00\x01")
    assert target.read_bytes() == b"\x00\x01" and (target.stat().st_mode & 0o777) == 0o640
    with pytest.raises(FileExistsError):
        write_atomic(target, "other", overwrite=False)
    assert target.read_bytes() == b"\x00\x01"
    fresh = write_atomic(tmp_path / "deep" / "new.txt", "x", overwrite=False)
    assert fresh.read_text() == "x"
    assert sorted(p.name for p in target.parent.iterdir()) == ["case.toml", "new.txt"]   # no temporary left


def test_write_atomic_leaves_target_and_no_temporary_on_error(tmp_path, monkeypatch):
    from lowgmap.app.files.atomic import write_atomic

    target = tmp_path / "out.csv"
    target.write_text("old")

    def fail(*a, **k):
        raise OSError("disk full (simulated)")

    monkeypatch.setattr(os, "fsync", fail)
    with pytest.raises(OSError, match="disk full"):
        write_atomic(target, "new")
    assert target.read_text() == "old" and [p.name for p in tmp_path.iterdir()] == ["out.csv"]


def test_case_values_outside_the_physical_bounds_name_the_range():
    # issue 14: a diameter of 1e300 mm passed `check` and overflowed in `margin`; bounds per quantity
    # (README "Limits and errors") are checked by the loader with the key path and line
    with pytest.raises(CaseFileError) as info:
        loads_case(GOOD.replace('diameter = "12.7 mm"', 'diameter = "1e300 mm"')
                   .replace('residual_acceleration = "1e-5 g0"', 'residual_acceleration = "200 g0"'))
    got = {p.path: (p.line, p.message) for p in info.value.problems}
    assert got["section.diameter"] == (13, "must be within [1 µm, 1 km], got 1e+297 m")
    assert got["conduit.residual_acceleration"][1].startswith("must be within [0, 100 g0]")
    assert isinstance(info.value, ValueError)                                 # still a ValueError for callers


def test_problems_are_listed_up_to_a_limit_with_short_values():
    from lowgmap.app.files.problems import MAX_PROBLEMS

    vertices = ", ".join(f'["{"x" * 500}", "y"]' for _ in range(150))
    text = GOOD.replace('kind = "circle"\ndiameter = "12.7 mm"', f"kind = \"polygon\"\nvertices = [{vertices}]")
    with pytest.raises(CaseFileError) as info:
        loads_case(text)
    problems = info.value.problems
    assert len(problems) == MAX_PROBLEMS + 1
    assert problems[-1].message.startswith("200 more problem(s) not listed")
    assert max(len(str(p)) for p in problems) < 600                           # a 500-character value is cut



_ONE_CONSTANT = '''
[[models]]
name = "slug_annular_dukler_1988"
constants = { alpha_c = 0.7 }
'''


def test_one_listed_model_merges_onto_the_default_set():
    # catches the old behaviour: listing one model to change one constant silently dropped every other
    # default line (the chart lost its bubble-slug boundary)
    from lowgmap.physics.chart.composition import Chart, default_models

    plain = loads_case(GOOD)
    doc = loads_case(GOOD + _ONE_CONSTANT)
    names = [m.name for m in doc.case.models]
    assert names[0] == "slug_annular_dukler_1988" and doc.case.models[0].param_dict == {"alpha_c": 0.7}
    assert set(names) == set(default_models(plain.case))            # the rest of the default set is kept
    assert all(m.param_dict == {} for m in doc.case.models[1:])       # ... with their default constants
    chart, base = Chart.build(doc.case), Chart.build(plain.case)
    assert chart.regime_names == base.regime_names
    used = {m.name: dict(c) for m, c in list(chart.region_models) + list(chart.comparison_models)}
    assert used["slug_annular_dukler_1988"]["alpha_c"] == 0.7
    assert used["bubble_slug_dukler_1988"] == {m.name: dict(c) for m, c in base.region_models}["bubble_slug_dukler_1988"]


def test_models_replace_defaults_uses_exactly_the_listed_set():
    doc = loads_case("models_replace_defaults = true\n" + GOOD + _ONE_CONSTANT)
    assert [m.name for m in doc.case.models] == ["slug_annular_dukler_1988"]
    assert "models_replace_defaults" in " ".join(map(str, _problems("models_replace_defaults = \"yes\"\n" + GOOD + _ONE_CONSTANT)))


# --------------------------------------------------------------------------------------------- bands
_BANDED = '''
[[models]]
name = "bubble_slug_dukler_1988"
constants = { alpha_c = 0.45 }
bands = { alpha_c = [0.30, 0.60] }
band_reasons = { alpha_c = "spread of the transition data (test)" }
'''


def test_model_bands_become_case_bands_with_their_reason():
    # catches bands read but never handed to the physics (the chart would draw the model's own band)
    from lowgmap.physics.chart.bands import chart_constant_bands
    from lowgmap.physics.chart.composition import Chart
    from lowgmap.physics.models.boundary import case_bands

    doc = loads_case(GOOD + _BANDED)
    assert case_bands(doc.case) == {"bubble_slug_dukler_1988": {"alpha_c": (0.30, 0.60,
                                                                            "spread of the transition data (test)")}}
    used = {b.name: b for b in chart_constant_bands(Chart.build(doc.case), "bubble_slug_dukler_1988")}
    band = used["alpha_c"]
    assert (band.low, band.high, band.origin) == (0.30, 0.60, "case")


def test_a_band_without_a_reason_gets_the_documented_default():
    # catches an empty reason (the review pack would show a band with no word on where it comes from)
    from lowgmap.app.files.casefile import DEFAULT_CASE_BAND_REASON
    from lowgmap.physics.models.boundary import case_bands

    doc = loads_case(GOOD + _BANDED.replace('band_reasons = { alpha_c = "spread of the transition data (test)" }\n', ""))
    assert case_bands(doc.case)["bubble_slug_dukler_1988"]["alpha_c"][2] == DEFAULT_CASE_BAND_REASON
    assert DEFAULT_CASE_BAND_REASON == "given by the case file"


@pytest.mark.parametrize("bands, reasons, path, words", [
    ("{ nope = [0.3, 0.6] }", "", "models[0].bands.nope", "no constant 'nope'"),          # unknown constant
    ("{ alpha_c = [0.6, 0.3] }", "", "models[0].bands.alpha_c", "low must be <= high"),
    ('{ alpha_c = ["low", 0.6] }', "", "models[0].bands.alpha_c", "plain number"),        # not a number
    ("{ alpha_c = [0.3, 1.2] }", "", "models[0].bands.alpha_c", "allowed range of alpha_c"),
    ("{ alpha_c = 0.3 }", "", "models[0].bands.alpha_c", "range [low, high]"),
    ("{ alpha_c = [0.3, 0.6] }", '{ c0 = "why" }', "models[0].band_reasons.c0", "no entry in bands"),
    ("{ alpha_c = [0.3, 0.6] }", "{ alpha_c = 5 }", "models[0].band_reasons.alpha_c", "must be text"),
])
def test_band_problems_are_named(bands, reasons, path, words):
    # catches a band the reader lets through that the chart then refuses (or silently widens)
    text = GOOD + f'\n[[models]]\nname = "bubble_slug_dukler_1988"\nbands = {bands}\n'
    if reasons:
        text += f"band_reasons = {reasons}\n"
    probs = {p.path: p for p in _problems(text)}
    assert path in probs, probs
    assert words in probs[path].message, probs[path]


def test_band_outside_the_range_names_value_and_range():
    probs = {p.path: p.message for p in _problems(GOOD + _BANDED.replace("[0.30, 0.60]", "[0.30, 1.20]"))}
    assert probs["models[0].bands.alpha_c"] == ("band [0.3, 1.2] must lie within the allowed range of alpha_c, "
                                                "[0.05, 0.95]")


def test_bands_round_trip_through_the_writer(tmp_path):
    # catches a writer that drops the keys it does not know (a saved case would lose its bands)
    from lowgmap.physics.models.boundary import case_bands

    doc = loads_case(GOOD + _BANDED)
    save_case(doc.data, tmp_path / "c.toml")
    again = load_case(tmp_path / "c.toml")
    assert case_bands(again.case) == case_bands(doc.case)
    assert dumps_case(again.data) == dumps_case(doc.data)


def test_a_failed_fluid_raises_no_second_problem_on_a_standard_gas_flow():
    # catches the knock-on "'100 sccm' needs the local pressure and temperature" after a fluid that did not
    # load: one wrong field gives one problem
    probs = _problems(GOOD.replace('liquid = "water"', 'liquid = "unobtainium"'))
    assert [p.path for p in probs] == ["fluid"]


def test_band_problems_show_with_the_other_problems_of_the_file():
    # catches bands checked only once everything else is right (the engineer fixes one problem, then meets
    # the next): an unknown constant and a band out of range are listed beside a wrong contact angle
    text = (GOOD.replace('contact_angle = "30 deg"', 'contact_angle = "210 deg"')
            + '\n[[models]]\nname = "bubble_slug_dukler_1988"\nbands = { nope = [1, 2], alpha_c = [0.1, 2] }\n')
    paths = {p.path for p in _problems(text)}
    assert {"wetting.contact_angle", "models[0].bands.nope", "models[0].bands.alpha_c"} <= paths
