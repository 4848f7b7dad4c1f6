"""Versioned outputs and publishing: a reader always finds one complete version, a crash at any
moment (SIGKILL) leaves the last complete version in place, and the next start finishes."""

from __future__ import annotations

import json
import os
import random
import signal
import subprocess
import sys
import time
from dataclasses import replace
from pathlib import Path
from typing import Callable

import pytest
from click.testing import CliRunner
from inbox_support import STUDY_TOML, Inputs, clean_run_outputs, export_bytes, output_files

from gammadot.cache import open_cache
from gammadot.cli import main
from gammadot.fingerprint import code_fingerprint
from gammadot.pipeline import process_study
from gammadot.publish import PublishError, publish_study
from gammadot.registry import Provided
from gammadot.study_output import write_study_version
from gammadot.versioned import KEEP_VERSIONS, VersionedFolder, read_manifest, verify_version

ENV = {"GAMMADOT_NO_ENTRY_POINTS": "1"}


def _study(root: Path) -> Inputs:
    inputs = Inputs(root)
    inputs.write("study.toml", STUDY_TOML.encode())
    inputs.write("a.csv", export_bytes("A", 2.0, 0.5))
    inputs.write("b.csv", export_bytes("B", 3.0, 0.7))
    inputs.write("broken.csv", b"Shear rate [1/s],Shear stress [Pa]\n1,2\n2,oops\n")
    return inputs


def _run(study: Path, registry, out: Path):
    """One `gammadot run` pass in this process (cache on)."""
    code = code_fingerprint(registry)
    cache, _ = open_cache(out, registry, code=code)
    result = process_study(study, registry, out_dir=out, cache=cache)
    return write_study_version(result, out, code=code)


def _leftovers(root: Path) -> list[str]:
    return sorted(p.name for p in root.iterdir() if p.name.startswith((".staging-", ".link-", ".legacy-")))


def test_a_run_is_one_complete_version_behind_stable_links(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path / "study")
    out = tmp_path / "out"
    committed = _run(inputs.root, registry, out)
    assert os.readlink(out / "current") == f"versions/{committed.version_id}"
    for entry in ("tables", "site", "rejected.json"):
        assert os.readlink(out / entry) == f"current/{entry}"
    assert verify_version(out / "current") == []
    manifest = read_manifest(out / "current")
    assert {i["file"] for i in manifest["inputs"]} == {"a.csv", "b.csv", "broken.csv"}
    assert manifest["counts"] == {"files": 3, "runs": 2, "rejected": 1}
    rejected = json.loads((out / "rejected.json").read_text(encoding="utf-8"))
    assert rejected["count"] == 1
    assert rejected["rejected"][0]["file"] == "broken.csv" and rejected["rejected"][0]["line"] == 3
    assert "oops" in rejected["rejected"][0]["reason"]
    assert output_files(out) == clean_run_outputs(inputs.root, registry, tmp_path)
    assert (out / "site" / "index.html").is_file()
    inputs.assert_untouched()


def test_old_versions_are_pruned_and_crash_leftovers_removed(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path / "study")
    out = tmp_path / "out"
    ids = [_run(inputs.root, registry, out).version_id for _ in range(KEEP_VERSIONS + 2)]
    assert sorted(p.name for p in (out / "versions").iterdir()) == ids[-KEEP_VERSIONS:]
    (out / ".staging-4242-deadbeef" / "tables").mkdir(parents=True)
    (out / ".staging-4242-deadbeef" / "tables" / "runs.parquet").write_bytes(b"half")
    os.symlink("versions/nowhere", out / ".link-4242-0000")
    last = _run(inputs.root, registry, out)
    assert _leftovers(out) == []
    assert os.readlink(out / "current") == f"versions/{last.version_id}"
    inputs.assert_untouched()


def test_an_output_folder_of_the_earlier_layout_is_taken_over(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path / "study")
    out = tmp_path / "out"
    (out / "tables").mkdir(parents=True)
    (out / "tables" / "runs.parquet").write_bytes(b"from an older gammadot")
    (out / "site").mkdir()
    (out / "site" / "index.html").write_text("old", encoding="utf-8")
    _run(inputs.root, registry, out)
    assert (out / "tables").is_symlink() and (out / "site").is_symlink()
    assert output_files(out) == clean_run_outputs(inputs.root, registry, tmp_path)
    assert _leftovers(out) == []


def test_when_the_tables_cannot_be_written_the_previous_version_stays(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path / "study")
    out = tmp_path / "out"
    first = _run(inputs.root, registry, out)
    before = output_files(out)

    def full_disk(result, out_dir):
        raise OSError(28, "No space left on device")

    provided = registry.writers["parquet_tables"]
    registry.writers["parquet_tables"] = Provided(provided.plugin, replace(provided.record, write=full_disk))
    inputs.write("c.csv", export_bytes("C", 1.0, 0.9))
    assert _run(inputs.root, registry, out) is None
    assert os.readlink(out / "current") == f"versions/{first.version_id}"
    assert output_files(out) == before and _leftovers(out) == []


def test_publish_copies_checks_and_switches_in_one_step(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path / "lot-2611")
    out = inputs.root / "_gammadot"
    www = tmp_path / "www"
    first = _run(inputs.root, registry, out)
    outcome = publish_study(out, www)
    target = www / "lot-2611"
    assert outcome.changed and outcome.target == target and outcome.version_id == first.version_id
    assert os.readlink(target / "current") == f"versions/{first.version_id}"
    assert verify_version(target / "current") == []
    assert output_files(target) == output_files(out)
    assert "site/index.html" in (target / "index.html").read_text(encoding="utf-8")
    listing = (www / "index.html").read_text(encoding="utf-8")
    assert "Test lotion" in listing and 'href="lot-2611/site/index.html"' in listing
    assert not publish_study(out, www).changed  # the same version twice: nothing happens
    inputs.write("c.csv", export_bytes("C", 1.0, 0.9))
    second = _run(inputs.root, registry, out)
    assert publish_study(out, www).version_id == second.version_id
    assert output_files(target) == clean_run_outputs(inputs.root, registry, tmp_path)
    assert _leftovers(target) == []
    inputs.assert_untouched()


def test_publish_refuses_a_damaged_output_and_keeps_what_was_published(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path / "lot")
    out = tmp_path / "out"
    www = tmp_path / "www"
    first = _run(inputs.root, registry, out)
    publish_study(out, www, name="lot")
    inputs.write("c.csv", export_bytes("C", 1.0, 0.9))
    _run(inputs.root, registry, out)
    page = next((out / "site" / "runs").glob("*.html"))
    page.write_text("tampered", encoding="utf-8")
    with pytest.raises(PublishError, match="damaged"):
        publish_study(out, www, name="lot")
    assert os.readlink(www / "lot" / "current") == f"versions/{first.version_id}"
    assert verify_version(www / "lot" / "current") == []


def test_publish_command_line(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path / "lot")
    www = tmp_path / "www"
    never_run = CliRunner().invoke(main, ["publish", str(inputs.root), str(www)], env=ENV)
    assert never_run.exit_code == 1 and "no complete output to publish" in never_run.output
    assert CliRunner().invoke(main, ["run", str(inputs.root), "--quiet"], env=ENV).exit_code == 0
    done = CliRunner().invoke(main, ["publish", str(inputs.root / "_gammadot"), str(www), "--name", "lot-a"],
                              env=ENV)
    assert done.exit_code == 0 and "published:" in done.output
    assert (www / "lot-a" / "site" / "index.html").is_file()
    bad_name = CliRunner().invoke(main, ["publish", str(inputs.root / "_gammadot"), str(www), "--name", ".."],
                                  env=ENV)
    assert bad_name.exit_code == 1 and "cannot be a published study's folder name" in bad_name.output
    inputs.assert_untouched()


# --------------------------------------------------------------------------- crash safety

def _in_child(work: Callable[[], object]) -> int:
    """Fork; the child does ``work`` and exits; returns the child's pid."""
    pid = os.fork()
    if pid == 0:  # pragma: no cover - runs in the child
        code = 0
        try:
            work()
        except BaseException:
            code = 1
        os._exit(code)
    return pid


def _timed(work: Callable[[], object]) -> float:
    pid = _in_child(work)
    start = time.perf_counter()
    _, status = os.waitpid(pid, 0)
    assert os.waitstatus_to_exitcode(status) == 0
    return time.perf_counter() - start


def _kill_after(pid: int, delay: float) -> bool:
    """SIGKILL ``pid`` after ``delay`` seconds; True if it was still running then."""
    time.sleep(delay)
    finished, _ = os.waitpid(pid, os.WNOHANG)
    if finished:
        return False
    os.kill(pid, signal.SIGKILL)
    os.waitpid(pid, 0)
    return True


def _delays(rng: random.Random, n: int, span: float) -> list[float]:
    """``n`` random moments spread over ``[0, span]`` (one per stratum, shuffled)."""
    moments = [(i + rng.random()) / n * span for i in range(n)]
    rng.shuffle(moments)
    return moments


def test_killing_a_run_at_random_moments_never_leaves_a_mix(tmp_path: Path, registry) -> None:
    """12 trials: SIGKILL at a random moment of a run (half of them with the cache emptied
    first, so that the kill also falls into importing and fitting), plus a kill at once and
    a run left to finish."""
    inputs = _study(tmp_path / "study")
    out = tmp_path / "out"
    states = {False: clean_run_outputs(inputs.root, registry, tmp_path)}
    inputs.write("extra.csv", export_bytes("E", 5.0, 0.3))
    states[True] = clean_run_outputs(inputs.root, registry, tmp_path)
    inputs.remove("extra.csv")
    _run(inputs.root, registry, out)
    run = lambda: _run(inputs.root, registry, out)  # noqa: E731
    durations = {True: 0.0, False: 0.0}
    for cached in (False, True):
        if not cached:
            _clear_cache(out)
        durations[cached] = _timed(run)
    rng = random.Random(20260302)
    trials, outcomes = 12, []
    delays = {c: _delays(rng, trials // 2, 1.2 * durations[c]) for c in (True, False)}
    # Two fixed trials make sure kills land both before and after the switch even when the
    # machine's speed during the trials differs from the timing run: at once, and never.
    delays[False] += [0.0]
    delays[True] += [60.0 * durations[True] + 5.0]
    schedule = iter([(trial % 4 < 2, trial) for trial in range(trials)] + [(False, trials), (True, trials + 1)])
    pending = {c: iter(delays[c]) for c in (True, False)}
    extra = False
    for cached, trial in schedule:
        extra = not extra
        if extra:
            inputs.write("extra.csv", export_bytes("E", 5.0, 0.3))
        else:
            inputs.remove("extra.csv")
        if not cached:
            _clear_cache(out)
        delay = next(pending[cached])
        killed = _kill_after(_in_child(run), delay)
        seen = output_files(out)
        note = f"trial {trial}, kill after {delay:.3f} s, cache {'kept' if cached else 'emptied'}"
        assert verify_version(out / "current") == [], note
        assert seen in (states[not extra], states[extra]), f"{note}: a mix of versions"
        outcomes.append(("killed " if killed else "finished ") + ("new" if seen == states[extra] else "old"))
        run()  # the next start finishes the work
        assert output_files(out) == states[extra], note
        assert _leftovers(out) == [] and verify_version(out / "current") == [], note
    assert "killed old" in outcomes, outcomes  # kills landed before and after the switch
    assert any(o.endswith("new") for o in outcomes), outcomes
    inputs.assert_untouched()


def _clear_cache(out: Path) -> None:
    for entry in (out / ".cache").glob("*"):
        entry.unlink()


def test_killing_a_publish_at_random_moments_never_leaves_a_mix(tmp_path: Path, registry) -> None:
    """12 trials: each publishes a new version and is killed at a random moment."""
    inputs = _study(tmp_path / "lot")
    out = tmp_path / "out"
    www = tmp_path / "www"
    code = code_fingerprint(registry)
    result = process_study(inputs.root, registry, out_dir=out)
    write_study_version(result, out, code=code)
    publish = lambda: publish_study(out, www, name="lot")  # noqa: E731
    publish()
    write_study_version(result, out, code=code)
    duration = _timed(publish)
    rng = random.Random(1789)
    outcomes = []
    for trial, delay in enumerate(_delays(rng, 12, 1.3 * duration)):
        before = VersionedFolder(www / "lot").current().name
        new = write_study_version(result, out, code=code).version_id
        killed = _kill_after(_in_child(publish), delay)
        current = VersionedFolder(www / "lot").current()
        note = f"trial {trial}, kill after {delay:.4f} s of {duration:.4f} s"
        assert current is not None and current.name in (before, new), note
        assert verify_version(current) == [], note
        assert (www / "lot" / "site" / "index.html").is_file(), note
        outcomes.append(("killed " if killed else "finished ") + ("new" if current.name == new else "old"))
        publish()  # the next start finishes the work
        assert VersionedFolder(www / "lot").current().name == new, note
        assert _leftovers(www / "lot") == [], note
        assert output_files(www / "lot") == output_files(out), note
    assert "killed old" in outcomes, outcomes
    inputs.assert_untouched()


def _cli(*args: str) -> list[str]:
    return [sys.executable, "-m", "gammadot.cli", *args]


def test_killing_the_real_commands_leaves_a_complete_version(tmp_path: Path, registry) -> None:
    """Two more trials with the command line itself (process start-up included): `gammadot
    run` and `gammadot publish` each killed late in their work."""
    inputs = _study(tmp_path / "lot")
    out = inputs.root / "_gammadot"
    www = tmp_path / "www"
    env = {**os.environ, **ENV}
    start = time.perf_counter()
    subprocess.run(_cli("run", str(inputs.root), "--quiet"), env=env, check=True, capture_output=True)
    duration = time.perf_counter() - start
    subprocess.run(_cli("publish", str(out), str(www)), env=env, check=True, capture_output=True)
    rng = random.Random(7)
    for trial in range(1):
        inputs.write(f"new-{trial}.csv", export_bytes(f"N{trial}", 1.0 + trial, 0.5))
        for command in (_cli("run", str(inputs.root), "--quiet"), _cli("publish", str(out), str(www))):
            process = subprocess.Popen(command, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
            time.sleep(duration * rng.uniform(0.75, 1.0))
            process.send_signal(signal.SIGKILL)
            process.wait()
            for root in (out, www / "lot"):
                assert verify_version(root / "current") == [], f"trial {trial}: {root}"
        _run(inputs.root, registry, out)
        publish_study(out, www)
        assert output_files(www / "lot") == clean_run_outputs(inputs.root, registry, tmp_path)
    inputs.assert_untouched()
