"""Browser benchmark cases 6-8: real Chromium (playwright) against voila on 127.0.0.1.

6. slider step to updated prediction text, timed in the page (performance.now() at the
   keydown, a MutationObserver on the readout), over N steps;
7. first view of a dashboard served with a preheated kernel;
8. resident memory of the one kernel serving a viewer (from /proc).
Every request that is not to this machine is aborted.
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from tests.servers import free_port, loopback_only, wait_for_port

from .rows import make_row, unavailable

CHROMIUM = os.environ.get("LEVELWISE_CHROMIUM", "/usr/bin/chromium")
READOUT = ".lw-readout"
MEAN = ".lw-readout .lw-mean"
HANDLE = ".lw-slider .noUi-handle"

INSTALL_OBSERVER = """
() => {
  const state = {last: null, t0: null, changes: []};
  // Every response's mean in the readout: one step changes at least one of them even where a
  // single rounded mean stays the same.
  const mean = () => {
    const els = document.querySelectorAll('.lw-readout .lw-mean');
    return els.length ? Array.from(els, el => el.innerText).join(' | ') : null;
  };
  state.last = mean();
  document.addEventListener('keydown', () => { state.t0 = performance.now(); }, true);
  new MutationObserver(() => {
    const text = mean();
    if (text !== null && text !== state.last) {
      state.last = text;
      state.changes.push({t: performance.now(), t0: state.t0, text: text});
    }
  }).observe(document.querySelector('.lw-readout'), {subtree: true, childList: true, characterData: true});
  window.__lwBench = state;
}
"""


def children(pid: int) -> list[int]:
    """Direct child processes of *pid*, from /proc."""
    found = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
        except OSError:
            continue
        fields = stat[stat.rindex(")") + 2:].split()
        if int(fields[1]) == pid:
            found.append(int(entry.name))
    return found


def cmdline(pid: int) -> bytes:
    try:
        return Path(f"/proc/{pid}/cmdline").read_bytes().replace(b"\0", b" ")
    except OSError:
        return b""


def kernel_pids(server_pid: int) -> list[int]:
    return [pid for pid in children(server_pid) if b"ipykernel" in cmdline(pid)]


def rss_mb(pid: int) -> float | None:
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024.0
    except OSError:
        return None
    return None


def pss_mb(pid: int) -> float | None:
    try:
        for line in Path(f"/proc/{pid}/smaps_rollup").read_text().splitlines():
            if line.startswith("Pss:"):
                return int(line.split()[1]) / 1024.0
    except OSError:
        return None
    return None


def cpu_seconds(pid: int) -> float | None:
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    fields = stat[stat.rindex(")") + 2:].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def wait_until_idle(pid: int, quiet: float = 1.0, timeout: float = 60.0) -> None:
    """Wait until process *pid* used no CPU for *quiet* seconds (a preheated kernel is ready)."""
    deadline = time.monotonic() + timeout
    last = cpu_seconds(pid)
    while time.monotonic() < deadline:
        time.sleep(quiet)
        now = cpu_seconds(pid)
        if now is None or now == last:
            return
        last = now


def wait_for_kernels(server_pid: int, count: int, timeout: float = 60.0) -> list[int]:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        pids = kernel_pids(server_pid)
        if len(pids) >= count:
            return pids
        time.sleep(0.2)
    return kernel_pids(server_pid)


class Server:
    """A voila (or levelwise) server on a free loopback port, in its own process group."""

    def __init__(self, command: list[str], port: int, log: Path):
        env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
        self.port = port
        self.log = open(log, "w")  # noqa: SIM115 - closed in stop()
        self.proc = subprocess.Popen(command, stdout=self.log, stderr=subprocess.STDOUT, env=env,
                                     start_new_session=True)
        wait_for_port(port, self.proc)
        self.url = f"http://127.0.0.1:{port}/"

    def voila_pid(self) -> int:
        """The server process whose children are the kernels: ours (``levelwise`` execs into the server), or our
        child when ours is a launcher. Never a kernel, even when a kernel's command line names voila (its
        connection file sits in voila's runtime folder)."""
        for pid in [self.proc.pid, *children(self.proc.pid)]:
            line = cmdline(pid)
            if b"ipykernel" not in line and (b"voila" in line or b"server_app" in line):
                return pid
        return self.proc.pid

    def stop(self) -> None:
        try:
            os.killpg(self.proc.pid, signal.SIGTERM)  # the group we started: voila and its kernels
            self.proc.wait(timeout=15)
        except (ProcessLookupError, subprocess.TimeoutExpired):
            try:
                os.killpg(self.proc.pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
        self.log.close()


def cli(*args) -> list[str]:
    return [sys.executable, "-m", "levelwise.dashboards.cli", *map(str, args)]


def workbench(port: int, preheat: bool) -> tuple[list[str], str]:
    """``levelwise serve`` (the workbench on the demo study); with preheating, voila run directly."""
    if not preheat:
        return cli("serve", "--port", port), "workbench via levelwise serve (kernel not preheated)"
    from levelwise.dashboards import NOTEBOOKS
    from levelwise.dashboards.cli import voila_command

    try:
        command = voila_command(NOTEBOOKS / "explore.ipynb", port, preheat=True, pool_size=1)
    except TypeError:  # an older voila_command without the preheat options
        command = voila_command(NOTEBOOKS / "explore.ipynb", port) + ["--preheat_kernel=True", "--pool_size=1"]
    return command, "workbench (dashboards/explore.ipynb) on voila with a preheated pool of 1"


def published_dashboard(workdir: Path, port: int) -> tuple[list[str] | None, str]:
    """``levelwise publish demo`` + ``levelwise view`` when the CLI has them, else (None, why not)."""
    try:
        from levelwise.dashboards import cli as lw_cli
    except ImportError:
        return None, "levelwise.dashboards.cli missing"
    if not all(hasattr(lw_cli, name) for name in ("publish", "view")):
        return None, "levelwise publish/view not available"
    failures = []
    example = Path(__file__).resolve().parents[1] / "data" / "study_example.json"
    for i, study in enumerate(["demo", example] if example.is_file() else ["demo"]):
        out = workdir / f"published-{i}"
        done = subprocess.run(cli("publish", study, "--out", out), capture_output=True, text=True, timeout=180)
        if done.returncode == 0:
            name = "the demo study" if study == "demo" else f"tests/data/{example.name}"
            # Every view comes from 127.0.0.1 and a closed page's kernel is shut down only later: without room
            # per client the fourth view would get the "busy" page (the limit is tested in its own tests).
            return cli("view", out, "--port", port, "--max-kernels-per-client", 16), \
                f"published read-only dashboard of {name} (levelwise publish + levelwise view, pool of 1)"
        said = (done.stdout + done.stderr).strip()[-200:]
        failures.append(f"levelwise publish {Path(str(study)).name} failed: {said}")
    return None, "; ".join(failures)


def launch(pw):
    return pw.chromium.launch(
        executable_path=CHROMIUM if os.path.exists(CHROMIUM) else shutil.which("chromium"),
        headless=True,
        args=["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
              "--disable-background-networking", "--disable-component-update", "--disable-sync"],
    )


def new_page(browser):
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    page.route("**/*", loopback_only)
    return context, page


def slider_steps(page, steps: int) -> tuple[list[float], int]:
    """Latencies (ms) from keydown to changed prediction text, and the number of steps with no change."""
    page.evaluate(INSTALL_OBSERVER)
    handle = page.locator(HANDLE).first
    handle.focus()
    latencies, missed = [], 0
    key = "ArrowRight"
    for _ in range(steps):
        value = float(handle.get_attribute("aria-valuenow"))
        if value >= float(handle.get_attribute("aria-valuemax")):
            key = "ArrowLeft"
        elif value <= float(handle.get_attribute("aria-valuemin")):
            key = "ArrowRight"
        before = page.evaluate("window.__lwBench.changes.length")
        handle.press(key)
        try:
            page.wait_for_function("n => window.__lwBench.changes.length > n", arg=before, timeout=2_000)
        except Exception:  # noqa: BLE001 - the text did not change (same rounded value) or the step was lost
            missed += 1
            continue
        change = page.evaluate("window.__lwBench.changes[window.__lwBench.changes.length - 1]")
        latencies.append(change["t"] - change["t0"])
        page.wait_for_timeout(100)  # let the trace updates of this step land before the next key
    return latencies, missed


def case_browser(quick: bool, workdir: Path) -> list[dict]:
    """Cases 6, 7 and 8."""
    if not (os.path.exists(CHROMIUM) or shutil.which("chromium")):
        status = f"skipped (Chromium not found at {CHROMIUM})"
        return [
            unavailable("slider_p50", "6. slider step to prediction text, p50", kind="absolute", unit="ms",
                        goal="<= 80 ms", goal_value=80.0, status=status),
            unavailable("slider_p95", "6. slider step to prediction text, p95", kind="absolute", unit="ms",
                        goal="<= 150 ms", goal_value=150.0, status=status),
            unavailable("first_view", "7. first view with preheating", kind="absolute", goal="<= 1.5 s",
                        goal_value=1.5, status=status),
            unavailable("kernel_memory", "8. memory of one viewer's kernel (RSS)", kind="absolute", unit="MB",
                        goal="<= 150 MB", goal_value=150.0, status=status),
            _slider_bytes(),
        ]
    from playwright.sync_api import sync_playwright

    steps = 20 if quick else 50
    views = 2 if quick else 5
    rows = []
    with sync_playwright() as pw:
        browser = launch(pw)
        try:
            slider_rows, workbench = _slider_and_memory(browser, steps, workdir)
            first_view, viewer = _first_view(browser, views, workdir)
            rows += [*slider_rows, first_view, _kernel_memory(viewer, workbench)]
        finally:
            browser.close()
    return [*rows, _slider_bytes()]


def _slider_bytes() -> dict:
    """9. Bytes the kernel sends per slider event on the demo workbench's sliders and 100 x 100 slice, counted
    headless (every message the widgets' comms would send, framed for the kernel websocket and deflated as the
    served dashboards' permessage-deflate does, see ``wire.py``): the worst event over five steps of each factor
    held by the slice."""
    import ipywidgets.comm

    from levelwise import demo
    from levelwise.widgets import FactorSliders, SharedModel, SurfaceSlice

    from .wire import WireCounter

    wire = WireCounter()

    class Recording:
        kernel = "recording"

        def __init__(self, **kwargs):
            self.comm_id = kwargs.get("comm_id") or f"rec-{id(self):x}"

        def send(self, data=None, metadata=None, buffers=None):
            wire.send(self.comm_id, data, metadata, buffers)

        def on_msg(self, callback):
            pass

        def on_close(self, callback):
            pass

        def close(self, *args, **kwargs):
            pass

        def open(self, *args, **kwargs):
            pass

    original = ipywidgets.comm.create_comm
    ipywidgets.comm.create_comm = lambda **kwargs: Recording(**kwargs)
    try:
        shared = SharedModel(demo.FACTORS, demo.demo_data(), responses=["Impact"], models={"Impact": demo.MODEL},
                             units={"Impact": "J"}, design=demo.demo_design())
        sliders, surface = FactorSliders(shared), SurfaceSlice(shared)
        surface.flush()
        held = [f for f in shared.continuous_factors() if f.name not in (surface.x_factor.value,
                                                                           surface.y_factor.value)]
        sizes, payload, frames = {}, {}, {}
        for f in held:
            sizes[f.name], payload[f.name], frames[f.name] = [], [], []
            for k in range(1, 6):
                wire.clear()
                sliders.sliders[f.name].value = float(f.low + (f.high - f.low) * k / 6)
                surface.flush()
                sizes[f.name].append(sum(wire.deflated))
                payload[f.name].append(sum(wire.payload))
                frames[f.name].append(sum(wire.frame))
    finally:
        ipywidgets.comm.create_comm = original
    worst = max(max(v) for v in sizes.values())
    return make_row("slider_bytes", "9. bytes per slider event on the wire, demo workbench (worst of the held "
                    "factors)", kind="absolute", unit="KB", goal="<= 8 KB", goal_value=8.0, ours=worst / 1000,
                    ours_repeats=sum(len(v) for v in sizes.values()), bytes_per_event=sizes,
                    payload_bytes_per_event=payload, frame_bytes_per_event=frames,
                    note="counted headless through a recording comm: every message the slider and slice widgets "
                         "send, as v1 kernel-websocket frames (Jupyter header, parent header, JSON state, binary "
                         "buffers) deflated by permessage-deflate as the served dashboards negotiate it; "
                         f"undeflated worst {max(max(v) for v in frames.values()) / 1000:.1f} KB per event "
                         f"(widget payload alone {max(max(v) for v in payload.values()) / 1000:.1f} KB); the heat "
                         "map is uint8 codes")


def _slider_and_memory(browser, steps: int, workdir: Path) -> list[dict]:
    port = free_port()
    command, where = workbench(port, preheat=False)
    server = Server(command, port, workdir / "voila-slider.log")
    try:
        context, page = new_page(browser)
        try:
            page.goto(server.url, timeout=60_000)
            page.locator(MEAN).first.wait_for(timeout=60_000)
            page.locator(HANDLE).first.wait_for(timeout=60_000)
            page.wait_for_timeout(500)
            latencies, missed = slider_steps(page, steps)
            kernels = kernel_pids(server.voila_pid())
            memory = [(pid, rss_mb(pid), pss_mb(pid)) for pid in kernels]
        finally:
            context.close()
    finally:
        server.stop()
    note = f"{len(latencies)} of {steps} steps changed a displayed mean ({missed} left every rounded mean as it " \
           f"was and are not counted); {where}; timed in the page: keydown to the MutationObserver seeing " \
           "new text in .lw-readout .lw-mean"
    status = "ok" if latencies else "error: no step changed the prediction text"
    rows = [
        make_row("slider_p50", f"6. slider step to prediction text, p50 of {steps} steps", kind="absolute",
                 unit="ms", goal="<= 80 ms", goal_value=80.0,
                 ours=float(np.percentile(latencies, 50)) if latencies else None,
                 ours_repeats=len(latencies), note=note, status=status),
        make_row("slider_p95", f"6. slider step to prediction text, p95 of {steps} steps", kind="absolute",
                 unit="ms", goal="<= 150 ms", goal_value=150.0,
                 ours=float(np.percentile(latencies, 95)) if latencies else None,
                 ours_repeats=len(latencies), note=note, status=status,
                 latencies_ms=[round(x, 2) for x in latencies]),
    ]
    return rows, {"where": where, "kernels": memory}


def _kernel_memory(viewer: dict, workbench: dict) -> dict:
    """8. The RSS of the kernel that served a viewer of the published dashboard (``levelwise view``, the kernel
    taken from the preheated pool), after the page showed and a few slider steps; median over the first-view
    case's views. The workbench's one kernel (``levelwise serve``, after case 6's steps) is reported beside it."""
    title = "8. memory of one viewer's kernel (RSS, published dashboard)"
    bench = [(pid, rss, pss) for pid, rss, pss in workbench["kernels"] if rss is not None]
    extra = {"workbench_kernel_rss_mb": round(bench[0][1], 1) if len(bench) == 1 else None,
             "workbench_kernels_found": len(workbench["kernels"])}
    served = [m for m in viewer["served"] if m[1] is not None]
    if not served:
        return unavailable("kernel_memory", title, kind="absolute", unit="MB", goal="<= 150 MB", goal_value=150.0,
                           status=f"error: no served viewer kernel measured ({viewer['why']})", **extra)
    rss = [m[1] for m in served]
    pss = [m[2] for m in served if m[2] is not None]
    return make_row("kernel_memory", title, kind="absolute", unit="MB", goal="<= 150 MB", goal_value=150.0,
                    ours=float(np.median(rss)), ours_repeats=len(rss), rss_mb=[round(x, 1) for x in rss],
                    pss_mb=round(float(np.median(pss)), 1) if pss else None, **extra,
                    note=f"VmRSS of the kernel that served the page (it was the preheated pool's kernel before the "
                         f"view), after the prediction text showed and {VIEWER_STEPS} slider steps; median over "
                         f"the views; {viewer['what']}. The workbench's kernel ({workbench['where']}) after case "
                         f"6's steps: {extra['workbench_kernel_rss_mb']} MB")


VIEWER_STEPS = 5


#: The floor page of case 7: one text widget with the readout's classes, served by the same ``levelwise view``.
FLOOR_SOURCE = 'import ipywidgets as w\nw.HTML(\'<span class="lw-mean">12.3</span>\').add_class("lw-readout")'


def floor_folder(published: Path, out: Path) -> Path:
    """A copy of the published folder whose notebook shows only one text widget (``FLOOR_SOURCE``): what voila's
    page, the widget manager and the kernel connection cost before any view of ours."""
    import json

    shutil.copytree(published, out)
    notebook = json.loads((out / "present.ipynb").read_text(encoding="utf-8"))
    notebook["cells"] = [cell for cell in notebook["cells"] if cell["cell_type"] == "code"][:1]
    notebook["cells"][0]["source"] = FLOOR_SOURCE
    notebook["cells"][0]["outputs"] = []
    (out / "present.ipynb").write_text(json.dumps(notebook), encoding="utf-8")
    return out


class BrowserCpu:
    """CPU seconds used by this process's Chromium processes (renderers that exited keep their last count)."""

    def __init__(self):
        self.seen: dict[int, float] = {}

    def __call__(self) -> float:
        todo = [os.getpid()]
        while todo:
            pid = todo.pop()
            todo.extend(children(pid))
            if b"chrom" in cmdline(pid)[:200]:
                used = cpu_seconds(pid)
                if used is not None:
                    self.seen[pid] = used
        return sum(self.seen.values())


class Viewing:
    """First views of one ``levelwise view`` server, each from a preheated pool kernel that served no earlier view."""

    def __init__(self, server: Server, browser, cpu: BrowserCpu):
        self.server, self.browser, self.cpu = server, browser, cpu
        self.times, self.cpu_s, self.served, self.used, self.why = [], [], [], set(), "no view"

    def view(self, measure_kernel: bool) -> None:
        pids = lambda: [pid for pid in kernel_pids(self.server.voila_pid()) if pid not in self.used]  # noqa: E731
        deadline = time.monotonic() + 60
        pool = pids()
        while not pool and time.monotonic() < deadline:
            time.sleep(0.2)
            pool = pids()
        for pid in pool:
            wait_until_idle(pid)  # the preheated kernel has run the notebook
        context, page = new_page(self.browser)
        try:
            cpu = self.cpu()
            start = time.perf_counter()
            page.goto(self.server.url, timeout=60_000)
            page.wait_for_function(
                "sel => { const el = document.querySelector(sel); return el && el.innerText.trim() !== ''; }",
                arg=MEAN, timeout=60_000)
            self.times.append(time.perf_counter() - start)
            self.cpu_s.append(self.cpu() - cpu)
            if measure_kernel:
                # Not timed: a few slider steps, then the memory of the kernel that served this view (the pool's).
                page.locator(HANDLE).first.wait_for(timeout=30_000)
                slider_steps(page, VIEWER_STEPS)
                alive = [pid for pid in pool if rss_mb(pid) is not None]
                if len(alive) == 1:
                    wait_until_idle(alive[0], quiet=0.5, timeout=10)
                    self.served.append((alive[0], rss_mb(alive[0]), pss_mb(alive[0])))
                else:
                    self.why = f"{len(alive)} pool kernels before the view"
        finally:
            context.close()
        self.used.update(pool)
        deadline = time.monotonic() + 10  # the pool refills; the next view waits for the new kernel
        while time.monotonic() < deadline and not pids():
            time.sleep(0.2)


def _first_view(browser, views: int, workdir: Path) -> tuple[dict, dict]:
    port = free_port()
    command, what = published_dashboard(workdir, port)
    floor_command = None
    if command is None:
        fallback = what
        command, what = workbench(port, preheat=True)
        what += f" ({fallback})"
    else:
        floor_port = free_port()
        at = command.index("view")
        floor_command = [*command[:at + 1], str(floor_folder(Path(command[at + 1]), workdir / "floor")),
                         "--port", str(floor_port), *command[command.index("--port") + 2:]]
    cpu = BrowserCpu()
    servers = [Server(command, port, workdir / "voila-first-view.log")]
    try:
        if floor_command:
            servers.append(Server(floor_command, floor_port, workdir / "voila-floor.log"))
        ours = Viewing(servers[0], browser, cpu)
        floor = Viewing(servers[1], browser, cpu) if floor_command else None
        for _ in range(views):  # interleaved: ours, then the floor page
            ours.view(measure_kernel=True)
            if floor:
                floor.view(measure_kernel=False)
    finally:
        for server in servers:
            server.stop()
    med = lambda xs: round(float(np.median(xs)), 3) if xs else None  # noqa: E731
    extra = {"browser_cpu_s": med(ours.cpu_s), "views_browser_cpu_s": [round(c, 2) for c in ours.cpu_s]}
    if floor is not None:
        extra.update(floor_s=med(floor.times), floor_views_s=[round(t, 3) for t in floor.times],
                     floor_browser_cpu_s=med(floor.cpu_s))
    row = make_row("first_view", f"7. first view with preheating, median of {len(ours.times)} views",
                   kind="absolute", goal="<= 1.5 s", goal_value=1.5,
                   ours=float(np.median(ours.times)) if ours.times else None, ours_repeats=len(ours.times),
                   views_s=[round(t, 3) for t in ours.times], **extra,
                   note=f"{what}; page.goto to the prediction text shown, new browser context per view, "
                        "pool kernel idle before each view. Beside it, interleaved, the same server on a floor page "
                        "(one text widget, nothing of ours: voila's page, widget manager and kernel connection): "
                        f"{extra.get('floor_s')} s; Chromium CPU seconds per view, ours "
                        f"{extra['browser_cpu_s']}, floor {extra.get('floor_browser_cpu_s')}")
    return row, {"served": ours.served, "what": what, "why": ours.why}


def run(quick: bool) -> list[dict]:
    with tempfile.TemporaryDirectory(prefix="levelwise-bench-") as tmp:
        return case_browser(quick, Path(tmp))
