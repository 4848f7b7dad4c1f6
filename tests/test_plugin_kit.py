"""The plugin author's kit: the compatibility rule, ``gammadot plugins --check``, the
``gammadot_study`` fixture, run-page sections and ``gammadot new-plugin``.

Sources the expectations rest on:

- PEP 440, "Version specifiers": ``>=`` is an inclusive ordered comparison, ``<`` an exclusive
  one, ``~=`` a compatible release, ``==1.*`` a prefix match; a comma means "and".
- pluggy's documented validation: a hook implementation may take only arguments its spec
  names (``PluginValidationError``), and ``check_pending`` refuses implementations of hooks
  that have no spec.
"""

from __future__ import annotations

import importlib
import types
from importlib import metadata
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from markupsafe import escape
from packaging.version import Version

import gammadot
from gammadot.cli import main
from gammadot.compat import compatibility
from gammadot.hookspecs import HOOKSPEC_VERSION
from gammadot.plugin_manager import PluginLoadError, build_plugin_manager
from gammadot.records import RunSection
from gammadot.scaffold import KINDS, ScaffoldError, names_for, render_files, write_plugin_package

import venvs

# --------------------------------------------------------------------------- helpers


def _module_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, name: str, source: str) -> str:
    """Write ``name.py`` on sys.path (so an entry point ``name`` can load it)."""
    folder = tmp_path / "plugins"
    folder.mkdir(exist_ok=True)
    (folder / f"{name}.py").write_text(source, encoding="utf-8")
    monkeypatch.syspath_prepend(str(folder))
    importlib.invalidate_caches()
    return name


def _fake_entry_points(monkeypatch: pytest.MonkeyPatch, names: list[str]) -> None:
    points = [metadata.EntryPoint(n, n, "gammadot") for n in names]
    monkeypatch.setattr("gammadot.plugin_manager.metadata.entry_points",
                        lambda group: [ep for ep in points if ep.group == group])
    monkeypatch.delenv("GAMMADOT_NO_ENTRY_POINTS", raising=False)
    monkeypatch.delenv("GAMMADOT_BLOCK_PLUGINS", raising=False)


HEADER = "import gammadot\nimport numpy as np\nfrom gammadot import Model, ModelParameter, Check, Importer\n"
MODEL = ("Model(id={id!r}, title='t', target='viscosity', parameters=(ModelParameter('eta', 'Pa·s'),), "
         "function=lambda shear_rate, eta: eta + 0 * shear_rate, guess=lambda g, v: {{'eta': 1.0}})")


# --------------------------------------------------------------------------- compatibility rule


def test_hookspec_version_and_builtin_ranges() -> None:
    """The version is a PEP 440 version; every built-in supports it (own or set-wide range)."""
    from gammadot.plugins import BUILTIN_HOOKSPEC, BUILTIN_PLUGINS

    assert str(Version(HOOKSPEC_VERSION)) == HOOKSPEC_VERSION
    for name, module_path in BUILTIN_PLUGINS:
        found = compatibility(importlib.import_module(module_path), default=BUILTIN_HOOKSPEC)
        assert found.compatible and found.declared, name
    for own in ("delimited_text", "spreadsheet", "json_runs"):
        assert importlib.import_module(f"gammadot.plugins.{own}").GAMMADOT_HOOKSPEC == ">=1,<2"


@pytest.mark.parametrize("declared,fits", [
    (">=1,<2", True), ("~=1.0", True), ("==1.*", True), (">=1.0", True),   # PEP 440: all include 1.0
    (">=1.1", False), ("<1", False), (">=2,<3", False), ("==0.*", False),
])
def test_pep440_ranges(declared: str, fits: bool) -> None:
    plugin = types.SimpleNamespace(GAMMADOT_HOOKSPEC=declared)
    assert compatibility(plugin, version="1.0").compatible is fits


def test_incompatible_plugin_is_refused_at_start_up_naming_it_and_both_versions(tmp_path, monkeypatch) -> None:
    _module_file(tmp_path, monkeypatch, "future_lab", 'GAMMADOT_HOOKSPEC = ">=2,<3"\n' + HEADER)
    _fake_entry_points(monkeypatch, ["future_lab"])
    with pytest.raises(PluginLoadError) as info:
        build_plugin_manager()
    assert str(info.value) == (
        "plugin 'future_lab' (future_lab) supports gammadot hook specs >=2,<3, but this gammadot has hook specs "
        f"{HOOKSPEC_VERSION}; install a version of the plugin made for these hook specs, or start without it "
        "with --block future_lab or GAMMADOT_BLOCK_PLUGINS=future_lab")
    result = CliRunner().invoke(main, ["plugins"])
    assert result.exit_code == 3 and "plugin 'future_lab'" in result.output
    assert CliRunner().invoke(main, ["plugins", "--block", "future_lab"]).exit_code == 0


def test_a_range_that_is_not_a_range_is_refused_and_undeclared_plugins_load() -> None:
    odd = types.SimpleNamespace(GAMMADOT_HOOKSPEC="version one")
    with pytest.raises(PluginLoadError, match="plugin 'odd' .*declares GAMMADOT_HOOKSPEC = 'version one', "
                                              "which is not a version range"):
        build_plugin_manager(entry_points=False, extra=[("odd", odd)])
    plain = types.SimpleNamespace()
    assert build_plugin_manager(entry_points=False, extra=[("plain", plain)]).get_plugin("plain") is plain


# --------------------------------------------------------------------------- plugins --check

BAD_PLUGINS = {
    "misspelt": HEADER + "@gammadot.hookimpl\ndef gammadot_importer():\n    return []\n",
    "unmarked": 'GAMMADOT_HOOKSPEC = ">=1,<2"\n' + HEADER + "def gammadot_models():\n    return []\n",
    "wrong_args": HEADER + "@gammadot.hookimpl\ndef gammadot_models(config):\n    return []\n",
    "twin": HEADER + "@gammadot.hookimpl\ndef gammadot_models():\n    return [" + MODEL.format(id="newtonian") + "]\n",
    "qa_a": HEADER + "@gammadot.hookimpl\ndef gammadot_checks():\n"
                     "    return [Check('qa_rule', 'QA', 'error', run=lambda run, context: [])]\n",
    "qa_b": HEADER + "@gammadot.hookimpl\ndef gammadot_checks():\n"
                     "    return [Check('qa_rule', 'QA again', 'error', run=lambda run, context: [])]\n",
    "twice": HEADER + "@gammadot.hookimpl\ndef gammadot_models():\n    return [" + MODEL.format(id="m1") + ", "
                      + MODEL.format(id="m1") + "]\n",
    "wrong_type": HEADER + "@gammadot.hookimpl\ndef gammadot_models():\n    return [{'id': 'dicty'}]\n",
    "bad_model": HEADER + "@gammadot.hookimpl\ndef gammadot_models():\n    return [Model(id='bad_model', title='b', "
                          "target='viscosity', parameters=(ModelParameter('eta', 'Pa·s'),), "
                          "function=lambda shear_rate, a, b: a, guess=lambda g, v: {})]\n",
    "bad_importer": HEADER + "@gammadot.hookimpl\ndef gammadot_importers():\n"
                             "    return [Importer('bad_importer', 'b', sniff=lambda path, head: 0.0, read=lambda path: [])]\n",
    "future": 'GAMMADOT_HOOKSPEC = ">=2"\n' + HEADER,
    "raising": HEADER + "@gammadot.hookimpl\ndef gammadot_checks():\n    raise KeyError('settings')\n",
    "no_range": HEADER,
    "clean": 'GAMMADOT_HOOKSPEC = ">=1,<2"\n' + HEADER + "@gammadot.hookimpl\ndef gammadot_models():\n"
                                                        "    return [" + MODEL.format(id="clean_model") + "]\n",
}
EXPECTED = [  # every kind of mistake, one line each
    "error: plugin 'misspelt': implements an unknown hook 'gammadot_importer'; did you mean 'gammadot_importers'?",
    "warning: plugin 'unmarked': 'gammadot_models' is not marked with @gammadot.hookimpl, so it is never called",
    "error: plugin 'wrong_args': wrong hook signature: ",
    "error: plugin 'twin': model id 'newtonian' is provided 2 times (by plugins 'basic_models' and 'twin'); ids must be unique",
    "error: plugin 'qa_b': check id 'qa_rule' is provided 2 times (by plugins 'qa_a' and 'qa_b'); ids must be unique",
    "error: plugin 'twice': model id 'm1' is returned twice by gammadot_models()",
    "error: plugin 'wrong_type': gammadot_models() returned dict, expected gammadot.Model",
    "error: plugin 'bad_model': model 'bad_model': function() cannot take (shear_rate, eta): ",
    "error: plugin 'bad_importer': importer 'bad_importer': read() cannot take (path, context): ",
    f"error: plugin 'future': supports gammadot hook specs >=2, but this gammadot has hook specs {HOOKSPEC_VERSION}",
    "error: plugin 'raising': gammadot_checks() failed: KeyError: 'settings'",
    "error: plugin 'not_there': cannot be imported (not_there): ModuleNotFoundError: ",
    "warning: plugin 'no_range': declares no GAMMADOT_HOOKSPEC",
]


def test_check_reports_every_kind_of_mistake_one_line_each(tmp_path, monkeypatch) -> None:
    for name, source in BAD_PLUGINS.items():
        _module_file(tmp_path, monkeypatch, name, source)
    _fake_entry_points(monkeypatch, [*BAD_PLUGINS, "not_there"])
    result = CliRunner().invoke(main, ["plugins", "--check"])
    assert result.exit_code == 1
    lines = result.output.splitlines()
    for expected in EXPECTED:
        assert [line for line in lines if line.startswith(expected)], expected
    assert not [line for line in lines if "'clean'" in line]
    # 11 errors as listed; 12 warnings: 'unmarked', and no range in the 11 plugins built on HEADER
    assert lines[-1].startswith("checked ") and lines[-1].endswith("11 errors, 12 warnings")


def test_check_of_the_builtins_is_clean() -> None:
    result = CliRunner().invoke(main, ["plugins", "--check"], env={"GAMMADOT_NO_ENTRY_POINTS": "1"})
    assert result.exit_code == 0
    assert result.output.splitlines()[-1].endswith(f"against hook specs {HOOKSPEC_VERSION}: 0 errors, 0 warnings")


# --------------------------------------------------------------------------- the fixture and sections


def test_the_fixture_ignores_installed_plugins_and_blocks(gammadot_study, monkeypatch) -> None:
    """An installed plugin that would fail to load never reaches a plugin's test; the env block
    list is cleared; ``block`` still blocks a built-in."""
    points = [metadata.EntryPoint("broken_lab", "gammadot_no_such_module", "gammadot")]
    monkeypatch.setattr("gammadot.plugin_manager.metadata.entry_points",
                        lambda group: [ep for ep in points if ep.group == group])
    study = gammadot_study(block=["basic_checks"])
    assert "newtonian" in study.registry().models and "invalid_point" not in study.registry().checks
    study.add_export("a.csv", {"Shear rate [1/s]": [1.0, 2.0, 4.0], "Viscosity [Pa·s]": [2.0, 2.0, 2.0]})
    out = study.run()
    assert out.rejected == [] and [r["run_id"] for r in out.table("runs")] == ["a-r1"]


def test_the_fixture_applies_the_compatibility_rule(gammadot_study) -> None:
    future = types.SimpleNamespace(__name__="future_lab", GAMMADOT_HOOKSPEC=">=2")
    study = gammadot_study(future)
    with pytest.raises(PluginLoadError, match="plugin 'future_lab'"):
        study.run()


def test_sections_appear_on_run_pages_in_order_and_failures_are_noted(gammadot_study) -> None:
    def explain(run_result):
        return f"<p class='lab'>{len(run_result.run.columns['shear_rate'])} points</p>"

    def explode(run_result):
        raise ZeroDivisionError("no points")

    plugin = types.SimpleNamespace(gammadot_run_sections=gammadot.hookimpl(lambda: [
        RunSection("lab_summary", "Lab <summary>", explain, order=20),
        RunSection("lab_broken", "Broken", explode, order=10),
        RunSection("lab_none", "Never shown", lambda rr: None, order=30),
        RunSection("lab_bytes", "Bytes", lambda rr: b"<p>", order=40)]))
    study = gammadot_study(named={"lab_sections": plugin})
    study.add_export("lot.csv", {"Shear rate [1/s]": [1.0, 2.0, 4.0], "Viscosity [Pa·s]": [3.0, 2.5, 2.0]})
    page = study.run().run_page("lot-r1")
    assert "<h2 id=\"section-lab_summary\">Lab &lt;summary&gt;</h2>" in page  # the title is escaped
    assert "<p class='lab'>3 points</p>" in page  # the fragment is the plugin's, as given
    assert escape("section plugin 'lab_sections' failed: ZeroDivisionError: no points") in page
    assert escape("section plugin 'lab_sections' returned bytes, not HTML text") in page
    assert "Never shown" not in page
    assert page.index("section-lab_broken") < page.index("section-lab_summary") < page.index("section-lab_bytes")


# --------------------------------------------------------------------------- new-plugin


def test_names_and_no_overwrite(tmp_path: Path) -> None:
    assert names_for("Acme-Thinning") == ("acme-thinning", "acme_thinning")
    for bad in ("1acme", "acme thinning", "class", "gammadot", "acme--x", ""):
        with pytest.raises(ScaffoldError):
            names_for(bad)
    package = write_plugin_package(tmp_path, "acme-thinning", "model")
    before = {p: p.read_bytes() for p in package.root.rglob("*") if p.is_file()}
    with pytest.raises(ScaffoldError, match="exists"):
        write_plugin_package(tmp_path, "acme-thinning", "check")
    assert {p: p.read_bytes() for p in package.root.rglob("*") if p.is_file()} == before
    result = CliRunner().invoke(main, ["new-plugin", "acme-thinning", "--kind", "model", "--dir", str(tmp_path)])
    assert result.exit_code == 2 and "exists" in result.output


@pytest.mark.parametrize("kind", KINDS)
def test_every_kind_renders_a_package_that_compiles(kind: str) -> None:
    files = render_files("acme-lab", kind)
    assert sorted(files) == ["README.md", "acme_lab.py", "pyproject.toml", "tests/test_acme_lab.py"]
    assert '[project.entry-points.gammadot]\nacme_lab = "acme_lab"' in files["pyproject.toml"]
    for name in ("acme_lab.py", "tests/test_acme_lab.py"):
        compile(files[name], name, "exec")
    assert 'GAMMADOT_HOOKSPEC = ">=1,<2"' in files["acme_lab.py"]


@pytest.mark.venv
def test_generated_plugins_of_every_kind_pass_their_own_tests_after_pip_install(tmp_path: Path) -> None:
    """`gammadot new-plugin` for each kind, `pip install -e` all of them into a fresh
    environment, then each package's own tests, the listing and the check; a generated test
    fails when its plugin is broken."""
    python = venvs.make_venv(tmp_path / "venv")
    work = tmp_path / "work"
    roots = []
    for kind in KINDS:
        made = venvs.run(python, ["-m", "gammadot.cli", "new-plugin", f"acme-{kind}", "--kind", kind, "--dir", str(work)])
        assert made.returncode == 0, made.stderr
        roots.append(work / f"acme-{kind}")
    editable = [arg for root in roots for arg in ("-e", str(root))]
    venvs.pip_install(python, *editable)
    tests = venvs.run(python, ["-m", "pytest", "-q", "-p", "no:cacheprovider", *[str(r / "tests") for r in roots]],
                      cwd=work)
    assert tests.returncode == 0, tests.stdout[-3000:] + tests.stderr[-3000:]
    assert "7 passed" in tests.stdout.splitlines()[-1]
    listed = venvs.run(python, ["-m", "gammadot.cli", "plugins"]).stdout
    for kind, provides in zip(KINDS, ("importers", "models", "checks", "geometries", "sections")):
        assert f"acme_{kind}  (acme-{kind} 0.1.0)" in listed
        assert f"    {provides}: acme_{kind}" in listed
    checked = venvs.run(python, ["-m", "gammadot.cli", "plugins", "--check"])
    assert checked.returncode == 0 and checked.stdout.splitlines()[-1].endswith("0 errors, 0 warnings"), checked.stdout
    module = roots[1] / "acme_model.py"  # editable install: a change takes effect at once
    module.write_text(module.read_text(encoding="utf-8").replace("eta0 / (1.0 + shear_rate / rate_c)",
                                                                 "eta0 / (1.0 + shear_rate / rate_c) ** 2"),
                      encoding="utf-8")
    broken = venvs.run(python, ["-m", "pytest", "-q", "-p", "no:cacheprovider", str(roots[1] / "tests")], cwd=work)
    # the equation test catches it (the fit test fits whatever the function is, by design)
    assert broken.returncode == 1 and "FAILED" in broken.stdout and "test_the_function_is_the_equation" in broken.stdout
