#!/usr/bin/env python3
"""Exercises the installed junco_client package against a running juncod.

    exercise_client.py main SOCKET LOT     wrappers, timeouts, threads, id-null errors, notifications
    exercise_client.py busy SOCKET         opens clients until juncod refuses one as busy

Run by tests/integration/python_client_test.cpp with the python of a venv the
package was installed into (python -I: the source tree is not on sys.path).
Each step prints "ok STEP: figures"; a failed check raises (exit 1). The
last line of "main" is a JSON object of values the C++ test compares with
its own client's replies.
"""

import json
import os
import sys
import threading
import time

import junco_client
from junco_client import Client, RpcError


def check(cond, what):
    if not cond:
        raise AssertionError(what)


def step_install():
    import importlib.metadata
    here = os.path.realpath(junco_client.__file__)
    check(here.startswith(os.path.realpath(sys.prefix) + os.sep), f"junco_client imported from {here}, not from {sys.prefix}")
    dist = importlib.metadata.version("junco-client")
    check(dist == junco_client.__version__, f"installed version {dist} != module version {junco_client.__version__}")
    print(f"ok install: {here} version {dist}")


def step_wrappers(c, lot):
    status = c.daemon_status()
    check(isinstance(status["uptime_s"], (int, float)), "daemon.status has uptime_s")
    check(any(l["name"] == lot for l in c.lot_list()["lots"]), f"lot {lot} in lot.list")
    parts = c.part_list(lot=lot)["parts"]
    check(len(parts) >= 2, f"parts of {lot}")
    ids = [p["part_id"] for p in parts]
    fit = c.part_fit(part_id=ids[0])
    figs = c.part_figures(part_id=ids[0], currents_a=[1e-3, 1e-2])["figures"]
    check([f["i_a"] for f in figs] == [1e-3, 1e-2], "part.figures at the currents asked")
    stats = c.lot_stats(lot=lot, currents_a=[1e-3], set_size=2)
    check(stats["currents_a"] == [1e-3] and stats["set_size"] == 2, "lot.stats took the optional params")
    jobs = c.job_list(state="done")["jobs"]
    check(jobs and all(j["state"] == "done" for j in jobs), "job.list filtered by state")
    check(c.job_get(job_id=jobs[0]["job_id"])["job_id"] == jobs[0]["job_id"], "job.get")
    check(c.bench_describe()["safety"]["current_limit_a"] > 0, "bench.describe")
    card = c.part_export(part_id=ids[0], format="spice")["content"]
    check(".model" in card.lower(), "part.export spice is a .model card")
    op = c.part_design(part_id=ids[0], calculator="op", inputs={"supply_v": 5.0, "bias_resistor_ohm": 1000.0})
    check(op["achievable"] in (True, False) and op["part_id"] == ids[0], "part.design")
    again = c.design_run(calculator="op", part=op["part"], inputs={"supply_v": 5.0, "bias_resistor_ohm": 1000.0})
    # The same values; only the stored part has a covariance, so only it carries std_error.
    bare = [{k: v for k, v in line.items() if k not in ("std_error", "nonlinear")} for line in op["result"]]
    check(again["result"] == bare, "design.run on the same part by value answers as part.design")
    check(all("std_error" in line for line in op["result"]), "part.design carries std_error")
    check(again["uncertainty"]["note"] == "no uncertainty (explicit parameters)", "design.run by value has no uncertainty")
    # Errors come back typed, and the connection goes on.
    for call, code in ((lambda: c.part_fit(part_id=999999), junco_client.NOT_FOUND),
                       (lambda: c.job_resume(job_id=jobs[0]["job_id"]), junco_client.WRONG_STATE),
                       (lambda: c.call("part.fit", part_id="one"), junco_client.INVALID_PARAMS),
                       (lambda: c.call("no.such.method"), junco_client.METHOD_NOT_FOUND)):
        try:
            call()
            raise AssertionError(f"expected error {code}")
        except RpcError as e:
            check(e.code == code and not e.id_null, f"error code {e.code} != {code}: {e}")
    print(f"ok wrappers: {len(parts)} parts, 12 methods and 4 errors")
    return ids, fit, figs


def step_timeouts(c, part_id):
    """A call abandoned by its timeout must not hand its late reply to the next call."""
    # 1 µs: the request goes out, the wait ends before any reply can be read.
    t0 = time.monotonic()
    try:
        c.lot_list(timeout_s=1e-6)
        raise AssertionError("lot.list with a 1 µs timeout returned")
    except TimeoutError:
        pass
    time.sleep(0.2)  # the late lot.list reply is now waiting on the socket
    dropped = c.dropped_replies
    status = c.daemon_status()
    check("uptime_s" in status and "lots" not in status, f"the call after a timeout got {sorted(status)}")
    check(c.dropped_replies == dropped + 1, f"the late lot.list reply was dropped ({c.dropped_replies - dropped})")
    # Exports abandoned by their timeout (every third at once, the others
    # after 1-4 ms: whether they come in time depends on the load): the calls
    # that follow, whose replies queue behind the late ones, get their own.
    full = c.part_export(part_id=part_id, format="csv")["content"]
    timed_out = whole = 0
    dropped = c.dropped_replies
    for k in range(60):
        try:
            timeout = 1e-6 if k % 3 == 0 else 0.001 * (k % 4 + 1)
            got = c.part_export(part_id=part_id, format="csv", timeout_s=timeout)["content"]
            check(got == full, "an export that did not time out is whole")
            whole += 1
        except TimeoutError:
            timed_out += 1
        check(c.job_list(state="done")["jobs"] is not None, "the call after an export")
        check(c.part_fit(part_id=part_id)["part_id"] == part_id, "part.fit after an export gets its own reply")
    check(timed_out >= 20, f"only {timed_out} exports timed out")
    time.sleep(0.2)
    c.daemon_status()  # reads whatever late reply is left
    check(c.dropped_replies - dropped == timed_out, f"{timed_out} timeouts, {c.dropped_replies - dropped} late replies dropped")
    print(f"ok timeouts: 1 µs timeout then a good call; {timed_out} of 60 exports of {len(full)} bytes timed out "
          f"(their late replies dropped), {whole} whole, 120 following calls right ({time.monotonic() - t0:.2f} s)")


def step_partial_line():
    """A timeout in the middle of a reply line. juncod writes a reply in one
    go, so this needs a peer that stops half-way: a socket server in this
    script (not juncod) that sends half of reply 1, waits, sends the rest and
    then reply 2. The client must drop reply 1 and return reply 2."""
    import socket
    import tempfile
    d = tempfile.mkdtemp()
    path = os.path.join(d, "half.sock")
    srv = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
    srv.bind(path)
    srv.listen(1)
    sizes = []

    def serve():
        conn, _ = srv.accept()
        f = conn.makefile("rb")
        r1 = json.loads(f.readline())
        line1 = (json.dumps({"jsonrpc": "2.0", "id": r1["id"], "result": {"answer": "first " + "x" * 4000}}) + "\n").encode()
        sizes.append(len(line1))
        conn.sendall(line1[:2000])
        r2 = json.loads(f.readline())  # the client's next call, sent after its timeout
        time.sleep(0.1)
        conn.sendall(line1[2000:])
        conn.sendall((json.dumps({"jsonrpc": "2.0", "id": r2["id"], "result": {"answer": "second"}}) + "\n").encode())
        f.read()  # until the client closes
        conn.close()

    t = threading.Thread(target=serve)
    t.start()
    c = Client(path, timeout_s=5.0)
    try:
        c.request("daemon.status", timeout_s=0.3)
        raise AssertionError("half a line was taken for a reply")
    except TimeoutError:
        pass
    second = c.request("daemon.status")
    check(second == {"answer": "second"}, f"after a timeout mid-line the next call got {str(second)[:60]}")
    check(c.dropped_replies == 1, f"dropped replies: {c.dropped_replies}")
    c.close()
    t.join(10)
    srv.close()
    os.unlink(path)
    os.rmdir(d)
    print(f"ok partial line: timeout after 2000 of {sizes[0]} bytes of a reply; the next call got its own reply")


def step_threads(c, ids):
    """Eight threads share one Client; every reply goes to the thread that asked."""
    expected = {p: c.part_fit(part_id=p)["fit_id"] for p in ids}
    errors, counts = [], {"ok": 0, "timeout": 0, "oversized": 0}
    lock = threading.Lock()

    def worker(k):
        try:
            for j in range(40):
                p = ids[(k + j) % len(ids)]
                if k == 7 and j % 8 == 0:
                    # An oversized line from one thread while the others call:
                    # its id-null error must reach this thread, and only it.
                    try:
                        c.part_list(lot="x" * ((1 << 20) + 16))
                        errors.append("oversized call returned")
                    except RpcError as e:
                        if e.code != junco_client.INVALID_REQUEST or not e.id_null:
                            errors.append(f"oversized: {e}")
                        with lock:
                            counts["oversized"] += 1
                    continue
                try:
                    timeout = 1e-6 if (k == 6 and j % 5 == 0) else None
                    got = c.part_fit(part_id=p, timeout_s=timeout)
                    if got["part_id"] != p or got["fit_id"] != expected[p]:
                        errors.append(f"thread {k} asked part {p}, got part {got['part_id']} fit {got['fit_id']}")
                    with lock:
                        counts["ok"] += 1
                except TimeoutError:
                    with lock:
                        counts["timeout"] += 1
        except Exception as e:  # noqa: BLE001 - reported below
            errors.append(f"thread {k}: {type(e).__name__}: {e}")

    t0 = time.monotonic()
    threads = [threading.Thread(target=worker, args=(k,)) for k in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(120)
    check(not any(t.is_alive() for t in threads), "a thread is stuck")
    check(not errors, "; ".join(errors[:5]))
    check(counts["ok"] >= 7 * 40 - 8 - 5, f"calls answered: {counts}")
    print(f"ok threads: 8 threads, {counts['ok']} calls right, {counts['timeout']} timed out on purpose, "
          f"{counts['oversized']} oversized lines answered to their thread ({time.monotonic() - t0:.2f} s)")


def step_id_null(c):
    """Errors juncod cannot tie to an id are raised at once, not waited on."""
    slow = Client(c.path, timeout_s=30.0)
    t0 = time.monotonic()
    try:
        slow.part_list(lot="y" * ((1 << 20) + 1))
        raise AssertionError("an oversized line was answered with a result")
    except RpcError as e:
        oversized_s = time.monotonic() - t0
        check(e.code == junco_client.INVALID_REQUEST and e.id_null, f"oversized: {e}")
    check(oversized_s < 5.0, f"the oversized-line error took {oversized_s:.2f} s")
    # NaN is not JSON (json.dumps writes it anyway): juncod answers parse error, id null.
    t0 = time.monotonic()
    try:
        slow.call("part.figures", part_id=1, currents_a=[float("nan")])
        raise AssertionError("a NaN param was answered with a result")
    except RpcError as e:
        parse_s = time.monotonic() - t0
        check(e.code == junco_client.PARSE_ERROR and e.id_null, f"parse error: {e}")
    check(parse_s < 5.0, f"the parse error took {parse_s:.2f} s")
    check("uptime_s" in slow.daemon_status(), "the connection goes on after id-null errors")
    slow.close()
    print(f"ok id-null errors: oversized line raised in {oversized_s * 1000:.0f} ms, "
          f"parse error in {parse_s * 1000:.0f} ms (client timeout 30 s)")


def step_notifications(c, path):
    listener = Client(path, timeout_s=30.0)
    check(sorted(listener.events_subscribe(kinds=["job.state", "job.progress"])["kinds"]) == ["job.progress", "job.state"],
          "events.subscribe")
    plan = {"lot": "PY-EVENTS", "parts": [{"slot": 1, "label": "PYE-1"}],
            "sweep": {"mode": "current", "spacing": "log", "start": 1e-5, "stop": 0.01, "count": 6, "settle_s": 0.0}}
    job = c.job_submit(plan=plan)["job_id"]
    states, progress, t0 = [], 0, time.monotonic()
    for n in listener.notifications(timeout_s=20.0):
        p = n["params"]
        if p.get("job_id") != job:
            continue
        if n["method"] == "job.progress":
            progress += 1
        elif n["method"] == "job.state":
            states.append(p["state"])
            if p["state"] in ("done", "failed", "cancelled", "interrupted"):
                break
    check(states and states[-1] == "done", f"job {job} states seen: {states}")
    check(progress >= 1, "job.progress notifications")
    # Nothing more comes: the iterator ends after its timeout, the single wait raises.
    t1 = time.monotonic()
    rest = list(listener.notifications(timeout_s=0.5, methods={"job.state"}))
    idle_s = time.monotonic() - t1
    check(rest == [] and 0.45 <= idle_s < 3.0, f"iterator after the job: {rest}, {idle_s:.2f} s")
    try:
        listener.next_notification(timeout_s=0.2)
        raise AssertionError("next_notification returned with nothing to say")
    except TimeoutError:
        pass
    check("uptime_s" in listener.daemon_status(), "calls still work on the subscribed connection")
    listener.events_unsubscribe()
    listener.close()
    print(f"ok notifications: job {job} states {states}, {progress} progress events "
          f"({time.monotonic() - t0:.2f} s), idle iterator ended after {idle_s:.2f} s")


def main_steps(path, lot):
    step_install()
    with Client(path, timeout_s=30.0) as c:
        ids, fit, figs = step_wrappers(c, lot)
        step_timeouts(c, ids[0])
        step_partial_line()
        step_threads(c, ids)
        step_id_null(c)
        step_notifications(c, path)
        print(json.dumps({"part_id": ids[0], "fit_id": fit["fit_id"], "n": fit["n"]["value"],
                          "is_a": fit["is_a"]["value"], "vf_v@0.01A": figs[1]["vf_v"]["value"]}))


def busy(path):
    clients, t0 = [], time.monotonic()
    try:
        for k in range(200):
            c = Client(path, timeout_s=10.0)
            t0 = time.monotonic()
            try:
                c.daemon_status()
            except RpcError as e:
                refused_s = time.monotonic() - t0
                check(e.code == junco_client.UNAVAILABLE and e.id_null and "busy" in e.message, f"busy: {e}")
                check(refused_s < 5.0, f"the busy error took {refused_s:.2f} s")
                try:
                    c.daemon_status()
                    raise AssertionError("a refused connection answered")
                except ConnectionError:
                    pass
                print(f"ok busy: client {k + 1} refused with '{e.message}' in {refused_s * 1000:.0f} ms "
                      f"after {k} admitted")
                return 0
            clients.append(c)
        raise AssertionError("200 clients admitted: no busy refusal")
    finally:
        for c in clients:
            c.close()


if __name__ == "__main__":
    if sys.argv[1:2] == ["busy"]:
        sys.exit(busy(sys.argv[2]))
    main_steps(sys.argv[2], sys.argv[3])
