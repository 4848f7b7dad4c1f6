"""Helpers for the cache, publish and watch tests: small studies, a record of the inputs a test
wrote (to prove gammadot never changed them), reference outputs from a clean run, and an
in-process watcher running in a thread."""

from __future__ import annotations

import hashlib
import io
import json
import os
import threading
import time
from pathlib import Path
from typing import Any, Callable

import numpy as np

from gammadot.pipeline import DEFAULT_OUT, process_study, write_outputs

STUDY_TOML = '[study]\ntitle = "Test lotion"\n\n[fit]\nmodels = ["newtonian", "power_law"]\n'


def export_bytes(sample: str, k: float = 3.0, n: float = 0.6, points: int = 8) -> bytes:
    """A small flow curve τ = K·γ̇ⁿ as a delimited-text export (exact values, no noise)."""
    rate = [float(g) for g in np.geomspace(0.5, 50.0, points)]
    rows = "\n".join(f"{g!r},{k * g ** n!r}" for g in rate)
    return f"sample: {sample}\nShear rate [1/s],Shear stress [Pa]\n{rows}\n".encode("utf-8")


def sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


class Inputs:
    """Writes input files and remembers what each must contain (``None``: must be absent)."""

    def __init__(self, root: Path) -> None:
        self.root = root
        self.expected: dict[str, str] = {}

    def write(self, rel: str, data: bytes) -> Path:
        path = self.root / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(data)
        self.expected[rel] = sha256(data)
        return path

    def append(self, rel: str, data: bytes) -> None:
        path = self.root / rel
        with open(path, "ab") as handle:
            handle.write(data)
        self.expected[rel] = sha256(path.read_bytes())

    def remove(self, rel: str) -> None:
        (self.root / rel).unlink()
        del self.expected[rel]

    def rename(self, old: str, new: str) -> None:
        (self.root / new).parent.mkdir(parents=True, exist_ok=True)
        os.rename(self.root / old, self.root / new)
        self.expected[new] = self.expected.pop(old)

    def actual(self) -> dict[str, str]:
        """Every file below the root except gammadot's (outputs and the watcher's lock)."""
        found = {}
        for path in self.root.rglob("*"):
            rel = path.relative_to(self.root)
            if rel.parts[0] == ".gammadot" or DEFAULT_OUT in rel.parts or not path.is_file():
                continue
            found[rel.as_posix()] = sha256(path.read_bytes())
        return found

    def assert_untouched(self) -> None:
        """Every input is there with the bytes the test wrote; nothing was added or removed."""
        assert self.actual() == self.expected


def output_files(version_root: Path) -> dict[str, bytes]:
    """The tables and the rejected list of an output folder (through its stable links)."""
    files = {f"tables/{p.name}": p.read_bytes() for p in sorted((version_root / "tables").glob("*.parquet"))}
    rejected = version_root / "rejected.json"
    if rejected.exists():
        files["rejected.json"] = rejected.read_bytes()
    return files


def clean_run_outputs(study: Path, registry: Any, scratch: Path) -> dict[str, bytes]:
    """Tables and rejected list of a clean, uncached pass over ``study`` (the reference)."""
    out = scratch / f"reference-{time.monotonic_ns()}"
    write_outputs(process_study(study, registry, out_dir=out), out)
    return output_files(out)


def wait_until(predicate: Callable[[], Any], timeout: float = 20.0, interval: float = 0.02) -> Any:
    """Poll ``predicate`` until it returns something true; fail after ``timeout`` seconds."""
    deadline = time.monotonic() + timeout
    while True:
        value = predicate()
        if value:
            return value
        if time.monotonic() > deadline:
            raise AssertionError(f"condition not met within {timeout} s")
        time.sleep(interval)


class WatcherThread:
    """An :class:`~gammadot.watch.InboxWatcher` in a thread, with its JSON-lines log in memory."""

    def __init__(self, registry: Any, inbox: Path, **settings: Any) -> None:
        from gammadot.eventlog import EventLog
        from gammadot.units import registry as unit_registry
        from gammadot.watch import InboxWatcher, WatchSettings

        # The unit registry is built lazily and not thread-safe; the test's own reference runs
        # work in parallel with the watcher's thread, so build it before the thread starts.
        unit_registry()

        self.stream = io.StringIO()
        self.watcher = InboxWatcher(WatchSettings(inbox=inbox, **settings), registry, EventLog(self.stream))
        self.thread = threading.Thread(target=self._run, daemon=True)
        self.error: BaseException | None = None

    def _run(self) -> None:
        try:
            self.watcher.run()
        except BaseException as exc:  # reported by stop()
            self.error = exc

    def __enter__(self) -> "WatcherThread":
        self.thread.start()
        wait_until(lambda: self.events("watch_started") or self.error, timeout=10)
        return self

    def __exit__(self, *exc: object) -> None:
        self.stop()
        if exc[0] is not None:  # pytest shows captured output of a failed test
            print(self.stream.getvalue())

    def stop(self) -> None:
        self.watcher.request_stop()
        self.thread.join(timeout=20)
        assert not self.thread.is_alive(), "the watcher did not stop"
        if self.error is not None:
            raise self.error

    def lines(self) -> list[dict[str, Any]]:
        return [json.loads(line) for line in self.stream.getvalue().splitlines() if line.strip()]

    def events(self, name: str, **match: Any) -> list[dict[str, Any]]:
        return [e for e in self.lines() if e["event"] == name and all(e.get(k) == v for k, v in match.items())]

    def count(self, name: str, **match: Any) -> int:
        return len(self.events(name, **match))
