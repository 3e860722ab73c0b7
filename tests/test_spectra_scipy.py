"""Welch PSD and stretched-exponential fit of icefield-stdlib against scipy.

Reference library: scipy.signal.welch and scipy.optimize.curve_fit (SciPy 1.17,
pinned in requirements.txt; Virtanen et al., Nature Methods 17, 261 (2020)).
The Rust side is the `welch_json` example of the stdlib crate, driven through
JSON on stdin/stdout. Needs cargo on PATH; honours CARGO_TARGET_DIR.
"""

from __future__ import annotations

import json
import subprocess

import numpy as np
import pytest
from scipy.optimize import curve_fit
from scipy.signal import welch

from helpers import REPO

COMMAND = ["cargo", "run", "--release", "-q", "-p", "icefield-stdlib", "--example", "welch_json"]


def rust(request: dict) -> dict:
    done = subprocess.run(
        COMMAND,
        input=json.dumps(request),
        capture_output=True,
        text=True,
        cwd=REPO,
        timeout=900,
    )
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout)


def ar1(rng: np.random.Generator, n: int, phi: float) -> np.ndarray:
    eps = rng.standard_normal(n)
    x = np.empty(n)
    x[0] = eps[0] / np.sqrt(1 - phi * phi)
    for k in range(1, n):
        x[k] = phi * x[k - 1] + eps[k]
    return x


RNG = np.random.default_rng(20261201)
SERIES = {
    "white": RNG.standard_normal(5000) * 2.5 + 1.0,
    "ar1": ar1(RNG, 6001, 0.95) + np.linspace(0.0, 3.0, 6001),
}
SETTINGS = [
    # (fs, nperseg, noverlap, window, detrend)
    (1.0, 256, 128, "hann", "constant"),
    (50.0, 512, 0, "boxcar", "none"),
    (3.5, 300, 100, "hamming", "linear"),
    (2.0, 257, 200, "hann", "linear"),
    (1e3, 1024, 512, "boxcar", "constant"),
]


@pytest.mark.parametrize("series", sorted(SERIES))
@pytest.mark.parametrize("fs,nperseg,noverlap,window,detrend", SETTINGS)
def test_welch_matches_scipy(series, fs, nperseg, noverlap, window, detrend):
    data = SERIES[series]
    ours = rust(
        {
            "data": data.tolist(),
            "fs": fs,
            "nperseg": nperseg,
            "noverlap": noverlap,
            "window": window,
            "detrend": detrend,
        }
    )
    freqs, psd = welch(
        data,
        fs=fs,
        window=window,
        nperseg=nperseg,
        noverlap=noverlap,
        detrend=False if detrend == "none" else detrend,
    )
    np.testing.assert_allclose(ours["freqs"], freqs, rtol=1e-12, atol=0)
    # rtol 1e-9 per bin; the absolute floor (1e-12 of the peak) only matters
    # for bins that detrending empties to rounding noise (DC with a
    # rectangular window), where any relative comparison is meaningless.
    np.testing.assert_allclose(ours["psd"], psd, rtol=1e-9, atol=1e-12 * psd.max())
    assert len(ours["psd"]) == nperseg // 2 + 1


def stretched(t, a, tau, beta):
    return a * np.exp(-((t / tau) ** beta))


def test_stretched_exponential_fit_matches_curve_fit():
    rng = np.random.default_rng(7)
    t = np.linspace(0.0, 6.0, 120)
    y = stretched(t, 1.4, 0.9, 0.55) + 0.01 * rng.standard_normal(t.size)
    ours = rust({"fit": "stretched_exponential", "t": t.tolist(), "y": y.tolist()})
    assert ours["converged"]
    popt, pcov = curve_fit(stretched, t, y, p0=[1.0, 1.0, 1.0], bounds=(1e-9, np.inf))
    # Both minimise the same χ²; the optima agree to the solvers' tolerances
    # and the errors (JᵀJ)⁻¹·χ²/dof (curve_fit's absolute_sigma=False) to the
    # Jacobian's accuracy.
    np.testing.assert_allclose(ours["parameters"], popt, rtol=1e-6)
    np.testing.assert_allclose(ours["standard_errors"], np.sqrt(np.diag(pcov)), rtol=1e-3)
