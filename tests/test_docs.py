"""Documentation checks: the theory manual is generated and complete; the README keeps its promises."""
import re
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "physics" / "manual"))
import build as manual_build  # noqa: E402


def test_theory_manual_is_up_to_date():
    assert (ROOT / "physics" / "README.md").read_text(encoding="utf-8") == manual_build.render(), \
        "physics/README.md is stale: run `python physics/manual/build.py`"


def test_every_registered_boundary_model_is_in_the_manual():
    from lowgmap.physics.models.boundary import model_names

    text = (ROOT / "physics" / "README.md").read_text(encoding="utf-8")
    missing = [name for name in model_names() if name not in text]
    assert not missing, f"models without a theory-manual entry: {missing}"


def _quick_start_commands():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    start = text.index("## Quick start")
    end = text.index("\n## ", start + 5)
    return re.findall(r"```bash\n(.*?)\n```", text[start:end], flags=re.S)


def test_readme_quick_start_has_exactly_two_commands():
    cmds = _quick_start_commands()
    assert len(cmds) == 2 and all("\n" not in c for c in cmds), cmds
    assert "pytest" in cmds[1] and "lowgmap" in cmds[0]


def test_ci_runs_the_readme_test_command():
    ci = (ROOT / ".ci" / "run").read_text()
    assert "ci:test-command" in ci
    text = (ROOT / "README.md").read_text()
    after = text.split("<!-- ci:test-command -->", 1)[1]
    assert re.search(r"```bash\n(.*?)\n```", after, flags=re.S).group(1) == _quick_start_commands()[1]


def test_caution_is_stated():
    from lowgmap.app import CAUTION

    readme = (ROOT / "README.md").read_text()
    assert "not a substitute for qualification testing" in readme
    assert "qualification testing" in CAUTION and "standards" in CAUTION


def test_readme_notebook_session_runs(tmp_path, monkeypatch, capsys):
    # catches a public name that the README shows but `import lowgmap` does not provide (or that
    # changed its signature), and an example that no longer runs as written
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    after = text.split("<!-- ci:notebook -->", 1)[1]
    code = re.search(r"```python\n(.*?)\n```", after, flags=re.S).group(1)
    assert len(code.splitlines()) <= 14
    monkeypatch.chdir(tmp_path)
    namespace: dict = {}
    exec(compile(code, "README.md notebook", "exec"), namespace)
    printed = capsys.readouterr().out
    m = namespace["m"]
    # the printed line is the margins object's own numbers (one source for every number)
    assert printed.strip() == f"{m.regime} ±{m.symmetric_margin:.1%} {m.limiting_boundary}"
    assert namespace["env"].regime == m.regime
    assert (tmp_path / "condensate_chart.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_public_api_names_resolve():
    # catches an entry of lowgmap's name table that points at a moved or renamed object
    import lowgmap

    missing = [n for n in lowgmap.__all__ if getattr(lowgmap, n, None) is None]
    assert not missing
    assert "point_margins" in dir(lowgmap)
    with pytest.raises(AttributeError, match="no attribute 'nope'"):
        lowgmap.nope


def _readme_case_files():
    """Every ```toml block of the README that is a whole case file (it has a [fluid] table); fragments
    (history entries, sweep files) are skipped."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```toml\n(.*?)\n```", text, flags=re.S)
    return [b for b in blocks if re.search(r"(?m)^\[fluid\]", b)]


def test_readme_case_files_load_and_give_a_margin(tmp_path, capsys):
    # catches a README example with a constant name the reader refuses (it once used
    # `critical_void_fraction`; the real name is `alpha_c`), or any other key that does not load
    import json

    from lowgmap.app.cli import main

    blocks = _readme_case_files()
    assert blocks                                            # the case-file example is found
    for i, block in enumerate(blocks):
        assert "[test_points]" not in block                  # an example with files would need them beside it
        path = tmp_path / f"block_{i}.toml"
        path.write_text(block + "\n", encoding="utf-8")
        code = main(["margin", str(path), "--json"])
        out, err = capsys.readouterr()
        assert code == 0, (i, err)
        d = json.loads(out)
        assert d["regime"] and d["verdict"]["margin_status"] in ("met", "NOT MET", "not established"), i


def test_readme_case_file_section_documents_the_gravity_and_band_keys():
    # catches a case-file key the reader accepts but the README never mentions (an engineer cannot guess it)
    from lowgmap.app.files.casefile import DEFAULT_CASE_BAND_REASON
    from lowgmap.app.files.units import ORIENTATION_WORDS, gravity_names

    text = (ROOT / "README.md").read_text(encoding="utf-8")
    start = text.index("## Case file")
    section = text[start:text.index("\n## ", start + 5)]
    for word in ("orientation", "bands", "band_reasons", DEFAULT_CASE_BAND_REASON, *gravity_names(),
                 *ORIENTATION_WORDS):
        assert f'"{word}"' in section or f"`{word}`" in section or f"{word} =" in section, word
    commands = text[text.index("## Commands"):text.index("## Limits and errors")]
    assert "--gravity" in commands and "--orientation" in commands and "--compare" in commands


def test_public_api_exports_orientation_and_the_named_levels():
    # catches the gravity inputs reachable only through internal module paths
    import lowgmap

    assert lowgmap.Orientation.vertical_up().axial_fraction == 1.0
    assert lowgmap.gravity_level("lunar surface").value == 1.62      # NASA GSFC Moon Fact Sheet
    assert {"Orientation", "gravity_level", "GravityLevel", "GRAVITY_LEVELS", "with_conduit"} <= set(lowgmap.__all__)
