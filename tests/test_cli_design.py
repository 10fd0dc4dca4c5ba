"""`lowgmap sweep`, `lowgmap design`, their file formats, plots and the dashboard's design tab.

Wiring only: the numbers printed, written or shown must be the ones lowgmap.physics.studies.sweep and lowgmap.physics.studies.design
compute (their physics is checked in test_sweep.py / test_design.py). Unit conversions are checked
against exact definitions (1 deg = pi/180 rad, 1 mm = 1e-3 m).
"""
import asyncio
import json
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st

from lowgmap.app.files.casefile import CaseFileError, load_case, sample_case_path
from lowgmap.app.cli import main
from lowgmap.app.files.studyfiles import loads_goal, loads_sweep, read_goal, read_sweep, to_display, variable_kind
from lowgmap.app.outputs.maps import margin_map_figure
from lowgmap.physics.studies.design import optimize_design
from lowgmap.physics.studies.sweep import grid, sweep

TUBE = str(sample_case_path("condensate_line"))
WEDGE = str(sample_case_path("wedge_separator"))

TUBE_SWEEP = """
[sweep]
required_margin = "30 %"
[envelope]
liquid_flow = ["1.2 L/min", "4.8 L/min"]
gas_flow = ["120 mL/min", "600 mL/min"]
[[variables]]
name = "size"
from = "6 mm"
to = "30 mm"
steps = 4
spacing = "log"
[[variables]]
name = "length"
values = ["0.5 m", "1.5 m", "3 m"]
"""

TUBE_GOAL = """
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
[[constraints]]
quantity = "volume"
max = "2 L"
"""


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def tube():
    return load_case(TUBE)


@pytest.fixture
def files(tmp_path):
    s = tmp_path / "sweep.toml"
    s.write_text(TUBE_SWEEP, encoding="utf-8")
    g = tmp_path / "goal.toml"
    g.write_text(TUBE_GOAL, encoding="utf-8")
    return tmp_path, str(s), str(g)


# ------------------------------------------------------------------------------------------------- files
def test_sweep_file_values_in_si(tube, files):
    _, s, _ = files
    plan = read_sweep(s, tube)
    assert len(plan.designs) == 12 and plan.variables == ["size", "length"]
    sizes = sorted({d["size"] for d in plan.designs})
    assert sizes == pytest.approx(np.geomspace(0.006, 0.030, 4).tolist(), rel=1e-12)     # 1 mm = 1e-3 m
    assert plan.units == {"size": "mm", "length": "m"} and plan.required_margin == pytest.approx(0.3)
    assert plan.envelope[0] == pytest.approx((1.2e-3 / 60, 4.8e-3 / 60), rel=1e-12)      # 1 L/min = 1e-3/60 m^3/s


def test_sample_files_parse():
    doc = load_case(WEDGE)
    plan = read_sweep(sample_case_path("studies/sweep_halfangle_length"), doc)
    assert len(plan.designs) == 20
    assert sorted({round(math.degrees(d["half_angle"]), 9) for d in plan.designs}) == [4.0, 5.5, 7.0, 8.5, 10.0]
    assert sorted({d["length"] for d in plan.designs}) == pytest.approx([0.025, 0.04, 0.055, 0.07])
    goal, info = read_goal(sample_case_path("studies/design_goal"), doc)
    assert [v.name for v in goal.variables] == ["length", "constant.injector_width_ratio"]
    assert goal.constraints[0].upper == pytest.approx(0.06) and goal.regime == "isolated bubbles separated"
    assert goal.ql_range == pytest.approx((0.2e-6, 1.0e-6), rel=1e-12)
    for name in ("sweep_halfangle_length.toml", "design_goal.toml"):
        assert sample_case_path(f"studies/{name}").read_text(encoding="utf-8").startswith("# INVENTED")


def test_file_problems_are_all_reported(tube):
    bad = {"sweep": {"combine": "zip", "colour": 1},
           "variables": [{"name": "bore", "values": ["1 mm"]},
                         {"name": "length", "from": "1 kg", "to": "2 m", "steps": 3},
                         {"name": "size", "values": []}]}
    with pytest.raises(CaseFileError) as exc:
        loads_sweep(bad, tube, source="bad.toml")
    paths = [p.path for p in exc.value.problems]
    assert paths == ["sweep.colour", "sweep.combine", "variables[0].name", "variables[1].from", "variables[2].values"]
    assert "unknown sweep variable 'bore'" in str(exc.value) and "has units of" in str(exc.value)
    with pytest.raises(CaseFileError, match="needs a name"):
        loads_goal({"goal": {"liquid_flow": ["1 L/min", "2 L/min"], "gas_flow": ["1 L/min", "2 L/min"]},
                    "variables": [{"low": "1 mm"}]}, tube)
    with pytest.raises(CaseFileError, match="unknown quantity 'mass'"):
        loads_goal({"goal": {"liquid_flow": ["1 L/min", "2 L/min"], "gas_flow": ["1 L/min", "2 L/min"]},
                    "variables": [{"name": "size", "low": "6 mm", "high": "9 mm"}],
                    "constraints": [{"quantity": "mass", "max": "1 kg"}]}, tube)


def test_study_file_problems_name_their_lines(tube, tmp_path):
    # the same problem collector as case files: key path and the line where the key is written
    bad = tmp_path / "bad_sweep.toml"
    bad.write_text('[sweep]\ncombine = "zip"\n\n[[variables]]\nname = "bore"\nvalues = ["1 mm"]\n\n'
                   '[[variables]]\nname = "length"\nfrom = "1 kg"\nto = "2 m"\nsteps = 3\n', encoding="utf-8")
    with pytest.raises(CaseFileError) as exc:
        read_sweep(bad, tube)
    assert [(p.path, p.line) for p in exc.value.problems] == [
        ("sweep.combine", 2), ("variables[0].name", 5), ("variables[1].from", 10)]
    assert exc.value.source == str(bad) and "line 10: variables[1].from" in str(exc.value)
    goal = tmp_path / "bad_goal.toml"
    goal.write_text('[goal]\nliquid_flow = ["1 L/min", "2 L/min"]\ngas_flow = ["1 L/min", "2 L/min"]\n'
                    'starts = -1\n', encoding="utf-8")
    with pytest.raises(CaseFileError) as exc:
        read_goal(goal, tube)
    assert {(p.path, p.line) for p in exc.value.problems} >= {("goal.starts", 4)}
    broken = tmp_path / "broken.toml"
    broken.write_text('[sweep\ncombine = "grid"\n', encoding="utf-8")
    with pytest.raises(CaseFileError) as exc:
        read_sweep(broken, tube)
    assert exc.value.problems[0].path == "(syntax)" and exc.value.problems[0].line == 1


@settings(max_examples=40, deadline=None)
@given(st.floats(min_value=0.01, max_value=89.0))
def test_angle_values_round_trip(deg):
    doc_like = type("D", (), {})()
    assert variable_kind("half_angle") == "angle"
    si = math.radians(deg)
    assert float(to_display(si, "angle", "deg")) == pytest.approx(deg, rel=1e-12)
    del doc_like


# ------------------------------------------------------------------------------------------------- sweep
def test_sweep_cli_json_csv_and_plot_match_physics(capsys, tube, files):
    tmp, s, _ = files
    out_csv, plot = tmp / "res.csv", tmp / "map.png"
    code, out, err = run(capsys, "sweep", TUBE, s, "--json", "-o", str(out_csv), "--plot", str(plot))
    assert code == 0, err
    data = json.loads(out)
    plan = read_sweep(s, tube)
    ref = sweep(tube.case, plan.designs, envelope=plan.envelope, required_margin=0.3, regime=None)
    assert data["designs"] == 12 and data["valid"] == 12 and data["backend"] == "in-process"
    got = pd.DataFrame(data["rows"])
    assert got["envelope_margin"].to_numpy() == pytest.approx(ref["envelope_margin"].to_numpy(), abs=0)
    assert got["margin"].to_numpy() == pytest.approx(ref["margin"].to_numpy(), abs=0)
    assert data["meets_required"] == int(ref["meets_required"].sum())
    table = pd.read_csv(out_csv)
    assert list(table.columns[:3]) == ["design", "size [mm]", "length [m]"]
    assert table["size [mm]"].to_numpy() == pytest.approx(ref["size"].to_numpy() * 1e3, rel=1e-12)
    assert table["envelope_margin [-]"].to_numpy() == pytest.approx(ref["envelope_margin"].to_numpy(), rel=1e-12)
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "sweep sweep.toml: 12/12 (100 %)" in err                 # progress on stderr


def test_sweep_cli_parquet_and_scheduler(capsys, tube, files):
    from distributed import LocalCluster

    tmp, s, _ = files
    out_pq = tmp / "res.parquet"
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=":0") as lc:
        code, out, err = run(capsys, "sweep", TUBE, s, "--scheduler", lc.scheduler_address, "-o", str(out_pq),
                             "--quiet")
    assert code == 0, err
    assert "dask scheduler" in out and err == ""
    got = pd.read_parquet(out_pq)
    plan = read_sweep(s, tube)
    ref = sweep(tube.case, plan.designs, envelope=plan.envelope, required_margin=0.3)
    assert got["envelope_margin [-]"].to_numpy() == pytest.approx(ref["envelope_margin"].to_numpy(), abs=0)


def test_sweep_cli_errors(capsys, files):
    tmp, s, _ = files
    bad = tmp / "bad.toml"
    bad.write_text('[[variables]]\nname = "length"\nvalues = ["3 kg"]\n', encoding="utf-8")
    code, _, err = run(capsys, "sweep", TUBE, str(bad))
    assert code == 2 and "variables[0].values[0]" in err and "has units of" in err
    code, _, err = run(capsys, "sweep", TUBE, s, "-o", str(tmp / "x.xlsx"), "--quiet")
    assert code == 2 and "-o must end in .csv or .parquet" in err
    with pytest.raises(SystemExit):
        main(["sweep", TUBE, s, "--workers", "2", "--scheduler", "tcp://localhost:1"])
    capsys.readouterr()


# ------------------------------------------------------------------------------------------------ design
def test_design_cli_matches_physics(capsys, tube, files):
    tmp, _, g = files
    plot = tmp / "best.png"
    code, out, err = run(capsys, "design", TUBE, g, "--json", "--plot", str(plot))
    assert code == 0, err
    data = json.loads(out)
    goal, info = read_goal(g, tube)
    ref = optimize_design(tube.case, goal, seed=info["seed"])
    assert data["margin"] == ref.margin and data["values"] == ref.values
    assert data["regime"] == "elongated bubbles / slugs" and data["inside"] is True
    assert data["constraints"] == ["volume <= 0.002"]
    assert [s["variable"] for s in data["sensitivity"]] == ["size"]
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    code, out, _ = run(capsys, "design", TUBE, g, "--quiet")
    assert code == 0 and "worst-case margin over the envelope" in out and "sensitivity" in out


# ------------------------------------------------------------------------------------------------- plots
def test_margin_map_has_the_required_margin_contour(tube):
    designs = grid({"contact_angle": np.radians([10, 40, 70]).tolist(), "gas_flow": [1e-6, 1e-5, 5e-5]})
    df = sweep(tube.case, designs, regime="dispersed bubbles")
    fig = margin_map_figure(df, "contact_angle", "gas_flow", required=0.3,
                            kinds={"contact_angle": "angle", "gas_flow": "flow"},
                            units={"contact_angle": "deg", "gas_flow": "L/min"}, log=(False, True))
    ax = fig.axes[0]
    assert ax.get_xlabel() == "contact angle [deg]" and ax.get_yscale() == "log"
    assert ax.get_xlim()[1] == pytest.approx(70.0)
    texts = [t.get_text() for t in ax.texts]
    assert "required ±30 %" in texts
    fig1 = margin_map_figure(df[df["gas_flow"] == 1e-6], "contact_angle", None, required=0.3,
                             kinds={"contact_angle": "angle"}, units={"contact_angle": "deg"})
    labels = [h.get_label() for h in fig1.axes[0].get_legend().legend_handles]
    assert "required ±30 %" in labels


# --------------------------------------------------------------------------------------------- dashboard
def test_design_tab_map_matches_the_sweep(tube):
    # Catches: a map whose designs are evaluated by another engine than the sweep's (numbers differing between
    # the map and `lowgmap sweep`), a threaded path that gives another table than the direct one, a bad range
    # accepted silently, and a budget beyond the tab's limit.
    from lowgmap.app.dashboard.design_tab import MAX_DESIGNS, DesignTab, design_inputs
    from lowgmap.app.dashboard.state import Session

    session = Session(tube)
    tab = DesignTab(session)
    assert "half_angle" not in design_inputs(tube.case)            # a tube has no corner half-angle
    assert (tab.x_var.value, tab.y_var.value) == ("size", "length")
    assert (tab.x_from.value, tab.x_to.value) == ("6.35 mm", "19.05 mm")    # +-50 % of the 12.7 mm bore
    tab.budget.value = 25
    tab.x_var.value = "contact_angle"
    df = tab.run_sync()
    assert 9 <= len(df) <= 25 and (df["level"] == 0).sum() == 9      # a 3 x 3 starting grid, then refined
    designs = [{"contact_angle": a, "length": b} for a, b in zip(df["contact_angle"], df["length"])]
    ref = sweep(tube.case, designs, point=(session.ql, session.qg), regime="dispersed bubbles",
                required_margin=session.required_margin)
    assert df["margin"].tolist() == ref["margin"].tolist()
    assert tab.image.object[:8] == b"\x89PNG\r\n\x1a\n"
    assert f"data-designs='{len(df)}'" in tab.status.object
    _run_coroutine(tab._on_run())                                  # the threaded path gives the same table
    assert tab.result["margin"].tolist() == ref["margin"].tolist() and not tab.running
    assert tab._csv().read().decode().startswith("design,contact_angle,length")
    tab.x_to.value = "1 kg"
    _run_coroutine(tab._on_run())
    assert "design-error" in tab.status.object and "is not an angle" in tab.status.object
    assert tab.budget.end == MAX_DESIGNS == 400


def test_design_map_shows_the_margin_table_value_at_the_current_design_and_draws_it_there():
    # Catches the map of the issue: an 8 x 8 grid that had no node at the current design drew a design with a
    # +-31.6 % margin (wedge sample) on its 0 contour, by interpolating across the regime boundary between
    # grid nodes. The current design is now a node of the map, its value the margin table's (same engine, the
    # sweep's margin error 5e-6 in the notes of lowgmap.physics.studies.sweep), and the drawing interpolates
    # on triangles between evaluated designs, so the colour at the star is that value.
    from matplotlib.tri import LinearTriInterpolator, Triangulation

    from lowgmap.app.dashboard.design_tab import DesignTab
    from lowgmap.app.dashboard.state import Session
    from lowgmap.app.outputs.maps import map_triangles
    from lowgmap.physics.studies.design import nominal_design_value

    doc = load_case(sample_case_path("wedge_separator"))
    session = Session(doc)
    tab = DesignTab(session)
    assert (tab.x_var.value, tab.y_var.value) == ("half_angle", "length")
    tab.budget.value = 50
    df = tab.run_sync()
    want = session.margins.symmetric_margin                       # the margin table's value (in the regime)
    assert session.margins.regime == doc.settings.intended_regime
    bx, by = nominal_design_value(doc.case, "half_angle"), nominal_design_value(doc.case, "length")
    here = df[(df["half_angle"] == bx) & (df["length"] == by)]
    assert len(here) == 1 and abs(float(here["margin"].iloc[0]) - want) < 1e-5
    assert f"{100 * want:+.1f} %" in tab.status.object              # the words under the map say the same
    ok = np.isfinite(df["margin"].to_numpy())
    x, y, m = (df[c].to_numpy(dtype=float)[ok] for c in ("half_angle", "length", "margin"))
    tri = Triangulation(x, y, map_triangles(x, y))
    drawn = float(LinearTriInterpolator(tri, m)(bx, by))
    assert abs(drawn - want) < 1e-9 and drawn > 0.25                # the star sits in the "met" colour band
    tab.x_from.value, tab.x_to.value = "7 deg", "9 deg"             # ranges that leave the current design out
    tab.budget.value = 25
    df = tab.run_sync()
    assert "lies outside the map's ranges" in tab.status.object and "Current design (" not in tab.status.object
    assert df["half_angle"].min() >= math.radians(7.0) - 1e-12      # the map stays within its ranges
    from lowgmap.app.outputs.maps import margin_map_figure

    fig = margin_map_figure(df, "half_angle", "length", required=0.25, base=(bx, by))
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert "design of the starting grid" in labels and not any("current design" in t for t in labels)
    assert fig.axes[0].get_xlim()[0] >= math.radians(7.0) - 0.01    # no star drawn out there, widening the axes


def _run_coroutine(coro):
    """Run a coroutine to completion on a fresh event loop in its own thread.

    The browser tests keep a playwright event loop running in the main thread for the whole session,
    where ``asyncio.run`` refuses to start a second loop.
    """
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(max_workers=1) as pool:
        return pool.submit(asyncio.run, coro).result()
