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

import json
import os
from pathlib import Path

from jupyter_server.services.kernels.connection.channels import ZMQChannelsWebsocketConnection
from tornado import web

#: The only kernel websocket subprotocol a published dashboard accepts.
V1_PROTOCOL = "v1.kernel.websocket.jupyter.org"

#: Dotted path of the connection class, as voila's configuration wants it.
CONNECTION_CLASS = "levelwise.dashboards.hardening.V1OnlyWebsocketConnection"

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
    """Kernel websocket connection that refuses (HTTP 400) clients not offering the v1 protocol.

    Enable it with ``--Voila.kernel_websocket_connection_class=dashboards.hardening.V1OnlyWebsocketConnection``.
    ``prepare()`` runs before the websocket upgrade, so raising an ``HTTPError`` there
    answers the upgrade request with that status and no connection is made.
    """

    async def prepare(self):
        offered = offered_subprotocols(self.websocket_handler.request.headers.get("Sec-WebSocket-Protocol"))
        if V1_PROTOCOL not in offered:
            self.log.warning("Refused a kernel websocket that did not offer %s (offered: %s)", V1_PROTOCOL, offered)
            raise web.HTTPError(400, f"This server only speaks the {V1_PROTOCOL} kernel websocket protocol.")
        return await super().prepare()


def voila_config(
    *,
    ip: str = "127.0.0.1",
    preheat: bool = True,
    pool_size: int = 1,
    cull_idle_timeout: int = CULL_IDLE_TIMEOUT,
    cull_interval: int = CULL_INTERVAL,
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
    """
    return {
        "Voila": {
            "ip": ip,
            "open_browser": False,
            "kernel_websocket_connection_class": CONNECTION_CLASS,
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
            text = json.dumps(value) if isinstance(value, list) else str(value)
            args.append(f"--{cls}.{name}={text}")
    return args


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
    config_dir=None,
) -> list[str]:
    """The standalone ``voila`` command line for one notebook, with every hardened setting.

    The settings are given on the command line even when ``config_dir`` holds a
    ``voila.json`` with the same values, so a stale or edited file cannot loosen them
    (voila applies command-line settings over file settings).
    """
    import sys

    config = voila_config(
        ip=ip, preheat=preheat, pool_size=pool_size, cull_idle_timeout=cull_idle_timeout, cull_interval=cull_interval
    )
    command = [sys.executable, "-m", "voila", str(notebook), "--no-browser", f"--port={int(port)}"]
    if config_dir is not None:
        command.append(f"--Voila.config_file_paths={json.dumps([str(config_dir)])}")
    command += config_arguments(config)
    command.append(f"--Voila.token={token}" if token else "--Voila.token=")
    return command


def server_env(extra: dict | None = None) -> dict:
    """Environment for the voila server and its kernels: one BLAS thread, our package importable."""
    env = dict(os.environ)
    env.update(THREAD_ENV)
    root = str(Path(__file__).resolve().parent.parent)
    paths = [p for p in env.get("PYTHONPATH", "").split(os.pathsep) if p]
    if root not in paths:
        env["PYTHONPATH"] = os.pathsep.join([root, *paths])
    env.update(extra or {})
    return env

