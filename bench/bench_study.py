"""Benchmark: a 200-run study end to end, and `gammadot --help` start-up time.

Run: `python bench/bench_study.py` (from the repository, with gammadot installed).
Prints wall time and peak memory of `gammadot run` on a generated study of 200 runs
(100 files of two runs each, 25 points per run, shear-thinning data with 1 % noise), and
the best-of-5 wall time of `gammadot --help` (target: under 0.5 s).
"""

from __future__ import annotations

import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

N_FILES, RUNS_PER_FILE, POINTS = 100, 2, 25


def write_study(folder: Path) -> None:
    """100 exports, two runs each, power-law-like lotion curves with seeded noise."""
    rng = np.random.default_rng(2026)
    rate = np.geomspace(0.1, 1000.0, POINTS)
    for f in range(N_FILES):
        blocks = []
        for r in range(RUNS_PER_FILE):
            eta = 5.0 * (1 + (rate / 2.0) ** 2) ** -0.3 * (1 + 0.01 * rng.standard_normal(POINTS))
            rows = "\n".join(f"{g:.6g},{e * 1e3:.6g}" for g, e in zip(rate, eta))
            blocks.append(f"sample: bench-{f:03d}\ntemperature: {20 + 20 * r} °C\n"
                          f"Shear rate [1/s],Viscosity [mPa·s]\n{rows}\n")
        (folder / f"bench-{f:03d}.csv").write_text("\n".join(blocks), encoding="utf-8")


def gammadot_command() -> list[str]:
    exe = shutil.which("gammadot")
    return [exe] if exe else [sys.executable, "-m", "gammadot.cli"]


def time_run(study: Path) -> tuple[float, float]:
    """Wall seconds and peak resident memory (MiB) of `gammadot run STUDY --quiet`."""
    start = time.perf_counter()
    subprocess.run([*gammadot_command(), "run", str(study), "--quiet"], check=True, stdout=subprocess.DEVNULL)
    wall = time.perf_counter() - start
    peak_kib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    return wall, peak_kib / 1024


def time_help(repeats: int = 5) -> float:
    """Best-of-N wall seconds of `gammadot --help`."""
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        subprocess.run([*gammadot_command(), "--help"], check=True, stdout=subprocess.DEVNULL)
        best = min(best, time.perf_counter() - start)
    return best


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        study = Path(tmp) / "study"
        study.mkdir()
        write_study(study)
        wall, peak = time_run(study)
        print(f"200-run study end to end: {wall:.2f} s, peak memory {peak:.0f} MiB "
              f"({N_FILES * RUNS_PER_FILE / wall:.1f} runs/s)")
    print(f"gammadot --help: {time_help() * 1000:.0f} ms (best of 5; target < 500 ms)")


if __name__ == "__main__":
    main()
