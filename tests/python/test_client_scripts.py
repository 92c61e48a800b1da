"""What jupyter_kernel_test does not cover, driven with jupyter_client directly: the
kernelspec, bad signatures, stop_on_error, interrupt and shutdown."""

from __future__ import annotations

import os
import queue
import time

import zmq
from jupyter_client.kernelspec import KernelSpecManager
from jupyter_client.manager import KernelManager
from jupyter_client.session import Session
from jupyter_kernel_test.msgspec_v5 import msg_structure_validator, validate_message

from conftest import DOUBLING, KERNEL_NAME, TIMEOUT


def collect_outputs(kc, msg_id: str) -> list[dict]:
    """The iopub messages of one request, up to its idle status, each validated."""
    out = []
    deadline = time.monotonic() + TIMEOUT
    while time.monotonic() < deadline:
        msg = kc.get_iopub_msg(timeout=TIMEOUT)
        if msg["parent_header"].get("msg_id") != msg_id:
            continue
        validate_message(msg, msg["msg_type"], msg_id)
        out.append(msg)
        if msg["msg_type"] == "status" and msg["content"]["execution_state"] == "idle":
            return out
    raise AssertionError(f"no idle status for {msg_id}")


def test_kernelspec_names_this_binary_and_message_interrupts():
    spec = KernelSpecManager().get_kernel_spec(KERNEL_NAME)
    assert spec.display_name == "Headroom"
    assert spec.language == "headroom"
    assert spec.interrupt_mode == "message"
    exe = spec.argv[0]
    assert os.path.isabs(exe) and os.access(exe, os.X_OK), exe
    assert spec.argv[1:] == ["kernel", "--connection-file", "{connection_file}"]
    for logo in ("logo-32x32.png", "logo-64x64.png", "logo-svg.svg"):
        assert os.path.exists(os.path.join(spec.resource_dir, logo)), logo


def test_messages_with_bad_signatures_are_not_served(kernel):
    km, kc = kernel
    # A second client on the same shell port, signing with a key that is not the kernel's.
    ctx = zmq.Context.instance()
    sock = ctx.socket(zmq.DEALER)
    sock.linger = 0
    if km.transport == "tcp":
        sock.connect(f"tcp://{km.ip}:{km.shell_port}")
    else:
        sock.connect(f"ipc://{km.ip}-{km.shell_port}")
    try:
        impostor = Session(key=b"not-the-kernel-key")
        impostor.send(sock, impostor.msg("execute_request", {
            "code": "x = 1 V", "silent": False, "store_history": True,
            "user_expressions": {}, "allow_stdin": False, "stop_on_error": True}))
        impostor.send(sock, impostor.msg("kernel_info_request", {}))
        assert sock.poll(1000) == 0, "a message with a bad signature was answered"

        # The same client with the right key is served.
        honest = Session(key=km.session.key)
        sent = honest.send(sock, honest.msg("kernel_info_request", {}))
        assert sock.poll(TIMEOUT * 1000), "no reply to a correctly signed request"
        _, frames = honest.feed_identities(sock.recv_multipart())
        reply = honest.deserialize(frames)  # checks the kernel's signature
        validate_message(reply, "kernel_info_reply", sent["header"]["msg_id"])
    finally:
        sock.close()

    # Nothing the impostor sent was executed: the next count is 1.
    msg_id = kc.execute("y = 2 V")
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    validate_message(reply, "execute_reply", msg_id)
    assert reply["content"]["execution_count"] == 1


def test_stop_on_error_aborts_what_was_queued(kernel):
    _, kc = kernel
    # Sent back to back, as "run all cells" does; the first fails on a unit mistake.
    failing = kc.execute("x = 12 V + 3 A", stop_on_error=True)
    queued = [kc.execute("y = 1 V"), kc.execute("z = 2 V")]
    replies = {}
    while len(replies) < 3:
        r = kc.get_shell_msg(timeout=TIMEOUT)
        replies[r["parent_header"]["msg_id"]] = r
    validate_message(replies[failing], "execute_reply", failing)
    assert replies[failing]["content"]["status"] == "error"
    for msg_id in queued:
        r = replies[msg_id]
        # The suite's validator knows the deprecated spelling "abort" only; "aborted" is what
        # kernels send and front ends read, so only the message structure is checked here.
        msg_structure_validator.validate(r)
        assert r["content"]["status"] == "aborted"

    outputs = collect_outputs(kc, failing)
    errors = [m for m in outputs if m["msg_type"] == "error"]
    assert len(errors) == 1
    assert any("^" in line for line in errors[0]["content"]["traceback"])

    # Without stop_on_error the next cell runs.
    failing = kc.execute("x = 12 V + 3 A", stop_on_error=False)
    after = kc.execute("y = 1 V")
    statuses = {}
    while len(statuses) < 2:
        r = kc.get_shell_msg(timeout=TIMEOUT)
        statuses[r["parent_header"]["msg_id"]] = r["content"]["status"]
    assert statuses == {failing: "error", after: "ok"}


def test_interrupt_stops_a_long_sweep_and_the_kernel_lives_on(kernel):
    km, kc = kernel
    kc.execute("given b = 2 V")
    kc.get_shell_msg(timeout=TIMEOUT)
    # Seconds of work: ten million points with worst-case bands, 1 024 calls a point.
    long_cell = (f"given a = 1 V ± 1 %\n{DOUBLING}\n"
                 "sweep a over 1 V .. 2 V steps 10000000: f10(a * a * a)")
    msg_id = kc.execute(long_cell)
    # Once execute_input is out the cell is running; give it a moment to get deep in.
    while True:
        msg = kc.get_iopub_msg(timeout=TIMEOUT)
        if msg["parent_header"].get("msg_id") == msg_id and msg["msg_type"] == "execute_input":
            break
    time.sleep(0.2)
    started = time.monotonic()
    km.interrupt_kernel()  # interrupt_mode "message": an interrupt_request on control
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    latency = time.monotonic() - started
    print(f"interrupt latency {latency * 1000:.0f} ms")
    validate_message(reply, "execute_reply", msg_id)
    assert reply["content"]["status"] == "error"
    assert reply["content"]["ename"] == "Interrupted"
    assert latency < 3, latency
    assert km.is_alive()
    msg_id = kc.execute("b * 2")
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    assert reply["content"]["status"] == "ok"


def test_restart_and_shutdown(kernel):
    km, kc = kernel
    kc.execute("given c = 3 V")
    kc.get_shell_msg(timeout=TIMEOUT)
    km.restart_kernel(now=False)
    kc.wait_for_ready(timeout=TIMEOUT)
    # A restarted kernel is a new session: counting starts again.
    msg_id = kc.execute("d = 1 V")
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    validate_message(reply, "execute_reply", msg_id)
    assert reply["content"]["execution_count"] == 1
    try:
        while True:
            kc.get_iopub_msg(timeout=0.2)
    except queue.Empty:
        pass


def test_ipc_transport(tmp_path):
    km = KernelManager(kernel_name=KERNEL_NAME, transport="ipc", ip=str(tmp_path / "k-ipc"))
    km.start_kernel()
    kc = km.client()
    kc.start_channels()
    try:
        kc.wait_for_ready(timeout=TIMEOUT)
        msg_id = kc.execute("2 V * 3")
        reply = kc.get_shell_msg(timeout=TIMEOUT)
        validate_message(reply, "execute_reply", msg_id)
        results = [m for m in collect_outputs(kc, msg_id) if m["msg_type"] == "execute_result"]
        # 2 V × 3 = 6 V, three significant digits.
        assert results[0]["content"]["data"]["text/plain"] == "6.00 V"
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=False)
