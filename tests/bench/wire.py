"""Bytes a widget message costs on a served dashboard's kernel websocket, counted headless.

Each comm message is built as the kernel sends it (a ``comm_msg`` with a full Jupyter header from
``jupyter_client.session.Session``, the parent header of the browser's update, the widget state and its binary
buffers) and framed as jupyter_server frames it for the ``v1.kernel.websocket.jupyter.org`` protocol
(``serialize_msg_to_ws_v1``: offsets, channel, header, parent header, metadata, content, buffers). The served
dashboards enable permessage-deflate (``levelwise.dashboards.hardening.WEBSOCKET_COMPRESSION``), so each frame is
also deflated as tornado deflates it (RFC 7692: raw deflate, one compressor per connection that keeps its window
between messages, a sync flush per message and its trailing 00 00 ff ff removed).
"""

from __future__ import annotations

import zlib


class WireCounter:
    """Counts, per message: the widget payload (JSON + buffers), the v1 frame and the deflated frame, in bytes."""

    def __init__(self, compression_level: int = 6, mem_level: int = 8):
        from jupyter_client.session import Session

        self.session = Session(username="viewer")
        self.parent = self.session.msg("comm_msg", content={"comm_id": "browser", "data": {"method": "update"}})
        self.compressor = zlib.compressobj(compression_level, zlib.DEFLATED, -zlib.MAX_WBITS, mem_level)
        self.payload = []
        self.frame = []
        self.deflated = []

    def clear(self) -> None:
        """Forget the counts (the compressor keeps its window, as a connection's does)."""
        self.payload.clear()
        self.frame.clear()
        self.deflated.clear()

    def send(self, comm_id: str, data, metadata=None, buffers=None) -> None:
        import json

        from jupyter_server.services.kernels.connection.base import serialize_msg_to_ws_v1

        buffers = [bytes(memoryview(b).cast("B")) for b in buffers or []]
        self.payload.append(len(json.dumps(data, default=str).encode()) + sum(len(b) for b in buffers))
        msg = self.session.msg("comm_msg", content={"comm_id": comm_id, "data": data}, parent=self.parent["header"],
                               metadata=metadata or {})
        parts = [self.session.pack(msg[key]) for key in ("header", "parent_header", "metadata", "content")]
        frame = serialize_msg_to_ws_v1([*parts, *buffers], "iopub")
        self.frame.append(len(frame))
        out = self.compressor.compress(frame) + self.compressor.flush(zlib.Z_SYNC_FLUSH)
        self.deflated.append(len(out[:-4] if out.endswith(b"\x00\x00\xff\xff") else out))
