"""Live morph in the browser (run on demand: `python tests/perf/bench_morph.py [--drags N] [--busy]`).

Starts `lowgmap serve` on a free port, opens the wedge sample (`?sample=wedge_separator`) and the tube
sample (`?sample=condensate_line`) in Debian's Chromium and drags a geometry slider with real mouse
events (the wedge's corner half-angle, the tube's diameter) at a steady speed, as a hand would: the
handle is moved to where the elapsed time puts it, as often as the page takes mouse events:

- updates per second during the drag: while a slider is dragged a label drawn in the plot names the
  value drawn ("Corner half-angle 6.35 deg: operating point in ..., ±..."); a loop on the page's
  animation frames counts the changes of that label in the visible figure (each one comes with the new
  chart's data in the same message, so each is a repaint of a new chart);
- release-to-final latency: from the mouse release to the preview status line disappearing (the value
  released is applied as an edit and the chart in effect is drawn).

By default each drag starts once the background worst-case job of the case in effect has finished (the
"computing worst case…" notice is gone), so the numbers are those of the morph itself; `--busy` drags
at once, with that job competing for the processor. `--pin` keeps the server on the first core and the
browser (and this script) on the others, as when the browser runs on another machine or the machine has
cores to spare: on a 2-core machine without it, Chromium and the server share both cores and each preview
takes about twice its in-process time. Prints medians; asserts nothing.
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.browser.conftest import CHROMIUM, CHROMIUM_ARGS, _free_port, _wait_listening  # noqa: E402

#: (sample, slider css class, words in the title while it is dragged)
CASES = (("wedge_separator", "slider-section-half-angle", "Corner half-angle"),
         ("condensate_line", "slider-section-diameter", "Diameter"))

# JavaScript: count the changes of the label drawn in the visible plot during a preview, on every animation frame.
_COUNT_JS = """
() => {
  // the live-label models are looked up once (walking every model on every frame would itself slow the page)
  const labels = [];
  for (const doc of Bokeh.documents) {
    for (const m of doc._all_models.values()) {
      if (m.type === 'Label' && m.name === 'live-label') labels.push(m);
    }
  }
  function text() {
    for (const m of labels) { if (m.visible) return m.text; }
    return '';
  }
  window._morph = {changes: [], last: text(), run: true};
  function tick(t) {
    const now = text();
    if (now !== window._morph.last) { window._morph.changes.push([performance.now(), now]); window._morph.last = now; }
    if (window._morph.run) requestAnimationFrame(tick);
  }
  requestAnimationFrame(tick);
}
"""

_LIVE_GONE_JS = """
() => {
  const found = [];
  const walk = (r) => r.querySelectorAll('*').forEach(e => {
    if (e.classList && e.classList.contains('live-status') && e.getClientRects().length) found.push(e);
    if (e.shadowRoot) walk(e.shadowRoot); });
  walk(document);
  return found.length === 0;
}
"""

_WORST_DONE_JS = """
() => {
  let busy = false;
  const walk = (r) => r.querySelectorAll('*').forEach(e => {
    // the words are drawn in the element's shadow root (its own text is empty)
    if (e.classList && e.classList.contains('worst-case-notice') && e.getClientRects().length
        && ((e.shadowRoot ? e.shadowRoot.textContent : e.textContent) || '').includes('computing')) busy = true;
    if (e.shadowRoot) walk(e.shadowRoot); });
  walk(document);
  return !busy;
}
"""


def drag_once(pg, slider_css: str, words: str, dx: int, seconds: float) -> tuple[float, float, int]:
    """Drag the slider's handle by ``dx`` px at a steady speed over ``seconds``, then release.

    Returns (updates per second during the drag, release-to-final latency [s], previews drawn).
    """
    handle = pg.locator(f".{slider_css} .noUi-handle").first
    handle.scroll_into_view_if_needed()
    box = handle.bounding_box()
    x0, y0 = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
    pg.evaluate(_COUNT_JS)
    pg.mouse.move(x0, y0)
    pg.mouse.down()
    t_start = pg.evaluate("() => performance.now()")
    begin = time.perf_counter()
    while (elapsed := time.perf_counter() - begin) < seconds:
        pg.mouse.move(x0 + dx * elapsed / seconds, y0)
        time.sleep(0.008)   # about 120 mouse events per second at most, fewer when the page is busy
    pg.mouse.move(x0 + dx, y0)
    t_end = pg.evaluate("() => performance.now()")
    t0 = time.perf_counter()
    pg.mouse.up()
    pg.wait_for_function(_LIVE_GONE_JS, polling="raf", timeout=120_000)
    latency = time.perf_counter() - t0
    changes = pg.evaluate("() => { window._morph.run = false; return window._morph.changes; }")
    during = [c for c in changes if t_start <= c[0] <= t_end and words in c[1]]
    ups = len(during) / ((t_end - t_start) / 1000.0)
    return ups, latency, len(during)


def main(argv=None) -> None:
    from playwright.sync_api import sync_playwright

    ap = argparse.ArgumentParser()
    ap.add_argument("--drags", type=int, default=6)
    ap.add_argument("--seconds", type=float, default=2.0, help="duration of each drag [s]")
    ap.add_argument("--busy", action="store_true", help="do not wait for the background worst case")
    ap.add_argument("--pin", action="store_true", help="server on the first core, the browser on the others")
    args = ap.parse_args(argv)
    port = _free_port()
    cores = sorted(os.sched_getaffinity(0))
    pin = args.pin and len(cores) >= 2
    proc = subprocess.Popen([sys.executable, "-m", "lowgmap", "serve", "--port", str(port)], cwd=ROOT,
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            preexec_fn=(lambda: os.sched_setaffinity(0, {cores[0]})) if pin else None)
    if pin:
        os.sched_setaffinity(0, set(cores[1:]))      # Chromium, started below, inherits it
    results = []
    try:
        _wait_listening(port, proc)
        with sync_playwright() as p:
            b = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
            for sample, css, words in CASES:
                ctx = b.new_context(viewport={"width": 1600, "height": 1000})
                pg = ctx.new_page()
                pg.set_default_timeout(120_000)
                pg.goto(f"http://127.0.0.1:{port}/?sample={sample}")
                pg.locator(".margin-summary").first.wait_for()
                ups, lat, n = [], [], []
                for k in range(args.drags):
                    if not args.busy:
                        pg.wait_for_function(_WORST_DONE_JS, timeout=300_000)
                    u, t, m = drag_once(pg, css, words, 60 if k % 2 == 0 else -60, args.seconds)
                    ups.append(u)
                    lat.append(t)
                    n.append(m)
                results.append((sample, words, ups, lat, n))
                ctx.close()
            b.close()
    finally:
        proc.terminate()
        proc.wait(timeout=10)
    mode = "with the background worst case running" if args.busy else "background worst case finished first"
    if pin:
        mode += f"; server on core {cores[0]}, browser on {', '.join(map(str, cores[1:]))}"
    print(f"live morph in Chromium ({mode}; drags of 60 px over {args.seconds:g} s)")
    for sample, words, ups, lat, n in results:
        print(f"{sample}: {words} slider: updates per second during the drag median {statistics.median(ups):.1f} "
              f"(min {min(ups):.1f}, max {max(ups):.1f}, previews drawn per drag {statistics.median(n):.0f}); "
              f"release -> final chart median {1e3 * statistics.median(lat):.0f} ms "
              f"(min {1e3 * min(lat):.0f}, max {1e3 * max(lat):.0f}, n={len(lat)})")


if __name__ == "__main__":
    main()
