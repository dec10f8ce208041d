"""Times scipy on the data of benches/signal.rs and prints the speed ratio.

Usage (from the repository root):  python benches/signal-vs-scipy.py
Requirements: tests/fixtures/signal/requirements.txt (numpy, scipy).

Runs `cargo bench --bench signal -- --write FILE`, reads the same raw data
(16 sites x 10 min x 2 kHz), and times on one thread:
  1. scipy.signal.sosfiltfilt of the same band-pass + notch cascade
     (butter(4, [20, 450], 'bandpass') + iirnotch at 50/100/150 Hz, Q = 30);
  2. the same conditioning chain in numpy/scipy: that filter, full-wave
     rectification, sosfiltfilt of butter(2, 5 Hz), linear interpolation onto
     the 100 Hz grid (no quality checks, which condition() also runs).
"""
import os
import re
import subprocess
import sys
import tempfile
import time

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402
from scipy import signal  # noqa: E402

FS, SITES = 2000.0, 16


def best_of(runs, f):
    best = float("inf")
    for _ in range(runs):
        t = time.perf_counter()
        f()
        best = min(best, time.perf_counter() - t)
    return best


def main():
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "emg.f64")
        out = subprocess.run(
            ["cargo", "bench", "--bench", "signal", "--", "--write", path],
            check=True, capture_output=True, text=True,
        ).stdout
        print(out, end="")
        x = np.fromfile(path, dtype="<f8").reshape(SITES, -1)

    sos = signal.butter(4, [20.0, 450.0], btype="bandpass", fs=FS, output="sos")
    notches = [np.concatenate(signal.iirnotch(f0, 30.0, fs=FS)) for f0 in (50.0, 100.0, 150.0)]
    cascade = np.vstack([sos] + notches)
    lp = signal.butter(2, 5.0, btype="lowpass", fs=FS, output="sos")
    t = np.arange(x.shape[1]) / FS
    grid = np.arange(int(np.floor((t[-1] - t[0]) * 100.0 + 1e-6)) + 1) / 100.0 + t[0]

    def chain():
        y = signal.sosfiltfilt(cascade, x, axis=-1)
        e = signal.sosfiltfilt(lp, np.abs(y), axis=-1)
        return np.stack([np.interp(grid, t, row) for row in e])

    scipy_filt = best_of(5, lambda: signal.sosfiltfilt(cascade, x, axis=-1))
    scipy_chain = best_of(5, chain)
    ours_filt = float(re.search(r"sosfiltfilt cascade .*lockstep, 1 thread: ([0-9.]+) s", out).group(1))
    ours_cond = float(re.search(r"condition, 1 thread: ([0-9.]+) s", out).group(1))
    print(f"scipy sosfiltfilt cascade, 1 thread: {scipy_filt:.3f} s")
    print(f"scipy conditioning chain, 1 thread: {scipy_chain:.3f} s")
    print(f"ratio sosfiltfilt (scipy / ours): {scipy_filt / ours_filt:.2f}")
    print(f"ratio chain (scipy chain / our condition incl. quality): {scipy_chain / ours_cond:.2f}")


if __name__ == "__main__":
    sys.exit(main())
