"""Fast start of the `lowgmap` command line, and a quiet end when the reader closes the pipe.

The checks look at the set of modules a fresh interpreter has imported after the command ran
(never at a time): `lowgmap --version` and `lowgmap --help` must load no numerical, units, plotting
or dashboard library and no command module; a command loads its own module only.
"""
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from lowgmap.app.cli import COMMANDS
from lowgmap.app.files.casefile import sample_case_path

SAMPLE = str(sample_case_path("condensate_line"))
HEAVY = ("numpy", "scipy", "pandas", "matplotlib", "CoolProp", "pint", "panel", "bokeh", "param", "shapely",
         "skfem", "dask", "tomlkit")

#: Runs the command line in this interpreter, then writes the imported module names to stderr.
WRAPPER = """\
import json, sys
from lowgmap.app.cli import main
try:
    code = main(sys.argv[1:])
except SystemExit as exc:
    code = exc.code
sys.stdout.flush()
sys.stderr.write("\\nMODULES " + json.dumps(sorted(sys.modules)) + "\\n")
sys.exit(code)
"""


def run_and_list_modules(*argv):
    proc = subprocess.run([sys.executable, "-c", WRAPPER, *argv], capture_output=True, text=True, timeout=300)
    line = [ln for ln in proc.stderr.splitlines() if ln.startswith("MODULES ")][-1]
    modules = set(json.loads(line[len("MODULES "):]))
    return proc, modules


def top_level(modules) -> set:
    return {m.split(".")[0] for m in modules}


def command_modules(modules) -> set:
    return {m for m in modules if m.startswith("lowgmap.app.cli.") and m != "lowgmap.app.cli.common"}


@pytest.mark.parametrize("flag", ["--version", "--help"])
def test_version_and_help_load_no_heavy_library(flag):
    proc, modules = run_and_list_modules(flag)
    assert proc.returncode == 0, proc.stderr
    assert not top_level(modules) & set(HEAVY), sorted(top_level(modules) & set(HEAVY))
    assert not command_modules(modules), sorted(command_modules(modules))
    assert not {m for m in modules if m.startswith(("lowgmap.physics", "lowgmap.app.outputs",
                                                     "lowgmap.app.dashboard"))}
    if flag == "--help":
        for c in COMMANDS:                 # every command is listed with (the start of) its help line
            assert c.name in proc.stdout and c.help.split()[0] in proc.stdout, c.name
    else:
        assert proc.stdout.startswith("lowgmap ")


def test_command_help_loads_only_that_command():
    proc, modules = run_and_list_modules("margin", "--help")
    assert proc.returncode == 0 and "--ql" in proc.stdout and "--qg" in proc.stdout
    commands_loaded = {m for m in command_modules(modules) if m.rsplit(".", 1)[1] in {c.module for c in COMMANDS}}
    assert commands_loaded == {"lowgmap.app.cli.margin"}
    assert not top_level(modules) & {"numpy", "pint", "CoolProp", "matplotlib", "panel"}


def test_check_loads_no_plotting_dashboard_or_solver(tmp_path):
    # check needs pint (units) and the fluid properties (CoolProp, unless the table cache has them), not
    # matplotlib, panel, pandas or scipy's solvers; pint itself imports the top-level scipy and dask
    # packages when they are installed. The file states no intended regime: naming one makes check build the
    # chart to see that the chart has that regime (tests/test_cli.py, "bad_intended"), which needs the solvers.
    text = Path(SAMPLE).read_text(encoding="utf-8")
    assert 'intended_regime = "dispersed bubbles"\n' in text
    plain = tmp_path / "no_intended_regime.toml"
    plain.write_text(text.replace('intended_regime = "dispersed bubbles"\n', ""), encoding="utf-8")
    proc, modules = run_and_list_modules("check", str(plain))
    assert proc.returncode == 0 and "valid" in proc.stdout
    assert "pint" in top_level(modules)
    assert not top_level(modules) & {"matplotlib", "panel", "bokeh", "param", "pandas", "shapely", "skfem"}
    assert not {m for m in modules if m.startswith(("scipy.optimize", "scipy.interpolate", "scipy.integrate",
                                                     "scipy.stats", "dask.dataframe", "distributed"))}
    assert command_modules(modules) == {"lowgmap.app.cli.check"}
    assert not {m for m in modules if m.startswith(("lowgmap.app.outputs", "lowgmap.app.dashboard"))}


def test_every_command_module_defines_its_arguments_and_run():
    import importlib

    for c in COMMANDS:
        mod = importlib.import_module(c.module_name)
        assert callable(mod.add_arguments) and callable(mod.run), c.name


# ----------------------------------------------------------------------------------------- closed pipe
def _no_traceback(stderr: str) -> None:
    for needle in ("Traceback", "BrokenPipeError", "Exception ignored"):
        assert needle not in stderr, stderr


@pytest.mark.parametrize("argv, codes", [
    (["--version"], (0, 141)),        # argparse prints these itself and ignores a failed write (exit 0)
    (["--help"], (0, 141)),
    (["corner", "--half-angle", "30 deg", "--contact-angle", "10 deg"], (141,)),
])
def test_output_into_a_closed_pipe_ends_quietly(argv, codes):
    # the reader is gone before lowgmap writes a byte: every write fails with EPIPE
    read_fd, write_fd = os.pipe()
    os.close(read_fd)
    try:
        proc = subprocess.run([sys.executable, "-m", "lowgmap", *argv], stdout=write_fd, stderr=subprocess.PIPE,
                              text=True, timeout=300)
    finally:
        os.close(write_fd)
    _no_traceback(proc.stderr)
    assert proc.returncode in codes   # 141 = 128 + SIGPIPE, what a shell reports for a writer cut off by `head`


def test_reader_that_stops_after_one_line_like_head():
    # `lowgmap margin CASE --json | head -1`: the pipe is made smaller than the output (Linux), so
    # lowgmap is still writing when the reader closes after the first line
    import fcntl

    read_fd, write_fd = os.pipe()
    if hasattr(fcntl, "F_SETPIPE_SZ"):
        fcntl.fcntl(write_fd, fcntl.F_SETPIPE_SZ, 4096)
    proc = subprocess.Popen([sys.executable, "-m", "lowgmap", "margin", SAMPLE, "--json"], stdout=write_fd,
                            stderr=subprocess.PIPE, text=True)
    os.close(write_fd)
    first = b""
    while not first.endswith(b"\n"):
        chunk = os.read(read_fd, 1)
        assert chunk, "no output"
        first += chunk
    os.close(read_fd)
    _, err = proc.communicate(timeout=300)
    assert first == b"{\n"
    _no_traceback(err)
    assert proc.returncode == 141
