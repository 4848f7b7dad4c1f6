"""The watcher as a service: one per inbox, a crash (SIGKILL) at any moment is finished by the
next start, SIGTERM and SIGINT stop it cleanly, and every event is one JSON line."""

from __future__ import annotations

import json
import os
import random
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

from click.testing import CliRunner
from inbox_support import STUDY_TOML, Inputs, clean_run_outputs, export_bytes, output_files, wait_until

from gammadot.cli import main
from gammadot.plugin_manager import build_plugin_manager
from gammadot.registry import build_registry
from gammadot.versioned import verify_version

ENV = {"GAMMADOT_NO_ENTRY_POINTS": "1"}


def _inbox(tmp_path: Path) -> Inputs:
    inputs = Inputs(tmp_path / "inbox")
    inputs.write("lot/study.toml", STUDY_TOML.encode())
    for i in range(3):
        inputs.write(f"lot/r{i}.csv", export_bytes(f"R{i}", 1.0 + i, 0.6))
    return inputs


class _Watcher:
    """`gammadot watch` in a subprocess, its JSON-lines log in a file."""

    def __init__(self, inbox: Path, log: Path, *extra: str) -> None:
        self.log = log
        self.handle = open(log, "ab")
        self.process = subprocess.Popen(
            [sys.executable, "-m", "gammadot.cli", "watch", str(inbox), "--settle", "0.2", *extra],
            env={**os.environ, **ENV}, stdout=subprocess.DEVNULL, stderr=self.handle)

    def events(self) -> list[dict]:
        lines = self.log.read_text(encoding="utf-8").splitlines()
        return [json.loads(line) for line in lines if line.startswith("{")]

    def wait_started(self) -> None:
        wait_until(lambda: any(e["event"] == "watch_started" and e["pid"] == self.process.pid
                               for e in self.events()), timeout=60)

    def end(self, sig: int) -> int:
        self.process.send_signal(sig)
        code = self.process.wait(timeout=30)
        self.handle.close()
        return code


def test_one_watcher_per_inbox_and_a_killed_one_is_finished_by_the_next(tmp_path: Path) -> None:
    registry = build_registry(build_plugin_manager(["study_site"], entry_points=False))  # references: tables
    inputs = _inbox(tmp_path)
    out = inputs.root / "lot" / "_gammadot"
    log = tmp_path / "watch.log"
    first = _Watcher(inputs.root, log)
    first.wait_started()
    wait_until(lambda: (out / "current").exists() and output_files(out)
               == clean_run_outputs(inputs.root / "lot", registry, tmp_path), timeout=60)
    second = subprocess.run([sys.executable, "-m", "gammadot.cli", "watch", str(inputs.root)],
                            env={**os.environ, **ENV}, capture_output=True, text=True, timeout=60)
    assert second.returncode == 4
    assert f"already watched by process {first.process.pid}" in second.stderr
    for i in range(3, 15):  # a burst, then a kill at a random moment while it is being processed
        inputs.write(f"lot/more/r{i}.csv", export_bytes(f"R{i}", 1.0 + i / 10, 0.5))
    time.sleep(random.Random(11).uniform(0.2, 1.0))
    assert first.end(signal.SIGKILL) == -signal.SIGKILL
    assert verify_version(out / "current") == []  # the last complete version, whatever the moment
    restarted = _Watcher(inputs.root, tmp_path / "watch-2.log")  # the lock of the dead one is no obstacle
    restarted.wait_started()
    reference = clean_run_outputs(inputs.root / "lot", registry, tmp_path)
    wait_until(lambda: output_files(out) == reference, timeout=60)
    assert not [p for p in out.iterdir() if p.name.startswith(".staging-")]
    assert restarted.end(signal.SIGTERM) == 0
    events = restarted.events()
    assert events[-1]["event"] == "watch_stopped"
    assert any(e["event"] == "stop_requested" and e["signal"] == "SIGTERM" for e in events)
    inputs.assert_untouched()


def test_ctrl_c_stops_the_watcher_cleanly(tmp_path: Path) -> None:
    inputs = _inbox(tmp_path)

    def interrupt_when_started() -> None:
        wait_until(lambda: (inputs.root / ".gammadot" / "watch.json").exists(), timeout=30)
        time.sleep(0.3)
        os.kill(os.getpid(), signal.SIGINT)

    timer = threading.Thread(target=interrupt_when_started, daemon=True)
    timer.start()
    result = CliRunner().invoke(main, ["watch", str(inputs.root), "--settle", "0.1"], env=ENV)
    timer.join(timeout=30)
    assert result.exit_code == 0, result.output
    events = [json.loads(line) for line in result.output.splitlines() if line.startswith("{")]
    assert any(e["event"] == "stop_requested" and e["signal"] == "SIGINT" for e in events)
    assert events[-1]["event"] == "watch_stopped"
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler  # handler given back
    inputs.assert_untouched()
