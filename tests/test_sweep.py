"""Design sweeps (lowgmap.physics.studies.sweep): per-design results, envelope margins, fast paths, cluster backends.

Check values: closed forms for straight boundaries in log-log axes (derived in the comments, marked
"closed form"), the drift-flux lines of Dukler et al. (1988) (a line of constant Q_G/Q_L, so the
tube size does not move it), and the single-case path (Chart.build + point_margins), which the sweep
must reproduce. Numbers computed by this code itself appear only as consistency checks between
two paths, never as pinned values.
"""
import math

import numpy as np
import pytest
from scipy.optimize import brentq

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.physics.models.boundary import PowerLawBoundary
from lowgmap.physics.case import Case, FlowRange, ModelChoice, OperatingPoint
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.chart.margins import MAX_MARGIN, point_margins, symmetric_margins
from lowgmap.physics.geometry.sections import Circle
from lowgmap.physics.studies.sweep import DesignEvaluator, SweepSpec, apply_changes, envelope_margin, grid, sweep, zipped
from lowgmap.physics.models.tube import drift_flux_flow_ratio
from lowgmap.physics.studies.uncertainty import Uncertainty, monte_carlo
from lowgmap.physics.properties.wetting import Wetting

FLUID = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5, "user", "user")
RANGE = FlowRange(1e-7, 1e-3, 1e-7, 1e-3)


def lines_case(*lines, point=None):
    """A case whose chart is the given empirical lines (carried in case.extra)."""
    return Case(FLUID, Circle(0.01), Wetting(0.0), 1.0, 1e-5, RANGE,
                OperatingPoint(*point) if point else None, models=tuple(ModelChoice(m.name) for m in lines),
                extra=(("custom_boundaries", tuple(lines)),))


@pytest.fixture(scope="module")
def tube():
    return load_case(sample_case_path("condensate_line"))


@pytest.fixture(scope="module")
def wedge():
    return load_case(sample_case_path("wedge_separator"))


# ------------------------------------------------------------------------------------------------ designs
def test_grid_and_zipped_order_and_errors():
    assert grid({"a": [1, 2], "b": [3]}) == [{"a": 1, "b": 3}, {"a": 2, "b": 3}]
    assert zipped({"a": [1, 2], "b": [3, 4]}) == [{"a": 1, "b": 3}, {"a": 2, "b": 4}]
    with pytest.raises(ValueError, match="same number of values"):
        zipped({"a": [1, 2], "b": [3]})
    with pytest.raises(ValueError, match="no values"):
        grid({"a": []})


def test_apply_changes_inputs_and_errors(tube, wedge):
    c = apply_changes(wedge.case, {"half_angle": math.radians(8.0), "section.wall_length": 0.05, "length": 0.07,
                                   "contact_angle": math.radians(10.0), "constant.safety_factor": 3.0})
    assert c.section.half_angle == pytest.approx(math.radians(8.0), rel=1e-15)
    assert c.section.wall_length == 0.05 and c.length == 0.07
    assert c.wetting.contact_angle == pytest.approx(math.radians(10.0))
    sep = dict(next(m for m in c.models if m.name == "corner_separation").params)
    assert sep["safety_factor"] == 3.0 and sep["injection_position"] == 0.1      # other constants kept
    # size scales the whole section so that D_h takes the value (the same as the uncertainty module)
    assert apply_changes(tube.case, {"size": 0.02}).section.hydraulic_diameter == pytest.approx(0.02, rel=1e-14)
    with pytest.raises(ValueError, match="contact_angle must be within"):
        apply_changes(tube.case, {"contact_angle": math.radians(200)})
    with pytest.raises(ValueError, match="half_angle can only be varied"):
        apply_changes(tube.case, {"half_angle": 0.1})
    with pytest.raises(ValueError, match="unknown sweep variable 'diameterr'"):
        apply_changes(tube.case, {"diameterr": 0.1})
    with pytest.raises(ValueError, match="no field 'depth'"):
        apply_changes(tube.case, {"section.depth": 0.1})
    with pytest.raises(ValueError, match="no model on this case's chart has a constant 'nope'"):
        apply_changes(tube.case, {"constant.nope": 1.0})
    with pytest.raises(ValueError, match="length must be > 0"):
        apply_changes(tube.case, {"length": -1.0})


def test_fluid_change_rebuilds_properties(tube):
    from lowgmap.physics.properties.fluids import make_fluid_pair

    spec = {"liquid": "water", "gas": "air", "temperature": 295.15, "pressure": 101300.0}
    c = apply_changes(tube.case, {"temperature": 330.0}, spec)
    ref = make_fluid_pair("water", 330.0, 101300.0, gas="air")
    assert c.fluid.sigma == ref.sigma and c.fluid.rho_l == ref.rho_l
    # physical trend: surface tension of water falls with temperature (IAPWS R1-76)
    assert c.fluid.sigma < tube.case.fluid.sigma


# ------------------------------------------------------------------------------------- single-case path
def test_sweep_over_size_reproduces_single_cases_tube(tube):
    sizes = [0.006, 0.0127, 0.025]
    df = sweep(tube.case, grid({"size": sizes}), required_margin=0.3)
    op = tube.case.operating_point
    for row, d in zip(df.itertuples(), sizes):
        chart = Chart.build(apply_changes(tube.case, {"size": d}))
        pm = point_margins(chart, op.ql, op.qg)
        assert row.regime == pm.regime
        assert row.margin == pytest.approx(pm.symmetric_margin, abs=1e-12)
        assert row.limiting == pm.limiting_boundary
        assert row.meets_required == (pm.symmetric_margin >= 0.3)
    assert set(df["method"]) == {"lines"}
    # Dukler et al. (1988): Q_G/Q_L on the bubble-slug line is C0 a/(1 - C0 a), whatever the tube size;
    # closed form for the box reaching the line above the point: (1 + m)/(1 - m) = k/(Q_G/Q_L)
    k = drift_flux_flow_ratio(0.45, 1.2) / (op.qg / op.ql)
    assert df["margin"].to_numpy() == pytest.approx((k - 1) / (k + 1), rel=1e-9)


def test_sweep_over_length_reproduces_single_cases_corner(wedge):
    lengths = [0.04, 0.07]                  # the case's own length and a longer conduit
    df = sweep(wedge.case, grid({"length": lengths}), regime=wedge.settings.intended_regime)
    op = wedge.case.operating_point
    for row, L in zip(df.itertuples(), lengths):
        chart = Chart.build(apply_changes(wedge.case, {"length": L}))
        pm = point_margins(chart, op.ql, op.qg)
        assert row.regime == pm.regime
        sign = 1.0 if pm.regime == wedge.settings.intended_regime else -1.0
        # lines sampled per design to 1e-6 decade here, 1e-7 on the full chart: margins agree to ~1e-5
        assert row.margin == pytest.approx(sign * pm.symmetric_margin, abs=2e-5)
        assert row.limiting == pm.limiting_boundary
    assert set(df["method"]) == {"draw"}


def test_fast_path_equals_full_path_tube(tube):
    designs = grid({"size": [0.008, 0.02], "contact_angle": [0.1, 1.0],
                    "model.bubble_slug_dukler_1988.alpha_c": [0.35, 0.5]})
    env = ((2e-5, 8e-5), (2e-6, 1e-5))
    fast = sweep(tube.case, designs, envelope=env)
    full = sweep(tube.case, designs, envelope=env, method="full")
    assert set(fast["method"]) == {"lines"} and set(full["method"]) == {"full"}
    for col in ("margin", "envelope_margin"):
        assert fast[col].to_numpy() == pytest.approx(full[col].to_numpy(), abs=1e-12)
    for col in ("regime", "limiting", "envelope_limiting", "envelope_inside"):
        assert fast[col].tolist() == full[col].tolist()


def test_invalid_design_gives_a_row_with_the_message(tube):
    df = sweep(tube.case, grid({"contact_angle": [0.5, math.radians(200.0)], "length": [1.0]}))
    assert df["status"].tolist()[0] == "ok"
    assert "contact_angle must be within [0, 180] deg" in df["status"].tolist()[1]
    assert math.isnan(df["margin"].iloc[1]) and df["regime"].iloc[1] == ""
    # a first design whose chart cannot be built does not spoil the next ones of the same structure
    df = sweep(tube.case, grid({"model.bubble_slug_dukler_1988.alpha_c": [0.9, 0.4]}))
    assert "c0 * alpha_c must be < 1" in df["status"].iloc[0] and df["status"].iloc[1] == "ok"
    with pytest.raises(ValueError, match="unknown sweep variable"):
        sweep(tube.case, [{"bore": 0.01}])
    with pytest.raises(ValueError, match="method must be one of"):
        sweep(tube.case, [{"length": 1.0}], method="fast")


def test_intended_regime_makes_other_regimes_negative():
    low = PowerLawBoundary("low", 1.0, 1.0, "a", "b")                   # Q_G = Q_L
    case = lines_case(low, point=(1e-5, 0.5e-5))
    df = sweep(case, grid({"gas_flow": [0.5e-5, 2e-5]}), regime="a")
    # closed form: (1 + m)/(1 - m) = 2 below the line, and (1 + m)/(1 - m) = 2 above it (regime b)
    assert df["margin"].tolist() == pytest.approx([1 / 3, -1 / 3], rel=1e-9)
    assert df["in_regime"].tolist() == [True, False]


def test_monte_carlo_column_matches_monte_carlo(tube):
    uncs = [Uncertainty.of(u) for u in tube.uncertainties]
    df = sweep(tube.case, grid({"size": [0.01]}), uncertainties=uncs, mc_samples=300, seed=5)
    case = apply_changes(tube.case, {"size": 0.01})
    res = monte_carlo(case, uncs, n=300, seed=5, chart=Chart.build(case))
    assert df["probability"].iloc[0] == res.probability
    assert df["probability_std_error"].iloc[0] == pytest.approx(res.std_error, abs=1e-15)
    with pytest.raises(ValueError, match="needs uncertainties"):
        sweep(tube.case, [{"size": 0.01}], mc_samples=10)


# -------------------------------------------------------------------------------------------- envelope
def two_line_chart(c1=0.1, c2=10.0):
    return Chart.build(lines_case(PowerLawBoundary("low", c1, 1.0, "a", "b"),
                                  PowerLawBoundary("high", c2, 1.0, "b", "c")))


def test_envelope_margin_between_two_ratio_lines_closed_form():
    chart = two_line_chart()
    ql, qg = (1e-5, 3e-5), (2e-5, 4e-5)
    res = envelope_margin(chart, ql, qg)
    # closed form: the grown rectangle's lowest ratio (1-m)qg_lo/((1+m)ql_hi) reaches 0.1, or its
    # highest ratio (1+m)qg_hi/((1-m)ql_lo) reaches 10, whichever first
    r_lo, r_hi = qg[0] / ql[1], qg[1] / ql[0]
    m_low = (r_lo / 0.1 - 1) / (r_lo / 0.1 + 1)
    m_high = (10 / r_hi - 1) / (10 / r_hi + 1)
    assert res["inside"] and res["regime"] == "b"
    assert res["margin"] == pytest.approx(min(m_low, m_high), rel=1e-9)
    assert res["limiting"] == ("low" if m_low < m_high else "high")
    assert res["line_margins"] == pytest.approx({"low": m_low, "high": m_high}, rel=1e-9)


def test_envelope_margin_horizontal_and_power_law_lines():
    top = PowerLawBoundary("top", 3e-5, 0.0, "a", "b")             # Q_G = 3e-5, horizontal
    chart = Chart.build(lines_case(top))
    res = envelope_margin(chart, (1e-6, 1e-4), (1e-6, 2e-5))
    assert res["margin"] == pytest.approx(3e-5 / 2e-5 - 1, rel=1e-9)       # closed form: m = H/Q_G,hi - 1
    curve = PowerLawBoundary("curve", 0.05, 0.5, "a", "b")          # Q_G = 0.05 Q_L^0.5
    chart = Chart.build(lines_case(curve))
    ql, qg = (1e-5, 4e-5), (1e-5, 3e-5)
    res = envelope_margin(chart, ql, qg)
    # closed form: for b > 0 the line above is first touched by the top-left corner of the grown
    # rectangle, (1 + m) Q_G,hi = a ((1 - m) Q_L,lo)^b (solved numerically)
    m = brentq(lambda m: (1 + m) * qg[1] - 0.05 * ((1 - m) * ql[0]) ** 0.5, 0.0, 0.999)
    assert res["margin"] == pytest.approx(m, abs=5e-7)


def test_degenerate_envelope_is_the_point_margin(tube):
    chart = Chart.build(tube.case)
    op = tube.case.operating_point
    res = envelope_margin(chart, (op.ql, op.ql), (op.qg, op.qg))
    m, _, _ = symmetric_margins(chart, op.ql, op.qg)
    assert res["margin"] == pytest.approx(float(m), abs=1e-14)


def test_envelope_margin_is_the_worst_point_margin(wedge):
    # invariant: the grown-rectangle margin equals the smallest symmetric margin of the envelope's points
    chart = Chart.build(wedge.case)
    ql, qg = (0.25e-6, 0.35e-6), (0.013e-6, 0.017e-6)         # around the case's operating point
    res = envelope_margin(chart, ql, qg)
    assert res["inside"]
    t = np.linspace(0, 1, 41)
    edges_l = np.concatenate([ql[0] * (ql[1] / ql[0]) ** t, np.full(41, ql[1]), ql[0] * (ql[1] / ql[0]) ** t,
                              np.full(41, ql[0])])
    edges_g = np.concatenate([np.full(41, qg[0]), qg[0] * (qg[1] / qg[0]) ** t, np.full(41, qg[1]),
                              qg[0] * (qg[1] / qg[0]) ** t])
    m, _, reg = symmetric_margins(chart, edges_l, edges_g)
    assert set(reg.tolist()) == {res["regime"]}
    assert res["margin"] <= m.min() + 1e-9                 # never above a point's margin
    assert res["margin"] == pytest.approx(m.min(), abs=2e-3)   # and the sampled edges come close to it


def test_crossed_envelope_is_negative_with_the_corner_margin():
    chart = Chart.build(lines_case(PowerLawBoundary("mid", 1.0, 1.0, "a", "b")))     # Q_G = Q_L
    ql, qg = (1e-5, 2e-5), (0.5e-5, 3e-5)                  # ratios 0.25 .. 3: crossed
    res = envelope_margin(chart, ql, qg, regime="a")
    assert not res["inside"] and res["limiting"] == "mid"
    # closed form: the point deepest in regime b is the corner (Q_L,lo, Q_G,hi), ratio 3:
    # its own margin satisfies (1 + m)/(1 - m) = 3; the worst-case signed margin is -m
    assert res["margin"] == pytest.approx(-(3 - 1) / (3 + 1), rel=1e-9)
    with pytest.raises(ValueError, match="unknown regime"):
        envelope_margin(chart, ql, qg, regime="z")
    with pytest.raises(ValueError, match="ql_range must be increasing"):
        envelope_margin(chart, (2e-5, 1e-5), qg)


def test_point_at_max_margin_names_no_line():
    chart = Chart.build(lines_case(PowerLawBoundary("far", 1e6, 1.0, "a", "b")))
    res = envelope_margin(chart, (1e-6, 2e-6), (1e-6, 2e-6))
    assert res["margin"] == MAX_MARGIN and res["limiting"] is None


# ----------------------------------------------------------------------------------- evaluator, backends
def test_evaluator_keeps_one_chart_per_structure(wedge):
    ev = DesignEvaluator(SweepSpec(wedge.case))
    ev.evaluate({"residual_acceleration": 1e-5})
    ev.evaluate({"residual_acceleration": 2e-5, "constant.safety_factor": 1.5})
    assert len(ev._templates) == 1
    # a contact angle at which the Concus-Finn condition fails (theta + alpha >= 90 deg): the channel cannot
    # hold liquid, gas is drawn in at any flow, and the chart has that one regime (another structure)
    row = ev.evaluate({"contact_angle": math.radians(88.0)})
    assert row["status"] == "ok" and row["regime"] == "free-surface collapse / gas ingestion"
    assert len(ev._templates) == 2


def test_dask_thread_cluster_gives_identical_results(tube):
    from distributed import Client, LocalCluster

    designs = grid({"size": np.linspace(0.006, 0.03, 6), "length": [0.5, 1.0, 2.0],
                    "contact_angle": [0.2, 0.9]})
    env = ((2e-5, 8e-5), (2e-6, 1e-5))
    ref = sweep(tube.case, designs, envelope=env, required_margin=0.3)
    seen = []
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=":0") as lc, \
            Client(lc) as client:
        got = sweep(tube.case, designs, envelope=env, required_margin=0.3, client=client, chunk_size=5,
                    progress=lambda done, total: seen.append((done, total)))
    assert got.equals(ref)
    assert seen[-1] == (len(designs), len(designs)) and len(seen) == math.ceil(len(designs) / 5)


def test_process_pool_gives_identical_results(tube):
    from concurrent.futures import ProcessPoolExecutor

    designs = grid({"size": [0.008, 0.016], "contact_angle": [0.2, 0.9]})
    ref = sweep(tube.case, designs)
    with ProcessPoolExecutor(2) as ex:
        got = sweep(tube.case, designs, client=ex, chunk_size=1)
    assert got.equals(ref)


# ------------------------------------------------------------------------------ module plan, batch, table
def test_sweep_re_exports_the_design_space_and_envelope_functions():
    # catches a second copy left behind in sweep.py after the split (two engines that can disagree)
    from lowgmap.physics.studies import design_space, envelope
    from lowgmap.physics.studies import sweep as sweep_module

    for name in ("grid", "zipped", "apply_changes", "VARIABLES", "FLUID_KEYS"):
        assert getattr(sweep_module, name) is getattr(design_space, name)
    assert sweep_module.envelope_margin is envelope.envelope_margin


def test_margin_batch_returns_each_question_its_own_chords():
    # catches an offset slip when the solved chords are handed back (an empty question in the
    # middle must not shift the next one's answer, and the line numbers must travel with them)
    from lowgmap.physics.studies.envelope import MarginBatch

    got = []
    batch = MarginBatch()
    # closed form, chords in ln(Q/Q0): a horizontal line k above the point is reached at 1 + m = k,
    # below it at 1 - m = k; a vertical line at Q_L = k Q_L0 likewise
    batch.add([4, 7], [-1.0, -1.0], [2.0, 2.0], [math.log(1.5), math.log(0.8)], [0.0, 0.0],
              lambda m, lines: got.append((m.tolist(), lines.tolist())))
    batch.add([], [], [], [], [], lambda m, lines: got.append((m.tolist(), lines.tolist())))
    batch.add([2], [math.log(1.25)], [0.0], [-1.0], [2.0], lambda m, lines: got.append((m.tolist(), lines.tolist())))
    assert batch.items                       # nothing solved before resolve
    batch.resolve()
    assert [g[1] for g in got] == [[4, 7], [], [2]]
    assert got[0][0] == pytest.approx([0.5, 0.2], rel=1e-12)
    assert got[1][0] == [] and got[2][0] == pytest.approx([0.25], rel=1e-12)
    assert batch.items == []                 # a second resolve does not answer twice
    batch.resolve()
    assert len(got) == 3


def test_tidy_results_gives_the_sweep_table_from_raw_rows():
    # catches the dashboard's path (raw rows of the evaluator + tidy_results) drifting from sweep()'s,
    # and a design without one of the varied inputs losing that column or its row
    low = PowerLawBoundary("low", 1.0, 1.0, "a", "b")                   # Q_G = Q_L
    case = lines_case(low, point=(1e-5, 0.5e-5))
    designs = [{"length": 2.0}, {"size": 0.02, "length": 1.0}, {"contact_angle": math.radians(200.0)}]
    spec = SweepSpec(case, required_margin=0.2)
    from lowgmap.physics.studies.sweep import RESULT_COLUMNS, tidy_results

    df = tidy_results(DesignEvaluator(spec).evaluate_many(designs), designs, spec)
    assert list(df.columns)[:4] == ["design", "length", "size", "contact_angle"]
    assert [c for c in df.columns[4:]] == [c for c in RESULT_COLUMNS if c in df.columns]
    assert math.isnan(df["size"].iloc[0]) and df["size"].iloc[1] == 0.02
    # closed form: the line Q_G = Q_L is reached at (1 + m)/(1 - m) = 2, m = 1/3, whatever the size
    assert df["margin"].iloc[:2].tolist() == pytest.approx([1 / 3, 1 / 3], rel=1e-9)
    assert df["meets_required"].dtype == bool and df["meets_required"].tolist() == [True, True, False]
    assert df.attrs["units"]["contact_angle"] == "rad" and df.attrs["units"]["margin"] == "-"
    assert df.attrs["required_margin"] == 0.2
    assert df.equals(sweep(case, designs, required_margin=0.2))


def test_a_map_split_over_worker_processes_gives_the_same_table_as_one_process(wedge):
    # Catches: rows put back in the wrong order after the designs were split by half-angle over the processes,
    # designs numbered per process instead of per map, a design lost or evaluated twice, and a worker that
    # evaluates with another spec than the map's (its regime or required margin dropped on the way).
    from lowgmap.physics.studies.sweep import sweep_map

    op = wedge.case.operating_point
    kw = dict(regime="isolated bubbles separated", point=(op.ql, op.qg), required_margin=0.25, n_max=60)
    one_m, one = sweep_map(wedge.case, "half_angle", (math.radians(4.0), math.radians(8.0)), "length",
                           (0.03, 0.05), **kw)
    two_m, two = sweep_map(wedge.case, "half_angle", (math.radians(4.0), math.radians(8.0)), "length",
                           (0.03, 0.05), workers=2, **kw)
    assert one.equals(two)
    assert len(one) == 60 and one["design"].tolist() == list(range(60)) and (one["level"] > 0).any()
    assert np.array_equal(one_m.margin, two_m.margin, equal_nan=True) and one_m.current == two_m.current
    assert one["meets_required"].any() and not one["meets_required"].all()


def test_workers_warmed_with_a_case_hold_its_tables_before_the_first_map(wedge):
    # Catches: the case given to the warm-up dropped on the way (the workers then build its tables during the
    # first map, which took 2.3-2.7 s instead of 1.5-1.9 s). After the warm-up the worker's similarity curve of
    # this corner shape is a cache hit; a half-angle no other test uses keeps earlier work out of it.
    from lowgmap.physics.models import corner
    from lowgmap.physics.studies import workers
    from lowgmap.physics.studies.design_space import apply_changes

    case = apply_changes(wedge.case, {"half_angle": math.radians(6.0123)})
    channel = corner.open_channel_of(case.section, case.wetting.contact_angle)
    k_e = corner.OPEN_CHANNEL_INGESTION.defaults["entrance_loss"]
    workers.warm(1, case)
    pool = workers.pools(1)[0]
    # the cache's counts, read in the worker (its CacheInfo record does not pickle)
    counts = "tuple(__import__('lowgmap.physics.models.corner', fromlist=['_'])._similarity_of.cache_info())[:2]"
    hits, misses = pool.submit(eval, counts).result()
    pool.submit(corner._similarity_of, channel, k_e).result()
    assert pool.submit(eval, counts).result() == (hits + 1, misses)


def test_the_design_tab_warms_the_map_workers_with_the_case_in_effect(monkeypatch, wedge):
    # Catches: the dashboard starting the map workers without the case in effect (no head start for its tables)
    import threading

    from lowgmap.app.dashboard import design_tab
    from lowgmap.physics.studies import sweep as sweep_module

    calls = []
    monkeypatch.setattr(sweep_module, "warm_map_pools", lambda n, case=None: calls.append((n, case)))
    monkeypatch.setattr(design_tab, "_WARMED", threading.Event())
    monkeypatch.setattr(design_tab, "MAP_WORKERS", 2)

    class Session:
        doc = wedge
    tab = design_tab.DesignTab.__new__(design_tab.DesignTab)
    tab.session = Session()
    tab.prepare()
    tab.prepare()                                            # once per server
    for t in threading.enumerate():
        if t.name == "lowgmap-map-start":
            t.join(timeout=30)
    assert calls == [(2, wedge.case)]


def test_map_workers_end_when_the_process_that_started_them_is_killed():
    # Catches: map worker processes that outlive a dashboard server stopped by a signal (no exit handlers run
    # then; each idle worker kept about 175 MB until the machine restarted).
    import os
    import select
    import subprocess
    import sys

    code = ("import os, signal\n"
            "from lowgmap.physics.studies.sweep import map_pools\n"
            "if __name__ == '__main__':\n"
            "    print(map_pools(1)[0].submit(os.getpid).result(), flush=True)\n"
            "    os.kill(os.getpid(), signal.SIGKILL)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    worker = int(out.stdout.split()[0])
    try:
        fd = os.pidfd_open(worker)
    except ProcessLookupError:
        return                                          # already gone
    try:
        ended, _, _ = select.select([fd], [], [], 30.0)    # readable once the worker has ended
        assert ended, f"map worker {worker} still running after its parent was killed"
    finally:
        os.close(fd)
