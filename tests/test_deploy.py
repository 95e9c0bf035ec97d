"""The container recipe and the deployment guide stay in step with the ``levelwise`` command (no docker engine)."""

from __future__ import annotations

import json
import re
import shlex
from pathlib import Path

import pytest

from levelwise.dashboards.cli import build_parser
from levelwise.dashboards.hardening import THREAD_ENV

ROOT = Path(__file__).parent.parent
#: Dockerfile instructions (the reference's list, from memory: docs.docker.com/reference/dockerfile).
INSTRUCTIONS = {"FROM", "RUN", "CMD", "LABEL", "EXPOSE", "ENV", "ADD", "COPY", "ENTRYPOINT", "VOLUME", "USER",
                "WORKDIR", "ARG", "ONBUILD", "STOPSIGNAL", "HEALTHCHECK", "SHELL", "MAINTAINER"}


def instructions(text: str) -> list[tuple[str, str]]:
    """(INSTRUCTION, arguments) per logical line: comments dropped, backslash continuations joined."""
    logical, current = [], ""
    for line in text.splitlines():
        if not current and (not line.strip() or line.lstrip().startswith("#")):
            continue
        current += line.rstrip("\\").rstrip() + " " if line.rstrip().endswith("\\") else line
        if not line.rstrip().endswith("\\"):
            logical.append(current.strip())
            current = ""
    assert not current, "a continuation line never ends"
    return [(line.split(None, 1)[0].upper(), line.split(None, 1)[1] if " " in line else "") for line in logical]


@pytest.fixture(scope="module")
def dockerfile():
    return instructions((ROOT / "Dockerfile").read_text(encoding="utf-8"))


def test_dockerfile_is_valid_and_serves_a_published_folder(dockerfile):
    kinds = [kind for kind, _ in dockerfile]
    assert set(kinds) <= INSTRUCTIONS, set(kinds) - INSTRUCTIONS
    assert kinds[0] == "FROM" and kinds.count("CMD") == 1
    assert re.match(r"python:3\.1[1-9]", dict(dockerfile)["FROM"])  # the package needs Python >= 3.11
    for kind, args in dockerfile:
        if kind == "COPY":
            for source in args.split()[:-1]:
                assert (ROOT / source).exists(), source  # every copied path is in the repository
    cmd = json.loads(dict(dockerfile)["CMD"])  # the exec form: a JSON array
    assert cmd[:2] == ["levelwise", "view"]
    args = build_parser().parse_args(cmd[1:])  # argparse exits (code 2) on any option the CLI lacks
    volume = json.loads(dict(dockerfile)["VOLUME"])
    assert args.dir in volume
    assert str(args.port) in dict(dockerfile)["EXPOSE"].split()
    assert args.ip == "0.0.0.0"  # inside the container; docker publishes the port
    assert args.max_kernels > 0 and args.per_client >= 1 and args.pool_size >= 1
    assert dict(dockerfile)["USER"] not in ("root", "0")
    env = dict(dockerfile)["ENV"]
    for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS"):
        assert name in THREAD_ENV and re.search(rf"\b{name}=1\b", env), name


def test_every_levelwise_command_in_the_deployment_guide_parses():
    guide = (ROOT / "docs" / "deploy.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```(?:sh|python)\n(.*?)```", guide, re.DOTALL)
    commands = []
    for block in blocks:
        for line in block.splitlines():
            line = line.split("  #")[0].strip()
            if line.startswith("levelwise "):
                commands.append(shlex.split(line)[1:])
        for listed in re.findall(r'"command":\s*(\[[^\]]*\])', block):
            commands.append(json.loads(listed)[1:])
    assert len(commands) >= 5
    parser = build_parser()
    for argv in commands:
        parser.parse_args(argv)  # exits with 2 (a test failure) on an unknown option
