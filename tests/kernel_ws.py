"""A minimal kernel-websocket client speaking jupyter_server's v1 binary protocol (tests only).

Framing, as in jupyter_server/services/kernels/connection/base.py (serialize_msg_to_ws_v1):
an 8-byte little-endian count of offsets, then the offsets (8 bytes each), then the channel
name and the message parts (header, parent header, metadata, content, buffers...).
"""

from __future__ import annotations

import json
import time
import uuid

import websocket

V1 = "v1.kernel.websocket.jupyter.org"


def pack_v1(channel: str, parts: list[bytes]) -> bytes:
    channel_bytes = channel.encode("utf-8")
    offsets = [8 * (1 + 1 + len(parts) + 1)]
    offsets.append(offsets[-1] + len(channel_bytes))
    for part in parts:
        offsets.append(offsets[-1] + len(part))
    head = len(offsets).to_bytes(8, "little") + b"".join(o.to_bytes(8, "little") for o in offsets)
    return head + channel_bytes + b"".join(parts)


def unpack_v1(frame: bytes):
    count = int.from_bytes(frame[:8], "little")
    offsets = [int.from_bytes(frame[8 * (i + 1): 8 * (i + 2)], "little") for i in range(count)]
    channel = frame[offsets[0]: offsets[1]].decode("utf-8")
    parts = [frame[offsets[i]: offsets[i + 1]] for i in range(1, count - 1)]
    parts.append(frame[offsets[-1]:])
    return channel, parts


class KernelClient:
    """Connects to ``/api/kernels/<id>/channels`` offering only the v1 subprotocol."""

    def __init__(self, base_url: str, kernel_id: str, token: str | None = None):
        self.session = uuid.uuid4().hex
        url = base_url.replace("http://", "ws://").rstrip("/") + f"/api/kernels/{kernel_id}/channels"
        url += f"?session_id={self.session}" + (f"&token={token}" if token else "")
        self.ws = websocket.create_connection(url, subprotocols=[V1], timeout=10)
        self.received: list[dict] = []

    def send(self, channel: str, msg_type: str, content: dict, buffers=()) -> str:
        msg_id = uuid.uuid4().hex
        header = {
            "msg_id": msg_id, "msg_type": msg_type, "username": "test", "session": self.session,
            "date": "2026-12-01T00:00:00.000Z", "version": "5.3",
        }
        parts = [json.dumps(p).encode() for p in (header, {}, {}, content)] + list(buffers)
        self.ws.send(pack_v1(channel, parts), opcode=websocket.ABNF.OPCODE_BINARY)
        return msg_id

    def collect(self, seconds: float) -> list[dict]:
        """Read every message arriving within *seconds*."""
        got = []
        deadline = time.monotonic() + seconds
        while time.monotonic() < deadline:
            self.ws.settimeout(max(0.05, deadline - time.monotonic()))
            try:
                frame = self.ws.recv()
            except websocket.WebSocketTimeoutException:
                break
            if isinstance(frame, str):
                msg = json.loads(frame)
            else:
                channel, parts = unpack_v1(frame)
                msg = {
                    "channel": channel,
                    "header": json.loads(parts[0]),
                    "parent_header": json.loads(parts[1]),
                    "content": json.loads(parts[3]) if len(parts) > 3 else {},
                }
            got.append(msg)
        self.received.extend(got)
        return got

    def wait_for(self, msg_type: str, parent: str, seconds: float = 10.0) -> dict | None:
        deadline = time.monotonic() + seconds
        while time.monotonic() < deadline:
            for msg in self.collect(0.3):
                if msg["header"].get("msg_type") == msg_type and msg["parent_header"].get("msg_id") == parent:
                    return msg
        return None

    def close(self):
        self.ws.close()
