"""Helpers for the headless widget tests: a recording comm and messages shaped as a browser sends them.

ipywidgets creates each widget's comm through ``ipywidgets.comm.create_comm``; replacing it with
:class:`RecordingComm` captures every message the kernel would send to the browser (with its binary
buffers), and :func:`browser_update` / :func:`browser_event` feed a widget the messages a browser
(or anyone holding the page's websocket) can send.
"""

from __future__ import annotations

import json

import ipywidgets.comm


class RecordingComm:
    """Stands in for a kernel comm; appends every outgoing message to a shared log."""

    kernel = "recording"  # truthy: ipywidgets then sends state

    def __init__(self, log, **kwargs):
        self.log = log
        self.comm_id = kwargs.get("comm_id") or f"rec-{id(self):x}"
        self._handler = None

    def send(self, data=None, metadata=None, buffers=None):
        self.log.append((data, list(buffers or [])))

    def on_msg(self, callback):
        self._handler = callback

    def on_close(self, callback):
        pass

    def close(self, *args, **kwargs):
        pass

    def open(self, *args, **kwargs):
        pass


def install_recording_comm(monkeypatch) -> list:
    """Make every widget created from now on talk through a RecordingComm; return the message log."""
    log = []
    monkeypatch.setattr(ipywidgets.comm, "create_comm", lambda **kwargs: RecordingComm(log, **kwargs))
    return log


def browser_update(widget, **state) -> None:
    """Deliver a state update to *widget* exactly as the front end sends one over its comm."""
    widget._handle_msg(
        {"content": {"data": {"method": "update", "state": state, "buffer_paths": []}}, "buffers": []}
    )


def browser_event(widget, content: dict) -> None:
    """Deliver a custom message (a button click, a bqplot element click) as the front end does."""
    widget._handle_msg({"content": {"data": {"method": "custom", "content": content}}, "buffers": []})


def message_bytes(log) -> int:
    """Bytes of the recorded messages: JSON text of each message plus its binary buffers."""
    total = 0
    for data, buffers in log:
        total += len(json.dumps(data, default=str).encode("utf-8"))
        total += sum(len(memoryview(b).cast("B")) for b in buffers)
    return total
