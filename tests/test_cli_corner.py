"""`lowgmap corner` and `lowgmap limit` command lines."""
import json
import math

import pytest

from lowgmap.app.files.casefile import sample_case_path
from lowgmap.app.cli import main


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_corner_json_matches_closed_forms(capsys):
    code, out, _ = run(capsys, "corner", "--half-angle", "30 deg", "--contact-angle", "0 deg", "--json")
    assert code == 0
    d = json.loads(out)
    assert d["concus_finn_wets"] is True
    # closed form F = cos(t) cos(t+a)/sin(a) - (pi/2 - t - a); [calc] F(30 deg, 0) = 0.684853
    assert d["area_factor"] == pytest.approx(0.684853, abs=1e-6)
    # wetted wall length b/R = cos(t+a)/sin(a) = cos 30 / sin 30 = sqrt(3) (closed form)
    assert d["wetted_wall_length_per_radius"] == pytest.approx(math.sqrt(3))
    # bisector height h/R = (cos t - sin a)/sin a = (1 - 0.5)/0.5 = 1 (closed form)
    assert d["bisector_height_per_radius"] == pytest.approx(1.0)
    assert d["flow_resistance_noslip"] > d["flow_resistance_free"]  # Ransohoff & Radke (1988) trend


def test_corner_reports_concus_finn_failure(capsys):
    code, out, _ = run(capsys, "corner", "--half-angle", "60 deg", "--contact-angle", "40 deg", "--json")
    assert code == 0
    d = json.loads(out)
    assert d["concus_finn_wets"] is False and "area_factor" not in d
    assert d["critical_contact_angle_deg"] == pytest.approx(30.0)  # Concus & Finn (1969): 90 - alpha


@pytest.mark.parametrize("argv,needle", [
    (["--half-angle", "95 deg", "--contact-angle", "10 deg"], "half_angle"),
    (["--half-angle", "30 s", "--contact-angle", "10 deg"], "--half-angle"),
    (["--half-angle", "30 deg", "--contact-angle", "200 deg"], "contact_angle"),
    (["--half-angle", "30 deg", "--contact-angle", "10 deg", "--radius", "-1 mm"], "--radius"),
])
def test_corner_bad_input(capsys, argv, needle):
    code, _, err = run(capsys, "corner", *argv)
    assert code == 2 and needle in err


def test_limit_on_groove_case(capsys):
    code, out, _ = run(capsys, "limit", str(sample_case_path("cryogenic_groove")), "--json")
    assert code == 0
    d = json.loads(out)
    assert d["critical_flow_m3_s"] > 0 and d["limited_by"] == "speed_index"
    assert d["outlet_speed_index"] == pytest.approx(1.0, abs=1e-3)
    q = [row["critical_flow_m3_s"] for row in d["curve"]]
    assert all(a > b for a, b in zip(q, q[1:]))  # the limit falls with channel length (viscous loss)
    assert d["profile"][-1]["speed_index"] == pytest.approx(1.0, abs=1e-3)


def test_limit_rejects_closed_section(capsys):
    code, _, err = run(capsys, "limit", str(sample_case_path("condensate_line")))
    assert code == 2 and "open channels" in err
