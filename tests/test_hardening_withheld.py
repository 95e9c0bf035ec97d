"""The served connection keeps the kernel's stderr and error messages off the wire (they go to the server log)
and passes every other message, widget messages included, whatever text their content carries."""

from __future__ import annotations

from jupyter_client.session import Session

from levelwise.dashboards.hardening import V1OnlyWebsocketConnection


class Log:
    def __init__(self):
        self.lines = []

    def warning(self, text, *args):
        self.lines.append(text % args)


class Connection(V1OnlyWebsocketConnection):
    kernel_id = "k-1"  # no kernel manager behind this one


def connection():
    conn = Connection.__new__(Connection)  # only what _withheld reads: the session and the log
    conn.__dict__["session"] = Session(key=b"test")
    conn._trait_values["log"] = Log()
    return conn


def withheld(conn, kind: str, content: dict) -> bool:
    return conn._withheld(conn.session.serialize(conn.session.msg(kind, content)))


def test_stderr_and_errors_are_withheld_and_logged():
    conn = connection()
    assert withheld(conn, "stream", {"name": "stderr", "text": "Traceback: secret path"})
    assert withheld(conn, "error", {"ename": "ValueError", "evalue": "bad", "traceback": []})
    assert len(conn.log.lines) == 2 and "secret path" in conn.log.lines[0] and "ValueError: bad" in conn.log.lines[1]


def test_other_messages_pass():
    conn = connection()
    assert not withheld(conn, "stream", {"name": "stdout", "text": "hello"})
    # A widget message whose state mentions the words "stream" and "error" is still a widget message.
    assert not withheld(conn, "comm_msg", {"comm_id": "c", "data": {"method": "update",
                                                                   "state": {"value": '"stream" "error"'}}})
    assert not withheld(conn, "display_data", {"data": {"text/plain": "x"}, "metadata": {}})
    assert conn.log.lines == []
