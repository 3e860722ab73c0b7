"""The `icefield` command line: kernel-spec installation (checked with jupyter_client's
KernelSpecManager, the reference reader of kernel specs), headless runs, Ctrl-C and
benchmarks.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

from jupyter_client.kernelspec import KernelSpecManager

from helpers import MODEL

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # ISO/IEC 15948:2003, section 5.2


def png_size(data: bytes) -> tuple[int, int]:
    # IHDR is the first chunk: width and height are big-endian u32 at bytes 16..24
    # (ISO/IEC 15948:2003, section 11.2.2).
    assert data[:8] == PNG_SIGNATURE
    assert data[12:16] == b"IHDR"
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")


def test_install_prefix_is_found_by_jupyter(icefield_bin: str, tmp_path: Path):
    result = subprocess.run(
        [icefield_bin, "install", "--prefix", str(tmp_path), "--name", "icefield-test"],
        capture_output=True,
        text=True,
        check=True,
    )
    folder = tmp_path / "share" / "jupyter" / "kernels" / "icefield-test"
    assert str(folder) in result.stdout

    manager = KernelSpecManager(kernel_dirs=[str(tmp_path / "share" / "jupyter" / "kernels")])
    spec = manager.get_kernel_spec("icefield-test")
    assert Path(spec.argv[0]).resolve() == Path(icefield_bin).resolve()
    assert spec.argv[1:] == ["kernel", "--connection-file", "{connection_file}"]
    assert spec.display_name == "icefield (spin ice)"
    assert spec.language == "icefield"
    assert spec.interrupt_mode == "message"
    assert png_size((folder / "logo-32x32.png").read_bytes()) == (32, 32)
    assert png_size((folder / "logo-64x64.png").read_bytes()) == (64, 64)
    assert (folder / "logo-svg.svg").read_text().startswith("<svg")

    # `jupyter kernelspec list` sees it through JUPYTER_PATH.
    env = dict(os.environ, JUPYTER_PATH=str(tmp_path / "share" / "jupyter"))
    listing = subprocess.run(
        [sys.executable, "-m", "jupyter", "kernelspec", "list", "--json"],
        capture_output=True,
        text=True,
        env=env,
        check=True,
    )
    assert "icefield-test" in json.loads(listing.stdout)["kernelspecs"]


def test_install_user_honours_jupyter_data_dir(icefield_bin: str, tmp_path: Path):
    env = dict(os.environ, JUPYTER_DATA_DIR=str(tmp_path / "data"))
    subprocess.run([icefield_bin, "install", "--user"], env=env, check=True, capture_output=True)
    assert (tmp_path / "data" / "kernels" / "icefield" / "kernel.json").is_file()


def test_install_refuses_a_bad_name(icefield_bin: str, tmp_path: Path):
    result = subprocess.run(
        [icefield_bin, "install", "--prefix", str(tmp_path), "--name", "../escape"],
        capture_output=True,
        text=True,
    )
    assert result.returncode != 0
    assert "invalid kernel name" in result.stderr
    assert not (tmp_path / "share").exists()


SCRIPT = MODEL + "\nthermo = scan T at [1, 2, 4] K, sweeps = 50, equilibrate = 20\nshow thermo\nplot thermo.energy against T\n"


def test_run_plain_writes_figures_beside_the_script(icefield_bin: str, tmp_path: Path):
    script = tmp_path / "demo.ifld"
    script.write_text(SCRIPT)
    result = subprocess.run([icefield_bin, "run", str(script)], capture_output=True, text=True, timeout=300)
    assert result.returncode == 0, result.stderr
    figure = tmp_path / "demo-figure-1.svg"
    assert f"figure written to {figure}" in result.stdout
    assert figure.read_text().lstrip().startswith("<svg")


def test_run_json_prints_one_record_per_line(icefield_bin: str, tmp_path: Path):
    script = tmp_path / "demo.ifld"
    script.write_text(SCRIPT)
    result = subprocess.run(
        [icefield_bin, "run", str(script), "--json"], capture_output=True, text=True, timeout=300
    )
    assert result.returncode == 0, result.stderr
    records = [json.loads(line) for line in result.stdout.splitlines()]
    assert [r["kind"] for r in records] == ["table", "figure"], records
    assert records[0]["values"]["T"] == [1.0, 2.0, 4.0]
    assert not list(tmp_path.glob("*.svg")), "JSON mode writes figures only with --out"


def test_run_error_reports_location_and_fails(icefield_bin: str, tmp_path: Path):
    script = tmp_path / "broken.ifld"
    script.write_text(MODEL + "\nshow nothing_here\n")
    result = subprocess.run([icefield_bin, "run", str(script)], capture_output=True, text=True, timeout=60)
    assert result.returncode == 1
    assert "NameError" in result.stderr
    assert f"{script}:4:6" in result.stderr, result.stderr  # line 4, column 6 of the file (derived)
    assert result.stdout == ""


def test_run_missing_file_fails_clearly(icefield_bin: str, tmp_path: Path):
    result = subprocess.run([icefield_bin, "run", str(tmp_path / "absent.ifld")], capture_output=True, text=True)
    assert result.returncode != 0
    assert "cannot read" in result.stderr


def test_ctrl_c_stops_a_long_run_and_keeps_its_results(icefield_bin: str, tmp_path: Path):
    script = tmp_path / "long.ifld"
    # 40 temperatures of 10^6 sweeps on 8192 spins: hours without the interrupt.
    script.write_text(
        "lattice pyrochlore L = 8\ncouplings nearest J_eff = 1.8 K\n"
        "long = scan T from 0.5 K to 5 K in 40 steps, sweeps = 1000000, equilibrate = 1000\n"
    )
    process = subprocess.Popen(
        [icefield_bin, "run", str(script), "--json"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        # The first progress line shows the scan is running.
        assert process.stderr is not None
        first = process.stderr.readline()
        assert "long" in first, first
        time.sleep(1.0)
        process.send_signal(signal.SIGINT)
        stdout, stderr = process.communicate(timeout=60)
    finally:
        if process.poll() is None:
            process.kill()
    assert process.returncode == 130, stderr  # 128 + SIGINT, common practice
    assert "Interrupted" in stderr
    # What was computed before the interrupt is printed: the (partial) scan table.
    records = [json.loads(line) for line in stdout.splitlines()]
    assert len(records) == 1 and records[0]["kind"] == "table", records
    assert len(records[0]["values"]["T"]) < 40


def test_bench_lists_runs_and_refuses_unknown_names(icefield_bin: str):
    listing = subprocess.run([icefield_bin, "bench", "--list"], capture_output=True, text=True, check=True)
    names = listing.stdout.split()
    assert names, "the stdlib has at least one benchmark"

    result = subprocess.run(
        [icefield_bin, "bench", names[0], "--json"], capture_output=True, text=True, timeout=600
    )
    assert result.returncode == 0, result.stderr
    records = [json.loads(line) for line in result.stdout.splitlines()]
    assert records and all(r["bench"] == names[0] for r in records)
    assert all(isinstance(r["value"], (int, float)) and isinstance(r["unit"], str) for r in records)

    unknown = subprocess.run(
        [icefield_bin, "bench", "no_such_bench", "--json"], capture_output=True, text=True
    )
    assert unknown.returncode != 0
    assert "unknown benchmark `no_such_bench`" in unknown.stderr
    assert unknown.stdout == ""
