"""Browser-test fixtures: a real dashboard server on a free local port, driven in Debian's Chromium.

The server is started as a subprocess (`python -m lowgmap serve CASE --port N`); readiness is the
server accepting connections (polled against a deadline, not a fixed sleep).
"""
from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest

# Assertions on the page wait for their condition up to 30 s (playwright's default is 5 s): the suite runs two
# test processes, so two servers and two browsers share the machine's cores; a condition that never holds still
# fails, and one that holds returns at once.
from playwright.sync_api import expect  # noqa: E402

expect.set_options(timeout=30_000)

ROOT = Path(__file__).resolve().parents[2]
ARTIFACTS = ROOT / "test-artifacts"
CHROMIUM = os.environ.get("LOWGMAP_CHROMIUM", "/usr/bin/chromium")
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync",
                 "--disable-dev-shm-usage"]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _wait_listening(port: int, proc, deadline_s: float = 60.0) -> None:
    end = time.monotonic() + deadline_s
    while time.monotonic() < end:
        if proc.poll() is not None:
            raise RuntimeError(f"dashboard server exited early with code {proc.returncode}")
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=0.5):
                return
        except OSError:
            time.sleep(0.1)  # polling interval of a condition wait
    raise RuntimeError(f"dashboard server did not listen on port {port} within {deadline_s} s")


@pytest.fixture(scope="session")
def server():
    """URL of a dashboard serving the bundled tube sample case."""
    port = _free_port()
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    proc = subprocess.Popen([sys.executable, "-m", "lowgmap", "serve",
                             str(ROOT / "sample_cases" / "condensate_line.toml"), "--port", str(port)],
                            cwd=ROOT, env=env, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    try:
        _wait_listening(port, proc)
        yield f"http://127.0.0.1:{port}/"
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()


@pytest.fixture(scope="session")
def browser():
    from playwright.sync_api import sync_playwright

    if not Path(CHROMIUM).exists():
        raise RuntimeError(f"Chromium not found at {CHROMIUM}: install Debian's chromium (apt-get install -y chromium)")
    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS, headless=True)
        yield b
        b.close()


@pytest.fixture()
def page(browser, server):
    """A fresh page on the served sample; a script error raised in it during the test fails the test (bokeh
    stops painting the plot where it fails, with no message on the page)."""
    ctx = browser.new_context(viewport={"width": 1600, "height": 1100}, accept_downloads=True)
    pg = ctx.new_page()
    errors: list[str] = []
    pg.on("pageerror", lambda e: errors.append(str(e)))
    pg.set_default_timeout(30_000)
    pg.goto(server)
    wait_ready(pg)
    yield pg
    ctx.close()
    assert not errors, f"script errors in the page: {errors}"


def wait_ready(pg):
    """Wait until the chart canvas, the margin table and the upload drop zone are on the page."""
    pg.wait_for_selector("canvas", state="attached")
    pg.locator(".margin-summary").first.wait_for(state="visible")
    # the upload widget replaces its file input when it starts: a file set before that is lost
    pg.locator(".points-upload .filepond--root").first.wait_for(state="attached")
    pg.wait_for_function("""() => {
        if (!window.Bokeh) return false;
        for (const v of Object.values(Bokeh.index)) { if (v) return true; }
        return false; }""")
