"""`lowgmap models`: every registered boundary model, with what a case file needs to use it.

Wiring tests: the check values are the model objects of the registry
(:mod:`lowgmap.physics.models.boundary`) and what the case-file reader accepts; no physical number is
checked here.
"""
import json
import math
import re
import tomllib
from pathlib import Path

import pytest

from lowgmap.app.cli import main
from lowgmap.app.files.casefile import loads_case, sample_case_path
from lowgmap.physics.chart.composition import DEFAULT_MODELS, Chart
from lowgmap.physics.models.boundary import get_model, model_names


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def listing():
    import contextlib
    import io

    text, data = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(text):
        assert main(["models"]) == 0
    with contextlib.redirect_stdout(data):
        assert main(["models", "--json"]) == 0
    return text.getvalue(), json.loads(data.getvalue())["models"]


def test_every_registered_model_is_listed(listing):
    # catches a model added to the registry but missing from the list a person reads
    text, entries = listing
    assert [e["name"] for e in entries] == model_names()
    for name in model_names():
        assert re.search(rf"(?m)^{name}  —  ", text), name


def test_entries_are_the_registry_objects(listing):
    # catches a second, hand-kept copy of defaults, ranges or sources that drifts from the models
    _, entries = listing
    for e in entries:
        m = get_model(e["name"])
        assert (e["label"], e["citation"], e["regime_below"], e["regime_above"]) == \
            (m.label, m.citation, m.regime_below, m.regime_above)
        assert [(c["name"], c["default"], c["unit"], c["low"], c["high"], c["source"], c["meaning"])
                for c in e["constants"]] == \
            [(c.name, c.default, c.unit, c.low, c.high, c.source, c.doc) for c in m.constants]
        assert [(v["group"], v["low"] if v["low"] is not None else -math.inf,
                 v["high"] if v["high"] is not None else math.inf, v["source"]) for v in e["validity"]] == \
            [(v.group, v.low, v.high, v.source) for v in getattr(m, "validity", ())]
        assert e["family"] == type(m).__module__.rsplit(".", 1)[-1]
        assert e["default_for"] == [k for k, names in DEFAULT_MODELS.items() if m.name in names]


def test_text_gives_each_constant_with_range_and_source(listing):
    # catches a listing that names constants without the range and source a designer needs to change them
    text, entries = listing
    for e in entries:
        for c in e["constants"]:
            assert f"    {c['name']} = {c['default']:.6g}" in text
            assert f"source: {c['source']}" in text
    assert "allowed 0.05 to 0.95" in text                       # alpha_c of bubble_slug_dukler_1988 (registry)


def test_partition_scheme_regimes_are_listed(listing):
    # catches corner-family models shown with their two side names only: their regimes come from a scheme
    _, entries = listing
    corner = [e for e in entries if e["family"] == "corner"]
    assert corner
    for e in corner:
        scheme = get_model(e["name"]).scheme
        assert [r["name"] for r in e["scheme"]["regimes"]] == [r.name for r in scheme.regimes]


def _sample_with_models(name: str, snippet: str) -> str:
    """A sample case's text with its [[models]] replaced by ``snippet``."""
    text = Path(sample_case_path(name)).read_text(encoding="utf-8")
    text = re.sub(r"(?ms)^\[\[models\]\].*?(?=^\[(?!\[models\]\])|\Z)", "", text)
    return text.rstrip() + "\n\n" + snippet + "\n"


@pytest.mark.parametrize("family, sample", [("tube", "condensate_line"), ("corner", "wedge_separator")])
def test_case_file_entry_loads_and_gives_the_defaults(family, sample, listing):
    # catches a listing whose case-file entry uses names the case-file reader refuses (as the README example
    # did with `critical_void_fraction`), or values that are not the model's defaults
    _, entries = listing
    chosen = [e for e in entries if e["family"] == family]
    snippet = "\n\n".join(e["case_file"] for e in chosen)
    for e in chosen:
        assert tomllib.loads(e["case_file"])["models"][0]["name"] == e["name"]
    doc = loads_case(_sample_with_models(sample, snippet))
    assert {m.name for m in doc.case.models} == {e["name"] for e in chosen}
    chart = Chart.build(doc.case)
    used = {m.name: dict(c) for m, c in list(chart.region_models) + list(chart.comparison_models)}
    for e in chosen:
        if e["name"] in used:
            for c in e["constants"]:
                assert used[e["name"]][c["name"]] == c["default"], (e["name"], c["name"])


def test_every_case_file_entry_is_toml_with_the_defaults(listing):
    # catches an entry that is not valid TOML or does not carry the registry's defaults exactly (a default
    # written to 6 digits, e.g. sqrt(2) as 1.41421, changes the line of a case that copies it)
    _, entries = listing
    for e in entries:
        entry = tomllib.loads(e["case_file"])["models"][0]
        assert entry["name"] == e["name"]
        assert entry.get("constants", {}) == {c["name"]: c["default"] for c in e["constants"]}


def test_one_model_and_one_family(capsys):
    code, out, _ = run(capsys, "models", "bubble_slug_dukler_1988", "--json")
    assert code == 0
    assert [e["name"] for e in json.loads(out)["models"]] == ["bubble_slug_dukler_1988"]
    code, out, _ = run(capsys, "models", "tube", "--json")
    assert code == 0
    names = [e["name"] for e in json.loads(out)["models"]]
    assert names and all(type(get_model(n)).__module__.endswith(".tube") for n in names)


def test_unknown_name_lists_the_known_ones(capsys):
    # catches a bare "not found" that leaves the person guessing the spelling
    code, _, err = run(capsys, "models", "bubble_slug_dukler")
    assert code == 2
    assert "bubble_slug_dukler_1988" in err and "families: corner, tube" in err


def test_buoyancy_models_say_they_apply_when_an_orientation_is_given(listing):
    # catches the old wording "in the default set for horizontal sections" (no section is horizontal: the
    # buoyancy lines join the chart of a circular tube when the case file gives conduit.orientation)
    from lowgmap.physics.models.tube_gravity import HORIZONTAL_MODEL_NAMES, VERTICAL_UPWARD_MODEL_NAMES

    text, entries = listing
    by = {e["name"]: e for e in entries}
    for name, words in [(n, '"vertical upward flow"') for n in VERTICAL_UPWARD_MODEL_NAMES] + \
                       [(n, '"horizontal"') for n in HORIZONTAL_MODEL_NAMES]:
        when = by[name]["default_when"]
        assert "when the case gives an orientation" in when and f"conduit.orientation = {words}" in when, name
        assert "hand-over rule" in when
        assert f"  default:   {when}" in text
    assert "sections sections" not in text and "for horizontal sections" not in text
    assert by["bubble_slug_dukler_1988"]["default_when"] == "in the default set for closed sections (tubes and ducts)"


def test_models_lists_the_measured_surrogate_errors(capsys):
    """`lowgmap models` states how far the surrogate tables may be from the full solves (issue: surrogate
    error reported in the models listing). Bug caught: errors dropped from the listing or from --json."""
    from lowgmap.physics.surrogates import SURROGATE_ERRORS

    assert main(["models", "corner"]) == 0
    text = capsys.readouterr().out
    assert "used unless --exact" in text
    for quantity in SURROGATE_ERRORS:
        assert quantity in text
    assert main(["models", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)["surrogate_errors"]
    assert {r["quantity"] for r in rows} == set(SURROGATE_ERRORS)
    assert all(r["max_rel_error"] < r["limit"] for r in rows)


def test_exact_option_builds_the_chart_with_the_full_solves(monkeypatch, capsys):
    """`--exact` reaches the chart builder (the full solves are requested while the command runs, and only
    then). Bug caught: the flag parsed but the chart still built from the surrogates."""
    from lowgmap.app.files.casefile import sample_case_path
    from lowgmap.physics import surrogates
    from lowgmap.physics.chart.composition import Chart

    seen = []
    original = Chart.build.__func__

    def spy(cls, *args, **kwargs):
        seen.append(surrogates.exact_requested())
        return original(cls, *args, **kwargs)

    monkeypatch.setattr(Chart, "build", classmethod(spy))
    case = str(sample_case_path("condensate_line"))
    assert main(["margin", case, "--exact", "--nominal-only", "--json"]) == 0
    assert seen and all(seen)
    seen.clear()
    assert main(["margin", case, "--nominal-only", "--json"]) == 0
    assert seen and not any(seen)
    capsys.readouterr()
