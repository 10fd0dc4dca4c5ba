#!/usr/bin/env bash
# The install a user gets: build the wheel, install it (no -e) into a fresh venv, and run the main job
# from a folder outside the source tree: version, the bundled samples, a margin, a chart to PNG, and
# the dashboard answering its first page.
set -euo pipefail
cd "$(dirname "$0")/.."
src=$(pwd)
work=$(mktemp -d)
server=""
cleanup() { [ -n "$server" ] && kill "$server" 2>/dev/null; rm -rf "$work"; }
trap cleanup EXIT

python3 -m venv "$work/venv"
bin="$work/venv/bin"
"$bin/pip" wheel -q --no-deps -w "$work/dist" "$src"
"$bin/pip" install -q "$work"/dist/lowgmap-*.whl
cd "$work"
export LOWGMAP_CACHE_DIR="$work/cache"     # a fresh table cache: the tables are built from the wheel
echo "wheel: $(ls "$work"/dist)"
"$bin/python" - <<'PY'
import importlib.util, zipfile, glob
names = zipfile.ZipFile(glob.glob("dist/lowgmap-*.whl")[0]).namelist()
tops = sorted({n.split("/")[0] for n in names if not n.split("/")[0].endswith(".dist-info")})
assert tops == ["lowgmap"], f"the wheel must install only the lowgmap package, got {tops}"
for needed in ("lowgmap/physics/data/corner_beta.npz", "lowgmap/samples/condensate_line.toml",
               "lowgmap/samples/studies/design_goal.toml", "lowgmap/app/dashboard/state.py"):
    assert needed in names, f"{needed} missing from the wheel"
assert importlib.util.find_spec("physics") is None and importlib.util.find_spec("app") is None
import lowgmap
print(f"wheel holds {len(names)} files; import lowgmap {lowgmap.__version__}")
PY
"$bin/lowgmap" --version
"$bin/lowgmap" samples --copy cases >/dev/null
"$bin/lowgmap" margin cases/condensate_line.toml
"$bin/lowgmap" chart cases/wedge_separator.toml -o chart.png
test -s chart.png

port=$("$bin/python" -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])')
"$bin/lowgmap" serve --port "$port" >serve.log 2>&1 &
server=$!
"$bin/python" - "$port" <<'PY'
import sys, time, urllib.request
url = f"http://127.0.0.1:{sys.argv[1]}/"
deadline = time.monotonic() + 120
while True:
    try:
        page = urllib.request.urlopen(url, timeout=10).read().decode("utf-8", "replace")
        break
    except OSError:
        if time.monotonic() > deadline:
            sys.exit(f"the dashboard did not answer {url} within 120 s")
        time.sleep(0.5)          # polling the port until the server is up (bounded by the deadline)
assert "<html" in page.lower() and "bokeh" in page.lower(), "the first page is not the dashboard"
print(f"dashboard answered {url} ({len(page)} bytes)")
PY
echo "wheel smoke test: passed"
