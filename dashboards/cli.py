"""The ``levelwise`` command.

Exit codes: 0 success; 1 the command failed (the message says why); 2 bad usage.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys

from . import NOTEBOOKS

DEFAULT_PORT = 8866


def voila_command(notebook, port: int, ip: str = "127.0.0.1") -> list[str]:
    """The standalone voila command line (never the server extension), sources and tracebacks off."""
    return [
        sys.executable, "-m", "voila", str(notebook),
        "--no-browser",
        f"--port={port}",
        f"--Voila.ip={ip}",
        "--strip_sources=True",
        "--show_tracebacks=False",
    ]


def serve(args) -> int:
    notebook = NOTEBOOKS / "explore.ipynb"
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
    print(f"levelwise: serving the workbench at http://{args.ip}:{args.port}/ (Ctrl-C to stop)", flush=True)
    try:
        return subprocess.call(voila_command(notebook, args.port, args.ip), env=env)
    except KeyboardInterrupt:
        return 0


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(
        prog="levelwise",
        description="Plan, fit and explore designed experiments; serve the results as dashboards.",
        epilog="Exit codes: 0 success, 1 failure, 2 bad usage.",
    )
    sub = parser.add_subparsers(dest="command", required=True)
    p_serve = sub.add_parser("serve", help="Serve the explore workbench on the demo study.")
    p_serve.add_argument("--port", type=int, default=DEFAULT_PORT, help=f"Port (default {DEFAULT_PORT}).")
    p_serve.add_argument("--ip", default="127.0.0.1", help="Address to bind (default 127.0.0.1, this machine only).")
    p_serve.set_defaults(handler=serve)
    args = parser.parse_args(argv)
    return args.handler(args)


if __name__ == "__main__":
    sys.exit(main())
