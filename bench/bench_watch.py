"""Benchmark: the watched inbox on a study of 200 runs.

Run: `python bench/bench_watch.py [--settle SECONDS] [--samples N]` (from the repository, with
gammadot installed). Prints

1. full versus incremental `gammadot run` time for the study (100 exports of two runs each,
   25 points per run, seeded noise; the generator of bench_study.py): the command line (process
   start-up included) and in-process (the pipeline alone): full = empty cache, incremental = one
   export changed, the other 99 from the cache;
2. the latency from an export becoming stable to the published site showing it, with
   `gammadot watch INBOX --publish DIR`: one export of the study is rewritten (new sample name)
   N times; the clock starts when the file is closed and stops when DIR/<study>/site/index.html
   names the new sample. "From stable" subtracts the settle interval (the time the watcher must
   see a file unchanged before it reads it). Median and 95th percentile, native events and
   polling.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_study import gammadot_command, write_study  # noqa: E402

PROBE = "bench-099.csv"


def probe_export(sample: str) -> str:
    """An export of two runs, like the others, with a recognisable sample name."""
    import numpy as np

    rate = np.geomspace(0.1, 1000.0, 25)
    blocks = []
    for r in range(2):
        eta = 5.0 * (1 + (rate / 2.0) ** 2) ** -0.3
        rows = "\n".join(f"{g:.6g},{e * 1e3:.6g}" for g, e in zip(rate, eta))
        blocks.append(f"sample: {sample}\ntemperature: {20 + 20 * r} °C\nShear rate [1/s],Viscosity [mPa·s]\n{rows}\n")
    return "\n".join(blocks)


def timed(command: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run(command, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - start


def run_times(study: Path) -> None:
    out = study / "_gammadot"
    shutil.rmtree(out, ignore_errors=True)
    full_cli = timed([*gammadot_command(), "run", str(study), "--quiet"])
    (study / PROBE).write_text(probe_export("incremental-cli"), encoding="utf-8")
    incremental_cli = timed([*gammadot_command(), "run", str(study), "--quiet"])

    from gammadot.cache import open_cache
    from gammadot.fingerprint import code_fingerprint
    from gammadot.pipeline import process_study
    from gammadot.plugin_manager import build_plugin_manager
    from gammadot.registry import build_registry
    from gammadot.study_output import write_study_version

    registry = build_registry(build_plugin_manager())
    code = code_fingerprint(registry)

    def one_pass(use_cache: bool) -> tuple[float, float]:
        cache = open_cache(out, registry, code=code)[0] if use_cache else None
        start = time.perf_counter()
        result = process_study(study, registry, out_dir=out, cache=cache)
        middle = time.perf_counter()
        write_study_version(result, out, code=code)
        return middle - start, time.perf_counter() - middle

    shutil.rmtree(out / ".cache", ignore_errors=True)
    full = one_pass(use_cache=True)
    (study / PROBE).write_text(probe_export("incremental-in-process"), encoding="utf-8")
    incremental = one_pass(use_cache=True)
    print("200-run study, full vs incremental (one export of 100 changed):")
    print(f"  gammadot run (process start-up included): full {full_cli:.2f} s, incremental {incremental_cli:.2f} s "
          f"({full_cli / incremental_cli:.1f}x)")
    print(f"  in-process: full {sum(full):.2f} s (processing {full[0]:.2f} s + writing {full[1]:.2f} s), "
          f"incremental {sum(incremental):.2f} s (processing {incremental[0]:.2f} s + writing "
          f"{incremental[1]:.2f} s) ({sum(full) / sum(incremental):.1f}x)")


def latencies(inbox: Path, www: Path, settle: float, samples: int, poll: float | None) -> list[float]:
    study = inbox / "study"
    page = www / "study" / "site" / "index.html"
    command = [*gammadot_command(), "watch", str(inbox), "--publish", str(www), "--settle", str(settle)]
    if poll:
        command += ["--poll", str(poll)]
    log = open(inbox.parent / f"watch-{'poll' if poll else 'events'}.log", "wb")
    watcher = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=log)
    try:
        wait_for(lambda: page.exists(), 300)
        time.sleep(settle + 1.0)  # let the start-up pass finish
        found = []
        for i in range(samples):
            sample = f"latency-probe-{'p' if poll else 'e'}{i:03d}"
            with open(study / PROBE, "w", encoding="utf-8") as handle:
                handle.write(probe_export(sample))
            written = time.perf_counter()
            wait_for(lambda: sample in page.read_text(encoding="utf-8", errors="replace"), 120, 0.005)
            found.append(time.perf_counter() - written)
            time.sleep(0.2)
        return found
    finally:
        watcher.terminate()
        watcher.wait(timeout=60)
        log.close()


def wait_for(predicate, timeout: float, interval: float = 0.05) -> None:
    deadline = time.monotonic() + timeout
    while True:
        try:
            if predicate():
                return
        except OSError:
            pass
        if time.monotonic() > deadline:
            raise TimeoutError("the published site did not change in time")
        time.sleep(interval)


def describe(label: str, values: list[float], settle: float) -> None:
    values = sorted(values)
    p95 = values[min(len(values) - 1, round(0.95 * (len(values) - 1)))]
    median = statistics.median(values)
    print(f"  {label} ({len(values)} samples): from file closed median {median:.2f} s, p95 {p95:.2f} s; "
          f"from stable (minus settle {settle:g} s) median {median - settle:.2f} s, p95 {p95 - settle:.2f} s")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--settle", type=float, default=0.5)
    parser.add_argument("--samples", type=int, default=20)
    parser.add_argument("--poll", type=float, default=1.0, help="interval of the polling series")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        inbox = Path(tmp) / "inbox"
        study = inbox / "study"
        study.mkdir(parents=True)
        write_study(study)
        (study / "study.toml").write_text('[study]\ntitle = "Watch benchmark"\n', encoding="utf-8")
        print(f"machine: {os.cpu_count()} CPUs, Python {sys.version.split()[0]}")
        run_times(study)
        print(f"latency, export stable -> published site shows it (settle {args.settle:g} s):")
        events = latencies(inbox, Path(tmp) / "www", args.settle, args.samples, poll=None)
        describe("native events", events, args.settle)
        polled = latencies(inbox, Path(tmp) / "www", args.settle, max(5, args.samples // 2), poll=args.poll)
        describe(f"polling every {args.poll:g} s", polled, args.settle)


if __name__ == "__main__":
    main()
