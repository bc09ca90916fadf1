"""Client library for juncod's socket (JSON-RPC 2.0, one message per line).

Standard library only; installable (`pip install --no-build-isolation
tools/python`, docs/python.md) or usable as this single file. Example:

    from junco_client import Client
    with Client() as c:                      # $JUNCO_SOCKET or the default path
        for part in c.part_list(lot="WREN-0912")["parts"]:
            print(part["label"], c.part_fit(part_id=part["part_id"])["n"])

One typed wrapper per method of schema/api (c.part_fit(part_id=3) is
c.call("part.fit", part_id=3)); params and results: docs/api.md.

What the client promises:
- A call that times out raises TimeoutError and leaves the connection usable:
  replies are matched by id and a late reply to an abandoned call is dropped,
  so the next call gets its own reply. Partial lines stay in the client's own
  buffer across timeouts.
- One Client may be shared by threads: sends are serialised by a lock, one
  waiting thread at a time reads and hands each reply to the thread whose id
  it carries; the others wait on a condition. Calls from several threads are
  pipelined on the one connection.
- An error juncod sends with id null (a line over its limit, a parse error,
  "server busy" on connect) is raised at once by the call it answers: juncod
  answers one connection's requests in the order they were sent, so such an
  error belongs to the oldest call not yet answered.
- Notifications (after events_subscribe) are queued and returned by
  next_notification(timeout_s) or the iterator notifications(timeout_s).
"""

import collections
import json
import math
import os
import select
import socket
import stat
import threading
import time
from typing import Any, Dict, Iterator, List, Optional

__version__ = "0.1.0"  # kept equal to CMakeLists.txt project(VERSION) by tests/python/check_wrappers.py

__all__ = ["Client", "RpcError", "default_socket_path", "SERVICE_SOCKET", "__version__",
           "PARSE_ERROR", "INVALID_REQUEST", "METHOD_NOT_FOUND", "INVALID_PARAMS", "INTERNAL_ERROR",
           "NOT_FOUND", "PLAN_REFUSED", "WRONG_STATE", "STORAGE_ERROR", "UNAVAILABLE"]

# Error codes (docs/api.md "Messages").
PARSE_ERROR = -32700
INVALID_REQUEST = -32600
METHOD_NOT_FOUND = -32601
INVALID_PARAMS = -32602
INTERNAL_ERROR = -32603
NOT_FOUND = -32001
PLAN_REFUSED = -32002
WRONG_STATE = -32003
STORAGE_ERROR = -32004
UNAVAILABLE = -32005

_PENDING = object()    # a call waiting for its reply
_ABANDONED = object()  # a call that timed out: its reply, when it comes, is dropped
_DEFAULT = object()    # "the client's timeout_s"


class RpcError(Exception):
    """juncod answered with a JSON-RPC error. `id_null` is True for an error
    juncod could not tie to a request id (oversized line, parse error, server busy)."""

    def __init__(self, code, message, data=None, id_null=False):
        super().__init__(f"{message} (code {code})")
        self.code = code
        self.message = message
        self.data = data
        self.id_null = id_null


SERVICE_SOCKET = "/run/junco/juncod.sock"  # juncod as a system service (juncod.service)


def default_socket_path():
    """The socket junco would use with no --socket (protocol/framing.hpp,
    default_socket_path; the same order): $JUNCO_SOCKET; else, as root, the
    service's /run/junco/juncod.sock; else the user's own daemon's socket,
    $XDG_RUNTIME_DIR/junco/juncod.sock or
    ${XDG_STATE_HOME:-$HOME/.local/state}/junco/juncod.sock, when one is
    there; else the service's socket when it exists (or cannot be looked at:
    connecting then says why); else the user's path, for the error message."""
    env = os.environ.get("JUNCO_SOCKET")
    if env:
        return env
    if os.geteuid() == 0:
        return SERVICE_SOCKET
    if os.environ.get("XDG_RUNTIME_DIR"):
        own = os.path.join(os.environ["XDG_RUNTIME_DIR"], "junco", "juncod.sock")
    elif os.environ.get("XDG_STATE_HOME"):
        own = os.path.join(os.environ["XDG_STATE_HOME"], "junco", "juncod.sock")
    else:
        own = os.path.join(os.environ.get("HOME", "/tmp"), ".local", "state", "junco", "juncod.sock")
    if _is_socket(own):
        return own
    try:
        if stat.S_ISSOCK(os.stat(SERVICE_SOCKET).st_mode):
            return SERVICE_SOCKET
    except PermissionError:
        return SERVICE_SOCKET  # a non-member of the service's group: connect() explains
    except OSError:
        pass
    return own


def _is_socket(path):
    try:
        return stat.S_ISSOCK(os.stat(path).st_mode)
    except OSError:
        return False


def _error_of(msg):
    e = msg.get("error") if isinstance(msg.get("error"), dict) else {}
    return RpcError(e.get("code"), e.get("message", ""), e.get("data"), id_null=msg.get("id") is None)


class Client:
    """One connection to juncod, safe to share between threads.

    timeout_s bounds every call and wait that does not give its own
    (None: wait for ever). After a TimeoutError the client stays usable.
    After ConnectionError (juncod closed the connection or went away) it does
    not: make a new Client (subscriptions are per connection).
    """

    def __init__(self, path=None, timeout_s: Optional[float] = 30.0):
        self.path = path or default_socket_path()
        self.timeout_s = timeout_s
        self._sock = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
        self._sock.settimeout(timeout_s)
        try:
            self._sock.connect(self.path)
        except OSError as e:
            self._sock.close()
            raise ConnectionError(f"cannot reach juncod at {self.path}: {e.strerror or e} — is it running?") from e
        # Non-blocking from here: every wait is a poll() with its own deadline,
        # so one thread's timeout never changes another's socket behaviour.
        self._sock.setblocking(False)
        self._send_lock = threading.Lock()      # one request line at a time, whole
        self._cond = threading.Condition()      # guards everything below
        self._next_id = 1
        self._outstanding = collections.OrderedDict()  # id -> _PENDING, _ABANDONED or the reply, in send order
        self._notifications = collections.deque()
        self._orphans = collections.deque()     # id-null errors with no call to answer
        self._reading = False                   # a thread is in _read_line
        self._buf = bytearray()                 # bytes read, not yet a whole line
        self._lost = None                       # why the connection is unusable
        self.dropped_replies = 0                # late replies to calls that had timed out

    # -- connection ---------------------------------------------------------

    def close(self):
        with self._cond:
            if self._lost is None:
                self._lost = "the client was closed"
            self._cond.notify_all()
        try:
            self._sock.shutdown(socket.SHUT_RDWR)  # wakes a thread blocked in poll()
        except OSError:
            pass
        self._sock.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    # -- calls --------------------------------------------------------------

    def call(self, method: str, **params) -> Any:
        """Calls method with named params; returns the result or raises RpcError."""
        return self.request(method, params)

    def request(self, method: str, params: Optional[Dict[str, Any]] = None, timeout_s=_DEFAULT) -> Any:
        """Calls method with a params object; returns the result.

        Raises RpcError for an error reply, TimeoutError when no reply came
        within timeout_s (the client stays usable; the late reply is dropped),
        ConnectionError when the connection is lost."""
        deadline = self._deadline(timeout_s)
        msg = {"jsonrpc": "2.0", "id": 0, "method": method}
        if params:
            msg["params"] = params
        with self._send_lock:
            with self._cond:
                self._raise_if_lost()
                rid = self._next_id
                self._next_id += 1
                msg["id"] = rid
                self._outstanding[rid] = _PENDING  # in send order: the send lock is held
            line = (json.dumps(msg) + "\n").encode("utf-8")
            try:
                self._send_all(line, deadline)
            except TimeoutError:
                with self._cond:
                    self._outstanding.pop(rid, None)
                raise TimeoutError(f"could not send {method} to juncod within {self._span(timeout_s)}") from None
            except OSError as e:
                # juncod may have written a reason (server busy) before closing:
                # fall through and read it; else the wait reports the loss.
                self._send_error = e

        def ready():
            reply = self._outstanding.get(rid, _PENDING)
            if reply is _PENDING:
                return None
            del self._outstanding[rid]
            return reply

        try:
            reply = self._wait(ready, deadline)
        except BaseException as e:
            # Timeout, an earlier id-null error, Ctrl-C: nobody waits for this
            # reply any more, so it is dropped when it comes (and an id-null
            # error is not pinned on a call that is no longer there).
            with self._cond:
                if self._outstanding.get(rid) is _PENDING:
                    self._outstanding[rid] = _ABANDONED
            if isinstance(e, TimeoutError):
                raise TimeoutError(f"juncod did not answer {method} (id {rid}) within {self._span(timeout_s)}; "
                                   "a late reply will be discarded") from None
            raise
        if isinstance(reply, RpcError):
            raise reply
        if "error" in reply:
            raise _error_of(reply)
        return reply.get("result")

    def _method(self, method, timeout_s, **params):
        """The typed wrappers' call: None means "not given" (the daemon's default)."""
        return self.request(method, {k: v for k, v in params.items() if v is not None},
                            _DEFAULT if timeout_s is None else timeout_s)

    # -- notifications ------------------------------------------------------

    def next_notification(self, timeout_s=_DEFAULT) -> Dict[str, Any]:
        """The next notification ({"jsonrpc", "method", "params"}), waiting up to
        timeout_s (default: the client's; None: for ever). Raises TimeoutError."""
        deadline = self._deadline(timeout_s)

        def ready():
            return self._notifications.popleft() if self._notifications else None

        try:
            return self._wait(ready, deadline)
        except TimeoutError:
            raise TimeoutError(f"no notification from juncod within {self._span(timeout_s)}") from None

    def notifications(self, timeout_s: Optional[float] = None, methods=None) -> Iterator[Dict[str, Any]]:
        """Iterates over notifications (after events_subscribe) until none has
        come for timeout_s (None: never ends). methods: only these event
        kinds (e.g. {"job.state"}) are yielded; the others are skipped but
        still count as something having come."""
        while True:
            try:
                n = self.next_notification(timeout_s)
            except TimeoutError:
                return
            if methods is None or n.get("method") in methods:
                yield n

    # -- internals ----------------------------------------------------------

    _send_error = None

    def _deadline(self, timeout_s):
        if timeout_s is _DEFAULT:
            timeout_s = self.timeout_s
        return math.inf if timeout_s is None else time.monotonic() + timeout_s

    def _span(self, timeout_s):
        t = self.timeout_s if timeout_s is _DEFAULT else timeout_s
        return "ever" if t is None else f"{t:g} s"

    def _raise_if_lost(self):
        if self._orphans:
            raise self._orphans.popleft()
        if self._lost is not None:
            raise ConnectionError(f"juncod at {self.path}: {self._lost}")

    def _send_all(self, data, deadline):
        # Tries before it polls: a request that fits the socket buffer always
        # goes out, so timeout_s bounds the wait for the reply, not the send.
        view, sent = memoryview(data), 0
        while sent < len(view):
            try:
                sent += self._sock.send(view[sent:])
                continue
            except BlockingIOError:
                pass
            if not self._poll(select.POLLOUT, deadline):
                if sent:
                    # Half a line is on the wire: nothing after it could be framed.
                    self._lose("a request could not be sent whole before its timeout")
                raise TimeoutError()

    def _poll(self, events, deadline):
        remaining = deadline - time.monotonic()
        if remaining <= 0:
            return False
        p = select.poll()
        p.register(self._sock, events)
        return bool(p.poll(None if remaining == math.inf else max(1, math.ceil(remaining * 1000))))

    def _wait(self, ready, deadline):
        """Returns ready()'s first non-None value, reading replies meanwhile.
        One thread reads at a time; the others wait for it to hand over."""
        with self._cond:
            while True:
                value = ready()
                if value is not None:
                    return value
                self._raise_if_lost()
                remaining = deadline - time.monotonic()
                if remaining <= 0:
                    raise TimeoutError()
                if self._reading:
                    self._cond.wait(None if remaining == math.inf else remaining)
                    continue
                self._reading = True
                self._cond.release()
                line, lost = None, None
                try:
                    line = self._read_line(deadline)
                except TimeoutError:
                    pass
                except (OSError, ValueError) as e:
                    lost = str(e) or type(e).__name__
                finally:
                    self._cond.acquire()
                    self._reading = False
                    self._cond.notify_all()
                if lost is not None:
                    self._lose_locked(lost)
                elif line is not None:
                    self._dispatch(line)

    def _read_line(self, deadline):
        """One line from the socket; bytes after it stay in the buffer. Only the
        reading thread touches _buf, so no lock is needed here."""
        scanned = 0  # bytes of _buf known to hold no newline: a long reply is scanned once
        while True:
            nl = self._buf.find(b"\n", scanned)
            if nl >= 0:
                line = bytes(self._buf[:nl])
                del self._buf[: nl + 1]
                return line
            scanned = len(self._buf)
            if not self._poll(select.POLLIN, deadline):
                raise TimeoutError()
            try:
                chunk = self._sock.recv(1 << 16)
            except BlockingIOError:
                continue
            if not chunk:
                raise ConnectionError("juncod closed the connection" +
                                      (f" (sending failed: {self._send_error})" if self._send_error else ""))
            self._buf += chunk

    def _dispatch(self, line):
        """Files one message from juncod; called with _cond held."""
        try:
            msg = json.loads(line)
        except ValueError:
            self._lose_locked("juncod sent a line that is not JSON: " + line[:80].decode("utf-8", "replace"))
            return
        for m in msg if isinstance(msg, list) else [msg]:
            if not isinstance(m, dict):
                continue
            if "id" not in m:
                self._notifications.append(m)
            elif m["id"] is None:
                # Answers the oldest call not yet answered (juncod replies in order).
                err = _error_of(m)
                for rid, state in self._outstanding.items():
                    if state is _PENDING or state is _ABANDONED:
                        if state is _ABANDONED:
                            del self._outstanding[rid]
                            self.dropped_replies += 1
                        else:
                            self._outstanding[rid] = err
                        break
                else:
                    self._orphans.append(err)
            else:
                state = self._outstanding.get(m["id"])
                if state is _ABANDONED:
                    del self._outstanding[m["id"]]  # the late reply of a call that timed out
                    self.dropped_replies += 1
                elif state is _PENDING:
                    self._outstanding[m["id"]] = m
                # else: an id this client never sent or already answered; dropped

    def _lose(self, why):
        with self._cond:
            self._lose_locked(why)

    def _lose_locked(self, why):
        if self._lost is None:
            self._lost = why
        self._cond.notify_all()
        try:
            self._sock.shutdown(socket.SHUT_RDWR)
        except OSError:
            pass

    # -- typed wrappers: one per method of schema/api ------------------------

    # ---- BEGIN GENERATED WRAPPERS (tools/python/gen_wrappers.py) ----
    def bench_check(self, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`bench.check`: Checks every configured instrument, one at a time: opens it with short timeouts (connect 500 ms, reply 700 ms, no retries), reads its *IDN? and takes one reading that changes nothing; says in words why one does not open. No output is turned on. While a job runs nothing is asked of the instruments: the answer has checked false, held_by_job and what is known. Takes about 1 s per mute instrument at most (`junco bench`).

        Returns the result object: checked, held_by_job, note, bench_open, bench_problem, elapsed_s,
        timeouts_ms, instruments.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('bench.check', timeout_s)

    def bench_describe(self, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`bench.describe`: The bench: instruments, fixture, safety limits.

        Returns the result object: instruments, seen, fixture, safety, limits, accuracy.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('bench.describe', timeout_s)

    def daemon_status(self, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`daemon.status`: What the daemon is doing.

        Returns the result object: version, uptime_s, running_job, queue, bench_open, database,
        schema_version, lab, bench_problem.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('daemon.status', timeout_s)

    def design_run(
            self,
            *,
            calculator: str,
            part: Optional[Dict[str, Any]] = None,
            inputs: Optional[Dict[str, Any]] = None,
            timeout_s: Optional[float] = None
    ) -> Dict[str, Any]:
        """`design.run`: A design calculator (design/calculators.hpp) on a part given by value: the part object of an answer reads back as the same part. No store access.

        Params:
            calculator (str, required): one of op, bias-r, loss, bias-for-loss, headroom, distortion,
            bias-for-thd, isolation, power, off-headroom, junction-temp, bias-network, series-shunt,
            attenuator
            part (Dict[str, Any], optional): required unless the calculator works without one (headroom,
            attenuator; headroom uses one when given: its TT, PIN tau, Cj); unknown keys are refused
            (data.field = part.KEY)
            inputs (Dict[str, Any], optional): the calculator's inputs in SI units, keys as in
            docs/design.md (supply_v, bias_resistor_ohm, current_a, switch, ...; the former names
            rbias_ohm, rreturn_ohm, rg_ohm and rl_ohm are read with a warning in the answer); optional
            part overrides cj0_f, vj_v, m, tt_s, eg_ev, xti, trs1_per_k and the junction temperature
            temp_k (IS and RS follow the SPICE law from the part's temp_k). Unknown keys are refused
            (invalid params, data.field = inputs.KEY)

        Returns the result object: calculator, part, assumed, result, achievable, reason, warnings,
        failures, junction, uncertainty.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('design.run', timeout_s, calculator=calculator, part=part, inputs=inputs)

    def events_subscribe(
            self,
            *,
            kinds: Optional[List[str]] = None,
            timeout_s: Optional[float] = None
    ) -> Dict[str, Any]:
        """`events.subscribe`: Handled by the server: this connection receives the events as notifications.

        Params:
            kinds (List[str], optional): event kinds; default all three

        Returns the result object: kinds.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('events.subscribe', timeout_s, kinds=kinds)

    def events_unsubscribe(self, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`events.unsubscribe`: Stops this connection's notifications.

        Returns the result object: kinds.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('events.unsubscribe', timeout_s)

    def job_cancel(self, *, job_id: int, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`job.cancel`: Stops the job, outputs off. Final state: cancelled. Wrong state: -32003; unknown id: -32001.

        Params:
            job_id (int, required): the job's id (job.submit, job.list)

        Returns the result object: job_id, state, plan, points_done, points_total, error, submitted_by,
        submitted_at, started_at, finished_at, updated_at.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('job.cancel', timeout_s, job_id=job_id)

    def job_get(self, *, job_id: int, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`job.get`: One job. Unknown id: -32001.

        Params:
            job_id (int, required): the job's id (job.submit, job.list)

        Returns the result object: job_id, state, persisted, plan, points_done, points_total, error,
        submitted_by, submitted_at, started_at, finished_at, updated_at, runs.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('job.get', timeout_s, job_id=job_id)

    def job_list(self, *, state: Optional[str] = None, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`job.list`: Jobs, oldest first.

        Params:
            state (str, optional): only jobs in this state

        Returns the result object: jobs.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('job.list', timeout_s, state=state)

    def job_pause(self, *, job_id: int, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`job.pause`: Stops after the current point, outputs off. Wrong state: -32003; unknown id: -32001.

        Params:
            job_id (int, required): the job's id (job.submit, job.list)

        Returns the result object: job_id, state, plan, points_done, points_total, error, submitted_by,
        submitted_at, started_at, finished_at, updated_at.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('job.pause', timeout_s, job_id=job_id)

    def job_resume(self, *, job_id: int, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`job.resume`: Continues a paused job. Wrong state: -32003; unknown id: -32001.

        Params:
            job_id (int, required): the job's id (job.submit, job.list)

        Returns the result object: job_id, state, plan, points_done, points_total, error, submitted_by,
        submitted_at, started_at, finished_at, updated_at.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('job.resume', timeout_s, job_id=job_id)

    def job_submit(self, *, plan: Dict[str, Any], timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`job.submit`: Validates a plan against the safety limits and queues it. Refused: -32002 plan_refused naming the limit; malformed: -32602.

        Params:
            plan (Dict[str, Any], required): the plan (docs/daemon-core.md)

        Returns the result object: job_id, points_total.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('job.submit', timeout_s, plan=plan)

    def lot_design(
            self,
            *,
            lot: str,
            calculator: str,
            inputs: Optional[Dict[str, Any]] = None,
            temps_k: Optional[List[float]] = None,
            supply_tol: Optional[float] = None,
            resistor_tol: Optional[float] = None,
            timeout_s: Optional[float] = None
    ) -> Dict[str, Any]:
        """`lot.design`: Worst case of a design calculator (design/worst_case.hpp) over a lot's fitted parts (their latest usable fits: the lot's measured spread) and the vertices of the given tolerances: per result line the least and greatest value and the part and corner that set it.

        Params:
            lot (str, required): the lot's name
            calculator (str, required): a calculator that needs a part; one of op, bias-r, loss,
            bias-for-loss, distortion, bias-for-thd, isolation, power
            inputs (Dict[str, Any], optional): the calculator's inputs as for part.design
            temps_k (List[float], K, optional): junction temperatures > 0 to take as corners, 1..64
            (default: each part's own) [K]
            supply_tol (float, optional): supply tolerance as a ratio 0..0.5 (0.05 = ±5 %), when the
            calculator takes supply_v (default 0)
            resistor_tol (float, optional): tolerance of the bias resistors bias_resistor_ohm and
            dc_return_ohm as a ratio 0..0.5 (default 0)

        Returns the result object: calculator, lot, parts, corners, corner_inputs, evaluations, result,
        not_achievable, not_achievable_count, failures, left_out.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('lot.design', timeout_s, lot=lot, calculator=calculator, inputs=inputs, temps_k=temps_k, supply_tol=supply_tol, resistor_tol=resistor_tol)

    def lot_export(self, *, lot: str, format: str, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`lot.export`: The lot nominal (median of each fitted parameter) as a SPICE .model card or a model document.

        Params:
            lot (str, required): the lot's name
            format (str, required): one of spice, json

        Returns the result object: format, content, parts, left_out.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('lot.export', timeout_s, lot=lot, format=format)

    def lot_list(self, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`lot.list`: Lots in the store.

        Returns the result object: lots.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('lot.list', timeout_s)

    def lot_stats(
            self,
            *,
            lot: str,
            currents_a: Optional[List[float]] = None,
            match_current_a: Optional[float] = None,
            match_tolerance_v: Optional[float] = None,
            set_size: Optional[int] = None,
            timeout_s: Optional[float] = None
    ) -> Dict[str, Any]:
        """`lot.stats`: Statistics of a lot's fitted parts: spread of each parameter and of Vf and rd at chosen currents, outliers, matched sets, the median nominal.

        Params:
            lot (str, required): the lot's name
            currents_a (List[float], A, optional): currents > 0 for Vf and rd (default [1e-3, 1e-2]) [A]
            match_current_a (float, A, optional): current at which Vf is matched, > 0 (default 1e-2) [A]
            match_tolerance_v (float, V, optional): Vf tolerance of a matched set, > 0 (default 2e-3)
            [V]
            set_size (int, optional): parts per matched set, 2..64 (default 2)

        Returns the result object: lot, parts, left_out, currents_a, match_current_a, match_tolerance_v,
        set_size, quantities, matched, nominal.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('lot.stats', timeout_s, lot=lot, currents_a=currents_a, match_current_a=match_current_a, match_tolerance_v=match_tolerance_v, set_size=set_size)

    def part_design(
            self,
            *,
            part_id: int,
            calculator: str,
            inputs: Optional[Dict[str, Any]] = None,
            timeout_s: Optional[float] = None
    ) -> Dict[str, Any]:
        """`part.design`: A design calculator (design/calculators.hpp) on the part's latest usable fit.

        Params:
            part_id (int, required): the part's id (part.list)
            calculator (str, required): one of op, bias-r, loss, bias-for-loss, headroom, distortion,
            bias-for-thd, isolation, power, off-headroom, junction-temp, bias-network, series-shunt,
            attenuator
            inputs (Dict[str, Any], optional): the calculator's inputs in SI units, keys as in
            docs/design.md (supply_v, bias_resistor_ohm, current_a, switch, ...; the former names
            rbias_ohm, rreturn_ohm, rg_ohm and rl_ohm are read with a warning in the answer); optional
            part overrides cj0_f, vj_v, m, tt_s, eg_ev, xti, trs1_per_k and the junction temperature
            temp_k (IS and RS follow the SPICE law from the part's temp_k). Unknown keys are refused
            (invalid params, data.field = inputs.KEY)

        Returns the result object: calculator, part, assumed, result, achievable, reason, warnings,
        failures, part_id, fit_id, junction, uncertainty.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('part.design', timeout_s, part_id=part_id, calculator=calculator, inputs=inputs)

    def part_export(self, *, part_id: int, format: str, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`part.export`: A part as a model document, readings CSV or SPICE .model card.

        Params:
            part_id (int, required): the part's id (part.list)
            format (str, required): json: the junco.part-model document
            (schema/model/part-model.schema.json); spice: a .model card; csv: every stored reading;
            iv-csv: v,i_a; ac-csv: bias_i_a,freq_hz,vin,vout; off-csv: reverse_v,freq_hz,vin,vout (the
            off-state readings); one of json, spice, csv, iv-csv, ac-csv, off-csv

        Returns the result object: format, content.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('part.export', timeout_s, part_id=part_id, format=format)

    def part_figures(
            self,
            *,
            part_id: int,
            currents_a: Optional[List[float]] = None,
            timeout_s: Optional[float] = None
    ) -> Dict[str, Any]:
        """`part.figures`: Vf and rd = dV/dI at chosen currents, from the latest fit.

        Params:
            part_id (int, required): the part's id (part.list)
            currents_a (List[float], A, optional): forward currents > 0 (default chosen by the daemon)
            [A]

        Returns the result object: part_id, fit_id, run_id, temp_k, figures.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('part.figures', timeout_s, part_id=part_id, currents_a=currents_a)

    def part_fit(self, *, part_id: int, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`part.fit`: The part's latest fit, with its latest temperature law (temperature_law: EG, XTI, TRS1 fitted from a multi-temperature job; null without one). No fit yet: -32001.

        Params:
            part_id (int, required): the part's id (part.list)

        Returns the result object: fit_id, part_id, run_id, model, status, message, is_a, n, rs_ohm,
        rsh_ohm, temp_k, cost, rms_residual, points_used, warnings, detail, created_at, cj0_f, vj_v, m,
        tt_s, temperature_law, part_type, pin, package.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('part.fit', timeout_s, part_id=part_id)

    def part_list(self, *, lot: Optional[str] = None, timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`part.list`: Parts, optionally of one lot.

        Params:
            lot (str, optional): lot name

        Returns the result object: parts.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('part.list', timeout_s, lot=lot)

    def part_readings(
            self,
            *,
            part_id: int,
            run_id: Optional[int] = None,
            timeout_s: Optional[float] = None
    ) -> Dict[str, Any]:
        """`part.readings`: Every committed reading of a run.

        Params:
            part_id (int, required): the part's id (part.list)
            run_id (int, optional): default: the part's latest run

        Returns the result object: part, run, fit_id, points.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('part.readings', timeout_s, part_id=part_id, run_id=run_id)

    def part_touchstone(
            self,
            *,
            part_id: int,
            freqs_hz: List[float],
            bias_i_a: Optional[float] = None,
            reverse_v: Optional[float] = None,
            mount: Optional[str] = None,
            z0_ohm: Optional[float] = None,
            ls_h: Optional[float] = None,
            cp_f: Optional[float] = None,
            timeout_s: Optional[float] = None
    ) -> Dict[str, Any]:
        """`part.touchstone`: The part's two-port at one bias (forward current or reverse voltage) as Touchstone 1.1 .s2p text, from its latest usable fit and the package parasitics given.

        Params:
            part_id (int, required): the part's id (part.list)
            freqs_hz (List[float], Hz, required): strictly increasing frequencies, Hz
            bias_i_a (float, A, optional): forward bias current, A; give this or reverse_v
            reverse_v (float, V, optional): reverse bias, V (positive number); give this or bias_i_a
            mount (str, optional): series: the diode between port 1 and port 2 (default); shunt: from
            the through line to ground; one of series, shunt
            z0_ohm (float, Ω, optional): reference impedance of both ports, ohm (default 50)
            ls_h (float, optional): package series inductance, H (default 0: not known)
            cp_f (float, F, optional): package capacitance across the leads, F (default 0: not known)

        Returns the result object: format, content.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('part.touchstone', timeout_s, part_id=part_id, freqs_hz=freqs_hz, bias_i_a=bias_i_a, reverse_v=reverse_v, mount=mount, z0_ohm=z0_ohm, ls_h=ls_h, cp_f=cp_f)

    def part_transfer(
            self,
            *,
            part_id: int,
            run_id: Optional[int] = None,
            ac_sigma_db: Optional[float] = None,
            cj_f: Optional[float] = None,
            max_signal_ratio: Optional[float] = None,
            ac_floor_v: Optional[float] = None,
            timeout_s: Optional[float] = None
    ) -> Dict[str, Any]:
        """`part.transfer`: A run's AC readings against the small-signal model of the latest fit, and the joint AC+DC fit compared with the DC-only fit.

        Params:
            part_id (int, required): the part's id (part.list)
            run_id (int, optional): default: the part's latest run
            ac_sigma_db (float, dB, optional): standard uncertainty of one AC ratio reading, > 0
            (default 0.01) [dB]
            cj_f (float, F, optional): junction capacitance in the AC model, >= 0 (default 0: ignored)
            [F]
            max_signal_ratio (float, optional): readings whose signal current peak exceeds this fraction
            of the bias are left out (large signal), > 0 (default 0.1)
            ac_floor_v (float, V, optional): readings with a level below this, in the readings' own
            unit, are left out, >= 0 (default 1e-4)

        Returns the result object: part_id, run_id, fit_id, temp_k, fixture, ac_sigma_db, cj_f, points,
        rms_residual_db, max_abs_residual_db, joint, max_signal_ratio, ac_floor_v, points_used,
        excluded.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('part.transfer', timeout_s, part_id=part_id, run_id=run_id, ac_sigma_db=ac_sigma_db, cj_f=cj_f, max_signal_ratio=max_signal_ratio, ac_floor_v=ac_floor_v)

    def plan_check(self, *, plan: Dict[str, Any], timeout_s: Optional[float] = None) -> Dict[str, Any]:
        """`plan.check`: A dry run: checks a plan exactly as job.submit does and says what it would do on this bench, without queuing it. Refused: -32002 plan_refused naming the limit; malformed: -32602.

        Params:
            plan (Dict[str, Any], required): the plan (docs/daemon-core.md)

        Returns the result object: points_per_part, temperatures, soak_s, points_total, parts,
        min_duration_s, duration_s, peak, pulse, limits.
        Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s (default: the
        client's), ConnectionError when the connection is lost.
        """
        return self._method('plan.check', timeout_s, plan=plan)
    # ---- END GENERATED WRAPPERS ----
