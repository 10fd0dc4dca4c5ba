"""`lowgmap margin`, `robust` and `uncertainty`: wiring, JSON contents, messages, exit codes.

Physics is checked in test_margins.py / test_uncertainty.py; here the numbers printed must be the
ones the chart and margin objects compute.
"""
import json
import math

import pytest

from lowgmap.app import CAUTION
from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.app.cli import main
from lowgmap.app.formatting import format_factor
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.chart.margins import point_margins

SAMPLE = str(sample_case_path("condensate_line"))


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def sample():
    doc = load_case(SAMPLE)
    return doc, Chart.build(doc.case)


def test_margin_json_matches_chart_objects(capsys, sample):
    doc, chart = sample
    code, out, _ = run(capsys, "margin", SAMPLE, "--json")
    assert code == 0
    data = json.loads(out)
    op = doc.case.operating_point
    assert data["operating_point"] == {"ql_m3_s": op.ql, "qg_m3_s": op.qg}
    pm = point_margins(chart, op.ql, op.qg)
    assert data["regime"] == pm.regime == "dispersed bubbles"
    assert data["symmetric_margin"] == pytest.approx(pm.symmetric_margin, rel=1e-12)
    assert data["limiting_boundary"] == pm.limiting_boundary == "bubble_slug_dukler_1988"
    assert [b["name"] for b in data["boundaries"]] == [b.name for b in chart.boundaries]
    for b, ref in zip(data["boundaries"], pm.boundaries):
        for key in ("ql_factor_up", "ql_factor_down", "qg_factor_up", "qg_factor_down", "log_distance"):
            assert b[key] == (pytest.approx(getattr(ref, key), rel=1e-12) if getattr(ref, key) is not None else None)
        assert b["source"] == ref.source and b["role"] == ref.role
    assert data["boundaries"][0]["ql_factor_up"] is None          # null where no crossing in the chart range
    assert data["meets_required_margin"] is True and data["required_margin"] == pytest.approx(0.3)


def test_margin_point_from_options_with_units(capsys, sample):
    doc, chart = sample
    code, out, _ = run(capsys, "margin", SAMPLE, "--ql", "2 L/min", "--qg", "1500 sccm", "--json")
    assert code == 0
    data = json.loads(out)
    assert data["operating_point"]["ql_m3_s"] == pytest.approx(2e-3 / 60, rel=1e-12)
    f = doc.case.fluid
    # sccm at 0 degC, 1 atm converted to the local state (ideal gas), as lowgmap.app.files.units documents
    q_std = 1500e-6 / 60
    assert data["operating_point"]["qg_m3_s"] == pytest.approx(q_std * 101325 / f.pressure * f.temperature / 273.15,
                                                               rel=1e-9)
    # one option given: the other flow is the case's
    code, out, _ = run(capsys, "margin", SAMPLE, "--ql", "5 L/min", "--json")
    data = json.loads(out)
    assert data["operating_point"]["qg_m3_s"] == pytest.approx(doc.case.operating_point.qg, rel=1e-12)


@pytest.mark.parametrize("argv,needle", [
    (["--ql", "3 kg"], "--ql"),
    (["--qg", "fast"], "--qg"),
    (["--ql=-3 L/min"], "must be a flow rate > 0"),
    (["--qg", "0 mL/min"], "must be a flow rate > 0"),
])
def test_margin_bad_values_exit_2(capsys, argv, needle):
    code, out, err = run(capsys, "margin", SAMPLE, *argv)
    assert code == 2 and needle in err and "Traceback" not in err


def test_margin_text_table(capsys):
    code, out, _ = run(capsys, "margin", SAMPLE)
    assert code == 0
    assert "Regime: dispersed bubbles" in out
    assert "Symmetric margin: ±78.1 %, limited by bubble–slug, void fraction (Dukler et al. 1988)" in out
    assert "−87.7 % (0.1228)" in out and "+715 % (8.146)" in out
    assert out.rstrip().splitlines()[-1] == CAUTION


def test_format_factor():
    assert format_factor(1.8) == "+80 % (1.8)"
    assert format_factor(0.4) == "\u221260 % (0.4)"
    assert format_factor(166.5) == "+16,550 % (166.5)"
    assert format_factor(None) == "none"


def test_case_without_point_or_regimes(capsys, tmp_path, monkeypatch):
    text = open(SAMPLE, encoding="utf-8").read()
    cut = text[:text.index("[operating_point]")]
    path = tmp_path / "nopoint.toml"
    path.write_text(cut, encoding="utf-8")
    code, _, err = run(capsys, "margin", str(path))
    assert code == 2 and "no operating point" in err and "--ql and --qg" in err
    code, out, _ = run(capsys, "margin", str(path), "--ql", "3 L/min", "--qg", "0.5 L/min", "--json")
    assert code == 0 and json.loads(out)["regime"] == "dispersed bubbles"
    # a chart on which no model applies (e.g. an open section before open-channel models): no regimes
    import lowgmap.app.cli.operating as operating   # the chart of margin, robust and uncertainty
    monkeypatch.setattr(operating, "case_chart", lambda doc: Chart.build(doc.case, []))
    code, out, _ = run(capsys, "margin", SAMPLE, "--json")
    data = json.loads(out)
    assert code == 0 and data["regime"] == "" and data["symmetric_margin"] is None and data["boundaries"] == []
    code, out, _ = run(capsys, "margin", SAMPLE)
    assert "Regime: none" in out
    code, _, err = run(capsys, "uncertainty", SAMPLE)
    assert code == 2 and "no regime" in err


def test_robust(capsys, sample):
    doc, chart = sample
    code, out, _ = run(capsys, "robust", SAMPLE, "--regime", "elongated bubbles / slugs", "--json")
    assert code == 0
    data = json.loads(out)
    # Dukler et al. (1988) lines are both Q_G = r Q_L: the optimum ratio is sqrt(r1 r2) (see test_margins)
    from lowgmap.physics.models.tube import drift_flux_flow_ratio
    r1 = drift_flux_flow_ratio(**dict(chart.region_models[0][1]))
    r2 = drift_flux_flow_ratio(**dict(chart.region_models[1][1]))
    assert data["qg_m3_s"] / data["ql_m3_s"] == pytest.approx(math.sqrt(r1 * r2), rel=1e-5)
    assert set(data["limiting"]) == {"bubble_slug_dukler_1988", "slug_annular_dukler_1988"}
    code, out, _ = run(capsys, "robust", SAMPLE, "--regime", "Elongated Bubbles / Slugs")
    assert code == 0 and "symmetric margin ±" in out and out.rstrip().endswith(CAUTION)


def test_robust_unknown_regime_lists_known(capsys):
    code, _, err = run(capsys, "robust", SAMPLE, "--regime", "slug")
    assert code == 2
    assert "unknown regime 'slug'" in err
    for name in ("dispersed bubbles", "elongated bubbles / slugs", "annular (gas core)"):
        assert name in err
    code, _, err = run(capsys, "robust", SAMPLE, "--regime", "annular (gas core)", "--ql-range", "5 L/min", "1 L/min")
    assert code == 2 and "--ql-range" in err


def test_uncertainty_json_reproducible(capsys):
    argv = ("uncertainty", SAMPLE, "--samples", "400", "--seed", "3", "--json")
    code, out, _ = run(capsys, *argv)
    assert code == 0
    a = json.loads(out)
    _, out, _ = run(capsys, *argv)
    assert json.loads(out) == a
    assert a["n"] == 400 and a["seed"] == 3 and a["intended_regime"] == "dispersed bubbles"
    assert {i["target"] for i in a["inputs"]} == {"liquid_flow", "gas_flow", "surface_tension"}
    assert {s["input"] for s in a["sensitivity"]} == {"liquid_flow", "gas_flow", "surface_tension"}
    code, out, _ = run(capsys, "uncertainty", SAMPLE, "--samples", "300", "--regime", "annular (gas core)")
    assert code == 0 and "Probability of staying in it: 0.0000" in out and out.rstrip().endswith(CAUTION)
    code, _, err = run(capsys, "uncertainty", SAMPLE, "--samples", "1")
    assert code == 2 and "--samples" in err
    code, _, err = run(capsys, "uncertainty", SAMPLE, "--samples", "10", "--workers", "0")
    assert code == 2 and "--workers" in err


def test_uncertainty_with_workers_prints_the_same_result(capsys):
    # catches --workers not passed on, or a result that depends on how many processes computed the draws
    # (40 draws: two blocks, one per worker)
    argv = ("uncertainty", str(sample_case_path("wedge_separator")), "--samples", "120", "--seed", "2",
            "--chart-draws", "40")
    _, one, _ = run(capsys, *argv, "--json")
    code, two, _ = run(capsys, *argv, "--json", "--workers", "2")
    assert code == 0 and json.loads(two) == json.loads(one) and json.loads(one)["chart_draws"] == 40
    _, text, _ = run(capsys, *argv, "--workers", "2")
    assert "40 property/geometry draws (computed in 2 worker processes)" in text
