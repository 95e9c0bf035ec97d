"""Shared fixtures: data paths, free ports, the served dashboard and the browser."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pytest
from servers import free_port, loopback_only, wait_for_port

DATA = Path(__file__).parent / "data"
CHROMIUM = os.environ.get("LEVELWISE_CHROMIUM", "/usr/bin/chromium")
IN_CI = os.environ.get("CI", "").lower() == "true"
INSTALL_HINT = "Install Debian's chromium (apt-get install chromium) to run the browser tests."


@pytest.fixture(scope="session")
def data_dir() -> Path:
    return DATA


@pytest.fixture(scope="session")
def chromium_path() -> str:
    """Debian chromium; missing is a failure under CI=true and a skip elsewhere."""
    if not (os.path.exists(CHROMIUM) or shutil.which("chromium")):
        if IN_CI:
            pytest.fail(f"Chromium not found at {CHROMIUM} under CI. {INSTALL_HINT}")
        pytest.skip(f"Chromium not found at {CHROMIUM}. {INSTALL_HINT}")
    return CHROMIUM if os.path.exists(CHROMIUM) else shutil.which("chromium")


@pytest.fixture(scope="module")
def browser(chromium_path):
    """One Chromium per test module. Not per session: while playwright's sync API is running it leaves an
    asyncio loop running in this thread, and the views' refresh coalescing (widgets/_base.py) then defers
    work to that loop, so headless widget tests collected after a browser module would see stale views."""
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        browser = pw.chromium.launch(
            executable_path=chromium_path,
            headless=True,
            args=[
                "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                "--disable-background-networking", "--disable-component-update", "--disable-sync",
            ],
        )
        yield browser
        browser.close()


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    page.route("**/*", loopback_only)
    yield page
    context.close()


@pytest.fixture(scope="session")
def served_workbench(chromium_path):
    """``levelwise serve`` on a free loopback port; yields the base URL.

    One server serves every workbench test of the session, all from 127.0.0.1: it allows more kernels per client
    than the default (a closed browser context's kernel lives until it is culled), and its output is read on a
    thread (an unread pipe would fill and stall the server).
    """
    port = free_port()
    proc, _output = start_cli_server(["serve", "--max-kernels-per-client", "40"], port)
    try:
        yield f"http://127.0.0.1:{port}/"
    finally:
        stop_server(proc)


ARTIFACTS = Path(__file__).parent / "artifacts"
# The browser tests take the README's screenshots. They land in tests/artifacts (ignored by git) unless
# LEVELWISE_SCREENSHOTS=docs asks to refresh the committed ones in docs/screenshots.
SCREENSHOTS = (
    Path(__file__).parent.parent / "docs" / "screenshots"
    if os.environ.get("LEVELWISE_SCREENSHOTS") == "docs"
    else ARTIFACTS / "screenshots"
)


class ServerOutput:
    """Collects a server's output lines on a thread, so a test can wait for one."""

    def __init__(self, proc: subprocess.Popen):
        import threading

        self.lines: list[str] = []
        self.proc = proc
        self.thread = threading.Thread(target=self._read, daemon=True)
        self.thread.start()

    def _read(self):
        for line in self.proc.stdout:
            self.lines.append(line)

    def wait_for(self, text: str, timeout: float = 60.0) -> bool:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if any(text in line for line in self.lines):
                return True
            if self.proc.poll() is not None:
                return False
            time.sleep(0.1)
        return False

    def text(self) -> str:
        return "".join(self.lines)


def start_cli_server(args: list[str], port: int, env: dict | None = None):
    """Start ``python -m levelwise.dashboards.cli ARGS --port PORT``; returns (process, output) once it listens."""
    proc = subprocess.Popen(
        [sys.executable, "-m", "levelwise.dashboards.cli", *args, "--port", str(port)],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, env=env,
    )
    output = ServerOutput(proc)
    try:
        wait_for_port(port, proc)
    except Exception:
        stop_server(proc)
        raise
    return proc, output


def stop_server(proc: subprocess.Popen) -> None:
    """Stop a server we started (SIGTERM, then SIGKILL after 15 s)."""
    proc.terminate()
    try:
        proc.wait(timeout=15)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait(timeout=5)


def cpu_ticks_of_children(pid: int) -> dict:
    """user+system CPU ticks of each child process of *pid* (from /proc)."""
    ticks = {}
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[1]) == pid:  # field 4 of stat: the parent pid
            ticks[entry.name] = int(fields[11]) + int(fields[12])  # fields 14, 15: utime, stime
    return ticks


def wait_until_children_idle(pid: int, quiet: float = 1.5, timeout: float = 90.0) -> None:
    """Wait until the server's kernels have used no CPU for *quiet* seconds (the preheated notebook has run)."""
    deadline = time.monotonic() + timeout
    last, since = None, time.monotonic()
    while time.monotonic() < deadline:
        now = cpu_ticks_of_children(pid)
        if now != last:
            last, since = now, time.monotonic()
        elif now and time.monotonic() - since >= quiet:
            return
        time.sleep(0.25)


@pytest.fixture(scope="module")
def published_dir(tmp_path_factory):
    """A folder written by ``levelwise publish demo``."""
    from levelwise.dashboards.cli import main

    out = tmp_path_factory.mktemp("published") / "dashboard"
    assert main(["publish", "demo", "--out", str(out)]) == 0
    return out


@pytest.fixture(scope="module")
def served_published(chromium_path, published_dir):
    """``levelwise view DIR`` on a free loopback port, its kernel pool filled; yields (base URL, output)."""
    port = free_port()
    proc, output = start_cli_server(["view", str(published_dir)], port)
    output.wait_for("is filled with", timeout=60)  # the preheated kernel was started...
    wait_until_children_idle(proc.pid)  # ...and has finished running the notebook
    try:
        yield f"http://127.0.0.1:{port}/", output
    finally:
        stop_server(proc)
