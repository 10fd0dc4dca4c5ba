"""The plan of the house holds: imports go one way between the wings, and no module reaches into
another module's private names.

The rules (DEVELOPERS.md, "Plan of the code"):

* physics/ never imports app/ nor a user-interface or units library (panel, bokeh, param, pint,
  matplotlib);
* inside physics/ the wings are layered: validate/case < properties < geometry < models < chart <
  studies (a module imports only its own layer or lower ones);
* app/files never imports app/outputs, app/dashboard or app/cli; app/outputs never imports
  app/dashboard or app/cli; app/dashboard never imports app/cli;
* no product module imports a private name (``_x``) of another module, or reads one through a
  module alias (``mod._x``).

Imports inside functions count too; imports under ``if TYPE_CHECKING:`` do not.
"""
from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
FOLDERS = {"api": "lowgmap", "physics": "lowgmap.physics", "app": "lowgmap.app"}

PHYSICS_LAYERS = {"validate": 0, "case": 0, "cache": 0, "properties": 1, "geometry": 2, "models": 3, "chart": 4,
                  "studies": 5, "examples": 5}
UI_LIBRARIES = ("panel", "bokeh", "param", "pint", "matplotlib")
APP_FORBIDDEN = {"files": ("outputs", "dashboard", "cli"), "outputs": ("dashboard", "cli"),
                 "dashboard": ("cli",)}


def module_name(path: Path) -> str:
    rel = path.relative_to(ROOT)
    parts = list(rel.with_suffix("").parts)
    prefix = FOLDERS[parts[0]]
    rest = [p for p in parts[1:] if p != "__init__"]
    return ".".join([prefix, *rest])


def product_files() -> list[Path]:
    files = []
    for folder in FOLDERS:
        files += [p for p in (ROOT / folder).rglob("*.py") if "manual" not in p.parts]
    return sorted(files)


def _type_checking_nodes(tree) -> set[int]:
    skip = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            for sub in ast.walk(node):
                skip.add(id(sub))
    return skip


def imports_of(path: Path) -> list[tuple[int, str, tuple[str, ...]]]:
    """(line, imported module, imported names) for every import statement in the file."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    skip = _type_checking_nodes(tree)
    me = module_name(path)
    package = me if path.name == "__init__.py" else me.rpartition(".")[0]
    out = []
    for node in ast.walk(tree):
        if id(node) in skip:
            continue
        if isinstance(node, ast.Import):
            for alias in node.names:
                out.append((node.lineno, alias.name, ()))
        elif isinstance(node, ast.ImportFrom):
            mod = node.module or ""
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                mod = ".".join(base + ([mod] if mod else []))
            out.append((node.lineno, mod, tuple(a.name for a in node.names)))
    return out


def _wing(module: str) -> tuple[str, str]:
    parts = module.split(".")
    if len(parts) >= 3 and parts[1] in ("physics", "app"):
        return parts[1], parts[2]
    return (parts[1], "") if len(parts) >= 2 else ("", "")


def layer_violations() -> list[str]:
    bad = []
    for path in product_files():
        me = module_name(path)
        side, wing = _wing(me)
        for line, mod, names in imports_of(path):
            targets = [mod] + [f"{mod}.{n}" for n in names]
            where = f"{path.relative_to(ROOT)}:{line} imports {mod}"
            if side == "physics":
                if mod.startswith("lowgmap.app") or mod.split(".")[0] in UI_LIBRARIES:
                    bad.append(f"{where} (physics must not import app or UI libraries)")
                if mod.startswith("lowgmap.physics.") and wing in PHYSICS_LAYERS:
                    for t in targets:
                        t_side, t_wing = _wing(t)
                        if t_wing in PHYSICS_LAYERS and PHYSICS_LAYERS[t_wing] > PHYSICS_LAYERS[wing]:
                            bad.append(f"{where} (layer {wing} must not import the higher layer {t_wing})")
                            break
            elif side == "app" and wing in APP_FORBIDDEN:
                for t in targets:
                    t_side, t_wing = _wing(t)
                    if t_side == "app" and t_wing in APP_FORBIDDEN[wing]:
                        bad.append(f"{where} (app/{wing} must not import app/{t_wing})")
                        break
    return bad


def private_violations() -> list[str]:
    bad = []
    for path in product_files():
        me = module_name(path)
        tree = ast.parse(path.read_text(encoding="utf-8"))
        aliases = {}
        for line, mod, names in imports_of(path):
            if not mod.startswith("lowgmap"):
                continue
            for n in names:
                if n.startswith("_") and not n.startswith("__") and mod != me:
                    bad.append(f"{path.relative_to(ROOT)}:{line} imports private {mod}.{n}")
        for node in ast.walk(tree):
            if isinstance(node, ast.Import):
                for a in node.names:
                    if a.name.startswith("lowgmap") and a.asname:
                        aliases[a.asname] = a.name
            elif isinstance(node, ast.ImportFrom) and (node.module or "").startswith("lowgmap"):
                for a in node.names:
                    aliases[a.asname or a.name] = f"{node.module}.{a.name}"
        for node in ast.walk(tree):
            if (isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name)
                    and node.value.id in aliases and node.attr.startswith("_")
                    and not node.attr.startswith("__") and aliases[node.value.id] != me):
                bad.append(f"{path.relative_to(ROOT)}:{node.lineno} reads private "
                           f"{aliases[node.value.id]}.{node.attr}")
    return sorted(set(bad))


def test_scanner_sees_the_tree():
    # catches a scanner that walks nothing (wrong root) and so can never fail
    names = {module_name(p) for p in product_files()}
    assert {"lowgmap", "lowgmap.physics.chart.margins", "lowgmap.app.cli"} <= names
    assert len(names) > 40


def test_scanner_flags_what_it_should(tmp_path, monkeypatch):
    # catches a scanner whose rules never fire: plant one violation of each kind in a fake tree
    fake = tmp_path / "physics" / "properties"
    fake.mkdir(parents=True)
    (tmp_path / "physics" / "__init__.py").write_text("")
    (fake / "__init__.py").write_text("")
    (fake / "bad.py").write_text("from lowgmap.physics.chart.margins import _helper\n"
                                 "from lowgmap.physics.studies import sweep as sw\n"
                                 "def f():\n    import panel\n    return sw._private\n")
    monkeypatch.setattr(__import__(__name__), "ROOT", tmp_path)
    monkeypatch.setattr(__import__(__name__), "FOLDERS", {"physics": "lowgmap.physics"})
    layers = layer_violations()
    private = private_violations()
    assert any("higher layer chart" in v for v in layers) and any("higher layer studies" in v for v in layers)
    assert any("UI libraries" in v for v in layers)
    assert any("imports private lowgmap.physics.chart.margins._helper" in v for v in private)
    assert any("reads private lowgmap.physics.studies.sweep._private" in v for v in private)


def test_imports_go_one_way():
    bad = layer_violations()
    assert not bad, "\n".join(bad)


def test_no_module_uses_another_modules_private_names():
    bad = private_violations()
    assert not bad, "\n".join(bad)


@pytest.mark.parametrize("folder", ["physics", "app"])
def test_source_folders_are_not_importable_under_their_own_names(folder):
    # catches a layout where `import physics` silently loads a second copy of every module
    import subprocess
    import sys

    proc = subprocess.run([sys.executable, "-c", f"import {folder}"], cwd=ROOT, capture_output=True, text=True)
    assert proc.returncode != 0 and f"lowgmap.{folder}" in proc.stderr
