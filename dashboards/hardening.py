"""Hardened serving of levelwise dashboards with the standalone ``voila`` command.

Every setting here closes a gap recorded in the stack notes (voila 0.5.13):

- the standalone ``voila`` command in single-notebook mode, never the jupyter_server
  extension (which runs ``execute_request`` for token holders);
- sources stripped and tracebacks hidden (a failing cell must not leak code or secrets);
- no file under the notebook's folder is served (``file_allowlist`` is empty: the study
  file, the configuration and the README stay on the server);
- bound to 127.0.0.1 unless an address is given, with an optional token;
- idle kernels culled, and kernels preheated so the first view is quick;
- one BLAS thread per kernel (a shared machine slows down, not speeds up, with more);
- :class:`V1OnlyWebsocketConnection`: a kernel websocket that did not offer the
  ``v1.kernel.websocket.jupyter.org`` subprotocol is refused with HTTP 400 before it is
  upgraded. A legacy-protocol client makes voila 0.5.13 misparse the first binary frame
  (it tries to allocate ~1e18 offsets and blocks the server for everyone); refusing it
  closes that denial of service while real browsers, which offer v1, keep working.

This module is imported by the voila server process (for the connection class), never
by a kernel, and it imports no widget library.
"""

from __future__ import annotations

import asyncio
import json
import os
import time
from pathlib import Path

from jupyter_server.services.kernels.connection.base import serialize_msg_to_ws_v1
from jupyter_server.services.kernels.connection.channels import ZMQChannelsWebsocketConnection
from tornado import web
from traitlets import Float, Integer

from ._frames import MAX_DEPTH, MAX_OFFSETS, FrameRefused, check_depth, v1_parts

#: The only kernel websocket subprotocol a published dashboard accepts.
V1_PROTOCOL = "v1.kernel.websocket.jupyter.org"

#: Dotted path of the connection class, as voila's configuration wants it.
CONNECTION_CLASS = "levelwise.dashboards.hardening.V1OnlyWebsocketConnection"

#: Largest websocket message a browser may send (tornado closes the connection above it; the page's own
#: messages are a few KB).
MAX_MESSAGE_BYTES = 1024 * 1024
#: permessage-deflate on the kernel websockets (RFC 7692; tornado's ``get_compression_options``): a slider event's
#: widget updates (float32 curves, the uint8 heat map, JSON) shrink about threefold on the wire. Level 6 is zlib's
#: default; the compressor keeps its window between messages (context takeover), so repeated keys cost little.
WEBSOCKET_COMPRESSION = {"compression_level": 6, "mem_level": 8}
#: The comm target the browser's widget manager opens to fetch the widgets' state; the only one it may open.
CONTROL_TARGET = "jupyter.widget.control"
#: What a refused frame counts against a connection's message rate (an accepted message counts 1).
REFUSED_COST = 0.1
#: Refused frames by kind, for this server process (the log has the first of each kind per connection).
REFUSALS: dict[str, int] = {}

#: Viewers' kernels one client address may hold at once (a few tabs).
PER_CLIENT = 3

#: Seconds a kernel may sit idle (no message, no connection) before it is shut down.
CULL_IDLE_TIMEOUT = 600
#: Seconds between two culling passes.
CULL_INTERVAL = 60

#: Environment for the server and every kernel it starts: one BLAS / OpenMP thread each.
THREAD_ENV = {
    "OPENBLAS_NUM_THREADS": "1",
    "OMP_NUM_THREADS": "1",
    "MKL_NUM_THREADS": "1",
    "NUMEXPR_NUM_THREADS": "1",
    "VECLIB_MAXIMUM_THREADS": "1",
}

#: The served kernels' widgets do not echo a browser's value back (ipywidgets 8 sends an ``echo_update`` for
#: every value a browser sets, for pages that share a kernel; each served page has a kernel of its own): one
#: message less per slider event for the kernel, the server and the page.
WIDGET_ENV = {"JUPYTER_WIDGETS_ECHO": "0"}


def offered_subprotocols(header: str | None) -> list[str]:
    """The subprotocols listed in a ``Sec-WebSocket-Protocol`` request header.

    Examples
    --------
    >>> offered_subprotocols("v1.kernel.websocket.jupyter.org, other")
    ['v1.kernel.websocket.jupyter.org', 'other']
    >>> offered_subprotocols(None)
    []
    """
    return [part.strip() for part in (header or "").split(",") if part.strip()]


class V1OnlyWebsocketConnection(ZMQChannelsWebsocketConnection):
    """The kernel websocket connection of a served dashboard: v1 protocol only, every frame checked first.

    Enable it with ``--Voila.kernel_websocket_connection_class=`` and :data:`CONNECTION_CLASS`.

    - ``prepare()`` runs before the websocket upgrade: a client that does not offer the v1 protocol gets
      HTTP 400 and no connection is made.
    - Every frame is checked before jupyter_server parses it (:mod:`levelwise.dashboards._frames`): its size,
      its offset count and offsets against its length, and the nesting of its JSON parts. A refused frame is
      dropped; the first refusal of each kind on a connection is logged, the rest are counted and the total
      is logged when the connection closes.
    - Each connection may send at most ``message_rate`` messages per second (bursts of ``message_burst``);
      beyond that the server stops reading *that* websocket for a moment, so a flooding client slows only
      itself (tornado awaits ``on_message`` before it reads the next frame).
    - A ``comm_open`` from the browser is refused unless its target is the widget manager's control channel:
      a published page creates every widget in the kernel and needs none from the browser. The refusal is
      answered with a plain ``comm_close``: no traceback, no path.
    - Nothing of the kernel's stderr and no error message reaches the browser: those go to the server log.
    """

    message_rate = Float(100.0, config=True, help="Messages per second a connection may send (sustained).")
    message_burst = Integer(300, config=True, help="Messages a connection may send at once before the rate applies.")
    max_message_bytes = Integer(MAX_MESSAGE_BYTES, config=True, help="Largest frame a browser may send, in bytes.")
    max_offsets = Integer(MAX_OFFSETS, config=True, help="Largest offset count of a v1 frame.")
    max_depth = Integer(MAX_DEPTH, config=True, help="Deepest JSON nesting of a message part.")
    control_opens = Integer(4, config=True, help="comm_open messages a connection may send to the control target.")

    async def prepare(self):
        offered = offered_subprotocols(self.websocket_handler.request.headers.get("Sec-WebSocket-Protocol"))
        if V1_PROTOCOL not in offered:
            self.log.warning("Refused a kernel websocket that did not offer %s (offered: %s)", V1_PROTOCOL, offered)
            raise web.HTTPError(400, f"This server only speaks the {V1_PROTOCOL} kernel websocket protocol.")
        self._refused: dict[str, int] = {}
        self._tokens, self._stamp = float(self.message_burst), time.monotonic()
        self._control_opened, self._cost = 0, 1.0
        # Tornado awaits what on_message returns before it reads the next frame: our on_message can pause.
        self.websocket_handler.on_message = self.receive
        return await super().prepare()

    # -- incoming ---------------------------------------------------------------------------------------
    def refuse(self, kind: str, detail: str) -> None:
        """Count a refused frame; log the first of each kind on this connection (one line, no traceback)."""
        self._cost = REFUSED_COST  # a refused frame never reaches the kernel: it costs the server little
        seen = self._refused.get(kind, 0)
        self._refused[kind] = seen + 1
        REFUSALS[kind] = REFUSALS.get(kind, 0) + 1
        if not seen:
            self.log.warning("levelwise: refused a kernel websocket frame from %s (%s: %s); further ones are counted",
                             self.websocket_handler.request.remote_ip, kind, detail)

    def receive(self, message):
        """on_message of the websocket: the rate limit, then :meth:`handle_incoming_message`."""
        now = time.monotonic()
        self._tokens = min(float(self.message_burst), self._tokens + (now - self._stamp) * self.message_rate)
        self._stamp = now
        self._cost = 1.0
        try:
            self.handle_incoming_message(message)
        except Exception as exc:  # noqa: BLE001 - a malformed message fails quietly, with one log line
            self.refuse("malformed", f"{type(exc).__name__}: {exc}")
        self._tokens -= self._cost
        if self._tokens < 0:
            return asyncio.sleep(-self._tokens / self.message_rate)
        return None

    def handle_incoming_message(self, incoming_msg) -> None:
        if not self.channels:
            return
        if isinstance(incoming_msg, (bytes, str)) and len(incoming_msg) > self.max_message_bytes:
            self.refuse("too large", f"{len(incoming_msg)} bytes (at most {self.max_message_bytes})")
            return
        try:
            channel, parts = v1_parts(incoming_msg, self.max_offsets)
            if len(parts) < 4:
                raise FrameRefused(f"{len(parts)} message parts (a message has at least 4)")
            check_depth(parts, self.max_depth)
            header = json.loads(parts[0])
            if not isinstance(header, dict) or not isinstance(header.get("msg_type"), str):
                raise FrameRefused("the header is not a message header")
            content = json.loads(parts[3])
            if not isinstance(content, dict):
                raise FrameRefused("the content is not an object")
            if header["msg_type"].startswith("comm_") and header["msg_type"] != "comm_info_request" and not (
                isinstance(content.get("comm_id"), str) and isinstance(content.get("data", {}), dict)
            ):
                raise FrameRefused("a comm message without a comm id or with data that is not an object")
        except FrameRefused as exc:
            self.refuse("frame", str(exc))
            return
        except ValueError as exc:
            self.refuse("frame", f"unreadable header ({type(exc).__name__})")
            return
        if header["msg_type"] == "comm_open" and not self._comm_open_allowed(header, content):
            return
        super().handle_incoming_message(bytes(incoming_msg))

    def _comm_open_allowed(self, header: dict, content: dict) -> bool:
        target, comm_id = content.get("target_name"), content.get("comm_id")
        if target == CONTROL_TARGET and self._control_opened < self.control_opens:
            self._control_opened += 1
            return True
        self.refuse("comm_open", f"target {str(target)[:60]!r}: this page creates no widget from the browser")
        if isinstance(comm_id, str) and len(comm_id) <= 64:
            self._answer_close(comm_id, header)
        return False

    def _answer_close(self, comm_id: str, parent: dict) -> None:
        """Tell the client its comm is closed, as a kernel does for a target it does not know."""
        reply = self.session.msg("comm_close", content={"comm_id": comm_id, "data": {}}, parent=parent)
        try:
            self.write_message(serialize_msg_to_ws_v1(reply, "iopub", self.session.pack), binary=True)
        except Exception:  # noqa: BLE001 - the client is gone; nothing to answer
            pass

    # -- outgoing ---------------------------------------------------------------------------------------
    def handle_outgoing_message(self, stream, outgoing_msg) -> None:
        channel = stream if isinstance(stream, str) else getattr(stream, "channel", None)
        if channel == "iopub" and self._withheld(outgoing_msg):
            return
        super().handle_outgoing_message(stream, outgoing_msg)

    def _withheld(self, msg_list) -> bool:
        """True for the kernel's stderr and error messages: logged here, never sent to the browser."""
        try:
            _, parts = self.session.feed_identities(msg_list)
            raw = bytes(parts[1])
            if b'"stream"' not in raw and b'"error"' not in raw:  # a header naming neither type is neither:
                return False  # the widget messages of every slider event pass without parsing their header
            header = json.loads(raw)
            kind = header.get("msg_type")
            if kind not in ("stream", "error"):
                return False
            content = json.loads(bytes(parts[4]))
        except Exception:  # noqa: BLE001 - not ours to judge; jupyter_server handles it as before
            return False
        if kind == "stream" and content.get("name") != "stderr":
            return False
        text = content.get("text") if kind == "stream" else f"{content.get('ename')}: {content.get('evalue')}"
        self.log.warning("levelwise: kernel %s %s (not sent to the browser): %s", self.kernel_id, kind,
                         str(text).strip()[:2000])
        return True

    def disconnect(self):
        refused = getattr(self, "_refused", {})
        if sum(refused.values()) > 1:
            self.log.warning("levelwise: refused %s frame(s) on a kernel websocket from %s", dict(refused),
                             self.websocket_handler.request.remote_ip)
            self._refused = {}
        return super().disconnect()


#: The page may load and connect only to the server it came from: the voila template's icon-font link to a
#: CDN (and anything else pointing elsewhere) is blocked by the browser before any request leaves.
CONTENT_SECURITY_POLICY = (
    "default-src 'self'; script-src 'self' 'unsafe-inline' 'unsafe-eval'; style-src 'self' 'unsafe-inline'; "
    "img-src 'self' data: blob:; font-src 'self' data:; connect-src 'self'; frame-ancestors 'self'; "
    "object-src 'none'; base-uri 'self'; form-action 'self'"
)


def voila_config(
    *,
    ip: str = "127.0.0.1",
    preheat: bool = True,
    pool_size: int = 1,
    cull_idle_timeout: int = CULL_IDLE_TIMEOUT,
    cull_interval: int = CULL_INTERVAL,
    max_kernels: int = 0,
    max_kernels_per_client: int = PER_CLIENT,
) -> dict:
    """The hardened voila configuration, as the nested dict a ``voila.json`` file holds.

    Parameters
    ----------
    ip : str
        Address to bind. The default, 127.0.0.1, serves this machine only.
    preheat : bool
        Start ``pool_size`` kernels ahead, with the notebook already run, so a first view is quick.
    pool_size : int
        Number of preheated kernels waiting for viewers.
    cull_idle_timeout, cull_interval : int
        Seconds of idleness before a kernel is shut down, and seconds between checks.
    max_kernels, max_kernels_per_client : int
        Viewers' kernels alive at once (0: sized to the machine's memory) and per client address
        (read by :class:`levelwise.dashboards.server_app.LevelwiseVoila`; plain voila ignores them).
    """
    return {
        "Voila": {
            "ip": ip,
            "open_browser": False,
            "kernel_websocket_connection_class": CONNECTION_CLASS,
            "tornado_settings": {
                "websocket_max_message_size": MAX_MESSAGE_BYTES,
                "websocket_compression_options": dict(WEBSOCKET_COMPRESSION),
                "headers": {"Content-Security-Policy": CONTENT_SECURITY_POLICY},
            },
        },
        "LevelwiseVoila": {
            "max_kernels": int(max_kernels),
            "max_kernels_per_client": int(max_kernels_per_client),
        },
        "VoilaConfiguration": {
            "strip_sources": True,
            "show_tracebacks": False,
            "file_allowlist": [],
            "file_denylist": [".*"],
            "preheat_kernel": bool(preheat),
            "default_pool_size": int(pool_size) if preheat else 0,
        },
        "MappingKernelManager": {
            "cull_idle_timeout": int(cull_idle_timeout),
            "cull_interval": int(cull_interval),
            "cull_connected": True,
        },
    }


def config_arguments(config: dict) -> list[str]:
    """Command-line ``--Class.name=value`` arguments for a nested config dict."""
    args = []
    for cls, values in config.items():
        for name, value in values.items():
            text = json.dumps(value) if isinstance(value, (list, dict)) else str(value)
            args.append(f"--{cls}.{name}={text}")
    return args


#: The module that runs the standalone voila application with bounded kernels (voila's own ``Voila`` app).
SERVER_MODULE = "levelwise.dashboards.server_app"


def voila_command(
    notebook,
    *,
    port: int,
    ip: str = "127.0.0.1",
    token: str | None = None,
    preheat: bool = True,
    pool_size: int = 1,
    cull_idle_timeout: int = CULL_IDLE_TIMEOUT,
    cull_interval: int = CULL_INTERVAL,
    max_kernels: int = 0,
    max_kernels_per_client: int = PER_CLIENT,
    base_url: str = "/",
    config_dir=None,
) -> list[str]:
    """The standalone voila command line for one notebook, with every hardened setting.

    It runs :mod:`levelwise.dashboards.server_app` (voila's standalone application with a bound on
    viewers' kernels). The settings are given on the command line even when ``config_dir`` holds a
    ``voila.json`` with the same values, so a stale or edited file cannot loosen them (voila applies
    command-line settings over file settings).
    """
    import sys

    config = voila_config(
        ip=ip, preheat=preheat, pool_size=pool_size, cull_idle_timeout=cull_idle_timeout, cull_interval=cull_interval,
        max_kernels=max_kernels, max_kernels_per_client=max_kernels_per_client,
    )
    command = [sys.executable, "-m", SERVER_MODULE, str(notebook), "--no-browser", f"--port={int(port)}"]
    if config_dir is not None:
        command.append(f"--Voila.config_file_paths={json.dumps([str(config_dir)])}")
    command += config_arguments(config)
    if base_url not in ("", "/"):
        command.append(f"--Voila.base_url=/{base_url.strip('/')}/")
    command.append(f"--Voila.token={token}" if token else "--Voila.token=")
    return command


def server_env(extra: dict | None = None) -> dict:
    """Environment for the voila server and its kernels: one BLAS thread, no widget echo, our package
    importable."""
    env = dict(os.environ)
    env.update(THREAD_ENV)
    env.update(WIDGET_ENV)
    root = str(Path(__file__).resolve().parent.parent)
    paths = [p for p in env.get("PYTHONPATH", "").split(os.pathsep) if p]
    if root not in paths:
        env["PYTHONPATH"] = os.pathsep.join([root, *paths])
    env.update(extra or {})
    return env

