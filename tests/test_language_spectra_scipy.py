"""The `spectrum` and `fit` statements of the language against scipy, on a simulated series.

A script runs physical-time kinetics, exports the magnetisation series and the Welch
spectrum the `spectrum` statement computed (CSV, full float precision), and scipy
recomputes the spectrum from the exported series. Reference library: scipy.signal.welch
(SciPy, pinned in requirements.txt; Virtanen et al., Nature Methods 17, 261 (2020)).
"""

from __future__ import annotations

import subprocess
from pathlib import Path

import numpy as np
from scipy.signal import welch

SCRIPT = """
lattice pyrochlore L = 2
couplings nearest J_eff = 1.1 K
seed 7
dynamics single_flip, acceptance = metropolis, attempt_time = 1 µs
noise = evolve for 8 ms at 1.5 K, sample_every = 2 µs
export noise to "noise.csv"
spec = spectrum noise.M, segment = 512, overlap = 0.5, window = hann, detrend = constant
export spec to "spec.csv"
"""


def read_csv(path: Path) -> dict[str, np.ndarray]:
    """Columns by name (the unit in brackets dropped); `#` lines are provenance."""
    lines = [l for l in path.read_text().splitlines() if l.strip() and not l.startswith("#")]
    names = [h.split("[")[0].strip() for h in lines[0].split(",")]
    rows = np.array([[float(x) for x in l.split(",")] for l in lines[1:]])
    return {name: rows[:, i] for i, name in enumerate(names)}


def test_spectrum_statement_equals_scipy_welch(icefield_bin: str, tmp_path: Path):
    script = tmp_path / "noise.ifld"
    script.write_text(SCRIPT)
    done = subprocess.run([icefield_bin, "run", str(script)], capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr
    series = read_csv(tmp_path / "noise.csv")
    spec = read_csv(tmp_path / "spec.csv")
    t, m = series["t"], series["M"]
    dt = t[1] - t[0]
    assert np.allclose(np.diff(t), dt, rtol=1e-9), "uniform grid"
    assert m.std() > 0, "the series fluctuates"
    f, psd = welch(m, fs=1.0 / dt, window="hann", nperseg=512, noverlap=256, detrend="constant", scaling="density")
    assert np.allclose(spec["f"], f, rtol=1e-12, atol=0.0)
    np.testing.assert_allclose(spec["psd"], psd, rtol=1e-9, atol=1e-12 * psd.max())
