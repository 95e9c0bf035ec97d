"""Loopback server helpers shared by the test fixtures (conftest.py) and the browser benchmarks (tests/bench)."""

from __future__ import annotations

import socket
import subprocess
import time


def free_port() -> int:
    """A free TCP port on 127.0.0.1."""
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def wait_for_port(port: int, proc: subprocess.Popen, timeout: float = 60.0) -> None:
    """Wait until something listens on 127.0.0.1:*port*; fail early if *proc* exits."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError(f"the server exited early with code {proc.returncode}")
        with socket.socket() as sock:
            if sock.connect_ex(("127.0.0.1", port)) == 0:
                return
        time.sleep(0.1)
    raise TimeoutError(f"nothing listened on 127.0.0.1:{port} within {timeout} s")


def loopback_only(route):
    """Playwright route handler: abort every request that is not to this machine, so nothing waits on the network."""
    url = route.request.url
    if url.startswith(("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:", "file:")):
        route.continue_()
    else:
        route.abort()
