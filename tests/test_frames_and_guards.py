"""The server's frame checks and the kernel's widget guard, without a server (fast; the live attacks are in
test_served_attacks.py)."""

from __future__ import annotations

import json
import time

import pytest
from kernel_ws import pack_v1

from levelwise.dashboards._frames import MAX_DEPTH, FrameRefused, check_depth, nesting_depth, v1_parts
from levelwise.dashboards.kernel_guard import WidgetOpenGuard
from levelwise.dashboards.present import build, without_paths


def test_a_well_formed_frame_is_split_like_jupyter_server_does():
    from jupyter_server.services.kernels.connection.base import deserialize_msg_from_ws_v1

    frame = pack_v1("shell", [b'{"msg_type": "comm_msg"}', b"{}", b"{}", b'{"comm_id": "a"}', b"\x00\x01buffer"])
    assert v1_parts(frame) == deserialize_msg_from_ws_v1(frame)  # jupyter_server's reader is the reference


@pytest.mark.parametrize("frame", [
    (30_000_000).to_bytes(8, "little") + bytes(16),  # issue 18's 24-byte frame
    (2**64 - 1).to_bytes(8, "little") + bytes(16),
    (5).to_bytes(8, "little") + bytes(8),  # five offsets announced, one present
    (3).to_bytes(8, "little") + b"".join(x.to_bytes(8, "little") for x in (32, 40, 10**9)),  # past the end
    (3).to_bytes(8, "little") + b"".join(x.to_bytes(8, "little") for x in (40, 32, 40)),  # out of order
    (3).to_bytes(8, "little") + b"".join(x.to_bytes(8, "little") for x in (0, 8, 16)),  # inside the offsets
    b"\x01", b"", "a text frame",
])
def test_inconsistent_frames_are_refused_before_any_list_is_built(frame):
    started = time.perf_counter()
    with pytest.raises(FrameRefused):
        v1_parts(frame)
    assert time.perf_counter() - started < 0.5  # jupyter_server's reader took 15 s on the first frame


def test_nesting_is_measured_without_parsing():
    assert nesting_depth(b'{"a": [1, 2, {"b": "]]]]{{{{"}]}') == 3  # brackets inside strings do not count
    assert nesting_depth(b'"no brackets"') == 0
    deep = b"[" * 50_000 + b"]" * 50_000
    with pytest.raises(RecursionError):
        json.loads(deep)  # what a server or kernel would raise
    with pytest.raises(FrameRefused):
        check_depth([b"{}", b"{}", b"{}", b'{"data": ' + deep + b"}"])
    check_depth([b"{}", b"{}", b"{}", b"[" * MAX_DEPTH + b"]" * MAX_DEPTH])  # a legal depth passes


class FakeComm:
    def __init__(self):
        self.closed = False

    def close(self):
        self.closed = True


def open_message(model):
    return {"content": {"data": {"state": {"_model_name": model, "value": "x" * 1000}}}}


def test_the_kernel_guard_caps_client_widgets_and_refuses_unknown_models(capfd):
    created = []
    guard = WidgetOpenGuard(lambda comm, msg: created.append(msg), limit=3, known={"HTMLModel", "FloatSliderModel"})
    comms = [FakeComm() for _ in range(10)]
    for comm in comms[:5]:
        guard(comm, open_message("HTMLModel"))
    guard(comms[5], open_message("SomethingElseModel"))
    guard(comms[6], {"content": ["not", "a", "dict"]})
    assert len(created) == 3 and guard.created == 3  # the cap
    assert [c.closed for c in comms[:7]] == [False] * 3 + [True] * 4  # refused ones are closed quietly
    err = capfd.readouterr()
    assert "Traceback" not in err.out + err.err
    assert err.out == ""  # nothing on stdout (a kernel would forward it to the browser)


def test_an_unreadable_study_shows_no_server_path(tmp_path):
    folder = tmp_path / "secret plant folder"
    folder.mkdir()
    broken = folder / "study.json"
    broken.write_text("{ not json", encoding="utf-8")
    page = build(str(broken))
    shown = page.children[0].value
    assert "cannot show its study" in shown and "study.json" in shown
    assert str(tmp_path) not in shown and "secret plant folder" not in shown
    missing = build(str(folder / "gone.json")).children[0].value
    assert "gone.json" in missing and str(folder) not in missing


def test_paths_are_cut_to_their_last_part():
    assert without_paths("Cannot read '/srv/a b/c.json': no") == "Cannot read 'c.json': no"
    assert without_paths("[Errno 2] No such file: /srv/x/y.json") == "[Errno 2] No such file: y.json"
    assert without_paths("a ratio of 1/2 and and/or") == "a ratio of 1/2 and and/or"
