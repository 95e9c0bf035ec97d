"""A published dashboard attacked over HTTP and its kernel websocket, as an outsider would (issues 17 and 18).

One ``levelwise view`` of a published study whose every text field carries markup and TeX payloads, with small
kernel limits (3 viewers' kernels, 2 per client address, a pool of 1). Loopback only; every loop is bounded in
count and time. The tests run in file order: the later ones count the kernels the earlier ones opened.
"""

from __future__ import annotations

import http.client
import json
import re
import threading
import time
import urllib.request
from pathlib import Path

import pytest
import websocket
from conftest import start_cli_server, stop_server, wait_until_children_idle
from hostile import PAYLOAD, hostile_study
from kernel_ws import KernelClient, pack_v1
from servers import free_port

MAX_KERNELS, PER_CLIENT = 3, 2


@pytest.fixture(scope="module")
def hostile_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("hostile") / "hostile study.json"
    hostile_study().save(path)
    return path


@pytest.fixture(scope="module")
def attacked(hostile_file, tmp_path_factory):
    """``levelwise view`` of the hostile study; yields (base URL, server output, server pid)."""
    from levelwise.dashboards.cli import main

    folder = tmp_path_factory.mktemp("published") / "board"
    assert main(["publish", str(hostile_file), "--out", str(folder)]) == 0
    port = free_port()
    proc, output = start_cli_server(["view", str(folder), "--pool-size", "1", "--max-kernels", str(MAX_KERNELS),
                                     "--max-kernels-per-client", str(PER_CLIENT)], port)
    output.wait_for("is filled with", timeout=90)
    wait_until_children_idle(proc.pid)
    try:
        yield f"http://127.0.0.1:{port}/", output, proc.pid
    finally:
        stop_server(proc)


def get_page(url: str, source: str = "127.0.0.1", timeout: float = 120) -> tuple[int, str, dict]:
    """GET *url* from the loopback address *source* (127.0.0.x: another client to the server)."""
    host, port = re.match(r"http://([\d.]+):(\d+)/", url).groups()
    conn = http.client.HTTPConnection(host, int(port), timeout=timeout, source_address=(source, 0))
    try:
        conn.request("GET", "/")
        response = conn.getresponse()
        return response.status, response.read().decode("utf-8", "replace"), dict(response.getheaders())
    finally:
        conn.close()


def kernel_of(page: str) -> str:
    return re.search(r'"kernelId":\s*"([0-9a-f-]{36})"', page).group(1)


def kernel_pids(server_pid: int) -> dict:
    """{kernel id: pid} of the server's kernels (from /proc)."""
    found = {}
    for proc in Path("/proc").iterdir():
        if not proc.name.isdigit():
            continue
        try:
            cmdline = (proc / "cmdline").read_bytes().decode("utf-8", "replace")
            ppid = int((proc / "stat").read_text().rsplit(")", 1)[1].split()[1])
        except (OSError, ValueError, IndexError):
            continue
        match = re.search(r"kernel-([0-9a-f-]{36})\.json", cmdline)
        if ppid == server_pid and match:
            found[match.group(1)] = int(proc.name)
    return found


def rss_mb(pid: int) -> float:
    return int(re.search(r"VmRSS:\s+(\d+) kB", Path(f"/proc/{pid}/status").read_text()).group(1)) / 1024


def answers(url: str, kernel: str, seconds: float = 30) -> float | None:
    """Seconds a kernel_info round trip takes on a new connection to *kernel* (None: no answer)."""
    started = time.monotonic()
    client = KernelClient(url, kernel)
    try:
        ask = client.send("shell", "kernel_info_request", {})
        reply = client.wait_for("kernel_info_reply", ask, seconds=seconds)
        return None if reply is None else time.monotonic() - started
    finally:
        client.close()


def timed_static(url: str) -> float:
    started = time.monotonic()
    with urllib.request.urlopen(url + "voila/static/voila.js", timeout=30) as response:
        response.read()
    return time.monotonic() - started


@pytest.fixture(scope="module")
def viewer(attacked):
    """The first viewer: its page (from the preheated pool), kernel id and an open kernel client."""
    url, _, _ = attacked
    status, page, _ = get_page(url)
    assert status == 200
    client = KernelClient(url, kernel_of(page))
    yield page, kernel_of(page), client
    client.close()


def test_crafted_offset_frames_never_delay_another_viewer(attacked, viewer):
    """Issue 18: one 24-byte frame (offset count 30,000,000 + 16 zero bytes) froze the server for 15 s."""
    url, output, _ = attacked
    _, kernel, client = viewer
    crafted = [
        (30_000_000).to_bytes(8, "little") + bytes(16),  # the frame of the issue
        (100_000_000).to_bytes(8, "little") + bytes(16),
        (2**63 - 1).to_bytes(8, "little") + bytes(16),
        (5).to_bytes(8, "little") + b"".join((10**12).to_bytes(8, "little") for _ in range(5)),  # offsets outside
        b"\x01\x02\x03",  # shorter than its count
    ]
    for frame in crafted:
        client.ws.send(frame, opcode=websocket.ABNF.OPCODE_BINARY)
        assert timed_static(url) < 1.0  # a second viewer's request is never delayed by more than 1 s
        assert answers(url, kernel, seconds=10) is not None  # and the kernel still answers
    client.ws.send('{"not": "binary"}')  # a text frame on the binary protocol
    assert answers(url, kernel) is not None
    assert output.wait_for("offset count 30000000 is above 64", timeout=10)
    lines = [line for line in output.lines if "refused a kernel websocket frame" in line and "(frame:" in line]
    assert len(lines) == 1  # logged once for the connection; the rest are counted
    assert "Traceback" not in output.text() and "MemoryError" not in output.text()


def test_deep_nesting_and_oversized_frames_fail_quietly(attacked, viewer):
    """Issue 17: a deeply nested JSON frame raised RecursionError in the server; no message size limit was set."""
    url, output, _ = attacked
    _, kernel, _ = viewer
    client = KernelClient(url, kernel)
    try:
        nested = b"[" * 100_000 + b"]" * 100_000
        header = json.dumps({"msg_id": "x", "msg_type": "comm_msg", "session": client.session, "username": "t",
                             "date": "2026-12-01T00:00:00Z", "version": "5.3"}).encode()
        client.ws.send(pack_v1("shell", [nested, b"{}", b"{}", b"{}"]), opcode=websocket.ABNF.OPCODE_BINARY)
        client.ws.send(pack_v1("shell", [header, b"{}", b"{}", b'{"data": ' + nested + b"}"]),
                       opcode=websocket.ABNF.OPCODE_BINARY)
        client.ws.send(pack_v1("shell", [header, b"{}", b"{}", b'["a", "list", "not", "a", "dict"]']),
                       opcode=websocket.ABNF.OPCODE_BINARY)
        assert answers(url, kernel) is not None
        assert output.wait_for("JSON nested 100000 deep", timeout=10)
    finally:
        client.close()
    big = KernelClient(url, kernel)
    try:
        big.ws.send(b"\0" * (2 * 1024 * 1024), opcode=websocket.ABNF.OPCODE_BINARY)  # above the 1 MB limit
        with pytest.raises((websocket.WebSocketConnectionClosedException, ConnectionError, OSError)):
            for _ in range(50):
                big.ws.recv()
    finally:
        big.close()
    assert timed_static(url) < 1.0
    assert "RecursionError" not in output.text() and "Traceback" not in output.text()


def test_client_comm_opens_leave_the_kernel_memory_flat(attacked, viewer):
    """Issue 18: 3,000 client comm_opens of a 100 KB model took a kernel from 194 MB to 528 MB."""
    url, output, server = attacked
    _, kernel, _ = viewer
    pid = kernel_pids(server)[kernel]
    before = rss_mb(pid)
    client = KernelClient(url, kernel)
    big = "x" * 100_000
    try:
        for i in range(3000):
            client.send("shell", "comm_open", {
                "comm_id": f"attack-{i}", "target_name": "jupyter.widget",
                "data": {"state": {"_model_name": "HTMLModel", "_model_module": "@jupyter-widgets/controls",
                                   "_model_module_version": "2.0.0", "value": big}, "buffer_paths": []}},
                        )
            if i == 1500:  # another target the page never offers
                client.send("shell", "comm_open", {"comm_id": "other", "target_name": "anything", "data": {}})
        barrier = client.send("shell", "kernel_info_request", {})
        assert client.wait_for("kernel_info_reply", barrier, seconds=60) is not None
        client.collect(1.0)
        received = json.dumps([m.get("content") for m in client.received])
    finally:
        client.close()
    after = rss_mb(pid)
    assert after - before < 20, (before, after)
    assert len(received) < 3001 * 200  # answered by a short comm_close each, never an echo of the model
    assert "attack-2999" in received  # the last open was answered (closed), quietly
    assert "Traceback" not in received and "site-packages" not in received and "/tmp" not in received
    assert output.wait_for("this page creates no widget from the browser", timeout=10)


def test_no_stderr_or_traceback_reaches_the_browser(attacked, viewer):
    """Issue 18: refused widget messages reached the client as stderr streams; tracebacks carried server paths."""
    url, output, _ = attacked
    _, kernel, _ = viewer
    client = KernelClient(url, kernel)
    try:
        ask = client.send("shell", "comm_info_request", {"target_name": "jupyter.widget"})
        comms = list(client.wait_for("comm_info_reply", ask)["content"]["comms"])
        for comm_id in comms:
            for state in ({"value": "not a number"}, {"layout": 12, "_dom_classes": 5}, {"index": "x"}):
                client.send("shell", "comm_msg", {"comm_id": comm_id, "data": {"method": "update", "state": state,
                                                                               "buffer_paths": []}})
        barrier = client.send("shell", "kernel_info_request", {})
        assert client.wait_for("kernel_info_reply", barrier, seconds=60) is not None
        messages = client.received + client.collect(2.0)
    finally:
        client.close()
    kinds = {m["header"].get("msg_type") for m in messages}
    assert "error" not in kinds
    assert not [m for m in messages if m["header"].get("msg_type") == "stream"
                and m["content"].get("name") == "stderr"]
    text = json.dumps([m.get("content") for m in messages])
    assert "Traceback" not in text and "site-packages" not in text and 'File \\"' not in text
    # The refusals did happen: they are in the server's log, not on the wire.
    assert output.wait_for("refused a widget message", timeout=15)


def test_a_flooding_client_slows_only_itself(attacked, viewer):
    """Issue 17: 10,000 slider updates on one websocket took another viewer's page load from 0.2 s to 15.8 s."""
    url, output, server = attacked
    _, kernel, _ = viewer
    wait_until_children_idle(server)  # the pool has its next kernel ready
    flooder = KernelClient(url, kernel)
    ask = flooder.send("shell", "comm_info_request", {"target_name": "jupyter.widget"})
    comms = list(flooder.wait_for("comm_info_reply", ask)["content"]["comms"])
    sent = [0]

    def flood():
        deadline = time.monotonic() + 15
        try:
            for i in range(10_000):
                if time.monotonic() > deadline:
                    break
                flooder.send("shell", "comm_msg", {"comm_id": comms[i % len(comms)], "data": {
                    "method": "update", "state": {"value": 150 + (i % 50)}, "buffer_paths": []}})
                sent[0] += 1
        except (websocket.WebSocketException, OSError):
            pass

    thread = threading.Thread(target=flood, daemon=True)
    thread.start()
    try:
        time.sleep(1.0)  # the flood is under way
        started = time.monotonic()
        status, page, _ = get_page(url, source="127.0.0.2")  # a second viewer, from another address
        page_load = time.monotonic() - started
        assert status == 200
        second = answers(url, kernel_of(page), seconds=30)
        static = timed_static(url)
    finally:
        thread.join(timeout=20)
        flooder.ws.close()
    assert sent[0] > 1000  # the flood was real
    assert page_load < 5.0, page_load  # a preheated page: well under the 15.8 s of the issue
    assert second is not None and second < 5.0 and static < 1.0


@pytest.mark.browser
def test_published_page_shows_every_payload_as_text(attacked, browser):
    """Issue 18: MathJax typeset $...$ in labels; the page asked a CDN for an icon font."""
    url, _, server = attacked
    wait_until_children_idle(server)  # the preheated kernel is ready
    check_page_in_browser(browser, url, ".lw-present", ".lw-readout .lw-mean",
                          source_ok=lambda u: u.startswith(("http://127.0.0.1", "ws://127.0.0.1")))


def test_kernels_are_bounded_and_existing_viewers_keep_working(attacked, viewer):
    """Issues 17/18: thirty bare GETs from one client started 31 kernels (4.3 GB)."""
    url, output, server = attacked
    _, kernel, _ = viewer
    wait_until_children_idle(server)  # a preheated kernel is ready, so an admitted view starts nothing slow
    for _ in range(PER_CLIENT):  # this client takes every place it may hold (it holds some already)
        if get_page(url, timeout=180)[0] == 503:
            break
    wait_until_children_idle(server)
    held_before = set(kernel_pids(server))
    started = time.monotonic()
    refused = [get_page(url, timeout=30) for _ in range(30)]
    assert time.monotonic() - started < 30  # answered at once, never a hang
    assert {status for status, _, _ in refused} == {503}
    status, text, headers = refused[0]
    assert "This dashboard is busy" in text and "try again" in text and headers.get("Retry-After")
    assert "/tmp" not in text and "Traceback" not in text
    full, text, _ = get_page(url, source="127.0.0.3", timeout=30)  # another client, but the server is full
    assert full == 503 and "places for viewers" in text
    kernels = kernel_pids(server)
    assert len(kernels) <= MAX_KERNELS + 1  # the viewers' kernels plus the preheated pool
    assert set(kernels) <= held_before  # the thirty refused views started nothing
    total = sum(rss_mb(pid) for pid in kernels.values())
    assert total < (MAX_KERNELS + 1) * 400, total
    assert answers(url, kernel) is not None  # the first viewer keeps working


def check_page_in_browser(browser, url, root, ready, source_ok):
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    requests, errors = [], []
    page.on("request", lambda request: requests.append(request.url))
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    page.route("**/*", lambda route: route.continue_() if source_ok(route.request.url) or route.request.url.startswith(
        ("data:", "blob:")) else route.abort())
    try:
        page.goto(url, timeout=120_000)
        page.locator(ready).first.wait_for(timeout=120_000)
        page.wait_for_timeout(1500)  # let any typesetting run
        shown = page.locator(root).first.inner_text()
        assert shown.count(PAYLOAD) >= 3, shown[:500]
        assert page.locator("mjx-container, .MathJax, mjx-math").count() == 0  # nothing typeset
        assert page.locator(f"{root} script").count() == 0  # no element made from a payload
        assert [u for u in requests if not (source_ok(u) or u.startswith(("data:", "blob:")))] == []
        assert not errors
    finally:
        context.close()


@pytest.mark.browser
def test_workbench_shows_every_payload_as_text(hostile_file, browser):
    port = free_port()
    proc, _ = start_cli_server(["serve", str(hostile_file)], port)
    try:
        check_page_in_browser(browser, f"http://127.0.0.1:{port}/", ".lw-explore", ".lw-readout .lw-mean",
                              source_ok=lambda u: u.startswith(("http://127.0.0.1", "ws://127.0.0.1")))
    finally:
        stop_server(proc)


@pytest.mark.browser
def test_offline_export_shows_every_payload_as_text(hostile_file, browser, tmp_path):
    """Issue 18: a title or name holding <!--<script> silently broke the export (0 sliders, 0 predictions)."""
    from levelwise.dashboards.cli import main

    out = tmp_path / "export.html"
    assert main(["export-html", str(hostile_file), "-o", str(out)]) == 0
    text = out.read_text(encoding="utf-8")
    data = text.split("<script", 2)
    assert all("<!--" not in part.split("</script")[0] for part in data[1:])  # nothing opens a comment inside
    context = browser.new_context(viewport={"width": 1300, "height": 1000})
    page = context.new_page()
    errors = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    page.route("**/*", lambda route: route.continue_() if route.request.url.startswith("file:") else route.abort())
    try:
        page.goto(out.as_uri())
        assert page.locator("input.lw-range").count() == 2  # both sliders
        numbers = json.loads(page.locator("#lw-numbers").get_attribute("data-numbers"))
        assert len(numbers["responses"]) == 1 and all(v is not None for v in numbers["settings"].values())
        shown = page.locator("body").inner_text()
        assert shown.count(PAYLOAD) >= 3
        assert not errors
    finally:
        context.close()
