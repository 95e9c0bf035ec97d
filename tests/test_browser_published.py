"""The published read-only dashboard (``levelwise publish`` + ``levelwise view``) in a real Chromium, and attacked
over its kernel websocket. One served instance for the whole module; loopback only."""

from __future__ import annotations

import html
import json
import re
import time
import urllib.error
import urllib.request
import warnings
from pathlib import Path

import pytest
import websocket
from conftest import ARTIFACTS, SCREENSHOTS
from kernel_ws import V1, KernelClient

from levelwise import LevelwiseWarning
from levelwise.dashboards.study_source import open_study
from levelwise.widgets.style import fmt, plain_text


def quiet_fit(study, name):
    """Study.fit without its warning about the demo's one missing impact value (tested in its own test)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LevelwiseWarning)
        return study.fit(name)


pytestmark = pytest.mark.browser

#: Widget models whose presence in a read-only page would offer a change to the model or data.
MUTATING_SELECTORS = [
    # Every button but: the figures' own pan/zoom toolbars, the display choices (response shown, slice quantity),
    # "Add current settings" (a row of the viewer's own prediction list) and "Use these settings" (moves the
    # sliders to the optimum), "Save figure" and "Export table" (they read what is shown). None of these touches
    # the data, the models or the exclusions.
    "button:not(.toolbar_div button):not(.lw-response-choice button):not(.lw-slice-quantity button)"
    ":not(.lw-add-prediction):not(.lw-use-optimum):not(.lw-save-figure):not(.lw-export-table)",
    "input[type=text]", "input[type=file]", "textarea", "input[type=checkbox]",
    ".widget-text", ".widget-textarea", ".widget-upload", ".widget-checkbox",
]


@pytest.fixture(scope="module")
def opened(served_published, browser):
    """The page opened once; yields (page, first-view seconds)."""
    url, _ = served_published
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    from conftest import loopback_only

    page.route("**/*", loopback_only)
    started = time.monotonic()
    page.goto(url, timeout=60_000)
    page.locator(".lw-readout .lw-mean").first.wait_for(timeout=60_000)
    first_view = time.monotonic() - started
    yield page, first_view
    context.close()


def kernel_id_of(page) -> str:
    match = re.search(r'"kernelId":\s*"([0-9a-f-]{36})"', page.content())
    assert match, "the page names no kernel"
    return match.group(1)


def fits_shown(page) -> dict:
    raw = page.locator(".lw-fingerprint .lw-fp").first.get_attribute("data-fits")
    return json.loads(html.unescape(raw))


def test_published_folder_holds_only_the_five_files(published_dir):
    assert sorted(p.name for p in Path(published_dir).iterdir()) == sorted(
        ["present.ipynb", "study.json", "voila.json", "README.md", "optimum.json"]
    )


def test_renders_read_only_with_caution_and_summary(opened):
    page, first_view = opened
    text = page.locator(".lw-present").first.inner_text()
    assert "Predictions hold only inside the tested region" in text
    assert "safety review, local codes and licensed practice" in text
    assert "Invented data" in text
    assert re.search(r"Study fingerprint [0-9a-f]{16}", text)
    assert "Traceback" not in page.content()
    assert "from levelwise.dashboards.present import build" not in page.content()  # sources stripped
    for selector in MUTATING_SELECTORS:
        assert page.locator(selector).count() == 0, selector
    # Report (not assert) the first view with a preheated kernel.
    ARTIFACTS.mkdir(exist_ok=True)
    (ARTIFACTS / "published_first_view.txt").write_text(f"{first_view:.2f} s\n")
    print(f"\nfirst view of the published dashboard (preheated): {first_view:.2f} s")


def slider_matches_kernel(page, keys) -> str:
    """Press *keys* on the first factor's slider; the readout must show the kernel's mean at the page's settings."""
    source = open_study("demo")
    handle = page.locator(".lw-slider .noUi-handle").first
    handle.focus()
    for key in keys:
        handle.press(key)
    values = [float(h.get_attribute("aria-valuenow")) for h in page.locator(".lw-slider .noUi-handle").all()]
    reference = quiet_fit(source, source.response_names[0])  # the fit of the published study file, made here
    settings = {f.name: v for f, v in zip(source.factors, values)}
    expected = fmt(reference.predict(settings)["mean"].iloc[0])
    page.wait_for_function(
        "([sel, want]) => [...document.querySelectorAll(sel)].some(e => e.innerText === want)",
        arg=[".lw-readout .lw-mean", expected], timeout=20_000,
    )
    return expected


def test_slider_moves_prediction_to_kernel_value(opened):
    page, _ = opened
    before = page.locator(".lw-readout .lw-mean").first.inner_text()
    assert slider_matches_kernel(page, ["ArrowRight"] * 4) != before
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SCREENSHOTS / "published-dashboard.png"), full_page=True)


def test_a_click_on_the_slice_moves_its_two_factors_to_the_nearest_grid_point(opened):
    """A click on the slice goes through its marks to the figure's event rectangle (the heat map, contours and
    points let clicks through), the click catcher adds the point, and the kernel moves the two axis factors to
    the nearest of the 41 x 41 grid points; the readout follows (the marker and traces are coalesced)."""
    page, _ = opened
    handles = page.locator(".lw-slider .noUi-handle")
    page.locator(".lw-slice").first.scroll_into_view_if_needed()
    box = page.locator(".lw-slice .plotarea_background").first.bounding_box()
    assert box and box["width"] > 100 and box["height"] > 100
    low_x, high_x = (float(handles.nth(0).get_attribute(a)) for a in ("aria-valuemin", "aria-valuemax"))
    low_y, high_y = (float(handles.nth(1).get_attribute(a)) for a in ("aria-valuemin", "aria-valuemax"))
    before = page.locator(".lw-readout .lw-mean").first.inner_text()
    # A quarter of the way across and a quarter of the way up (away from the centre, where the marker sits).
    at = (box["x"] + 0.25 * box["width"], box["y"] + 0.75 * box["height"])
    hit = page.evaluate("([x, y]) => { const e = document.elementFromPoint(x, y); "
                        "return e ? e.tagName + '.' + e.getAttribute('class') : null; }", list(at))
    assert hit == "rect.plotarea_events", f"the click lands on {hit}, not on the figure's event rectangle"
    page.mouse.click(*at)
    page.wait_for_function(
        "([sel, old]) => document.querySelector(sel).innerText !== old", arg=[".lw-readout .lw-mean", before],
        timeout=20_000)
    step_x, step_y = (high_x - low_x) / 40, (high_y - low_y) / 40  # the 41-point click grid (CLICK_GRID)
    x = float(handles.nth(0).get_attribute("aria-valuenow"))
    y = float(handles.nth(1).get_attribute("aria-valuenow"))
    assert abs(x - (low_x + 0.25 * (high_x - low_x))) <= 1.01 * step_x, (x, low_x, high_x)
    assert abs(y - (low_y + 0.25 * (high_y - low_y))) <= 1.01 * step_y, (y, low_y, high_y)


def widget_states(client, comms) -> dict:
    """Ask the kernel for the state of every widget (``request_state``); {comm id: state}."""
    asks = {comm_id: client.send("shell", "comm_msg", {"comm_id": comm_id, "data": {"method": "request_state"}})
            for comm_id in comms}
    barrier = client.send("shell", "kernel_info_request", {})
    assert client.wait_for("kernel_info_reply", barrier, seconds=120) is not None
    # The replies travel on iopub, which is not ordered with the shell reply: collect until all have arrived.
    states = {}
    deadline = time.monotonic() + 30
    while True:
        for msg in client.received:
            content = msg.get("content", {})
            data = content.get("data", {}) if isinstance(content, dict) else {}
            comm_id = content.get("comm_id") if isinstance(content, dict) else None
            if msg["header"].get("msg_type") == "comm_msg" and data.get("method") == "update" \
                    and comm_id in asks and msg["parent_header"].get("msg_id") == asks[comm_id]:
                states[comm_id] = data["state"]
        if len(states) == len(asks) or time.monotonic() > deadline:
            return states
        client.collect(0.5)


def with_class(states, css) -> list:
    return [cid for cid, st in states.items() if css in (st.get("_dom_classes") or [])]


def kernel_readback(client, comms, settings_by_label) -> tuple[dict, str]:
    """Move the kernel's sliders (as a browser would) and read back the readout and the fingerprint it computes."""
    states = widget_states(client, comms)
    sliders = {plain_text(st["description"]): cid for cid, st in states.items()
               if st.get("_model_name") == "FloatSliderModel" and "lw-slider" in (st.get("_dom_classes") or [])}
    assert set(sliders) == set(settings_by_label), sliders
    for label, value in settings_by_label.items():
        client.send("shell", "comm_msg", {"comm_id": sliders[label], "data": {
            "method": "update", "state": {"value": value}, "buffer_paths": []}})
    states = widget_states(client, comms)
    readout = states[with_class(states, "lw-readout")[0]]["value"]
    means = dict(re.findall(r"<b>([^<]+)</b><br>Expected (?:mean|pass rate \(probability of a pass\)): "
                            r"<span class=\"lw-mean\">([^<]+)</span>", readout))
    return means, states[with_class(states, "lw-fingerprint")[0]]["value"]


def test_crafted_comm_messages_cannot_change_the_model(opened, served_published, tmp_path):
    page, _ = opened
    url, _ = served_published
    source = open_study("demo")
    settings = {f.label if hasattr(f, "label") else f.name: round(f.low + 0.3 * (f.high - f.low), 2)
                for f in source.factors}
    natural = {f.name: settings[f.label if hasattr(f, "label") else f.name] for f in source.factors}
    # The kernel's numbers of the published study file, computed here: the readout must keep showing these.
    # (The pass/fail adhesion response shows its pass rate in %; its panel count is its trials, not a response.)
    expected = {name: fmt(quiet_fit(source, name).predict(natural)["mean"].iloc[0]
                          * (100 if source.responses[name].family == "binomial" else 1))
                for name in source.response_names if name in source.models}
    client = KernelClient(url, kernel_id_of(page))
    try:
        ask = client.send("shell", "comm_info_request", {"target_name": "jupyter.widget"})
        reply = client.wait_for("comm_info_reply", ask)
        assert reply is not None, "comm_info_request went unanswered"
        comms = list(reply["content"]["comms"])
        assert len(comms) > 10  # every widget of the page is reachable: the attack surface is real
        means_before, fingerprint_before = kernel_readback(client, comms, settings)
        assert means_before == expected
        crafted = [
            {"value": 1e12, "max": 1e12, "min": -1e12, "disabled": False},
            {"value": "not a number", "description": "<script>alert(1)</script>"},
            {"value": -1e12, "options": ["x"], "index": 5},
            {"x": [0.0, 1.0], "y": [1e9, -1e9], "color": None},
        ]
        for comm_id in comms:
            for state in crafted:
                client.send("shell", "comm_msg", {"comm_id": comm_id,
                                                  "data": {"method": "update", "state": state, "buffer_paths": []}})
            client.send("shell", "comm_msg", {"comm_id": comm_id, "data": {"method": "custom",
                                                                           "content": {"event": "click"}}})
        marker = tmp_path / "executed"
        code = f"open({str(marker)!r}, 'w').write('x')"
        run = client.send("shell", "execute_request", {"code": code, "silent": False, "store_history": False,
                                                      "user_expressions": {}, "allow_stdin": False,
                                                      "stop_on_error": True})
        means_after, fingerprint_after = kernel_readback(client, comms, settings)
        # Read back from the kernel after the attack: same model, same data, same exclusions, same numbers.
        assert fingerprint_after == fingerprint_before
        assert means_after == expected
        messages = client.received + client.collect(1.0)
        assert [m for m in messages if m["parent_header"].get("msg_id") == run] == []  # execute_request dropped
        assert not marker.exists()
        assert not any("Traceback" in json.dumps(m.get("content", {})) for m in messages)
    finally:
        client.close()
    assert "Traceback" not in page.content()


def test_legacy_protocol_websocket_gets_400(opened, served_published):
    page, _ = opened
    url, _ = served_published
    ws_url = url.replace("http://", "ws://") + f"api/kernels/{kernel_id_of(page)}/channels?session_id=legacy"
    with pytest.raises(websocket.WebSocketBadStatusException) as refused:
        websocket.create_connection(ws_url, timeout=10)  # offers no subprotocol: the legacy protocol
    assert refused.value.status_code == 400
    with pytest.raises(websocket.WebSocketBadStatusException) as other:
        websocket.create_connection(ws_url + "2", subprotocols=["v2.other"], timeout=10)
    assert other.value.status_code == 400


def test_kernel_websocket_negotiates_permessage_deflate(opened, served_published):
    """The served page's kernel websocket compresses (RFC 7692), as the bench's slider_bytes row assumes."""
    page, _ = opened
    url, _ = served_published
    ws_url = url.replace("http://", "ws://") + f"api/kernels/{kernel_id_of(page)}/channels?session_id=deflate"
    offer = ["Sec-WebSocket-Extensions: permessage-deflate; client_max_window_bits"]
    ws = websocket.create_connection(ws_url, subprotocols=[V1], header=offer, timeout=10)
    try:
        assert "permessage-deflate" in ws.getheaders().get("sec-websocket-extensions", "")
    finally:
        ws.close()


@pytest.mark.parametrize("path", [
    "api/contents", "api/contents/study.json", "tree", "study.json", "voila/files/study.json",
    "voila/files/voila.json", "voila/files/README.md", "voila/files/present.ipynb", "voila/tree",
    "voila/render/present.ipynb", "voila/api/contents/", "api/kernels", "api/sessions",
])
def test_paths_are_not_served(served_published, path):
    url, _ = served_published
    try:
        with urllib.request.urlopen(url + path, timeout=10) as response:
            status, body = response.status, response.read().decode("utf-8", "replace")
    except urllib.error.HTTPError as exc:
        status, body = exc.code, exc.read().decode("utf-8", "replace")
    assert status in (403, 404, 405), (path, status)
    assert '"audit"' not in body and "format_version" not in body  # the study file's content never leaks
    assert "Traceback" not in body


def test_viewer_kernel_runs_one_blas_thread_and_report_its_memory(opened):
    """The viewer kernel's environment pins one BLAS thread; its resident memory is reported (not asserted)."""
    page, _ = opened
    kernel = kernel_id_of(page)
    rss = None
    for proc in Path("/proc").iterdir():
        if not proc.name.isdigit():
            continue
        try:
            cmdline = (proc / "cmdline").read_bytes().decode("utf-8", "replace")
            if "ipykernel" in cmdline and kernel in cmdline:
                status = (proc / "status").read_text()
                rss = int(re.search(r"VmRSS:\s+(\d+) kB", status).group(1)) / 1024
                environ = (proc / "environ").read_bytes().split(b"\0")
                assert b"OPENBLAS_NUM_THREADS=1" in environ and b"OMP_NUM_THREADS=1" in environ  # one BLAS thread
        except (OSError, AttributeError):
            continue
    assert rss is not None, "the viewer's kernel process was not found"
    ARTIFACTS.mkdir(exist_ok=True)
    (ARTIFACTS / "published_kernel_memory.txt").write_text(f"{rss:.0f} MB\n")
    print(f"\nmemory of one viewer kernel: {rss:.0f} MB resident")


def test_bound_to_loopback_only(served_published):
    """The server listens on 127.0.0.1 only (read from the kernel's socket table, /proc/net/tcp)."""
    url, _ = served_published
    port = int(url.rstrip("/").rsplit(":", 1)[1])
    listening = []
    for table in ("/proc/net/tcp", "/proc/net/tcp6"):
        try:
            lines = Path(table).read_text().splitlines()[1:]
        except OSError:
            continue
        for line in lines:
            local, state = line.split()[1], line.split()[3]
            address, hex_port = local.rsplit(":", 1)
            if int(hex_port, 16) == port and state == "0A":  # 0A: LISTEN
                listening.append(address)
    assert listening and set(listening) <= {"0100007F", "00000000000000000000000001000000"}, listening
