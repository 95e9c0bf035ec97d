"""The ``levelwise`` command: help on every command, documented exit codes, publish, view and serve arguments,
and every hardened voila setting on the command line and in the published configuration."""

from __future__ import annotations

import json
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

from levelwise.dashboards import cli
from levelwise.dashboards.hardening import CONNECTION_CLASS, THREAD_ENV, offered_subprotocols, server_env, voila_config
from levelwise.dashboards.publish import OPTIONAL_FILES, PUBLISHED_FILES

COMMANDS = ["serve", "publish", "view", "export-html"]


def run_cli(*args):
    command = [sys.executable, "-m", "levelwise.dashboards.cli", *args]
    return subprocess.run(command, capture_output=True, text=True, timeout=60)


@pytest.mark.parametrize("command", [None, *COMMANDS])
def test_help_on_every_command_names_the_exit_codes(command):
    done = run_cli(*([command] if command else []), "--help")
    assert done.returncode == 0
    assert "usage: levelwise" in done.stdout
    assert "Exit codes: 0 success, 1 failure" in done.stdout and "2 bad usage" in done.stdout


@pytest.mark.parametrize("args", [[], ["bogus"], ["publish", "demo"], ["view"], ["serve", "--port", "0"],
                                  ["serve", "--port", "many"], ["export-html", "demo"]])
def test_bad_usage_exits_2(args):
    done = run_cli(*args)
    assert done.returncode == 2, done.stderr
    assert "usage: levelwise" in done.stderr


def test_publish_writes_exactly_the_five_files(tmp_path, capsys):
    out = tmp_path / "board"
    assert cli.main(["publish", "demo", "--out", str(out)]) == 0
    assert sorted(p.name for p in out.iterdir()) == sorted(PUBLISHED_FILES + OPTIONAL_FILES)
    assert f"levelwise view {out}" in capsys.readouterr().out
    config = json.loads((out / "voila.json").read_text())
    assert config == voila_config()
    readme = (out / "README.md").read_text()
    assert "levelwise view ." in readme and "Predictions hold only inside the tested region" in readme
    notebook = json.loads((out / "present.ipynb").read_text())
    code = [c for c in notebook["cells"] if c["cell_type"] == "code"]
    assert len(code) == 1 and "".join(code[0]["source"]).count("\n") <= 2  # one import and one call
    from levelwise.study import Study

    assert Study.load(out / "study.json").title == Study.load(cli.NOTEBOOKS / "data" / "demo_campaign.json").title


def test_publish_refuses_a_non_empty_folder_and_a_missing_study(tmp_path, capsys):
    (tmp_path / "old.txt").write_text("keep me")
    assert cli.main(["publish", "demo", "--out", str(tmp_path)]) == 1
    assert "must not exist yet or be empty" in capsys.readouterr().err
    assert (tmp_path / "old.txt").read_text() == "keep me"
    assert cli.main(["publish", str(tmp_path / "none.json"), "--out", str(tmp_path / "new")]) == 1
    assert "does not exist" in capsys.readouterr().err
    assert not (tmp_path / "new").exists()


def test_publish_refuses_a_corrupt_study(tmp_path, capsys):
    bad = tmp_path / "bad.json"
    bad.write_text("{ not json")
    assert cli.main(["publish", str(bad), "--out", str(tmp_path / "out")]) == 1
    assert "levelwise publish:" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_view_refuses_a_folder_that_was_not_published(tmp_path, capsys):
    assert cli.main(["view", str(tmp_path)]) == 1
    assert "is not a published folder" in capsys.readouterr().err


def test_serve_refuses_a_missing_study(tmp_path, capsys):
    assert cli.main(["serve", str(tmp_path / "none.json")]) == 1
    assert "does not exist" in capsys.readouterr().err


def test_voila_command_has_every_hardened_setting():
    command = cli.voila_command("nb.ipynb", 9100)
    joined = " ".join(command)
    # voila's standalone application (with bounded kernels), one notebook, never the jupyter_server extension
    assert command[1:4] == ["-m", "levelwise.dashboards.server_app", "nb.ipynb"]
    assert "--no-browser" in command and "--port=9100" in command
    assert "--Voila.ip=127.0.0.1" in command  # loopback unless --ip
    assert "--VoilaConfiguration.strip_sources=True" in command
    assert "--VoilaConfiguration.show_tracebacks=False" in command
    assert "--VoilaConfiguration.file_allowlist=[]" in command  # no file of the folder is served
    assert "--VoilaConfiguration.preheat_kernel=True" in command
    assert "--VoilaConfiguration.default_pool_size=1" in command
    assert "--MappingKernelManager.cull_idle_timeout=600" in command
    assert "--MappingKernelManager.cull_interval=60" in command
    assert f"--Voila.kernel_websocket_connection_class={CONNECTION_CLASS}" in command
    assert "--Voila.token=" in command  # no token by default
    assert "--LevelwiseVoila.max_kernels=0" in command and "--LevelwiseVoila.max_kernels_per_client=3" in command
    assert '"websocket_max_message_size": 1048576' in joined and "default-src 'self'" in joined
    assert "--debug" not in joined and "jupyter" not in command[0]
    with_token = cli.voila_command("nb.ipynb", 9100, ip="0.0.0.0", token="s3cret")
    assert "--Voila.ip=0.0.0.0" in with_token and "--Voila.token=s3cret" in with_token


def test_voila_accepts_the_hardened_settings():
    """voila itself parses every setting (a misspelt option would be ignored or refused)."""
    from voila.app import Voila

    from levelwise.dashboards.server_app import LevelwiseVoila

    app = LevelwiseVoila()
    app.parse_command_line(cli.voila_command("x.ipynb", 9100, max_kernels=7)[3:])
    config = app.config
    assert isinstance(app, Voila)
    assert config.LevelwiseVoila.max_kernels == 7 and config.LevelwiseVoila.max_kernels_per_client == 3
    assert config.Voila.tornado_settings["websocket_max_message_size"] == 1024 * 1024
    assert config.VoilaConfiguration.strip_sources is True
    assert config.VoilaConfiguration.show_tracebacks is False
    assert config.VoilaConfiguration.file_allowlist == []
    assert config.VoilaConfiguration.preheat_kernel is True
    assert config.Voila.kernel_websocket_connection_class == CONNECTION_CLASS
    from jupyter_server.services.kernels.kernelmanager import AsyncMappingKernelManager

    # voila's kernel manager is a subclass of this one; MappingKernelManager settings reach it by name.
    manager = AsyncMappingKernelManager(config=config)
    assert manager.cull_idle_timeout == 600 and manager.cull_interval == 60 and manager.cull_connected is True


def test_one_blas_thread_per_kernel():
    env = server_env({"LEVELWISE_STUDY": "demo"})
    for name in THREAD_ENV:
        assert env[name] == "1", name
    assert env["LEVELWISE_STUDY"] == "demo"


ECHO_PROBE = """
import ipywidgets, ipywidgets.comm
from tests.widget_support import RecordingComm, browser_update
log = []
ipywidgets.comm.create_comm = lambda **kw: RecordingComm(log, **kw)
slider = ipywidgets.FloatSlider(min=0.0, max=10.0)
log.clear()
browser_update(slider, value=3.5)
print(slider.value, sorted(data.get("method") for data, _ in log))
"""


def test_served_kernels_send_no_widget_echo():
    """Under the served environment a value set by the browser is not sent back (an echo_update message, which
    ipywidgets 8 sends by default: the same probe without the setting shows it)."""
    root = str(Path(__file__).resolve().parent.parent)
    served = subprocess.run([sys.executable, "-c", ECHO_PROBE], env=server_env(), capture_output=True, text=True,
                            cwd=root, timeout=120)
    default_env = {k: v for k, v in server_env().items() if k != "JUPYTER_WIDGETS_ECHO"}
    default = subprocess.run([sys.executable, "-c", ECHO_PROBE], env=default_env, capture_output=True, text=True,
                             cwd=root, timeout=120)
    assert served.stdout.split() == ["3.5", "[]"], served.stderr[-500:]
    assert default.stdout.strip() == "3.5 ['echo_update']", default.stderr[-500:]


def test_the_connection_class_is_importable_and_subclasses_jupyter_servers():
    from jupyter_server.services.kernels.connection.channels import ZMQChannelsWebsocketConnection

    from levelwise.dashboards.hardening import V1OnlyWebsocketConnection

    assert issubclass(V1OnlyWebsocketConnection, ZMQChannelsWebsocketConnection)
    assert offered_subprotocols("v1.kernel.websocket.jupyter.org,  x ") == ["v1.kernel.websocket.jupyter.org", "x"]
    assert offered_subprotocols("") == []


def test_view_with_a_token_refuses_requests_without_it(published_board):
    """A live ``levelwise view DIR --token T`` (no preheating, to be quick): no token, no page."""
    from conftest import free_port, start_cli_server, stop_server

    port = free_port()
    proc, output = start_cli_server(["view", str(published_board), "--token", "s3cret-t0ken", "--pool-size", "0"],
                                    port)
    try:
        assert output.wait_for(f"http://127.0.0.1:{port}/?token=s3cret-t0ken", timeout=10)  # serve/view print the URL

        def status(path):
            request = urllib.request.Request(f"http://127.0.0.1:{port}/{path}")
            opener = urllib.request.build_opener(NoRedirect)
            try:
                with opener.open(request, timeout=30) as response:
                    return response.status
            except urllib.error.HTTPError as exc:
                return exc.code

        assert status("") in (302, 403)  # sent to the login page or refused
        assert status("?token=wrong") in (302, 403)
        assert status("?token=s3cret-t0ken") == 200
    finally:
        stop_server(proc)


class NoRedirect(urllib.request.HTTPRedirectHandler):
    """Report a redirect as its own status instead of following it."""

    def redirect_request(self, *args, **kwargs):
        return None


@pytest.fixture(scope="module")
def published_board(tmp_path_factory):
    out = tmp_path_factory.mktemp("token") / "board"
    assert cli.main(["publish", "demo", "--out", str(out)]) == 0
    return out


def test_view_culls_an_idle_viewer_kernel(published_board):
    """A live ``levelwise view DIR --idle-timeout 3`` (no preheating): a page view starts a kernel, and the kernel is
    shut down once it has been idle for the timeout."""
    from conftest import cpu_ticks_of_children, free_port, start_cli_server, stop_server

    port = free_port()
    proc, output = start_cli_server(["view", str(published_board), "--pool-size", "0", "--idle-timeout", "3"], port)
    try:
        assert cpu_ticks_of_children(proc.pid) == {}  # no kernel before the first view
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/", timeout=120) as response:
            assert response.status == 200 and "kernelId" in response.read().decode("utf-8", "replace")
        assert len(cpu_ticks_of_children(proc.pid)) == 1  # the viewer's kernel (no browser ever connects)
        deadline = time.monotonic() + 30
        while cpu_ticks_of_children(proc.pid) and time.monotonic() < deadline:
            time.sleep(0.5)
        assert cpu_ticks_of_children(proc.pid) == {}
        assert output.wait_for("Culling", timeout=5)  # shut down by the idle culler (jupyter_server's log line)
    finally:
        stop_server(proc)
