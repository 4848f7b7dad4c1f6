"""The run cache: a cached pass gives the same bytes as a fresh one, only changed files are
computed, anything that shaped a result invalidates it, and a damaged or foreign entry is
never trusted."""

from __future__ import annotations

import hashlib
import hmac
import os
import pickle
import stat
import time
from pathlib import Path

from click.testing import CliRunner
from inbox_support import STUDY_TOML, Inputs, clean_run_outputs, export_bytes, output_files

import gammadot.pipeline as pipeline
from gammadot.cache import CACHE_DIR, MAGIC, RunCache, secret_key
from gammadot.cli import main
from gammadot.config import load_study_config
from gammadot.pipeline import process_study, write_outputs


def _study(tmp_path: Path) -> Inputs:
    inputs = Inputs(tmp_path / "study")
    inputs.write("study.toml", STUDY_TOML.encode())
    inputs.write("a.csv", export_bytes("A", 2.0, 0.5))
    inputs.write("sub/b.csv", export_bytes("B", 3.0, 0.7))
    inputs.write("c.csv", export_bytes("C", 1.5, 0.4))
    inputs.write("broken.csv", b"Shear rate [1/s],Shear stress [Pa]\n1,2\n2,oops\n")
    return inputs


def _pass(study: Path, registry, out: Path, cache: RunCache | None):
    result = process_study(study, registry, out_dir=out, cache=cache)
    target = out / f"pass-{time.monotonic_ns()}"
    write_outputs(result, target)
    return result, output_files(target)


def _cache(out: Path, registry, code: str = "code-1") -> RunCache:
    return RunCache(out / CACHE_DIR, code, secret_key())


def test_cached_pass_gives_the_same_bytes_as_a_fresh_pass(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path)
    reference = clean_run_outputs(inputs.root, registry, tmp_path)
    out = tmp_path / "out"
    first_cache = _cache(out, registry)
    result, first = _pass(inputs.root, registry, out, first_cache)
    assert len(result.runs) == 3 and [r.source_file for r in result.rejected] == ["broken.csv"]
    assert (first_cache.stats.hits, first_cache.stats.misses, first_cache.stats.stored) == (0, 4, 4)
    second_cache = _cache(out, registry)
    _, second = _pass(inputs.root, registry, out, second_cache)
    assert (second_cache.stats.hits, second_cache.stats.misses) == (4, 0)
    assert first == reference and second == reference  # Parquet bytes and rejected.json
    inputs.assert_untouched()


def test_one_new_file_is_the_only_one_imported_and_fitted(tmp_path: Path, registry, monkeypatch) -> None:
    inputs = _study(tmp_path)
    out = tmp_path / "out"
    _pass(inputs.root, registry, out, _cache(out, registry))
    inputs.write("d.csv", export_bytes("D", 4.0, 0.8))
    processed: list[str] = []
    real = pipeline.process_run

    def counting(run, config, reg):
        processed.append(run.source_file)
        return real(run, config, reg)

    cache = _cache(out, registry)
    with monkeypatch.context() as patch:
        patch.setattr(pipeline, "process_run", counting)
        _, outputs = _pass(inputs.root, registry, out, cache)
    assert processed == ["d.csv"]
    assert (cache.stats.hits, cache.stats.misses) == (4, 1)
    assert outputs == clean_run_outputs(inputs.root, registry, tmp_path)
    inputs.assert_untouched()


def test_settings_and_code_changes_invalidate_but_a_comment_does_not(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path)
    out = tmp_path / "out"
    _pass(inputs.root, registry, out, _cache(out, registry))
    inputs.write("study.toml", b"# lab note: same settings\n" + STUDY_TOML.encode())
    comment = _cache(out, registry)
    _pass(inputs.root, registry, out, comment)
    assert comment.stats.hits == 4
    inputs.write("study.toml", STUDY_TOML.replace('"newtonian", ', "").encode())
    settings = _cache(out, registry)
    _, outputs = _pass(inputs.root, registry, out, settings)
    assert (settings.stats.hits, settings.stats.misses) == (0, 4)
    assert outputs == clean_run_outputs(inputs.root, registry, tmp_path)
    new_code = _cache(out, registry, code="code-2")
    _pass(inputs.root, registry, out, new_code)
    assert (new_code.stats.hits, new_code.stats.misses) == (0, 4)
    inputs.assert_untouched()


def test_damaged_entries_are_ignored_and_rebuilt(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path)
    out = tmp_path / "out"
    _pass(inputs.root, registry, out, _cache(out, registry))
    entries = sorted((out / CACHE_DIR).glob("*.entry"))
    assert len(entries) == 4
    flipped = bytearray(entries[0].read_bytes())
    flipped[-10] ^= 0xFF
    entries[0].write_bytes(bytes(flipped))                               # one bit pattern changed
    entries[1].write_bytes(entries[1].read_bytes()[: len(MAGIC) + 10])   # cut short
    entries[2].write_bytes(b"not a cache entry at all")                  # garbage
    cache = _cache(out, registry)
    _, outputs = _pass(inputs.root, registry, out, cache)
    assert (cache.stats.corrupt, cache.stats.hits, cache.stats.stored) == (3, 1, 3)
    assert outputs == clean_run_outputs(inputs.root, registry, tmp_path)
    again = _cache(out, registry)
    _pass(inputs.root, registry, out, again)
    assert (again.stats.hits, again.stats.corrupt) == (4, 0)  # rebuilt entries are good


class _Planted:
    """Unpickling this creates a marker file: proof that foreign code would have run."""

    def __init__(self, marker: Path) -> None:
        self.marker = marker

    def __reduce__(self):
        return (Path.touch, (self.marker,))


def test_an_entry_signed_with_another_key_is_never_unpickled(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path)
    out = tmp_path / "out"
    cache = _cache(out, registry)
    config = load_study_config(inputs.root, registry)
    marker = tmp_path / "planted-code-ran"
    payload = pickle.dumps(_Planted(marker))
    forged = hmac.new(b"k" * 32, payload, hashlib.sha256).digest()  # not this machine's key
    entry = cache.entry_path("a.csv", hashlib.sha256((inputs.root / "a.csv").read_bytes()).hexdigest(), config)
    entry.parent.mkdir(parents=True)
    entry.write_bytes(MAGIC + forged + payload)
    _, outputs = _pass(inputs.root, registry, out, cache)
    assert not marker.exists()
    assert cache.stats.corrupt == 1
    assert outputs == clean_run_outputs(inputs.root, registry, tmp_path)


def test_unreadable_file_is_rejected_not_cached_and_picked_up_when_readable(tmp_path: Path, registry,
                                                                            monkeypatch) -> None:
    inputs = _study(tmp_path)
    out = tmp_path / "out"
    real_read = Path.read_bytes

    def locked(self: Path) -> bytes:
        if self.name == "c.csv":  # root ignores chmod, so the error is injected
            raise PermissionError(13, "Permission denied", str(self))
        return real_read(self)

    cache = _cache(out, registry)
    with monkeypatch.context() as patch:
        patch.setattr(Path, "read_bytes", locked)
        result, _ = _pass(inputs.root, registry, out, cache)
    assert any(r.source_file == "c.csv" and "permission denied" in r.reason for r in result.rejected)
    assert cache.stats.stored == 3  # the unreadable file is not remembered
    again = _cache(out, registry)
    _, outputs = _pass(inputs.root, registry, out, again)
    assert (again.stats.hits, again.stats.misses) == (3, 1)
    assert outputs == clean_run_outputs(inputs.root, registry, tmp_path)
    inputs.assert_untouched()


def test_renamed_and_removed_files_follow_the_folder_and_stale_entries_are_pruned(tmp_path: Path,
                                                                                  registry) -> None:
    inputs = _study(tmp_path)
    out = tmp_path / "out"
    _pass(inputs.root, registry, out, _cache(out, registry))
    inputs.rename("a.csv", "renamed/a2.csv")
    inputs.remove("c.csv")
    cache = _cache(out, registry)
    result, outputs = _pass(inputs.root, registry, out, cache)
    assert (cache.stats.hits, cache.stats.misses) == (2, 1)  # run ids and sources name the path
    assert "renamed-a2-r1" in [r.run.run_id for r in result.runs]
    assert outputs == clean_run_outputs(inputs.root, registry, tmp_path)
    assert cache.prune() == 2  # the entries of a.csv and c.csv
    assert len(list((out / CACHE_DIR).glob("*.entry"))) == 3
    inputs.assert_untouched()


def test_the_secret_key_is_private_and_stable(tmp_path: Path) -> None:
    folder = tmp_path / "state"
    key = secret_key(folder)
    assert len(key) == 32 and secret_key(folder) == key
    assert stat.S_IMODE(os.stat(folder / "cache-key").st_mode) == 0o600


def test_gammadot_run_uses_the_cache(tmp_path: Path, registry) -> None:
    inputs = _study(tmp_path)
    env = {"GAMMADOT_NO_ENTRY_POINTS": "1"}
    first = CliRunner().invoke(main, ["run", str(inputs.root)], env=env)
    assert first.exit_code == 0, first.output
    assert "cache: 0 of 4 files reused" in first.output
    second = CliRunner().invoke(main, ["run", str(inputs.root)], env=env)
    assert "cache: 4 of 4 files reused" in second.output
    assert output_files(inputs.root / "_gammadot") == clean_run_outputs(inputs.root, registry, tmp_path)
    inputs.assert_untouched()


def test_run_works_without_a_usable_cache(tmp_path: Path, registry, monkeypatch) -> None:
    inputs = _study(tmp_path)
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("a file where the state folder should be")
    monkeypatch.setenv("GAMMADOT_STATE_DIR", str(blocker))
    result = CliRunner().invoke(main, ["run", str(inputs.root), "--quiet"], env={"GAMMADOT_NO_ENTRY_POINTS": "1"})
    assert result.exit_code == 0
    assert "the run cache is off" in result.output
    assert output_files(inputs.root / "_gammadot") == clean_run_outputs(inputs.root, registry, tmp_path)
