"""Bundled samples are package data found through importlib.resources; `lowgmap samples` and `lowgmap cache`."""
import json

import pytest

from lowgmap.app.cli import main
from lowgmap.app.files import samples
from lowgmap.app.files.casefile import load_case, sample_case_path


def test_every_sample_case_loads_from_the_package():
    # catches a sample missing from the package data or a case that no longer validates
    names = samples.sample_cases()
    assert {"condensate_line", "wedge_separator", "cryogenic_groove", "drop_tower_silicone"} <= set(names)
    for name in names:
        assert load_case(samples.sample_path(name)).invented


def test_sample_path_finds_cases_and_other_files():
    # catches a look-up that always appends .toml (test points and study files unreachable)
    assert samples.sample_path().name == "condensate_line.toml"
    assert samples.sample_path("drop_tower_points.csv").is_file()
    assert samples.sample_path("studies/design_goal.toml").is_file()
    assert sample_case_path("wedge_separator") == samples.sample_path("wedge_separator.toml")
    with pytest.raises(FileNotFoundError, match="no bundled sample 'nope'.*condensate_line.toml"):
        samples.sample_path("nope")


def test_copy_refuses_to_replace_without_force(tmp_path, capsys):
    # catches a copy that silently overwrites the engineer's edited case
    assert main(["samples", "--copy", str(tmp_path), "wedge_separator"]) == 0
    target = tmp_path / "wedge_separator.toml"
    target.write_text("# my edits\n")
    assert main(["samples", "--copy", str(tmp_path), "wedge_separator"]) == 2
    assert "give --force" in capsys.readouterr().err
    assert target.read_text() == "# my edits\n"
    assert main(["samples", "--copy", str(tmp_path), "--force", "wedge_separator"]) == 0
    assert target.read_text() == samples.sample_path("wedge_separator").read_text()


def test_copy_all_keeps_subfolders(tmp_path):
    # catches study files flattened into the target folder (their relative names would break)
    assert main(["samples", "--copy", str(tmp_path)]) == 0
    assert (tmp_path / "studies" / "sweep_halfangle_length.toml").is_file()
    assert sorted(p.relative_to(tmp_path).as_posix() for p in tmp_path.rglob("*") if p.is_file()) == \
        samples.sample_files()


def test_unknown_sample_copies_nothing(tmp_path, capsys):
    assert main(["samples", "--copy", str(tmp_path), "wedge_separator", "nope"]) == 2
    assert "no bundled sample 'nope'" in capsys.readouterr().err
    assert not list(tmp_path.iterdir())


def test_list_json(capsys):
    assert main(["samples", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert "condensate_line" in data["cases"] and "drop_tower_points.csv" in data["files"]


def test_cache_command_reports_and_clears(tmp_path, monkeypatch, capsys):
    # catches a cache command that reports another folder than the one the tables go to
    from lowgmap.physics import cache

    monkeypatch.setenv(cache.ENV_DIR, str(tmp_path))
    cache.cached_arrays("test", (1.0,), lambda: {"x": [1.0, 2.0]})
    assert main(["cache", "--json"]) == 0
    rep = json.loads(capsys.readouterr().out)
    assert rep["path"] == str(tmp_path) and rep["files"] == 1 and rep["enabled"] is True
    assert main(["cache", "--clear"]) == 0
    out = capsys.readouterr().out
    assert "deleted 1 cached file(s)" in out and cache.info()["files"] == 0


#: The gravity samples of issue 18 (invented): a 1-g ground-test loop and a lunar-surface separator.
GRAVITY_SAMPLES = {"ground_test_loop": (9.80665, "vertical upward flow"),       # g0 exact (CGPM 1901)
                   "lunar_separator": (1.62, "horizontal flow")}                 # NASA GSFC Moon Fact Sheet


@pytest.mark.parametrize("name", sorted(GRAVITY_SAMPLES))
def test_gravity_samples_load_chart_and_give_a_margin(name, tmp_path, capsys):
    # catches a gravity sample that is listed but does not compute (a key the reader refuses, a chart that fails,
    # an intended regime the buoyancy chart does not have) or that is not marked as invented
    g, orientation = GRAVITY_SAMPLES[name]
    path = samples.sample_path(name)
    text = path.read_text(encoding="utf-8")
    assert text.startswith("# INVENTED SCENARIO") and "invented = true" in text
    doc = load_case(path)
    assert doc.invented and doc.case.g == g and doc.case.orientation.describe() == orientation
    assert main(["chart", str(path), "-o", str(tmp_path / f"{name}.svg"), "--json"]) == 0
    drawn = json.loads(capsys.readouterr().out)
    assert drawn["notes"] and "buoyancy-inclusive lines define the regions" in drawn["notes"][0]
    assert main(["margin", str(path), "--nominal-only", "--json"]) == 0
    m = json.loads(capsys.readouterr().out)
    assert m["regime"] == doc.settings.intended_regime and m["verdict"]["margin_status"] == "met"
    assert "taitel" in m["limiting_boundary"]                 # the buoyancy family limits the margin


def test_samples_command_lists_the_gravity_samples(capsys):
    assert main(["samples", "--json"]) == 0
    assert set(GRAVITY_SAMPLES) <= set(json.loads(capsys.readouterr().out)["cases"])


def test_no_bundled_test_point_is_set_aside_for_its_label(capsys):
    # issue 15: the bundled points use labels of the bundled charts, so none is "not a chart regime"
    case = samples.sample_path("condensate_line")
    assert main(["compare", str(case), str(samples.sample_path("drop_tower_points.csv")), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["unknown_labels"] == [] and d["n_points"] == 25 and d["confusion_all"]["compared"] == 25
