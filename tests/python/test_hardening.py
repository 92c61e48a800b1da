"""The kernel under hostile traffic and load, driven by an independent client (jupyter_client
on libzmq): forged and replayed messages, many clients at once, restart and shutdown while a
long cell runs, and a kernel killed outright. Each test prints its figures (pytest -s)."""

from __future__ import annotations

import os
import queue
import time

import zmq
from jupyter_client.manager import KernelManager
from jupyter_client.session import Session

from conftest import DOUBLING, KERNEL_NAME, TIMEOUT

# Seconds of work: ten million points, each with its own worst-case band and 1 024 calls.
SETUP = f"given r = 10 Ω ± 1 %\ngiven x = 0.5 V\ny = x * x / r\n{DOUBLING}"
LONG_SWEEP = "sweep x over 0 V .. 1 V steps 10000000: f10(y)"


def running(pid: int) -> bool:
    """True while the process exists and is not a zombie."""
    try:
        with open(f"/proc/{pid}/stat") as f:
            state = f.read().rsplit(")", 1)[1].split()[0]
    except (FileNotFoundError, IndexError):
        return False
    return state not in ("Z", "X")


def started_kernel() -> tuple[KernelManager, object]:
    km = KernelManager(kernel_name=KERNEL_NAME)
    km.start_kernel()
    kc = km.client()
    kc.start_channels()
    kc.wait_for_ready(timeout=TIMEOUT)
    return km, kc


def wait_for_input(kc, msg_id: str) -> None:
    deadline = time.monotonic() + TIMEOUT
    while time.monotonic() < deadline:
        msg = kc.get_iopub_msg(timeout=TIMEOUT)
        if msg["parent_header"].get("msg_id") == msg_id and msg["msg_type"] == "execute_input":
            return
    raise AssertionError("the cell never started")


def dealer(km: KernelManager, channel: str) -> zmq.Socket:
    sock = zmq.Context.instance().socket(zmq.DEALER)
    sock.linger = 0
    port = getattr(km, f"{channel}_port")
    if km.transport == "tcp":
        sock.connect(f"tcp://{km.ip}:{port}")
    else:
        sock.connect(f"ipc://{km.ip}-{port}")
    return sock


def test_forged_messages_are_ignored_and_an_exact_replay_is_reported(kernel):
    km, kc = kernel
    shell, control = dealer(km, "shell"), dealer(km, "control")
    try:
        impostors = [Session(key=f"not-the-key-{i}".encode()) for i in range(4)]
        honest = Session(key=km.session.key)
        sent = 0
        for i in range(1000):
            s = impostors[i % 4]
            if i % 3 == 0:
                s.send(control, s.msg("shutdown_request", {"restart": False}))
            elif i % 3 == 1:
                s.send(shell, s.msg("execute_request", {"code": f"forged{i} = 1 V", "silent": False}))
            else:
                # Signed with the right key, then the signature cut in half.
                msg = honest.msg("kernel_info_request", {})
                frames = honest.serialize(msg)
                d = frames.index(b"<IDS|MSG>")
                frames[d + 1] = frames[d + 1][:32]
                shell.send_multipart(frames)
            sent += 1
        answered = shell.poll(1000) + control.poll(200)
        print(f"forged through jupyter_client's Session: {sent} sent, {answered} answered")
        assert answered == 0
        assert km.is_alive(), "a forged shutdown was obeyed"

        # A correctly signed request sent twice, byte for byte. jupyter_client's own Session
        # refuses a signature it has already seen; report what the kernel does.
        frames = honest.serialize(honest.msg("kernel_info_request", {}))
        shell.send_multipart(frames)
        assert shell.poll(TIMEOUT * 1000), "the original is served"
        shell.recv_multipart()
        shell.send_multipart(frames)
        replayed = bool(shell.poll(1000))
        if replayed:
            shell.recv_multipart()
        print(f"an exact replay of a signed request was {'answered' if replayed else 'refused'}")
    finally:
        shell.close()
        control.close()
    msg_id = kc.execute("forged1")
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    assert reply["parent_header"]["msg_id"] == msg_id
    assert reply["content"]["ename"] == "UnknownName", "a forged definition ran"
    assert reply["content"]["execution_count"] == 1


def test_many_clients_at_once_each_get_their_own_replies(kernel):
    km, _ = kernel
    clients = []
    for _ in range(6):
        # Each front end has a session of its own; jupyter_client uses the session id as
        # the socket identity, so clients sharing the manager's session would share one.
        c = km.client(session=Session(key=km.session.key))
        c.start_channels()
        c.wait_for_ready(timeout=TIMEOUT)
        clients.append(c)
    try:
        per_client = 40
        ids = {id(c): [] for c in clients}
        started = time.monotonic()
        for i in range(per_client):
            for n, c in enumerate(clients):
                ids[id(c)].append(c.execute(f"v{n} = {i + 1} mV", silent=False))
        counts = []
        for c in clients:
            got = []
            for _ in range(per_client):
                r = c.get_shell_msg(timeout=TIMEOUT)
                got.append(r["parent_header"]["msg_id"])
                counts.append(r["content"]["execution_count"])
                assert r["content"]["status"] == "ok", r["content"]
            assert got == ids[id(c)], "a client got replies that were not its own, or out of order"
        took = time.monotonic() - started
        print(f"{len(clients)} clients x {per_client} executes interleaved: {took:.2f} s, "
              f"every reply routed to its sender")
        # One kernel, one count: each execute got a number of its own.
        assert sorted(counts) == list(range(1, len(clients) * per_client + 1))
    finally:
        for c in clients:
            c.stop_channels()


def test_restart_while_busy_leaves_no_orphan_and_the_client_reconnects():
    km, kc = started_kernel()
    try:
        kc.execute(SETUP)
        assert kc.get_shell_msg(timeout=TIMEOUT)["content"]["status"] == "ok"
        old_pid = km.provisioner.pid
        msg_id = kc.execute(LONG_SWEEP)
        wait_for_input(kc, msg_id)
        started = time.monotonic()
        km.restart_kernel(now=False)
        kc.wait_for_ready(timeout=TIMEOUT)
        took = time.monotonic() - started
        new_pid = km.provisioner.pid
        print(f"restart while busy: {took:.2f} s; old pid {old_pid} running: {running(old_pid)}")
        assert new_pid != old_pid
        assert not running(old_pid), "the old kernel process outlived the restart"
        # The same client, reconnected by libzmq, is served by the new session.
        msg_id = kc.execute("y")
        while True:
            r = kc.get_shell_msg(timeout=TIMEOUT)
            if r["parent_header"].get("msg_id") == msg_id:
                break
        assert r["content"]["execution_count"] == 1
        assert r["content"]["ename"] == "UnknownName", "a restarted kernel starts empty"
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)


def test_shutdown_while_busy_answers_the_cell_and_ends_the_process():
    km, kc = started_kernel()
    pid = km.provisioner.pid
    try:
        kc.execute(SETUP)
        kc.get_shell_msg(timeout=TIMEOUT)
        msg_id = kc.execute(LONG_SWEEP)
        wait_for_input(kc, msg_id)
        # Well under way (the Rust test in kernel/tests/hardening.rs covers the first moments).
        time.sleep(0.3)
        started = time.monotonic()
        km.shutdown_kernel(now=False)
        took = time.monotonic() - started
        replies = []
        try:
            while True:
                replies.append(kc.get_shell_msg(timeout=1))
        except queue.Empty:
            pass
        statuses = [r["content"].get("ename", r["content"]["status"])
                    for r in replies if r["parent_header"].get("msg_id") == msg_id]
        print(f"shutdown while busy: {took:.2f} s to a stopped process; the running cell's "
              f"reply: {statuses}")
        assert not running(pid), "the kernel process is still there"
        assert took < 10, took
        assert statuses, "the running cell got no reply"
    finally:
        kc.stop_channels()
        if km.has_kernel:
            km.shutdown_kernel(now=True)


def test_a_kernel_killed_outright_is_restarted_and_serves():
    km, kc = started_kernel()
    try:
        pid = km.provisioner.pid
        os.kill(pid, 9)
        deadline = time.monotonic() + TIMEOUT
        while km.is_alive() and time.monotonic() < deadline:
            time.sleep(0.05)
        assert not km.is_alive()
        started = time.monotonic()
        km.restart_kernel(now=True)
        kc.wait_for_ready(timeout=TIMEOUT)
        print(f"after SIGKILL: a new kernel ready in {time.monotonic() - started:.2f} s")
        msg_id = kc.execute("2 V * 3")
        while True:
            r = kc.get_shell_msg(timeout=TIMEOUT)
            if r["parent_header"].get("msg_id") == msg_id:
                break
        assert r["content"]["status"] == "ok"
        assert r["content"]["execution_count"] == 1
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)
