"""Helpers shared by the icefield protocol, CLI and notebook tests (jupyter_client)."""

from __future__ import annotations

import queue
import time
from pathlib import Path
from typing import Any

from jupyter_client.kernelspec import KernelSpecManager
from jupyter_client.manager import KernelManager

KERNEL_NAME = "icefield"
REPO = Path(__file__).resolve().parent.parent

# A small model every test that needs a table starts from (invented parameters).
MODEL = "\n".join(
    [
        "lattice pyrochlore L = 2",
        "couplings nearest J_eff = 1.8 K",
        "seed 20261201",
    ]
)


def installed_binary() -> str:
    spec = KernelSpecManager().get_kernel_spec(KERNEL_NAME)
    return spec.argv[0]


def start_kernel() -> tuple[KernelManager, Any]:
    km = KernelManager(kernel_name=KERNEL_NAME)
    km.start_kernel()
    kc = km.client()
    kc.start_channels()
    kc.wait_for_ready(timeout=60)
    return km, kc


def stop_kernel(km: KernelManager, kc: Any) -> None:
    kc.stop_channels()
    if km.is_alive():
        km.shutdown_kernel(now=False)


def drain_iopub(kc: Any, seconds: float) -> list[dict]:
    """Every IOPub message arriving within `seconds`."""
    messages = []
    deadline = time.monotonic() + seconds
    while True:
        remaining = deadline - time.monotonic()
        if remaining <= 0:
            return messages
        try:
            messages.append(kc.get_iopub_msg(timeout=remaining))
        except queue.Empty:
            return messages


def collect_outputs(kc: Any, msg_id: str, timeout: float = 60) -> list[dict]:
    """IOPub messages of request `msg_id` up to its `idle` status."""
    outputs = []
    deadline = time.monotonic() + timeout
    while True:
        remaining = deadline - time.monotonic()
        if remaining <= 0:
            raise TimeoutError(f"no idle status for {msg_id} within {timeout} s")
        msg = kc.get_iopub_msg(timeout=remaining)
        if msg["parent_header"].get("msg_id") != msg_id:
            continue
        if msg["msg_type"] == "status" and msg["content"]["execution_state"] == "idle":
            return outputs
        outputs.append(msg)


def shell_reply(kc: Any, msg_id: str, timeout: float = 60) -> dict:
    """The shell reply to `msg_id` (other replies are skipped)."""
    deadline = time.monotonic() + timeout
    while True:
        remaining = deadline - time.monotonic()
        if remaining <= 0:
            raise TimeoutError(f"no reply to {msg_id} within {timeout} s")
        msg = kc.get_shell_msg(timeout=remaining)
        if msg["parent_header"].get("msg_id") == msg_id:
            return msg


def run_cell(kc: Any, code: str, timeout: float = 120, **options: Any) -> tuple[dict, list[dict]]:
    """Executes a cell; returns (reply content, IOPub output messages)."""
    msg_id = kc.execute(code, **options)
    reply = shell_reply(kc, msg_id, timeout)
    outputs = collect_outputs(kc, msg_id, timeout)
    return reply["content"], outputs


def stdout_text(outputs: list[dict]) -> str:
    return "".join(
        m["content"]["text"]
        for m in outputs
        if m["msg_type"] == "stream" and m["content"]["name"] == "stdout"
    )
