"""The standalone voila server with a bound on viewers' kernels (``python -m levelwise.dashboards.server_app``).

Every page view starts a kernel of about 200 MB, and voila sets no limit: thirty bare ``GET /``
requests from one client started thirty kernels. :class:`LevelwiseVoila` is voila's own standalone
application (never the jupyter_server extension) whose page handler admits a view only while

- fewer than ``max_kernels`` viewers' kernels are alive on the server (default: sized to the
  machine's memory, :func:`default_max_kernels`), and
- the client (its address) has fewer than ``max_kernels_per_client`` kernels alive.

Past a limit the viewer gets, at once, a short "busy, try again" page (HTTP 503 with
``Retry-After``), never a hang; nothing is started. Idle kernels are culled as before
(``MappingKernelManager.cull_idle_timeout``), which frees their places.
"""

from __future__ import annotations

import re
import time
from pathlib import Path

import tornado.web
from traitlets import Integer
from voila.app import Voila
from voila.tornado.handler import TornadoVoilaHandler

from .hardening import PER_CLIENT

#: Resident memory of one viewer's kernel that the default budget assumes (MB; ~200 MB measured, plus margin).
KERNEL_MB = 250
#: Seconds a page view may take to start its kernel before its place is given back.
START_GRACE = 120

#: Stylesheet links of voila's template to other hosts (an icon font on a CDN): dropped from the page, so no
#: request leaves the server's host (the page's icons come from voila's own bundle).
_FOREIGN_LINK = re.compile(r"""<link\b[^>]*\bhref=["']?(?:https?:)?//[^>]*>""", re.IGNORECASE)
_KERNEL_ID = re.compile(r'"kernelId":\s*"([0-9a-f-]{36})"')

BUSY_PAGE = """<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>Busy: try again shortly</title>
<style>body{{font-family:sans-serif;max-width:40em;margin:4em auto;line-height:1.5}}</style></head>
<body><h1>This dashboard is busy</h1>
<p>{why} Please try again in a minute, or close one of your other open views of this dashboard.</p>
</body></html>
"""


def default_max_kernels(meminfo: str | Path = "/proc/meminfo") -> int:
    """Viewers' kernels this machine can hold: half of its memory at :data:`KERNEL_MB` each, from 2 to 200.

    Examples
    --------
    >>> import tempfile, os
    >>> with tempfile.NamedTemporaryFile("w", delete=False) as f:
    ...     _ = f.write("MemTotal:        8000000 kB\\n")
    >>> default_max_kernels(f.name)
    15
    >>> os.unlink(f.name)
    """
    try:
        text = Path(meminfo).read_text()
        total_kb = int(re.search(r"MemTotal:\s+(\d+) kB", text).group(1))
    except (OSError, AttributeError, ValueError):
        return 8
    return max(2, min(200, int(total_kb / 1024 * 0.5 // KERNEL_MB)))


class ViewLimits:
    """Who holds which viewer's kernel; answers whether one more view may start."""

    def __init__(self, max_kernels: int, per_client: int, kernel_manager, log):
        self.max_kernels, self.per_client = int(max_kernels), int(per_client)
        self.kernel_manager, self.log = kernel_manager, log
        self.views: list[dict] = []  # {"client", "kernel" (None until known), "started"}

    def _prune(self) -> None:
        alive = set(self.kernel_manager.list_kernel_ids())
        now = time.monotonic()
        self.views = [v for v in self.views if (v["kernel"] in alive if v["kernel"] else
                                                now - v["started"] < START_GRACE)]

    def admit(self, client: str) -> tuple[dict | None, str]:
        """A new view's record, or None and the reason it is refused."""
        self._prune()
        if len(self.views) >= self.max_kernels:
            return None, f"All {self.max_kernels} places for viewers on this server are taken."
        mine = sum(1 for v in self.views if v["client"] == client)
        if mine >= self.per_client:
            return None, f"You already have {mine} open views of this dashboard (at most {self.per_client})."
        view = {"client": client, "kernel": None, "started": time.monotonic()}
        self.views.append(view)
        return view, ""

    def release(self, view: dict) -> None:
        """A view that never got a kernel (the request failed) gives its place back."""
        if view in self.views and view["kernel"] is None:
            self.views.remove(view)


class LimitedVoilaHandler(TornadoVoilaHandler):
    """voila's page handler, admitting a view only within :class:`ViewLimits`."""

    @tornado.web.authenticated
    async def get(self, path=None):
        limits: ViewLimits = self.settings["levelwise_view_limits"]
        self._lw_view, why = limits.admit(self.request.remote_ip or "?")
        if self._lw_view is None:
            self.log.warning("levelwise: busy page for %s: %s", self.request.remote_ip, why)
            self.set_status(503)
            self.set_header("Retry-After", "60")
            self.set_header("Content-Type", "text/html; charset=utf-8")
            self.finish(BUSY_PAGE.format(why=why))
            return
        try:
            await super().get(path)
        finally:
            if self._lw_view["kernel"] is None:
                limits.release(self._lw_view)

    def write(self, chunk):
        if isinstance(chunk, str) and "<link" in chunk:
            chunk = _FOREIGN_LINK.sub("", chunk)
        view = getattr(self, "_lw_view", None)
        if view is not None and view["kernel"] is None and isinstance(chunk, str):
            found = _KERNEL_ID.search(chunk)
            if found:
                view["kernel"] = found.group(1)
        return super().write(chunk)


class LevelwiseVoila(Voila):
    """voila's standalone application with bounded viewers' kernels (see the module's docstring)."""

    max_kernels = Integer(0, config=True, help="Viewers' kernels alive at once on this server (0: sized to memory).")
    max_kernels_per_client = Integer(PER_CLIENT, config=True, help="Viewers' kernels one client address may hold.")

    def init_settings(self):
        settings = super().init_settings()
        limit = self.max_kernels if self.max_kernels > 0 else default_max_kernels()
        settings["levelwise_view_limits"] = ViewLimits(limit, max(1, self.max_kernels_per_client),
                                                       self.kernel_manager, self.log)
        self.log.info("levelwise: at most %d viewers' kernels, %d per client", limit, self.max_kernels_per_client)
        return settings

    def init_handlers(self):
        handlers = super().init_handlers()
        return [(pattern, LimitedVoilaHandler, *rest) if handler is TornadoVoilaHandler else (pattern, handler, *rest)
                for pattern, handler, *rest in handlers]


main = LevelwiseVoila.launch_instance

if __name__ == "__main__":
    main()
