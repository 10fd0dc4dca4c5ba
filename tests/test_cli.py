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
