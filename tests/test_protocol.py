"""Protocol behaviour beyond the conformance suite, driven with jupyter_client (the
Jupyter project's reference client) and raw pyzmq sockets: message signing, interrupts,
stop_on_error, error locations, heartbeat and shutdown/restart.
"""

from __future__ import annotations

import time

import pytest
import zmq
from jupyter_client.session import Session

from helpers import (
    MODEL,
    collect_outputs,
    drain_iopub,
    run_cell,
    shell_reply,
    start_kernel,
    stdout_text,
    stop_kernel,
)


def intruder_code(name: str) -> str:
    """A cell that would leave visible traces: a printed line and a workspace table."""
    return (
        MODEL
        + f"\n{name} = scan T at [2] K, sweeps = 20, equilibrate = 10"
        + f'\nrhai {{ print("{name} ran") }}'
    )


def raw_shell_socket(km) -> zmq.Socket:
    info = km.get_connection_info()
    socket = zmq.Context.instance().socket(zmq.DEALER)
    socket.linger = 0
    socket.connect(f"{info['transport']}://{info['ip']}:{info['shell_port']}")
    return socket


def reply_on(socket: zmq.Socket, session: Session, timeout_ms: int) -> dict | None:
    if not socket.poll(timeout_ms):
        return None
    frames = socket.recv_multipart()
    _, parts = session.feed_identities(frames)
    return session.deserialize(parts)


def test_unsigned_and_badly_signed_requests_are_not_executed(kernel):
    km, kc = kernel
    key = km.session.key
    assert key, "jupyter_client signs with a random key by default"
    socket = raw_shell_socket(km)
    try:
        # Same client session id, wrong key: a forged signature.
        forged = Session(key=b"not-the-key", session=kc.session.session)
        forged.send(socket, "execute_request", content=_execute_content(intruder_code("forged")))
        # No key at all: the signature frame is empty.
        unsigned = Session(key=b"", session=kc.session.session)
        unsigned.send(socket, "execute_request", content=_execute_content(intruder_code("unsigned")))

        # Nothing comes back: no reply, and no IOPub message at all (not even `busy`).
        broadcast = drain_iopub(kc, 3.0)
        assert broadcast == [], [m["msg_type"] for m in broadcast]
        assert reply_on(socket, Session(key=key), 500) is None

        # The workspace has neither table: a properly signed request proves it.
        for name in ("forged", "unsigned"):
            reply, outputs = run_cell(kc, f"show {name}")
            assert reply["status"] == "error" and reply["ename"] == "NameError", reply
            assert f"{name} ran" not in stdout_text(outputs)

        # Control: the same frames signed with the right key do run. This shows the
        # forged requests above failed only because of their signatures.
        honest = Session(key=key, session=kc.session.session)
        good = honest.send(socket, "execute_request", content=_execute_content(intruder_code("honest")))
        answer = reply_on(socket, honest, 60_000)
        assert answer is not None and answer["parent_header"]["msg_id"] == good["header"]["msg_id"]
        assert answer["content"]["status"] == "ok", answer["content"]
        reply, _ = run_cell(kc, "show honest")
        assert reply["status"] == "ok", reply
    finally:
        socket.close()
    # The kernel survived and still answers.
    kc.kernel_info()
    assert kc.get_shell_msg(timeout=10)["msg_type"] == "kernel_info_reply"


def _execute_content(code: str) -> dict:
    return {
        "code": code,
        "silent": False,
        "store_history": True,
        "user_expressions": {},
        "allow_stdin": False,
        "stop_on_error": True,
    }


def test_malformed_frames_do_not_kill_the_kernel(kernel):
    km, kc = kernel
    socket = raw_shell_socket(km)
    session = Session(key=km.session.key)
    try:
        # No delimiter, too few frames, non-JSON content with a valid signature.
        socket.send_multipart([b"garbage"])
        socket.send_multipart([b"<IDS|MSG>", b"sig"])
        header = session.msg_header("execute_request")
        parts = [
            session.pack(header),
            b"{}",
            b"{}",
            b"{not json",
        ]
        signature = session.sign(parts)
        socket.send_multipart([b"<IDS|MSG>", signature, *parts])
        # Well-signed but of an unknown type: ignored, no reply.
        session.send(socket, "no_such_request", content={})
        assert reply_on(socket, session, 1500) is None
    finally:
        socket.close()
    reply, outputs = run_cell(kc, 'rhai { print("still alive") }')
    assert reply["status"] == "ok"
    assert stdout_text(outputs) == "still alive\n"


def test_interrupt_stops_a_long_scan_and_keeps_the_workspace(kernel):
    km, kc = kernel
    reply, _ = run_cell(kc, MODEL + "\nbefore = scan T at [2] K, sweeps = 20, equilibrate = 10")
    assert reply["status"] == "ok", reply

    # Far too long to finish within the test: 8192 spins, 40 temperatures, 10^6 sweeps
    # each (about 3 * 10^11 spin-flip attempts).
    long_cell = (
        "lattice pyrochlore L = 8\ncouplings nearest J_eff = 1.8 K\n"
        "long = scan T from 0.5 K to 5 K in 40 steps, sweeps = 1000000, equilibrate = 1000"
    )
    msg_id = kc.execute(long_cell)
    # Wait until the scan reports progress: then it is really computing.
    deadline = time.monotonic() + 60
    while True:
        msg = kc.get_iopub_msg(timeout=max(0.1, deadline - time.monotonic()))
        if msg["parent_header"].get("msg_id") != msg_id:
            continue
        if msg["msg_type"] == "display_data" and msg["content"].get("transient", {}).get("display_id"):
            break

    # Heartbeat and control keep answering while the cell runs.
    assert kc.hb_channel.is_beating()
    info_request = kc.session.msg("kernel_info_request", {})
    kc.control_channel.send(info_request)
    assert kc.get_control_msg(timeout=10)["msg_type"] == "kernel_info_reply"

    started = time.monotonic()
    interrupt = kc.session.msg("interrupt_request", {})
    kc.control_channel.send(interrupt)
    interrupt_reply = kc.get_control_msg(timeout=10)
    assert interrupt_reply["msg_type"] == "interrupt_reply"
    assert interrupt_reply["content"]["status"] == "ok"

    reply = shell_reply(kc, msg_id, timeout=60)["content"]
    assert time.monotonic() - started < 60
    assert reply["status"] == "error"
    assert reply["ename"] == "Interrupted", reply
    collect_outputs(kc, msg_id)

    assert km.is_alive()
    # The earlier value and the (partial) interrupted scan are both in the workspace.
    for name in ("before", "long"):
        reply, _ = run_cell(kc, f"show {name}")
        assert reply["status"] == "ok", (name, reply)
    # The flag was cleared: the next cell runs to the end.
    reply, outputs = run_cell(kc, 'rhai { print("after") }')
    assert reply["status"] == "ok" and stdout_text(outputs) == "after\n"


# Runs for about one second, then fails at run time (not at check time), so the cells
# sent after it are already queued in the kernel when it fails.
SLOW_FAILURE = 'rhai { let t = timestamp(); while t.elapsed < 1.0 { } throw "boom"; }'


def test_stop_on_error_aborts_queued_cells(kernel):
    km, kc = kernel
    first = kc.execute(SLOW_FAILURE)
    second = kc.execute('rhai { print("second ran") }')
    third = kc.execute('rhai { print("third ran") }')
    replies = {mid: shell_reply(kc, mid)["content"] for mid in (first, second, third)}
    assert replies[first]["status"] == "error" and replies[first]["ename"] == "ScriptError"
    assert replies[second]["status"] == "aborted"
    assert replies[third]["status"] == "aborted"
    texts = "".join(stdout_text(collect_outputs(kc, mid)) for mid in (first, second, third))
    assert "ran" not in texts

    # Requests sent after the abort run normally.
    reply, outputs = run_cell(kc, 'rhai { print("fourth ran") }')
    assert reply["status"] == "ok" and stdout_text(outputs) == "fourth ran\n"

    # Contrast: without stop_on_error the queued cell runs.
    first = kc.execute(SLOW_FAILURE, stop_on_error=False)
    second = kc.execute('rhai { print("second ran") }')
    assert shell_reply(kc, first)["content"]["status"] == "error"
    assert shell_reply(kc, second)["content"]["status"] == "ok"
    collect_outputs(kc, first)
    assert stdout_text(collect_outputs(kc, second)) == "second ran\n"


def test_error_reply_carries_line_and_column(kernel):
    km, kc = kernel
    reply, _ = run_cell(kc, MODEL + "\nthermo = scan T at [2] K, sweeps = 20, equilibrate = 10")
    assert reply["status"] == "ok", reply
    # Line 3 has two unknown options; the second comes after a non-ASCII string, so its
    # column differs in code points (35) and in UTF-8 bytes (36). Positions are
    # (derived) from the cell text itself.
    code = '# locate the errors\nmeasure energy\nshow thermo, bogus_a = "Énergie", bogus_b = 3'
    msg_id = kc.execute(code)
    reply = shell_reply(kc, msg_id)["content"]
    outputs = collect_outputs(kc, msg_id)
    assert reply["status"] == "error"
    locations = [(d["line"], d["column"]) for d in reply["diagnostics"]]
    assert locations == [(3, 14), (3, 35)], reply["diagnostics"]
    assert reply["ename"] == "NameError"
    assert "bogus_a" in reply["evalue"]
    errors = [m for m in outputs if m["msg_type"] == "error"]
    assert len(errors) == 1
    traceback = "\n".join(errors[0]["content"]["traceback"])
    assert "cell:3:14" in traceback and "cell:3:35" in traceback, traceback


def test_silent_execution_broadcasts_nothing_and_keeps_the_count(kernel):
    km, kc = kernel
    reply, _ = run_cell(kc, 'rhai { print("one") }')
    assert reply["execution_count"] == 1
    msg_id = kc.execute('rhai { print("quiet") }', silent=True)
    assert shell_reply(kc, msg_id)["content"]["status"] == "ok"
    # Only the busy status (idle ends the collection): no execute_input, no stream.
    types = [m["msg_type"] for m in collect_outputs(kc, msg_id)]
    assert types == ["status"], types
    reply, _ = run_cell(kc, 'rhai { print("two") }')
    assert reply["execution_count"] == 2


def test_comm_messages_are_ignored_gracefully(kernel):
    km, kc = kernel
    kc.comm_info()
    reply = kc.get_shell_msg(timeout=10)
    assert reply["msg_type"] == "comm_info_reply" and reply["content"]["comms"] == {}
    open_msg = kc.session.msg("comm_open", {"comm_id": "c-1", "target_name": "nowhere", "data": {}})
    kc.shell_channel.send(open_msg)
    outputs = collect_outputs(kc, open_msg["header"]["msg_id"], timeout=10)
    assert [m["msg_type"] for m in outputs] == ["status", "comm_close"]
    assert outputs[1]["content"]["comm_id"] == "c-1"
    kc.shell_channel.send(kc.session.msg("comm_msg", {"comm_id": "c-1", "data": {}}))
    reply, outputs = run_cell(kc, 'rhai { print("fine") }')
    assert reply["status"] == "ok" and stdout_text(outputs) == "fine\n"


@pytest.mark.parametrize("restart", [True, False])
def test_shutdown_replies_then_exits_cleanly(restart):
    km, kc = start_kernel()
    try:
        reply, _ = run_cell(kc, MODEL + "\nkept = scan T at [2] K, sweeps = 20, equilibrate = 10")
        assert reply["status"] == "ok"
        process = km.provisioner.process
        msg_id = kc.shutdown(restart=restart)
        reply = kc.get_control_msg(timeout=10)
        assert reply["parent_header"]["msg_id"] == msg_id
        assert reply["msg_type"] == "shutdown_reply"
        assert reply["content"] == {"status": "ok", "restart": restart}
        assert process.wait(timeout=15) == 0
        assert not km.is_alive()

        if restart:
            # The manager starts a new kernel process: a fresh, empty workspace.
            km.start_kernel()
            kc.stop_channels()
            kc = km.client()
            kc.start_channels()
            kc.wait_for_ready(timeout=60)
            reply, _ = run_cell(kc, "show kept")
            assert reply["status"] == "error" and reply["ename"] == "NameError"
    finally:
        stop_kernel(km, kc)
