"""Minimal client for juncod's socket (JSON-RPC 2.0, one message per line).

Standard library only. Example:

    from junco_client import Client
    with Client() as c:                      # $JUNCO_SOCKET or the default path
        for part in c.call("part.list", lot="WREN-0912")["parts"]:
            print(part["label"], c.call("part.fit", part_id=part["part_id"])["n"])

Methods and their params/results: docs/api.md and schema/api/*.json.
"""

import json
import os
import socket

__all__ = ["Client", "RpcError", "default_socket_path"]


class RpcError(Exception):
    """juncod answered with a JSON-RPC error."""

    def __init__(self, code, message, data=None):
        super().__init__(f"{message} (code {code})")
        self.code = code
        self.message = message
        self.data = data


def default_socket_path():
    """The same rule as junco and juncod (daemon/rpc_framing.hpp)."""
    env = os.environ.get("JUNCO_SOCKET")
    if env:
        return env
    if os.geteuid() == 0:
        return "/run/junco/juncod.sock"
    if os.environ.get("XDG_RUNTIME_DIR"):
        return os.path.join(os.environ["XDG_RUNTIME_DIR"], "junco", "juncod.sock")
    state = os.environ.get("XDG_STATE_HOME") or os.path.join(os.environ.get("HOME", "/tmp"), ".local", "state")
    return os.path.join(state, "junco", "juncod.sock")


class Client:
    """One connection; call() is synchronous. Notifications (after
    events.subscribe) are kept and returned by next_notification()."""

    def __init__(self, path=None, timeout_s=30.0):
        self.path = path or default_socket_path()
        self._sock = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
        self._sock.settimeout(timeout_s)
        try:
            self._sock.connect(self.path)
        except OSError as e:
            self._sock.close()
            raise ConnectionError(f"cannot reach juncod at {self.path}: {e.strerror} — is it running?") from e
        self._file = self._sock.makefile("rb")
        self._next_id = 1
        self._notifications = []

    def close(self):
        self._file.close()
        self._sock.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def call(self, method, **params):
        """Calls method with named params; returns the result or raises RpcError."""
        rid = self._next_id
        self._next_id += 1
        line = json.dumps({"jsonrpc": "2.0", "id": rid, "method": method, "params": params}) + "\n"
        self._sock.sendall(line.encode("utf-8"))
        while True:
            msg = self._read()
            if "id" not in msg:
                self._notifications.append(msg)
                continue
            if msg["id"] != rid:
                continue
            if "error" in msg:
                e = msg["error"]
                raise RpcError(e.get("code"), e.get("message", ""), e.get("data"))
            return msg.get("result")

    def next_notification(self):
        """Blocks for the next notification ({"method":..., "params":...})."""
        if self._notifications:
            return self._notifications.pop(0)
        while True:
            msg = self._read()
            if "id" not in msg:
                return msg

    def _read(self):
        raw = self._file.readline()
        if not raw:
            raise ConnectionError(f"juncod at {self.path} closed the connection")
        return json.loads(raw)
