"""Dashboard responsiveness and memory (run on demand: `python tests/perf/bench_dashboard.py`).

Starts `lowgmap serve` on a free port, then in Debian's Chromium:
- the server's resident memory with 1 and with 10 open sessions (from /proc/<pid>/status);
- the time from releasing a dragged operating point to the updated margin table (median of N drags);
- the time from typing a flow rate (Enter) to the updated table;
- the size of the chart canvas and the page's scroll width at 1280x800 and 1600x1000.
Prints medians and sizes; asserts nothing.
"""
from __future__ import annotations

import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.browser.conftest import CHROMIUM, CHROMIUM_ARGS, _free_port, _wait_listening  # noqa: E402
from tests.browser.test_dashboard import _POINT_JS  # noqa: E402


def rss_mb(pid: int) -> float:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1]) / 1024.0
    return float("nan")


def main(n_drags: int = 15) -> None:
    from playwright.sync_api import sync_playwright

    port = _free_port()
    proc = subprocess.Popen([sys.executable, "-m", "lowgmap", "serve", str(ROOT / "sample_cases" /
                                                                           "condensate_line.toml"),
                             "--port", str(port)], cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        _wait_listening(port, proc)
        url = f"http://127.0.0.1:{port}/"
        idle = rss_mb(proc.pid)
        with sync_playwright() as p:
            b = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
            pages = []
            for i in range(10):
                ctx = b.new_context(viewport={"width": 1600, "height": 1100})
                pg = ctx.new_page()
                pg.goto(url)
                pg.locator(".margin-summary").first.wait_for(timeout=60_000)
                pages.append(pg)
                if i == 0:
                    one = rss_mb(proc.pid)
            ten = rss_mb(proc.pid)
            sizes = []
            for w, h in ((1280, 800), (1600, 1000)):
                ctx = b.new_context(viewport={"width": w, "height": h})
                sp = ctx.new_page()
                sp.goto(url)
                sp.locator(".margin-summary").first.wait_for(timeout=60_000)
                boxes = [c.bounding_box() for c in sp.locator(".bk-Canvas").all()]
                chart = max((bb for bb in boxes if bb), key=lambda bb: bb["width"] * bb["height"])
                scroll = sp.evaluate("() => [document.scrollingElement.scrollWidth, "
                                     "document.scrollingElement.clientWidth]")
                sizes.append(f"{w}x{h}: chart {chart['width']:.0f}x{chart['height']:.0f} px, "
                             f"scroll width {scroll[0]} of {scroll[1]} px")
                ctx.close()
            pg = pages[0]
            pg.bring_to_front()   # a page behind others gets no animation frames (the waits poll on them)
            release, typed = [], []
            for k in range(n_drags):
                info = pg.evaluate(_POINT_JS)
                x0, y0 = info["left"] + info["sx"], info["top"] + info["sy"]
                old = pg.locator(".margin-summary").first.get_attribute("data-ql")
                pg.mouse.move(x0, y0)
                pg.mouse.down()
                step = 4 if k % 2 == 0 else -4
                for j in range(1, 6):
                    pg.mouse.move(x0 + step * j, y0 - step * j)
                t0 = time.perf_counter()
                pg.mouse.up()
                pg.wait_for_function(
                    "(old) => { const els = []; const walk = (r) => { r.querySelectorAll('*').forEach(e => { "
                    "if (e.classList && e.classList.contains('margin-summary')) els.push(e); "
                    "if (e.shadowRoot) walk(e.shadowRoot); }); }; walk(document); "
                    "return els.length && els[0].dataset.ql !== old; }", arg=old, polling=20)   # a timer: a page behind others gets no animation frames
                release.append(time.perf_counter() - t0)
            field = pg.locator(".ql-input input").first
            for k in range(n_drags):
                value = f"{2 + 0.1 * k:.1f} L/min"
                field.fill(value)
                t0 = time.perf_counter()
                field.press("Enter")
                target = f"{(2 + 0.1 * k) * 1e-3 / 60:.6g}"[:6]
                pg.locator(f".margin-summary[data-ql^='{target}']").wait_for()
                typed.append(time.perf_counter() - t0)
            b.close()
        print(f"server memory: idle {idle:.0f} MB, 1 session {one:.0f} MB, 10 sessions {ten:.0f} MB "
              f"({(ten - one) / 9:.1f} MB per extra session)")
        print(f"release -> updated margin table: median {1e3 * statistics.median(release):.0f} ms "
              f"(min {1e3 * min(release):.0f}, max {1e3 * max(release):.0f}, n={len(release)})")
        print(f"typed flow (Enter) -> updated margin table: median {1e3 * statistics.median(typed):.0f} ms "
              f"(n={len(typed)})")
        for line in sizes:
            print(f"page {line}")
    finally:
        proc.terminate()
        proc.wait(timeout=10)


if __name__ == "__main__":
    main()
