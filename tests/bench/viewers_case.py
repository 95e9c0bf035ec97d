"""Browser benchmark case 10: many viewers of one published dashboard at once, each moving a slider.

``levelwise publish demo`` + ``levelwise view`` (limits raised so that every viewer gets a kernel: all viewers
come from 127.0.0.1, one client address), N Chromium pages (one browser context each, so one kernel each). Every
step presses an arrow key on the first slider of every page, one page after another without waiting, then waits
for every page's prediction text to change; each page times its own keydown to the MutationObserver seeing new
text in ``.lw-readout .lw-mean`` (the script of case 6). The p50 and p95 over every viewer's steps are reported.
"""

from __future__ import annotations

import os
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np

from .browser_cases import (
    CHROMIUM,
    HANDLE,
    INSTALL_OBSERVER,
    MEAN,
    Server,
    children,
    cli,
    cmdline,
    launch,
    new_page,
    rss_mb,
)
from .rows import make_row, unavailable

VIEWERS = 20
ROW_P50 = ("viewers_slider_p50", "10. {n} concurrent viewers of one published dashboard, slider step to text, p50")
ROW_P95 = ("viewers_slider_p95", "10. {n} concurrent viewers of one published dashboard, slider step to text, p95")
ROW_RSS = ("viewers_kernel_memory", "10. memory of a published page's kernel (RSS, median of the {n} viewers')")


def kernels_below(pid: int) -> list[int]:
    """Every ipykernel process below *pid* (children, grandchildren, ...)."""
    found, todo = [], [pid]
    while todo:
        for child in children(todo.pop()):
            todo.append(child)
            if b"ipykernel" in cmdline(child):
                found.append(child)
    return found


def unavailable_rows(status: str, n: int = VIEWERS) -> list[dict]:
    return [
        unavailable(ROW_P50[0], ROW_P50[1].format(n=n), kind="absolute", unit="ms", goal="(report)",
                    goal_value=None, status=status),
        unavailable(ROW_P95[0], ROW_P95[1].format(n=n), kind="absolute", unit="ms", goal="<= 150 ms",
                    goal_value=150.0, status=status),
        unavailable(ROW_RSS[0], ROW_RSS[1].format(n=n), kind="absolute", unit="MB", goal="<= 150 MB",
                    goal_value=150.0, status=status),
    ]


def _open_viewers(browser, url: str, n: int) -> tuple[list, list[str]]:
    """Open *n* viewers one after another (each waits for its prediction text, one reload allowed); returns the
    (context, page) pairs that opened and what happened to those that did not."""
    viewers, failed = [], []
    for i in range(n):
        context, page = new_page(browser)
        for attempt in range(2):
            try:
                page.goto(url, timeout=180_000)
                page.wait_for_function(
                    "sel => { const el = document.querySelector(sel); return el && el.innerText.trim() !== ''; }",
                    arg=MEAN, timeout=180_000)
                page.locator(HANDLE).first.wait_for(timeout=60_000)
                viewers.append((context, page))
                break
            except Exception as exc:  # noqa: BLE001 - reported in the row's note
                if attempt == 1:
                    busy = "busy" in page.content().lower()
                    failed.append(f"viewer {i + 1}: {'busy page' if busy else type(exc).__name__}")
                    context.close()
    for _, page in viewers:
        page.evaluate(INSTALL_OBSERVER)
        page.locator(HANDLE).first.focus()
    return viewers, failed


def _step_all(viewers, key: str, timeout_s: float = 10.0) -> tuple[list[float], int]:
    """Press *key* on every viewer's slider, then collect each viewer's latency; (latencies ms, missed)."""
    counts = [page.evaluate("window.__lwBench.changes.length") for _, page in viewers]
    for _, page in viewers:  # no waiting in between: the kernels work on these steps at the same time
        page.keyboard.press(key)
    latencies, missed = [], 0
    deadline = time.monotonic() + timeout_s
    for (_, page), before in zip(viewers, counts):
        left = max(0.0, deadline - time.monotonic())
        try:
            page.wait_for_function("n => window.__lwBench.changes.length > n", arg=before, timeout=left * 1000 + 1)
        except Exception:  # noqa: BLE001 - the rounded text did not change, or the step was lost
            missed += 1
            continue
        change = page.evaluate("window.__lwBench.changes[window.__lwBench.changes.length - 1]")
        latencies.append(change["t"] - change["t0"])
    return latencies, missed


def case_viewers(quick: bool, workdir: Path, n: int = VIEWERS) -> list[dict]:
    """Case 10: *n* viewers, each moving a slider at the same time, 5 steps (quick: 3)."""
    import subprocess

    from playwright.sync_api import sync_playwright

    steps = 3 if quick else 5
    out = workdir / "published-viewers"
    done = subprocess.run(cli("publish", "demo", "--out", out), capture_output=True, text=True, timeout=180)
    if done.returncode != 0:
        return unavailable_rows(f"error: levelwise publish demo failed: {(done.stdout + done.stderr)[-200:]}", n)
    from tests.servers import free_port

    port = free_port()
    server = Server(cli("view", out, "--port", port, "--max-kernels", n + 4, "--max-kernels-per-client", n + 4,
                        "--pool-size", 2), port, workdir / "voila-viewers.log")
    latencies, missed, opened, memory, failed = [], 0, 0.0, [], []
    try:
        with sync_playwright() as pw:
            browser = launch(pw)
            try:
                start = time.perf_counter()
                viewers, failed = _open_viewers(browser, server.url, n)
                opened = time.perf_counter() - start
                time.sleep(5.0)  # the pool's refills settle before the steps
                key = "ArrowRight"
                for i in range(2 * steps):
                    if i == steps:
                        key = "ArrowLeft"  # back again: stays inside the slider's range
                    got, lost = _step_all(viewers, key)
                    latencies += got
                    missed += lost
                    time.sleep(0.3)  # the trace updates of this step land before the next key
                memory = [rss_mb(pid) for pid in kernels_below(server.proc.pid)]
                for context, _ in viewers:
                    context.close()
            finally:
                browser.close()
    finally:
        server.stop()
    if not latencies:
        return unavailable_rows("error: no step changed a viewer's prediction text", n)
    memory = [m for m in memory if m is not None]
    note = (("; ".join(failed) + f" - {len(failed)} of {n} viewers did not open; ") if failed else "") + (
            f"{n} viewers (one browser context and one kernel each) of levelwise view on the published demo; "
            f"{2 * steps} steps each, every step pressed on all viewers at once; {len(latencies)} latencies, "
            f"{missed} steps left the rounded text as it was (not counted); opening the {n} views took "
            f"{opened:.0f} s; {len(memory)} kernels, RSS {sum(memory):.0f} MB in all")
    status = "ok" if not failed else f"partial: {n - len(failed)} of {n} viewers opened"
    common = dict(kind="absolute", unit="ms", ours_repeats=len(latencies), note=note, status=status)
    return [
        make_row(ROW_P50[0], ROW_P50[1].format(n=n), goal="(report)", goal_value=None,
                 ours=float(np.percentile(latencies, 50)), **common),
        make_row(ROW_P95[0], ROW_P95[1].format(n=n), goal="<= 150 ms", goal_value=150.0,
                 ours=float(np.percentile(latencies, 95)), latencies_ms=[round(x, 2) for x in latencies], **common),
        make_row(ROW_RSS[0], ROW_RSS[1].format(n=n), kind="absolute", unit="MB", goal="<= 150 MB", goal_value=150.0,
                 ours=float(np.median(memory)) if memory else None, ours_repeats=len(memory),
                 status=status if memory else "error: no kernel process found", rss_mb=[round(m, 1) for m in memory],
                 note="VmRSS of every kernel below the server after the steps (the viewers' and the preheated pool's)"),
    ]


def run(quick: bool) -> list[dict]:
    """Case 10, or its rows saying why it was skipped."""
    if not (os.path.exists(CHROMIUM) or shutil.which("chromium")):
        return unavailable_rows(f"skipped (Chromium not found at {CHROMIUM})")
    with tempfile.TemporaryDirectory(prefix="levelwise-bench-viewers-") as tmp:
        return case_viewers(quick, Path(tmp))
