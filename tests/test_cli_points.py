"""`lowgmap compare` and `lowgmap calibrate` (lowgmap.app.cli.compare, lowgmap.app.cli.calibrate): wiring, files written, errors.

The numbers shown come from lowgmap.physics.studies.agreement and lowgmap.physics.studies.calibration (tested there); these tests check
that the commands report them, that a calibrated case is a loadable next revision with its history, and
that bad input gives exit code 2 with a message. The sample test points are invented demonstration
data (see the file's header); they are inputs here, not check values.
"""
import json
import shutil
from pathlib import Path

import pytest

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.app.cli import main
from lowgmap.app.cli.points import parse_regime_map
from lowgmap.app.files.revisions import next_revision
from lowgmap.physics.chart.composition import Chart

CASE = str(sample_case_path())
POINTS = str(sample_case_path().parent / "drop_tower_points.csv")
MAP = ["--map", "annular=annular (gas core)"]
SHORT = ["--length", "0.1 m"]            # observed 0.1 m after the inlet: some drop-tube points are valid
BS = "bubble_slug_dukler_1988"


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_compare_json(capsys):
    code, out, _ = run(capsys, "compare", CASE, POINTS, *MAP, *SHORT, "--json")
    assert code == 0
    d = json.loads(out)
    assert d["n_points"] == 25 and d["revision"] == "A"
    assert d["unknown_labels"] == []                               # the bundled labels are chart regimes
    cm = d["confusion_all"]
    assert cm["compared"] == 25 and sum(map(sum, cm["counts"])) == 25
    assert d["fraction_all"] == pytest.approx(cm["agreeing"] / cm["compared"])
    assert d["n_valid"] == sum(p["valid"] for p in d["points"])
    assert d["criteria"]["observation_length_m"] == pytest.approx(0.1)
    assert d["criteria"]["bond_max_source"] == "Brauner (1990)"
    for p in d["points"]:
        assert p["valid"] == (not p["reasons"])
    listed = {q["test_id"] for b in d["by_boundary"] for q in b["points"]}
    assert listed == {p["test_id"] for p in d["points"] if p["agrees"] is False}


def test_compare_text_and_criteria_options(capsys, tmp_path):
    # catches labels that are not chart regimes dropped without a word, rows set aside without their reason,
    # and table headers cut or run together (issue 15, item 4)
    points = tmp_path / "points.csv"
    lines = Path(POINTS).read_text(encoding="utf-8").splitlines()
    assert any(ln.startswith("DT-06,") for ln in lines)       # one point relabelled with a phrase, not a regime
    lines = [ln.replace(",elongated bubbles / slugs,", ",slug-annular transition,") if ln.startswith("DT-06,")
             else ln for ln in lines]
    points.write_text("\n".join(lines) + "\n", encoding="utf-8")
    code, out, _ = run(capsys, "compare", CASE, str(points), "--safety-factor", "1", "--bond-max", "0.5")
    assert code == 0
    assert "Confusion matrix, valid points" in out and "Disagreeing points by boundary" in out
    assert "is below 0.5 (Brauner 1990)" in out and "low-g time is at least 1 × the time" in out
    assert "'slug-annular transition' (1)" in out                   # unmapped labels are listed
    row = next(ln for ln in out.splitlines() if ln.strip().startswith("DT-06 "))
    assert row.endswith("not compared: label not a chart regime")     # and the point's row says so
    head = next(ln for ln in out.splitlines() if ln.strip().startswith("test id"))
    for word in ("test id", "Q_L [L/min]", "Q_G [L/min]", "needs [s]", "has [s]", "valid", "observed -> chart"):
        assert f" {word} " in f" {head} "                           # every header whole, spaced from the next
    assert "Rows set aside:" in out and "no chart regime matches its words" in out   # and why rows were set aside
    assert "[1] dispersed bubbles; [2] elongated bubbles / slugs; [3] annular (gas core)" in out  # header key, not cut
    assert "Preliminary design aid" in out


def test_calibrate_writes_the_next_revision_with_history(capsys, tmp_path):
    new = tmp_path / "calibrated.toml"
    code, out, _ = run(capsys, "calibrate", CASE, POINTS, *MAP, *SHORT, "--fit", f"{BS}.alpha_c", "-o", str(new),
                       "--json")
    assert code == 0
    d = json.loads(out)
    (c,) = d["constants"]
    assert c["model"] == BS and c["constant"] == "alpha_c" and c["start"] == pytest.approx(0.45)
    lo, hi = c["interval_95"]
    assert lo <= c["value"] <= hi
    assert d["revision_before"] == "A" and d["revision_after"] == "B" and d["written"] == str(new)
    assert d["cv_method"] and d["agreement_after"] >= d["agreement_before"]
    doc = load_case(new)                                             # loads with the case-file reader
    assert doc.case.revision == "B"
    hist = doc.data["history"]
    assert len(hist) == 1 and hist[0]["revision"] == "A" and "date" in hist[0]
    before = {m["name"]: m.get("constants", {}) for m in hist[0]["models"]}
    assert before[BS]["alpha_c"] == pytest.approx(0.45) and before[BS]["c0"] == pytest.approx(1.2)
    chart = Chart.build(doc.case)
    assert dict(chart.region_models[0][1])["alpha_c"] == pytest.approx(c["value"], rel=1e-5)
    assert [m.name for m, _ in chart.comparison_models] == [m.name for m, _ in
                                                           Chart.build(load_case(CASE).case).comparison_models]
    assert load_case(CASE).case.revision == "A"                      # the input is untouched
    # a second calibration moves on to C and keeps both earlier revisions
    newer = tmp_path / "c.toml"
    code, out, _ = run(capsys, "calibrate", str(new), POINTS, *MAP, *SHORT, "--all-points", "--fit",
                       "slug_annular_dukler_1988.alpha_c", "-o", str(newer))
    assert code == 0 and "revision C" in out
    doc = load_case(newer)
    assert [h["revision"] for h in doc.data["history"]] == ["A", "B"]


def test_calibrate_empirical_boundary(capsys, tmp_path):
    new = tmp_path / "empirical.toml"
    code, out, _ = run(capsys, "calibrate", CASE, POINTS, *MAP, *SHORT, "--all-points", "--empirical",
                       "dispersed bubbles|elongated bubbles / slugs", "-o", str(new), "--json")
    assert code == 0
    fit = json.loads(out)
    doc = load_case(new)
    assert doc.case.revision == "B"
    (cb,) = doc.data["custom_boundaries"]
    assert cb["kind"] == "power_law" and "fitted from test points" in cb["label"]
    assert cb["flow_unit"] == "L/min" and cb["name"] == fit["boundary_name"]   # the case's liquid-flow unit
    chart = Chart.build(doc.case)
    line = chart.region_models[0][0]
    assert line.name == cb["name"]                                 # defines the bubble-slug regions now
    q = 3e-6                                                       # read back in SI: the fitted line
    assert line.qg_of_ql(doc.case, q) == pytest.approx(fit["a"] * q ** fit["b"], rel=1e-4)
    assert line.ql_range == pytest.approx(tuple(fit["ql_range_m3_s"]), rel=1e-5)
    assert BS in [m.name for m, _ in chart.comparison_models]
    assert doc.data["history"][0]["revision"] == "A"


def test_calibrate_keeps_test_point_files_reachable(capsys, tmp_path):
    src = tmp_path / "a"
    src.mkdir()
    shutil.copy(POINTS, src / "points.csv")
    text = sample_case_path().read_text(encoding="utf-8") + '\n[test_points]\nfiles = ["points.csv"]\n'
    (src / "case.toml").write_text(text, encoding="utf-8")
    out_dir = tmp_path / "b" / "c"
    code, _, _ = run(capsys, "calibrate", str(src / "case.toml"), str(src / "points.csv"), *MAP, *SHORT,
                     "--fit", f"{BS}.alpha_c", "-o", str(out_dir / "new.toml"))
    assert code == 0
    doc = load_case(out_dir / "new.toml")
    assert all(f.exists() for f in doc.test_point_files) and len(doc.test_point_files) == 1


@pytest.mark.parametrize("argv,needle", [
    (["--fit", "no_such_model.alpha_c"], "unknown model 'no_such_model'"),
    (["--fit", f"{BS}.alpha_x"], "has no constant 'alpha_x'"),
    # the sample labels its annular points "annular (gas core)" now; mapped away, none is left on that side
    (["--fit", "slug_annular_dukler_1988.alpha_c", "--map", "annular (gas core)=annular"],
     "no valid test points observed as 'annular (gas core)'"),
    (["--fit", f"{BS}.alpha_c", "--empirical", "a|b"], "either --fit"),
    ([], "either --fit"),
    (["--empirical", "dispersed bubbles"], "two different names"),
    (["--fit", f"{BS}.alpha_c", "--map", "annular"], "LABEL=REGIME"),
    (["--fit", f"{BS}.alpha_c", "--safety-factor", "0.5"], "safety_factor"),
])
def test_calibrate_errors(capsys, argv, needle):
    code, _, err = run(capsys, "calibrate", CASE, POINTS, *SHORT, *argv)
    assert code == 2
    assert needle in err


def test_file_errors(capsys, tmp_path):
    code, _, err = run(capsys, "compare", CASE, str(tmp_path / "none.csv"))
    assert code == 2 and "test-point file not found" in err
    existing = tmp_path / "exists.toml"
    existing.write_text("x", encoding="utf-8")
    code, _, err = run(capsys, "calibrate", CASE, POINTS, *MAP, *SHORT, "--fit", f"{BS}.alpha_c", "-o",
                       str(existing))
    assert code == 2 and "--force" in err
    assert existing.read_text(encoding="utf-8") == "x"


def test_helpers():
    assert next_revision("A") == "B" and next_revision("Z") == "AA" and next_revision("B9") == "B10"
    assert parse_regime_map(["a = b=c"]) == {"a": "b=c"}


def test_calibration_that_moves_the_operating_point_says_so(capsys, tmp_path):
    # the sample calibration moves the bubble-slug line past the operating point (3 L/min water, 400 sccm air):
    # the change must be stated on screen, in the JSON and in the [[history]] entry of revision B
    import tomllib

    new = tmp_path / "calibrated.toml"
    code, out, _ = run(capsys, "calibrate", CASE, POINTS, *SHORT, "--fit", f"{BS}.alpha_c", "-o", str(new))
    assert code == 0
    assert "The operating point moves from dispersed bubbles in revision A to elongated bubbles / slugs in " \
           "revision B" in out
    assert "NOT MET in revision B" in out
    hist = tomllib.loads(new.read_text(encoding="utf-8"))["history"][-1]
    assert "The operating point moves from dispersed bubbles" in hist["change"]
    assert hist["verdict_before"].startswith("dispersed bubbles") and "met" in hist["verdict_before"]
    assert hist["verdict_after"].startswith("elongated bubbles / slugs") and "NOT MET" in hist["verdict_after"]
    code, out, _ = run(capsys, "calibrate", CASE, POINTS, *SHORT, "--fit", f"{BS}.alpha_c", "--json")
    d = json.loads(out)
    assert d["verdict_before"]["regime"] == "dispersed bubbles" and d["verdict_after"]["margin_status"] == "NOT MET"
    assert d["verdict_change"].startswith("The operating point moves")



def test_bundled_points_need_no_label_map(capsys):
    # the tube samples' labels are chart regimes (only the transitional label is set aside, by name);
    # the invented corner points use the corner chart's regime names
    d = json.loads(run(capsys, "compare", CASE, POINTS, "--json")[1])
    assert d["unknown_labels"] == []
    wedge = str(sample_case_path("wedge_separator").parent)
    d = json.loads(run(capsys, "compare", wedge + "/wedge_separator.toml", wedge + "/wedge_points.csv", "--json")[1])
    assert d["unknown_labels"] == [] and d["n_points"] == 15
    assert d["compared_all"] == 15


def test_robust_text_states_the_search_range_and_caveats(capsys):
    code, out, _ = run(capsys, "robust", CASE, "--regime", "dispersed bubbles")
    assert code == 0
    assert "a decade either side of the operating point" in out
    assert "Caveats:" in out and "edge of the searched range" in out
    with pytest.raises(SystemExit):
        main(["robust", "--help"])
    out = " ".join(capsys.readouterr().out.split())
    assert "default: chart range" not in out and "default: a decade either side" in out
