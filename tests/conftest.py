"""Shared fixtures: data paths, free ports, the served dashboard and the browser."""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest

DATA = Path(__file__).parent / "data"
CHROMIUM = os.environ.get("LEVELWISE_CHROMIUM", "/usr/bin/chromium")
IN_CI = os.environ.get("CI", "").lower() == "true"
INSTALL_HINT = "Install Debian's chromium (apt-get install chromium) to run the browser tests."


@pytest.fixture(scope="session")
def data_dir() -> Path:
    return DATA


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def wait_for_port(port: int, proc: subprocess.Popen, timeout: float = 60.0) -> None:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError(f"the server exited early with code {proc.returncode}")
        with socket.socket() as sock:
            if sock.connect_ex(("127.0.0.1", port)) == 0:
                return
        time.sleep(0.2)
    raise TimeoutError(f"nothing listened on 127.0.0.1:{port} within {timeout} s")


@pytest.fixture(scope="session")
def chromium_path() -> str:
    """Debian chromium; missing is a failure under CI=true and a skip elsewhere."""
    if not (os.path.exists(CHROMIUM) or shutil.which("chromium")):
        if IN_CI:
            pytest.fail(f"Chromium not found at {CHROMIUM} under CI. {INSTALL_HINT}")
        pytest.skip(f"Chromium not found at {CHROMIUM}. {INSTALL_HINT}")
    return CHROMIUM if os.path.exists(CHROMIUM) else shutil.which("chromium")


@pytest.fixture(scope="session")
def browser(chromium_path):
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


def loopback_only(route):
    """Abort every request that is not to this machine, so nothing waits on the network."""
    url = route.request.url
    if url.startswith(("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:", "file:")):
        route.continue_()
    else:
        route.abort()


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    page.route("**/*", loopback_only)
    yield page
    context.close()


@pytest.fixture(scope="session")
def served_workbench(chromium_path):
    """``levelwise serve`` on a free loopback port; yields the base URL."""
    port = free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "dashboards.cli", "serve", "--port", str(port)],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
    )
    try:
        wait_for_port(port, proc)
        yield f"http://127.0.0.1:{port}/"
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            proc.kill()
