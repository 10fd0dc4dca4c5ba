"""The `lowgmap` command line: exit codes, messages, JSON output."""
import json
import math
import subprocess
import sys

import pytest

from lowgmap.app import __version__
from lowgmap.app.files.casefile import SAMPLE_DIR, sample_case_path
from lowgmap.app.cli import main

SAMPLES = sorted(SAMPLE_DIR.glob("*.toml"))


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_version_flag(capsys):
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0
    assert __version__ in capsys.readouterr().out


def test_console_script_is_installed_and_runs():
    proc = subprocess.run([sys.executable, "-m", "lowgmap", "--version"], capture_output=True, text=True)
    assert proc.returncode == 0 and "lowgmap" in proc.stdout


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_check_accepts_every_sample(capsys, path):
    code, out, _ = run(capsys, "check", str(path))
    assert code == 0, out
    assert "valid" in out


def test_check_rejects_broken_case_naming_each_problem(capsys, tmp_path):
    text = sample_case_path().read_text()
    text = (text.replace('diameter = "12.7 mm"', 'diameter = "-12.7 mm"')
                .replace('contact_angle = "40 deg"', 'contact_angle = "200 deg"')
                .replace('length = "1.5 m"', 'length = "1.5 s"')
                .replace('temperature = "22 degC"', 'temperature = "500 degC"'))
    bad = tmp_path / "broken.toml"
    bad.write_text(text)
    code, out, err = run(capsys, "check", str(bad))
    assert code == 2
    for needle in ("section.diameter", "wetting.contact_angle", "200", "conduit.length", "time",
                   "fluid.temperature", "773.15 K"):
        assert needle in err, needle
    code, out, _ = run(capsys, "check", str(bad), "--json")
    assert code == 2
    data = json.loads(out)
    assert data["valid"] is False
    assert {p["path"] for p in data["problems"]} >= {"section.diameter", "wetting.contact_angle", "conduit.length",
                                                      "fluid.temperature"}
    assert all(p["line"] for p in data["problems"])


def test_check_missing_file(capsys, tmp_path):
    code, _, err = run(capsys, "check", str(tmp_path / "none.toml"))
    assert code == 2 and "no such file" in err


def test_fluids_lists_sources(capsys):
    code, out, _ = run(capsys, "fluids", "--json")
    assert code == 0
    data = json.loads(out)
    assert "coolprop" in data["sources"] and "table" in data["sources"]
    assert any("water" in n.lower() for n in data["sources"]["coolprop"])
    code, out, _ = run(capsys, "fluids")
    assert "silicone" in out.lower()


def test_section_json_for_tube(capsys):
    code, out, _ = run(capsys, "section", str(sample_case_path("condensate_line")), "--json")
    assert code == 0
    data = json.loads(out)
    # circle: D_h = D (closed form)
    assert data["section"]["hydraulic_diameter_m"] == pytest.approx(0.0127)
    assert data["corners"] == []
    assert data["gravity"]["gravity_negligible"] is True


def test_section_groove_concus_finn(capsys):
    code, out, _ = run(capsys, "section", str(sample_case_path("cryogenic_groove")), "--json")
    assert code == 0
    data = json.loads(out)
    apex = [c for c in data["corners"] if math.isclose(c["half_angle_deg"], 15.0)]
    assert apex and apex[0]["wicks"] is True  # Concus & Finn (1969): 0 + 15 deg < 90 deg
    assert apex[0]["critical_contact_angle_deg"] == pytest.approx(75.0)
    code, out, _ = run(capsys, "section", str(sample_case_path("cryogenic_groove")))
    assert "wicks" in out and "Bond number" in out


def test_no_command_prints_help(capsys):
    code, out, _ = run(capsys)
    assert code == 2 and "COMMAND" in out


# --------------------------------------------------------------------------------------------- check = compute
def _variant(tmp_path, name, old, new, base=None):
    text = (base or sample_case_path()).read_text(encoding="utf-8")
    assert old in text, old
    p = tmp_path / f"{name}.toml"
    p.write_text(text.replace(old, new), encoding="utf-8")
    return p


def _variants(tmp_path):
    """Case files that look plausible but carry one input error each (or none): what check and margin must
    judge alike."""
    models = '\n[[models]]\nname = "bubble_slug_dukler_1988"\n'
    g = 'residual_acceleration = "1e-6 g0"'
    return [
        _variant(tmp_path, "bad_constant", "[operating_point]\n", models + "constants = { alpha_c = 1.5 }\n\n[operating_point]\n"),
        _variant(tmp_path, "bad_constant_name", "[operating_point]\n", models + "constants = { alpha = 0.4 }\n\n[operating_point]\n"),
        _variant(tmp_path, "bad_band", "[operating_point]\n", models + "bands = { alpha_c = [0.2, 0.99] }\n\n[operating_point]\n"),
        _variant(tmp_path, "bad_model", "[operating_point]\n", '\n[[models]]\nname = "no_such_model"\n\n[operating_point]\n'),
        _variant(tmp_path, "bad_intended", 'intended_regime = "dispersed bubbles"', 'intended_regime = "foam"'),
        _variant(tmp_path, "good_band", "[operating_point]\n", models + "bands = { alpha_c = [0.40, 0.50] }\n\n[operating_point]\n"),
        _variant(tmp_path, "good_upflow", g, 'residual_acceleration = "ground"\norientation = "vertical upward flow"'),
        _variant(tmp_path, "good_no_intended", 'intended_regime = "dispersed bubbles"\n', ""),
    ]


def test_a_file_check_calls_valid_never_fails_margin_for_an_input_reason(capsys, tmp_path):
    # catches `check` saying "valid" for a file `margin` then refuses (an intended regime the chart does not
    # have, a constant out of range) and `check` refusing a file margin computes
    verdicts = {}
    for path in _variants(tmp_path) + SAMPLES:
        checked = run(capsys, "check", str(path))[0]
        computed, _, err = run(capsys, "margin", str(path), "--nominal-only")
        verdicts[path.stem] = checked
        assert (checked == 0) == (computed == 0), (path.stem, checked, computed, err)
    assert {k for k, v in verdicts.items() if v == 2} == {"bad_constant", "bad_constant_name", "bad_band",
                                                          "bad_model", "bad_intended"}


def test_check_names_a_bad_constant_and_an_unknown_intended_regime(capsys, tmp_path):
    paths = {p.stem: p for p in _variants(tmp_path)}
    code, _, err = run(capsys, "check", str(paths["bad_constant"]))
    assert code == 2 and "models[0].constants" in err and "alpha_c" in err and "1.5" in err
    code, out, _ = run(capsys, "check", str(paths["bad_intended"]), "--json")
    d = json.loads(out)
    assert code == 2 and d["valid"] is False
    prob, = d["problems"]
    assert prob["path"] == "chart.intended_regime" and "'foam'" in prob["message"] and prob["line"]
    assert "dispersed bubbles" in prob["message"]                     # the chart's regimes are listed


def test_check_says_which_default_models_a_list_keeps_or_drops(capsys, tmp_path):
    # catches a check that is silent while models_replace_defaults drops the rest of the chart
    merged = _variant(tmp_path, "merged", "[operating_point]\n",
                      '\n[[models]]\nname = "bubble_slug_dukler_1988"\n\n[operating_point]\n')
    code, out, _ = run(capsys, "check", str(merged))
    assert code == 0 and "merged onto the section's default models" in out and "slug_annular_dukler_1988" in out
    replaced = tmp_path / "replaced.toml"
    replaced.write_text("models_replace_defaults = true\n" + merged.read_text(encoding="utf-8"), encoding="utf-8")
    code, out, _ = run(capsys, "check", str(replaced), "--json")
    note, = json.loads(out)["notes"]
    assert code == 0 and "left out: slug_annular_dukler_1988" in note and "remove models_replace_defaults" in note


@pytest.mark.parametrize("liquid, temperature", [
    ("water", "273.16 K"),       # triple point of water, 273.16 K (ITS-90 defining fixed point)
    ("nitrogen", "63.151 K"),    # triple point of nitrogen in CoolProp's equation of state (Span et al. 2000)
])
def test_a_case_at_the_liquid_triple_point_is_valid(capsys, tmp_path, liquid, temperature):
    # catches a temperature check with an open lower end at the triple point (the saturated liquid exists there)
    import CoolProp.CoolProp as CP

    tt = CP.PropsSI("Ttriple", liquid.capitalize())
    assert float(temperature.split()[0]) == pytest.approx(tt, abs=1e-3)
    text = sample_case_path().read_text(encoding="utf-8")
    text = (text.replace('liquid = "water"\ngas = "air"\n', f'liquid = "{liquid}"\n')   # own vapour at saturation
                .replace('temperature = "22 degC"', f'temperature = "{temperature}"')
                .replace('pressure = "101.3 kPa"\n', ""))
    p = tmp_path / "triple.toml"
    p.write_text(text, encoding="utf-8")
    code, out, err = run(capsys, "check", str(p))
    assert code == 0, err
