"""Checks on a kernel-websocket frame from a browser, made before anything in it is parsed.

jupyter_server's v1 deserialiser (``deserialize_msg_from_ws_v1``) builds the list of offsets a
frame announces before it compares them with the frame's length: an 8-byte count of 30,000,000
followed by 16 zero bytes made the server build 30 million integers and froze it for every
viewer for seconds. :func:`v1_parts` reads the count and the offsets itself, refuses a frame
whose count is larger than a small bound or whose offsets do not lie, in order, inside the
frame, and only then slices it. :func:`nesting_depth` measures how deeply a JSON text nests
without parsing it (``json.loads`` of a deeply nested text raises ``RecursionError``).

Pure functions on bytes: no server, no widget library.
"""

from __future__ import annotations

import re
import struct

import numpy as np

#: A real message has a channel, four JSON parts (header, parent header, metadata, content) and a few
#: binary buffers (bqplot sends one per array). 64 offsets is far above any message a page sends.
MAX_OFFSETS = 64
#: JSON parts nest a few levels (content -> data -> state -> a list); anything deeper is not ours.
MAX_DEPTH = 32

_STRING = re.compile(rb'"(?:[^"\\]|\\.)*"', re.DOTALL)


class FrameRefused(ValueError):
    """A frame that is refused before it is parsed; ``str()`` says why in a few words (for the server log)."""


def v1_parts(frame, max_offsets: int = MAX_OFFSETS) -> tuple[str, list[bytes]]:
    """The channel and message parts of a v1 frame, or :class:`FrameRefused` when its layout is inconsistent.

    Layout (jupyter_server's ``serialize_msg_to_ws_v1``): an 8-byte little-endian count *n*, *n* 8-byte
    offsets, then the channel name and the parts; offsets *i* and *i + 1* bound part *i* (the channel is
    part 0), so the last offset is the end of the last part. Read as ``deserialize_msg_from_ws_v1`` reads it.

    Examples
    --------
    >>> v1_parts(b"".join(x.to_bytes(8, "little") for x in (30_000_000, 0, 0)))
    Traceback (most recent call last):
    ...
    levelwise.dashboards._frames.FrameRefused: offset count 30000000 is above 64
    """
    if not isinstance(frame, (bytes, bytearray, memoryview)):
        raise FrameRefused("a text frame on the binary v1 protocol")
    frame = bytes(frame)
    if len(frame) < 8:
        raise FrameRefused(f"frame of {len(frame)} bytes is shorter than its count")
    count = int.from_bytes(frame[:8], "little")
    if count > max_offsets:
        raise FrameRefused(f"offset count {count} is above {max_offsets}")
    if count < 3:
        raise FrameRefused(f"offset count {count} leaves no channel and header")
    head = 8 * (count + 1)
    if head > len(frame):
        raise FrameRefused(f"{count} offsets do not fit in a frame of {len(frame)} bytes")
    offsets = struct.unpack_from(f"<{count}Q", frame, 8)
    if offsets[0] < head or any(b < a for a, b in zip(offsets, offsets[1:])) or offsets[-1] > len(frame):
        raise FrameRefused("offsets out of order or outside the frame")
    try:
        channel = frame[offsets[0]: offsets[1]].decode("ascii")
    except UnicodeDecodeError:
        raise FrameRefused("channel name is not text") from None
    return channel, [frame[offsets[i]: offsets[i + 1]] for i in range(1, count - 1)]


def nesting_depth(text: bytes) -> int:
    """How deeply brackets nest in a JSON text (strings skipped), without parsing it.

    Examples
    --------
    >>> nesting_depth(b'{"a": [1, {"b": "[[[["}]}')
    3
    >>> nesting_depth(b"[" * 5000)
    5000
    """
    if text.count(b"[") + text.count(b"{") <= 1:
        return int(bool(text.count(b"[") + text.count(b"{")))
    bare = _STRING.sub(b'""', text)
    codes = np.frombuffer(bare, dtype=np.uint8)
    step = (np.isin(codes, (ord("["), ord("{")))).astype(np.int32) - np.isin(codes, (ord("]"), ord("}")))
    return int(np.cumsum(step).max(initial=0))


def check_depth(parts: list[bytes], max_depth: int = MAX_DEPTH, json_parts: int = 4) -> None:
    """Refuse a message whose JSON parts (the first *json_parts*) nest deeper than *max_depth*."""
    for part in parts[:json_parts]:
        if part.count(b"[") + part.count(b"{") <= max_depth:
            continue  # cannot nest deeper than it has brackets
        depth = nesting_depth(part)
        if depth > max_depth:
            raise FrameRefused(f"JSON nested {depth} deep (at most {max_depth})")
