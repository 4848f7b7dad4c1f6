"""`gammadot watch`: the final tables always equal those of a clean `gammadot run` of the same
folder, whatever happened to the files on the way, and the watcher never reads a file half-way
nor touches an input."""

from __future__ import annotations

import hashlib
import json
import os
import threading
import time
from pathlib import Path

import pytest
from inbox_support import STUDY_TOML, Inputs, WatcherThread, clean_run_outputs, export_bytes, output_files, wait_until

import gammadot.pipeline as pipeline
from gammadot.plugin_manager import build_plugin_manager
from gammadot.registry import build_registry
from gammadot.versioned import VersionedFolder, read_manifest, verify_version

SETTLE = 0.2
FAST = {"settle": SETTLE, "max_wait": 30.0}


@pytest.fixture(scope="module")
def tables_only():
    """Built-ins without the site writer: clean reference runs need only tables."""
    return build_registry(build_plugin_manager(["study_site"], entry_points=False))


def _inbox(tmp_path: Path, study: str = "lot-2611") -> Inputs:
    inputs = Inputs(tmp_path / "inbox")
    inputs.write(f"{study}/study.toml", STUDY_TOML.encode())
    inputs.write(f"{study}/a.csv", export_bytes("A", 2.0, 0.5))
    inputs.write(f"{study}/b.csv", export_bytes("B", 3.0, 0.7))
    return inputs


def _settled(inputs: Inputs, study: str, tables_only, scratch: Path, root: Path | None = None) -> dict:
    """Wait until the output (or published) folder equals a clean run of the study as it is now."""
    reference = clean_run_outputs(inputs.root / study, tables_only, scratch)
    root = root or inputs.root / study / "_gammadot"
    wait_until(lambda: (root / "current").exists() and output_files(root) == reference)
    assert verify_version(root / "current") == []
    return reference


def test_drop_change_delete_rename_each_end_like_a_clean_run(tmp_path: Path, registry, tables_only) -> None:
    inputs = _inbox(tmp_path)
    www = tmp_path / "www"
    study = inputs.root / "lot-2611"
    with WatcherThread(registry, inputs.root, publish_dir=www, **FAST) as watch:
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        inputs.write("lot-2611/c.csv", export_bytes("C", 1.5, 0.4))                   # drop
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        inputs.write("lot-2611/a.csv", export_bytes("A", 2.5, 0.45, points=10))       # change
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        inputs.remove("lot-2611/b.csv")                                               # delete
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        inputs.rename("lot-2611/c.csv", "lot-2611/day2/c-renamed.csv")                # rename
        reference = _settled(inputs, "lot-2611", tables_only, tmp_path)
        _settled(inputs, "lot-2611", tables_only, tmp_path, root=www / "lot-2611")
        wait_until(lambda: watch.count("file_added", file="day2/c-renamed.csv"))
    assert watch.count("file_added", study="lot-2611", file="c.csv") == 1
    assert watch.count("file_changed", study="lot-2611", file="a.csv") == 1
    assert watch.count("file_removed", study="lot-2611", file="b.csv") == 1
    assert watch.count("file_removed", study="lot-2611", file="c.csv") == 1
    assert watch.count("study_processed", study="lot-2611") >= 5
    for line in watch.stream.getvalue().splitlines():  # one JSON object per line
        entry = json.loads(line)
        assert {"time", "level", "event"} <= set(entry) and entry["level"] in ("info", "warning", "error")
    assert output_files(study / "_gammadot") == reference
    listing = (www / "index.html").read_text(encoding="utf-8")
    assert 'href="lot-2611/site/index.html"' in listing
    assert "c-renamed" in (www / "lot-2611" / "site" / "index.html").read_text(encoding="utf-8")
    inputs.assert_untouched()


def test_the_same_file_twice(tmp_path: Path, registry, tables_only) -> None:
    inputs = _inbox(tmp_path)
    out = inputs.root / "lot-2611" / "_gammadot"
    with WatcherThread(registry, inputs.root, **FAST) as watch:
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        version = VersionedFolder(out).current().name
        inputs.write("lot-2611/a.csv", export_bytes("A", 2.0, 0.5))  # the same bytes saved again
        wait_until(lambda: watch.count("study_unchanged", study="lot-2611"))
        assert VersionedFolder(out).current().name == version  # nothing was rewritten
        inputs.write("lot-2611/copy-of-a.csv", export_bytes("A", 2.0, 0.5))  # the same file under a second name
        _settled(inputs, "lot-2611", tables_only, tmp_path)
    runs = [r["file"] for r in read_manifest(out / "current")["inputs"]]
    assert runs == ["a.csv", "b.csv", "copy-of-a.csv"]
    inputs.assert_untouched()


def _record_reads(monkeypatch, path: Path) -> list[str]:
    """SHA-256 of the bytes the watcher imports from ``path``, one entry per import (the
    test's own reference runs, in the main thread, are not counted)."""
    seen: list[str] = []
    real = pipeline.import_file

    def recording(p, rel, registry, config):
        if Path(p) == path and threading.current_thread() is not threading.main_thread():
            seen.append(hashlib.sha256(Path(p).read_bytes()).hexdigest())
        return real(p, rel, registry, config)

    monkeypatch.setattr(pipeline, "import_file", recording)
    return seen


def test_a_growing_file_is_read_only_when_complete(tmp_path: Path, registry, tables_only, monkeypatch) -> None:
    inputs = _inbox(tmp_path)
    path = inputs.root / "lot-2611" / "slow.csv"
    reads = _record_reads(monkeypatch, path)
    full = export_bytes("S", 4.0, 0.3, points=12)
    lines = full.splitlines(keepends=True)
    with WatcherThread(registry, inputs.root, **FAST) as watch:
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        inputs.write("lot-2611/slow.csv", b"".join(lines[:3]))
        for line in lines[3:]:  # an instrument writing a row every 0.1 s (less than the settle time)
            time.sleep(SETTLE / 2)
            inputs.append("lot-2611/slow.csv", line)
        wait_until(lambda: watch.count("file_changed", file="slow.csv") >= 3)
        _settled(inputs, "lot-2611", tables_only, tmp_path)
    assert reads == [hashlib.sha256(full).hexdigest()]  # read once, complete
    inputs.assert_untouched()


def test_a_zero_byte_file_waits_until_it_is_filled(tmp_path: Path, registry, tables_only) -> None:
    inputs = _inbox(tmp_path)
    out = inputs.root / "lot-2611" / "_gammadot"
    with WatcherThread(registry, inputs.root, **FAST) as watch:
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        inputs.write("lot-2611/later.csv", b"")
        wait_until(lambda: watch.count("file_waiting", file="later.csv"))
        assert "later.csv" not in (out / "rejected.json").read_text(encoding="utf-8")
        inputs.write("lot-2611/later.csv", export_bytes("L", 2.2, 0.6))
        _settled(inputs, "lot-2611", tables_only, tmp_path)
    assert "later.csv" in [i["file"] for i in read_manifest(out / "current")["inputs"]]
    inputs.assert_untouched()


def test_an_unreadable_file_is_listed_and_picked_up_when_fixed(tmp_path: Path, registry, tables_only,
                                                             monkeypatch) -> None:
    inputs = _inbox(tmp_path)
    out = inputs.root / "lot-2611" / "_gammadot"
    real_read = Path.read_bytes
    locked = {"on": True}

    def read(self: Path) -> bytes:
        if self.name == "locked.csv" and locked["on"]:  # root ignores chmod, so the error is injected
            raise PermissionError(13, "Permission denied", str(self))
        return real_read(self)

    monkeypatch.setattr(Path, "read_bytes", read)
    with WatcherThread(registry, inputs.root, **FAST) as watch:
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        path = inputs.write("lot-2611/locked.csv", export_bytes("K", 1.1, 0.9))
        os.chmod(path, 0o000)

        def listed() -> bool:
            rejected = json.loads((out / "rejected.json").read_text(encoding="utf-8"))["rejected"]
            return any(r["file"] == "locked.csv" and "permission denied" in r["reason"] for r in rejected)

        wait_until(listed)
        wait_until(lambda: watch.count("file_rejected", file="locked.csv") == 1)
        locked["on"] = False
        os.chmod(path, 0o644)  # the fix: a change of mode is a change of the file's state
        _settled(inputs, "lot-2611", tables_only, tmp_path)
    assert "locked.csv" not in (out / "rejected.json").read_text(encoding="utf-8")
    inputs.assert_untouched()


def test_two_hundred_files_in_one_second(tmp_path: Path, registry, tables_only) -> None:
    inputs = _inbox(tmp_path)
    with WatcherThread(registry, inputs.root, **FAST) as watch:
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        for i in range(200):
            inputs.write(f"lot-2611/burst/run-{i:03d}.csv", export_bytes(f"R{i}", 1.0 + i / 100, 0.5, points=5))
        reference = clean_run_outputs(inputs.root / "lot-2611", tables_only, tmp_path)
        out = inputs.root / "lot-2611" / "_gammadot"
        wait_until(lambda: output_files(out) == reference, timeout=60)
    assert read_manifest(out / "current")["counts"]["runs"] == 202
    assert watch.count("file_rejected") == 0
    inputs.assert_untouched()


def test_polling_mode_for_shares_without_events(tmp_path: Path, registry, tables_only) -> None:
    inputs = _inbox(tmp_path)
    with WatcherThread(registry, inputs.root, poll=0.1, **FAST) as watch:
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        inputs.write("lot-2611/c.csv", export_bytes("C", 1.5, 0.4))
        inputs.remove("lot-2611/a.csv")
        _settled(inputs, "lot-2611", tables_only, tmp_path)
    assert watch.events("watch_started")[0]["mode"] == "polling"
    inputs.assert_untouched()


def test_temporary_and_lock_files_are_left_alone(tmp_path: Path, registry, tables_only) -> None:
    inputs = _inbox(tmp_path)
    out = inputs.root / "lot-2611" / "_gammadot"
    with WatcherThread(registry, inputs.root, **FAST):
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        inputs.write("lot-2611/~$a.csv", b"owner lock of a spreadsheet program")
        inputs.write("lot-2611/.~lock.a.csv#", b"lock")
        inputs.write("lot-2611/copying.csv.part", export_bytes("P", 2.0, 0.5)[:40])
        inputs.write("lot-2611/new.csv.filepart", export_bytes("F", 2.0, 0.5))
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        inputs.rename("lot-2611/new.csv.filepart", "lot-2611/new.csv")  # the copy program's last step
        _settled(inputs, "lot-2611", tables_only, tmp_path)
    assert [i["file"] for i in read_manifest(out / "current")["inputs"]] == ["a.csv", "b.csv", "new.csv"]
    inputs.assert_untouched()


def test_only_folders_with_study_toml_are_studies(tmp_path: Path, registry, tables_only) -> None:
    inputs = _inbox(tmp_path)
    inputs.write("stray.csv", export_bytes("X", 1.0, 1.0))
    inputs.write("unmarked/u.csv", export_bytes("U", 1.0, 1.0))
    with WatcherThread(registry, inputs.root, **FAST) as watch:
        _settled(inputs, "lot-2611", tables_only, tmp_path)
        assert {e["file"] for e in watch.events("not_in_a_study")} == {"stray.csv", "unmarked"}
        assert not (inputs.root / "unmarked" / "_gammadot").exists()
        inputs.write("unmarked/study.toml", b"")  # now it is a study
        _settled(inputs, "unmarked", tables_only, tmp_path)
    assert not (inputs.root / "_gammadot").exists()
    inputs.assert_untouched()


def test_a_broken_study_toml_keeps_the_last_good_output(tmp_path: Path, registry, tables_only) -> None:
    inputs = _inbox(tmp_path)
    out = inputs.root / "lot-2611" / "_gammadot"
    with WatcherThread(registry, inputs.root, **FAST) as watch:
        good = _settled(inputs, "lot-2611", tables_only, tmp_path)
        version = VersionedFolder(out).current().name
        inputs.write("lot-2611/study.toml", b"[study]\ntitel = 'typo'\n")
        wait_until(lambda: watch.count("study_error", study="lot-2611", file="study.toml"))
        assert "titel" in watch.events("study_error")[0]["message"]
        assert VersionedFolder(out).current().name == version and output_files(out) == good
        inputs.write("lot-2611/study.toml", STUDY_TOML.replace("Test lotion", "Fixed title").encode())
        _settled(inputs, "lot-2611", tables_only, tmp_path)
    inputs.assert_untouched()
