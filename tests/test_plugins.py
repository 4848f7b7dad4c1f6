"""The plugin system: loading, blocking, catalogue validation, and failures recorded against
the file or run they happened in (the rest of the study goes on)."""

from __future__ import annotations

import types
from importlib import metadata
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

import gammadot
from gammadot.cli import main
from gammadot.pipeline import process_study
from gammadot.plugin_manager import PluginLoadError, build_plugin_manager
from gammadot.registry import build_registry

from support import write_export


def _plugin(**hooks) -> types.SimpleNamespace:
    """A throwaway plugin object whose attributes are hook implementations."""
    return types.SimpleNamespace(**{name: gammadot.hookimpl(fn) for name, fn in hooks.items()})


def _fake_entry_points(monkeypatch, *entry_points: metadata.EntryPoint) -> None:
    monkeypatch.setattr("gammadot.plugin_manager.metadata.entry_points",
                        lambda group: [ep for ep in entry_points if ep.group == group])


def _power_law_study(tmp_path: Path, names=("a.csv", "b.csv")) -> Path:
    rate = np.geomspace(0.1, 100, 8)
    for name in names:
        write_export(tmp_path / "study" / name, {"sample": name}, ["Shear rate [1/s]", "Viscosity [Pa·s]"],
                     [[g, 2.0 * g ** -0.5] for g in rate])
    return tmp_path / "study"


def test_entry_point_that_fails_to_load_stops_start_up_naming_it(monkeypatch) -> None:
    _fake_entry_points(monkeypatch, metadata.EntryPoint("lims_reader", "gammadot_no_such_module:plugin", "gammadot"))
    with pytest.raises(PluginLoadError) as info:
        build_plugin_manager(entry_points=True)
    text = str(info.value)
    assert "plugin 'lims_reader'" in text and "ModuleNotFoundError" in text
    assert "--block lims_reader" in text and "GAMMADOT_BLOCK_PLUGINS=lims_reader" in text


def test_blocked_entry_point_is_not_loaded(monkeypatch) -> None:
    _fake_entry_points(monkeypatch, metadata.EntryPoint("lims_reader", "gammadot_no_such_module:plugin", "gammadot"))
    monkeypatch.setenv("GAMMADOT_BLOCK_PLUGINS", "lims_reader")
    pm = build_plugin_manager(entry_points=True)
    assert pm.is_blocked("lims_reader")


def test_entry_point_plugin_is_loaded_and_listed(monkeypatch, tmp_path: Path) -> None:
    (tmp_path / "acme_extra.py").write_text(
        "import gammadot\nfrom gammadot.plugins.basic_models import NEWTONIAN\nimport dataclasses\n"
        "@gammadot.hookimpl\ndef gammadot_models():\n"
        "    return [dataclasses.replace(NEWTONIAN, id='acme_newtonian')]\n", encoding="utf-8")
    monkeypatch.syspath_prepend(str(tmp_path))
    _fake_entry_points(monkeypatch, metadata.EntryPoint("acme_extra", "acme_extra", "gammadot"))
    registry = build_registry(build_plugin_manager(entry_points=True))
    assert registry.models["acme_newtonian"].plugin == "acme_extra"
    result = CliRunner().invoke(main, ["plugins"])
    assert result.exit_code == 0 and "acme_extra" in result.output and "acme_newtonian" in result.output


def test_builtin_can_be_blocked_by_name() -> None:
    registry = build_registry(build_plugin_manager(["basic_models"], entry_points=False))
    assert "newtonian" not in registry.models and "basic_models" in registry.blocked


def test_duplicate_model_id_names_both_plugins() -> None:
    from gammadot.plugins.basic_models import NEWTONIAN

    clash = _plugin(gammadot_models=lambda: [NEWTONIAN])
    with pytest.raises(PluginLoadError, match="'newtonian' is provided twice: by plugin 'basic_models' "
                                              "and by plugin 'clash'"):
        build_registry(build_plugin_manager(entry_points=False, extra=[("clash", clash)]))


def test_unknown_hook_is_refused() -> None:
    odd = _plugin(gammadot_importer=lambda: [])  # misspelt hook name
    with pytest.raises(PluginLoadError, match="plugin 'odd' implements an unknown hook"):
        build_plugin_manager(entry_points=False, extra=[("odd", odd)])


def test_raising_model_is_recorded_and_other_models_fit(tmp_path: Path) -> None:
    import dataclasses

    from gammadot.plugins.basic_models import NEWTONIAN

    def explode(shear_rate, eta):
        raise ZeroDivisionError("in-house bug")

    broken = _plugin(gammadot_models=lambda: [dataclasses.replace(NEWTONIAN, id="inhouse", function=explode)])
    registry = build_registry(build_plugin_manager(entry_points=False, extra=[("inhouse_models", broken)]))
    result = process_study(_power_law_study(tmp_path), registry)
    fits = {f.model: f for f in result.runs[0].fits}
    assert not fits["inhouse"].success
    assert "model plugin 'inhouse_models' failed: ZeroDivisionError: in-house bug" in fits["inhouse"].message
    assert fits["power_law"].success and fits["power_law"].selected


def test_raising_importer_rejects_only_its_file(tmp_path: Path) -> None:
    from gammadot.records import Importer

    def read(path, context):
        raise RuntimeError("layout changed")

    importer = Importer("lims", "LIMS", sniff=lambda p, head: 1.0 if p.name == "b.csv" else 0.0, read=read)
    plugin = _plugin(gammadot_importers=lambda: [importer])
    registry = build_registry(build_plugin_manager(entry_points=False, extra=[("lims_plugin", plugin)]))
    result = process_study(_power_law_study(tmp_path), registry)
    assert [r.run.source_file for r in result.runs] == ["a.csv"]
    (rejected,) = result.rejected
    assert rejected.source_file == "b.csv" and rejected.plugin == "lims_plugin"
    assert "importer failed: RuntimeError: layout changed" in rejected.describe()


def test_raising_check_is_recorded_on_the_run(tmp_path: Path) -> None:
    from gammadot.records import Check

    def bad(run, context):
        raise KeyError("density")

    plugin = _plugin(gammadot_checks=lambda: [Check("fussy", "Fussy", "warning", run=bad)])
    registry = build_registry(build_plugin_manager(entry_points=False, extra=[("fussy_checks", plugin)]))
    result = process_study(_power_law_study(tmp_path), registry)
    for run in result.runs:
        (finding,) = [f for f in run.findings if f.check == "fussy"]
        assert finding.severity == "error" and "check plugin 'fussy_checks' failed: KeyError" in finding.message
        assert run.selected is not None  # the run still got its fits


def test_plugins_command_lists_what_each_provides() -> None:
    result = CliRunner().invoke(main, ["plugins", "--block", "basic_checks"], env={"GAMMADOT_NO_ENTRY_POINTS": "1"})
    assert result.exit_code == 0
    assert "basic_models  (built-in)" in result.output
    assert "models: newtonian, power_law" in result.output
    assert "importers: delimited_text" in result.output
    assert "basic_checks  (blocked)" in result.output


def test_analysis_adds_a_table_and_findings_and_a_raising_one_is_recorded(tmp_path: Path) -> None:
    import pyarrow.parquet as pq

    from gammadot.pipeline import write_outputs
    from gammadot.records import Analysis, AnalysisOutput, AnalysisTable, Finding

    def count_runs(result):
        rows = [{"sample": r.run.sample, "n_points": r.run.n_points} for r in result.runs]
        first = result.runs[0].run.run_id
        return AnalysisOutput(tables=(AnalysisTable("run_sizes", rows, units={"n_points": "1"}),),
                              findings={first: [Finding("sizes", "info", "counted")]})

    def explode(result):
        raise ValueError("no gaps")

    plugin = _plugin(gammadot_analyses=lambda: [Analysis("sizes", "Sizes", count_runs),
                                                Analysis("broken", "Broken", explode)])
    registry = build_registry(build_plugin_manager(entry_points=False, extra=[("lab_analyses", plugin)]))
    result = process_study(_power_law_study(tmp_path), registry)
    assert [f.message for f in result.runs[0].findings if f.check == "sizes"] == ["counted"]
    (failure,) = result.analysis_failures
    assert failure.writer == "broken" and failure.plugin == "lab_analyses" and "no gaps" in failure.message
    write_outputs(result, tmp_path / "out")
    table = pq.read_table(tmp_path / "out" / "tables" / "run_sizes.parquet")
    assert table.to_pylist() == [{"sample": "a.csv", "n_points": 8}, {"sample": "b.csv", "n_points": 8}]
    assert table.schema.field("n_points").metadata == {b"unit": b"1"}
