"""Gravity level and orientation as inputs: case-file keys, study files, the command line and the
two-gravity chart (issue 18, items 1 and 4).

Outside values: standard gravity g0 = 9.80665 m/s^2 exactly (3rd CGPM, 1901); mean surface gravity of
the Moon 1.62 m/s^2 and of Mars 3.71 m/s^2 (NASA Goddard Space Flight Center, Moon and Mars Fact
Sheets, D. R. Williams). Everything else here is wiring: the same value written two ways must give the
same case, and each wrong input must be named with its value and what is allowed.
"""
import json
import math

import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st

from lowgmap.app.cli import main
from lowgmap.app.files.casefile import (CaseFileError, dumps_case, load_case, loads_case, sample_case_path,
                                        with_conduit)
from lowgmap.app.files.units import UnitError, orientation_text, parse_gravity, parse_orientation
from lowgmap.physics.case import Orientation

BASE = sample_case_path("condensate_line").read_text(encoding="utf-8")
G_LINE = 'residual_acceleration = "1e-6 g0"'


def _conduit(g: str, orientation: str | None = None) -> str:
    new = f'residual_acceleration = "{g}"' + (f'\norientation = "{orientation}"' if orientation is not None else "")
    return BASE.replace(G_LINE, new)


def _problems(text):
    with pytest.raises(CaseFileError) as info:
        loads_case(text)
    return {p.path: p for p in info.value.problems}


# ------------------------------------------------------------------------------------------ case-file keys
@pytest.mark.parametrize("name, value", [
    ("ground", 9.80665),              # 3rd CGPM (1901): g0 exact by definition
    ("lunar surface", 1.62),          # NASA GSFC Moon Fact Sheet
    ("Martian surface", 3.71),        # NASA GSFC Mars Fact Sheet
    ("  LUNAR   Surface ", 1.62),     # names are case- and space-insensitive
])
def test_named_levels_give_the_published_values(name, value):
    # catches a named level that maps to the wrong body or a number typed twice that drifted
    assert loads_case(_conduit(name)).case.g == value


def test_the_same_level_written_three_ways_gives_the_same_case():
    # unit invariance: "ground", "1 g0" and "9.80665 m/s^2" are one acceleration
    values = {loads_case(_conduit(t)).case.g for t in ("ground", "1 g0", "9.80665 m/s^2", "1g0")}
    assert values == {9.80665}


def test_unknown_level_names_the_field_the_value_and_both_forms():
    # catches a message that says only "bad unit" (the engineer cannot guess that names exist)
    msg = _problems(_conduit("moon"))["conduit.residual_acceleration"].message
    assert "'moon'" in msg and "'lunar surface'" in msg and "'Martian surface'" in msg and "g0" in msg


def test_a_level_beyond_the_bounds_is_refused():
    msg = _problems(_conduit("200 g0"))["conduit.residual_acceleration"].message
    assert "[0, 100 g0]" in msg


@pytest.mark.parametrize("text, kind, degrees", [
    ("vertical upward flow", "vertical upward", 90.0),
    ("vertical downward flow", "vertical downward", -90.0),
    ("Vertical Upward", "vertical upward", 90.0),          # "flow" may be left out, any case
    ("horizontal", "horizontal", 0.0),
    ("30 deg", "inclined", 30.0),
    ("-5 deg", "inclined", -5.0),
    ("90 deg", "vertical upward", 90.0),                   # the angle of a named kind gives that kind
    ("0 deg", "horizontal", 0.0),
])
def test_orientation_words_and_angles(text, kind, degrees):
    o = loads_case(_conduit("ground", text)).case.orientation
    assert o.kind == kind and math.degrees(o.angle_rad) == pytest.approx(degrees, abs=1e-12)


def test_orientation_defaults_to_unspecified_and_unspecified_changes_nothing():
    # catches a default orientation that switches the buoyancy models on for every old case file
    from lowgmap.physics.chart.composition import Chart

    plain, explicit = loads_case(BASE), loads_case(_conduit("1e-6 g0", "unspecified"))
    assert plain.case.orientation == Orientation.unspecified() == explicit.case.orientation
    assert Chart.build(plain.case).regime_names == Chart.build(explicit.case).regime_names
    assert [m.name for m in plain.case.models] == [m.name for m in explicit.case.models]


@pytest.mark.parametrize("text, words", [
    ("sideways", "'vertical upward flow', 'vertical downward flow', 'horizontal'"),
    ("120 deg", "within [-90, 90] deg"),
    ("30 mm", "not an angle"),
])
def test_orientation_problems_name_value_and_choices(text, words):
    msg = _problems(_conduit("ground", text))["conduit.orientation"].message
    assert words in msg and text.split()[0] in msg


def test_an_orientation_that_is_not_text_is_named():
    text = BASE.replace(G_LINE, G_LINE + "\norientation = 30")
    assert "got 30" in _problems(text)["conduit.orientation"].message


def test_orientation_brings_the_buoyancy_models_by_the_hand_over_rule():
    # catches an orientation read but not handed to the case (the chart would stay the low-gravity one)
    from lowgmap.physics.chart.composition import default_models
    from lowgmap.physics.models.tube_gravity import VERTICAL_UPWARD_MODEL_NAMES

    ground = loads_case(_conduit("ground", "vertical upward flow")).case
    assert default_models(ground)[:3] == VERTICAL_UPWARD_MODEL_NAMES   # Eo = 21.8 >= 1 at 1 g0 in 12.7 mm
    orbit = loads_case(_conduit("1e-6 g0", "vertical upward flow")).case
    assert default_models(orbit)[-3:] == VERTICAL_UPWARD_MODEL_NAMES   # comparison lines below Eo = 1


@settings(max_examples=40, deadline=None)
@given(st.floats(-90.0, 90.0, allow_nan=False))
def test_orientation_text_reads_back(deg):
    # the writer's text of an orientation reads back as the same orientation (to the printed digits)
    o = parse_orientation(f"{deg!r} deg")
    back = parse_orientation(orientation_text(o))
    assert back.kind == o.kind
    assert back.angle_rad == pytest.approx(o.angle_rad, rel=1e-5, abs=1e-12)


@settings(max_examples=60, deadline=None)
@given(st.floats(1e-9, 100.0, allow_nan=False))
def test_gravity_in_g0_and_in_m_s2_agree(x):
    # unit invariance of the parser: x g0 and 9.80665 x m/s^2 are the same acceleration (CGPM 1901)
    assert parse_gravity(f"{x!r} g0") == pytest.approx(parse_gravity(f"{x * 9.80665!r} m/s^2"), rel=1e-12)


def test_parse_gravity_refuses_a_bare_number():
    with pytest.raises(UnitError, match="--gravity: .*no unit"):
        parse_gravity("9.81", "--gravity")


# ------------------------------------------------------------------------------------------ writer round trip
def test_with_conduit_writes_the_keys_and_the_document_reloads_the_same(tmp_path):
    # catches an override that changes the case but not the document (a saved revision would lose it)
    doc = load_case(sample_case_path("condensate_line"))
    new = with_conduit(doc, residual_acceleration="Martian surface", orientation="-30 deg")
    assert new.case.g == 3.71 and math.degrees(new.case.orientation.angle_rad) == pytest.approx(-30)
    assert doc.case.g == pytest.approx(9.80665e-6) and not doc.case.orientation.is_known    # doc untouched
    again = loads_case(dumps_case(new.data))
    assert again.case.g == new.case.g and again.case.orientation == new.case.orientation
    assert 'orientation = "-30 deg"' in dumps_case(new.data)
    assert new.path == doc.path


def test_study_files_take_named_levels():
    # catches a sweep file that reads "lunar surface" as an unknown unit
    from lowgmap.app.files.studyfiles import loads_sweep

    doc = load_case(sample_case_path("condensate_line"))
    data = {"sweep": {}, "variables": [{"name": "residual_acceleration",
                                        "values": ["1e-6 g0", "lunar surface", "Martian surface", "ground"]}]}
    plan = loads_sweep(data, doc)
    got = [d["residual_acceleration"] for d in plan.designs]
    assert got == [pytest.approx(9.80665e-6), 1.62, 3.71, 9.80665]


# ------------------------------------------------------------------------------------------ command line
def _run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_gravity_and_orientation_options_replace_the_case_values(capsys):
    # catches options parsed but not applied (the numbers would be those of the file's orbit level)
    case = str(sample_case_path("condensate_line"))
    orbit = json.loads(_run(capsys, "section", case, "--json")[1])["gravity"]
    code, out, err = _run(capsys, "section", case, "--gravity", "lunar surface", "--json")
    assert code == 0, err
    lunar = json.loads(out)["gravity"]
    assert lunar["g_m_s2"] == 1.62 and orbit["g_over_g0"] == pytest.approx(1e-6)
    # the Bond number scales with g (dimensional invariant)
    assert lunar["bond_number"] / orbit["bond_number"] == pytest.approx(1.62 / 9.80665e-6, rel=1e-9)
    code, out, err = _run(capsys, "margin", case, "--gravity", "ground", "--orientation", "vertical upward flow",
                          "--nominal-only", "--json")
    assert code == 0, err
    d = json.loads(out)
    assert d["limiting_boundary"] == "bubble_slug_taitel_1980"          # the 1-g family defines the regions
    assert [b["name"] for b in d["boundaries"]][:3] == ["bubble_slug_taitel_1980", "slug_churn_taitel_1980",
                                                        "churn_annular_taitel_1980"]


@pytest.mark.parametrize("option, value, words", [
    ("--gravity", "moon", "--gravity: 'moon' is neither"),
    ("--gravity", "1e3 g0", "--gravity: must be within [0, 100 g0]"),
    ("--orientation", "up", "--orientation: must be one of"),
])
def test_bad_gravity_options_are_named(capsys, option, value, words):
    code, _, err = _run(capsys, "margin", str(sample_case_path("condensate_line")), option, value)
    assert code == 2 and words in err, err


def test_check_and_calibrate_do_not_take_gravity_options(capsys):
    # check validates the file as written; a --gravity there would be silently meaningless
    with pytest.raises(SystemExit):
        main(["check", str(sample_case_path("condensate_line")), "--gravity", "ground"])
    assert "unrecognized arguments: --gravity" in capsys.readouterr().err


@pytest.fixture
def low_dpi(monkeypatch):
    """Exports at 40 dpi: these tests check the wiring of the pair figure, not its resolution."""
    from lowgmap.app.outputs import render

    monkeypatch.setattr(render, "EXPORT_DPI", 40)


def _points_csv(tmp_path):
    # INVENTED points for a wiring test (never check values): two at 1 g0, three in low gravity, one without g
    rows = ["test_id,liquid_flow [L/min],gas_flow [L/min],observed_regime,platform,residual_acceleration [g0],"
            "low_g_duration [s]",
            "G-1,3,0.2,dispersed bubbles,,1,1000", "G-2,1,2,elongated bubbles / slugs,,0.9,1000",
            "F-1,3,0.2,dispersed bubbles,,1e-6,1000", "F-2,0.5,3,elongated bubbles / slugs,,1e-4,1000",
            "F-3,0.2,10,annular (gas core),parabolic flight,,", "X-1,1,1,dispersed bubbles,,,"]
    p = tmp_path / "points.csv"
    p.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return p


def test_chart_compare_draws_both_levels_with_each_point_on_its_own(tmp_path, capsys, low_dpi):
    # catches points drawn on both panels (or by row order), a compare level that is ignored, and a figure
    # written over an existing file without --force
    from lowgmap.app import CAUTION, __version__

    case = str(sample_case_path("condensate_line"))
    out = tmp_path / "pair.svg"
    argv = ["chart", case, "--gravity", "1 g0", "--orientation", "vertical upward flow", "--compare", "1e-6 g0",
            "--points", str(_points_csv(tmp_path)), "-o", str(out), "--json"]
    code, text, err = _run(capsys, *argv)
    assert code == 0, err
    d = json.loads(text)
    left, right = d["panels"]
    assert left["residual_acceleration_m_s2"] == 9.80665 and right["g_over_g0"] == pytest.approx(1e-6)
    assert left["orientation"] == right["orientation"] == "vertical upward flow"
    # G-1, G-2 (near 1 g0) left; F-1, F-2 and the parabolic flight (1e-2 g0 from its platform) right; X-1 nowhere
    assert (left["test_points"], right["test_points"], d["test_points_unplaced"]) == (2, 3, 1)
    assert "churn (oscillating froth)" in left["regimes"] and "churn (oscillating froth)" not in right["regimes"]
    assert left["notes"][0].startswith("Hand-over: Eötvös number") and "buoyancy-inclusive lines define" in \
        left["notes"][0]
    assert "low-gravity lines define the regions" in right["notes"][0]
    svg = out.read_text(encoding="utf-8")
    words = " ".join(svg.replace("&#39;", "'").split())
    assert " ".join(CAUTION.split()[:6]) in words and f"lowgmap {__version__}" in words      # caution and version
    assert "Left: residual acceleration 1 g0" in words and "Right: residual acceleration 1e-06 g0" in words
    assert "2 test point(s) whose residual acceleration is closest to this level (of 6)" in words
    assert "1 test point(s) with no known residual acceleration are on neither chart" in words
    before = out.read_bytes()
    code, _, err = _run(capsys, *argv[:-1])
    assert code == 2 and "add --force" in err and out.read_bytes() == before


def test_split_is_by_nearest_level_and_symmetric():
    # invariant: each point with a level goes to exactly one panel, and swapping the panels swaps the sets
    from lowgmap.app.outputs.gravity_pair import split_points_by_gravity

    g = [9.80665, 5.0, 1.62, 3.71, 0.0, 1e-5, 2.7]
    pts = pd.DataFrame({"g_m_s2": g, "platform": [""] * len(g)})
    (a, b), unplaced = split_points_by_gravity(pts, [1.62, 3.71])
    (b2, a2), _ = split_points_by_gravity(pts, [3.71, 1.62])
    assert not unplaced.any() and (a ^ b).all()
    assert a.tolist() == a2.tolist() and b.tolist() == b2.tolist()
    assert a.tolist() == [False, False, True, False, True, True, False]      # 2.7 lies above the midpoint 2.665
