"""gammadot's JSON run format: the schema, validation with JSON paths, import, export and the
round trip run -> JSON -> run.

Sources the expectations rest on:

- JSON Schema draft 2020-12 (Core and Validation specifications): ``type`` (Validation §6.1.1),
  ``const`` (§6.1.3), ``minItems`` (§6.4.2), ``required`` (§6.5.3), ``additionalProperties``
  (Core §10.3.2.3), ``oneOf`` (Core §10.2.1.3); the shipped schema must itself be valid against
  the 2020-12 meta-schema (checked with the ``jsonschema`` reference implementation).
- RFC 8259 (JSON): §6, numbers have no NaN or Infinity; §8.1, UTF-8 text.
- RFC 9535 (JSONPath): ``$`` is the root, ``.name`` and ``['name']`` select members,
  ``[i]`` selects an array element; paths in messages follow it.
- Python's float ``repr`` reads back to the same binary64 value (IEEE 754-2008 §5.12.2, from
  memory): exported values must come back bit for bit.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path
from typing import Any

import jsonschema
import numpy as np
import pytest
from click.testing import CliRunner

from gammadot.cli import main
from gammadot.plugins import json_runs
from gammadot.records import ImportRejection
from gammadot.run_export import find_run, imported_runs
from gammadot.run_json import (FORMAT, RunDocumentError, document_problems, dumps, json_path, load_schema,
                               read_document, run_document, schema_text)

from study_tables import assert_same_tables, read_tables, run_study


def valid_document() -> dict[str, Any]:
    """Two runs: instrument values with a missing value, and torque and speed with notes."""
    return {
        "format": FORMAT, "version": 1, "generator": "Merrowind LIMS 4.2 (fictitious)",
        "runs": [
            {"metadata": {"sample": "HC-2611", "temperature": {"value": 25, "unit": "°C"},
                          "gap": "0.5 mm", "batch": "2611"},
             "columns": [{"name": "shear_rate", "unit": "1/s", "values": [0.1, 1, 10, 100]},
                         {"name": "Viscosity", "unit": "mPa·s", "values": [8000, 3000, None, 300]}]},
            {"metadata": {"sample": "HC-2612", "geometry": "cone50"},
             "columns": [{"name": "angular_velocity", "unit": "rpm", "values": [1, 2, 5, 10]},
                         {"name": "torque", "unit": "µN·m", "values": [10, 18, 40, 71]},
                         {"name": "status", "unit": "1", "values": [0, 0, 0, 1]}],
             "notes": ["entered by the LIMS interface"]},
        ],
    }


def encode(document: Any) -> bytes:
    return json.dumps(document, ensure_ascii=False).encode("utf-8")


# --------------------------------------------------------------------------- the schema


def test_shipped_schema_is_a_valid_2020_12_schema_and_printed_by_the_command() -> None:
    schema = load_schema()
    jsonschema.Draft202012Validator.check_schema(schema)  # the 2020-12 meta-schema
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert schema["properties"]["version"] == {"description": schema["properties"]["version"]["description"],
                                               "const": 1}
    result = CliRunner().invoke(main, ["schema"])
    assert result.exit_code == 0 and json.loads(result.output) == schema and result.output == schema_text()


def test_valid_document_gives_its_runs() -> None:
    runs = read_document(encode(valid_document()))
    assert len(runs) == 2
    first, second = runs
    assert dict(first.metadata) == {"sample": "HC-2611", "temperature": "25 °C", "gap": "0.5 mm", "batch": "2611"}
    assert [(c.name, c.unit) for c in first.columns] == [("shear_rate", "1/s"), ("Viscosity", "mPa·s")]
    np.testing.assert_array_equal(first.columns[1].values, [8000.0, 3000.0, np.nan, 300.0])  # null: missing
    assert second.notes == ("entered by the LIMS interface",)
    assert jsonschema.Draft202012Validator(load_schema()).is_valid(valid_document())


# --------------------------------------------------------------------------- invalid documents


def _set(document: dict[str, Any], path: list[Any], value: Any) -> dict[str, Any]:
    doc = copy.deepcopy(document)
    target = doc
    for part in path[:-1]:
        target = target[part]
    if value is _DELETE:
        del target[path[-1]]
    else:
        target[path[-1]] = value
    return doc


_DELETE = object()
INVALID = [  # (where to change, new value, the one-line reason expected)
    (["format"], _DELETE, '$.format: not a gammadot run document (format is missing, expected "gammadot-run")'),
    (["format"], "flow-curve", '$.format: not a gammadot run document (format is "flow-curve", expected "gammadot-run")'),
    (["version"], 2, "$.version: version 2 is not read by this gammadot (it reads version 1); update gammadot"),
    (["runs"], [], "$.runs: must not be empty"),
    (["runs", 0, "columns"], _DELETE, "$.runs[0].columns: is missing (required)"),
    (["runs", 0, "columns", 1, "unit"], _DELETE, "$.runs[0].columns[1].unit: is missing (required)"),
    (["runs", 1, "columns", 2, "unit"], 5, "$.runs[1].columns[2].unit: must be a text, not a number 5"),
    (["runs", 0, "columns", 0, "values", 3], "abc",
     '$.runs[0].columns[0].values[3]: must be a number or null, not a text "abc"'),
    (["runs", 0, "columns", 0, "values"], [], "$.runs[0].columns[0].values: must not be empty"),
    (["runs", 0, "columns", 1, "unti"], "Pa", "$.runs[0].columns[1].unti: is not part of the format "
                                              "(allowed here: name, unit, values)"),
    (["runs", 0, "metadata", "temperature"], {"value": 25}, "$.runs[0].metadata.temperature.unit: is missing (required)"),
    (["runs", 0, "metadata", "temperature"], "25", '$.runs[0].metadata.temperature: "25" has no unit; '
                                                   'write it as {"value": 25, "unit": "..."}'),
    (["runs", 0, "metadata", "temperature"], {"value": 25, "unit": "Pa"},
     "$.runs[0].metadata.temperature: unit 'Pa' is a stress unit, but a temperature unit is needed"),
    (["runs", 1, "columns", 1, "values"], [10, 18, 40],
     "$.runs[1].columns[1].values: 3 values, but $.runs[1].columns[0].values has 4"),
    (["runs", 0, "columns", 1, "unit"], "Pa",
     "$.runs[0].columns[1].unit: unit 'Pa' is a stress unit, but a viscosity unit is needed"),
    (["runs", 1, "columns", 0, "unit"], "m/s",
     "$.runs[1].columns[0].unit: unit 'm/s' is a unit of dimension [length] / [time], but an angular velocity "
     "unit is needed"),
    (["runs", 0, "columns", 0, "name"], "rate of climb",
     "$.runs[0].columns: no shear-rate, speed or dial-reading column found in the header (rate of climb, Viscosity)"),
    (["run s"], [], "$['run s']: is not part of the format (allowed here: $schema, format, generator, runs, version)"),
]


@pytest.mark.parametrize("path,value,reason", INVALID, ids=[r.split(":")[0] + f"-{i}" for i, (_, _, r) in enumerate(INVALID)])
def test_every_problem_names_its_json_path(path: list[Any], value: Any, reason: str) -> None:
    """JSON Schema 2020-12 keywords (required, type, const, minItems, additionalProperties,
    oneOf) and the checks beyond the schema; paths as RFC 9535 writes them."""
    data = encode(_set(valid_document(), path, value))
    with pytest.raises(RunDocumentError) as info:
        read_document(data)
    assert info.value.reason == reason
    assert info.value.line is None and "\n" not in info.value.reason


def test_nan_and_infinity_are_not_json() -> None:
    """RFC 8259 §6: no NaN or Infinity; Python's json writes them unless told not to."""
    text = encode(valid_document()).replace(b"8000", b"NaN", 1).replace(b"300]", b"-Infinity]", 1)
    problems = document_problems(text)
    assert [str(p) for p in problems] == [
        "$.runs[0].columns[1].values[0]: NaN is not a JSON number (RFC 8259, section 6); write null for a missing value",
        "$.runs[0].columns[1].values[3]: -Infinity is not a JSON number (RFC 8259, section 6); write null for a missing value",
    ]


def test_several_problems_are_all_listed_and_the_first_is_named() -> None:
    doc = _set(_set(valid_document(), ["runs", 1, "columns", 0, "unit"], _DELETE), ["runs", 0, "metadata", "gap"], 0.5)
    doc = _set(doc, ["runs", 0, "columns", 0, "values", 2], True)
    problems = document_problems(encode(doc))
    paths = [p.path for p in problems]
    assert paths == ["$.runs[0].columns[0].values[2]", "$.runs[0].metadata.gap", "$.runs[1].columns[0].unit"]
    assert problems[1].message == 'must be a text or a quantity {"value": number, "unit": text}, not a number 0.5'
    with pytest.raises(RunDocumentError) as info:
        read_document(encode(doc))
    assert info.value.reason.startswith("$.runs[0].columns[0].values[2]: must be a number or null, not a boolean true")
    assert info.value.reason.endswith("(and 2 more problems; `gammadot schema --check FILE` lists them)")


def test_text_that_is_not_json_names_line_and_column() -> None:
    data = b'{"format": "gammadot-run",\n "version": 1,\n "runs": [,]}'
    with pytest.raises(ImportRejection) as info:
        read_document(data)
    assert info.value.reason == "not valid JSON: Expecting value (line 3, column 11)" and info.value.line == 3


def test_json_path_quotes_what_is_not_a_name() -> None:
    assert json_path(["runs", 0, "metadata", "gap (nominal)"]) == "$.runs[0].metadata['gap (nominal)']"
    assert json_path(["it's"]) == "$['it\\'s']"


def test_schema_check_command_lists_every_problem(tmp_path: Path) -> None:
    good, bad = tmp_path / "good.json", tmp_path / "bad.json"
    good.write_bytes(encode(valid_document()))
    bad.write_bytes(encode(_set(_set(valid_document(), ["version"], 1.5), ["runs", 0, "columns", 0, "unit"], "")))
    result = CliRunner().invoke(main, ["schema", "--check", str(good), "--check", str(bad)])
    assert result.exit_code == 1
    assert result.output.splitlines() == [
        f"{good}: ok",
        f"{bad}: $.version: version 1.5 is not read by this gammadot (it reads version 1); update gammadot",
    ]


# --------------------------------------------------------------------------- in a study


def test_runs_from_json_in_a_study_and_a_foreign_json_rejected(tmp_path: Path, registry) -> None:
    study = tmp_path / "study"
    study.mkdir()
    (study / "study.toml").write_text('[geometries.cone50]\ntype = "cone_plate"\nradius = "25 mm"\n'
                                      'cone_angle = "1 deg"\n', encoding="utf-8")
    (study / "lims.json").write_bytes(encode(valid_document()))
    (study / "settings.json").write_text('{"theme": "dark"}', encoding="utf-8")
    result = run_study(study, registry, tmp_path / "out")
    assert [r.run.run_id for r in result.runs] == ["lims-r1", "lims-r2"]
    rate = result.runs[1].run.columns["shear_rate"]  # cone: γ̇ = Ω/α (rpm → rad/s: 2π/60)
    np.testing.assert_allclose(rate, np.array([1, 2, 5, 10]) * 2 * np.pi / 60 / np.radians(1.0), rtol=1e-12)
    (rejected,) = result.rejected
    assert rejected.describe() == ('settings.json: $.format: not a gammadot run document (format is missing, '
                                   'expected "gammadot-run")')
    notes = [f.message for f in result.runs[1].findings if f.check == "import.note"]
    assert "entered by the LIMS interface" in notes


def test_sniff() -> None:
    head = encode(valid_document())[:200]
    assert json_runs.sniff(Path("a.json"), head) == 0.9
    assert json_runs.sniff(Path("a.txt"), head) == 0.6
    assert json_runs.sniff(Path("a.json"), b'{"theme": 1}') == 0.3
    assert json_runs.sniff(Path("a.csv"), b"Shear rate [1/s],Viscosity [Pa s]\n1,2\n") == 0.0


# --------------------------------------------------------------------------- export and round trip

ROUND_TRIP_TOML = '''[study]
title = "Round trip"

[geometries.cone50]
type = "cone_plate"
radius = "25 mm"
cone_angle = "1 deg"

[geometries.plate25]
type = "parallel_plate"
radius = "12.5 mm"
gap = "1.0 mm"
'''


def _round_trip_source(study: Path) -> None:
    """A text export with instrument values, a cone run (torque, speed, normal force, time) and
    a plate run whose gap comes from its metadata; every number generated here."""
    rng = np.random.default_rng(2611)
    rate = np.geomspace(0.2, 300, 16)
    eta = 6.0 * (1 + (0.8 * rate) ** 2) ** ((0.45 - 1) / 2) * rng.lognormal(0, 0.01, rate.size)
    lines = ["sample: HC-2611", "temperature: 25 °C", "Batch no.: 2611", "Operator: R. Okafor",
             "Shear rate [1/s],Viscosity [mPa·s],Status"]
    lines += [f"{float(g)!r},{float(e * 1000)!r},ok" for g, e in zip(rate, eta)]
    omega = rate * np.radians(1.0)
    torque = 2 * np.pi * 0.025 ** 3 * eta * rate / 3
    lines += ["", "sample: HC-2612", "geometry: cone50", "temperature: 77 °F",
              "Time [s],Speed [rpm],Torque [µN·m],Normal force [N]"]
    lines += [f"{10.0 * i!r},{float(w * 60 / (2 * np.pi))!r},{float(m * 1e6)!r},{0.01 * i!r}"
              for i, (w, m) in enumerate(zip(omega, torque))]
    lines += ["", "sample: HC-2613", "geometry: plate25", "gap: 0.8 mm",
              "Speed [rad/s],Torque [mN·m]"]
    lines += [f"{float(w)!r},{float(m * 1e3)!r}" for w, m in zip(omega[:10], torque[:10])]
    (study / "lot-2611.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")


def test_round_trip_run_to_json_to_run_gives_identical_tables(tmp_path: Path, registry) -> None:
    """Every run exported and imported again: the same tables (points, fits, parameters,
    checks and every other table), apart from where runs.parquet says the run came from."""
    original, again = tmp_path / "original", tmp_path / "again"
    for study in (original, again):
        study.mkdir()
        (study / "study.toml").write_text(ROUND_TRIP_TOML, encoding="utf-8")
    _round_trip_source(original)
    documents = [run_document(run) for run in imported_runs(original, registry)]
    assert [d["runs"][0]["source"]["run_id"] for d in documents] == ["lot-2611-r1", "lot-2611-r2", "lot-2611-r3"]
    merged = {**documents[0], "runs": [d["runs"][0] for d in documents]}  # one document, run ids kept
    (again / "lot-2611.json").write_text(dumps(merged), encoding="utf-8")
    run_study(original, registry, tmp_path / "out-original")
    result = run_study(again, registry, tmp_path / "out-again")
    assert not result.rejected and len(result.runs) == 3
    ignore = {"runs": ["source_file", "source_sha256", "source_line"]}
    assert_same_tables(read_tables(tmp_path / "out-original"), read_tables(tmp_path / "out-again"), ignore)
    runs = read_tables(tmp_path / "out-again")["runs"].to_pylist()
    assert runs[1]["temperature"] == pytest.approx(25.0, abs=1e-12)  # 77 °F, exported as °C
    assert runs[0]["batch_no"] == "2611"


def test_export_command_writes_one_run_and_never_overwrites(tmp_path: Path) -> None:
    study = tmp_path / "study"
    study.mkdir()
    (study / "study.toml").write_text(ROUND_TRIP_TOML, encoding="utf-8")
    _round_trip_source(study)
    env = {"GAMMADOT_NO_ENTRY_POINTS": "1"}
    printed = CliRunner().invoke(main, ["export", "--json", "lot-2611-r2", "--study", str(study)], env=env)
    assert printed.exit_code == 0
    document = json.loads(printed.stdout)
    assert document["runs"][0]["source"] == {"file": "lot-2611.csv", "sha256": document["runs"][0]["source"]["sha256"],
                                             "line": 23, "run_id": "lot-2611-r2"}  # after 21 lines and a blank
    assert [c["name"] for c in document["runs"][0]["columns"]] == ["time", "angular_velocity", "torque", "normal_force"]
    assert [c["unit"] for c in document["runs"][0]["columns"]] == ["s", "rad/s", "N·m", "N"]
    assert document_problems(printed.stdout.encode()) == []
    out = tmp_path / "r2.json"
    written = CliRunner().invoke(main, ["export", "--json", "lot-2611-r2", "--study", str(study), "--out", str(out)], env=env)
    assert written.exit_code == 0 and json.loads(out.read_text(encoding="utf-8")) == document
    again = CliRunner().invoke(main, ["export", "--json", "lot-2611-r2", "--study", str(study), "--out", str(out)], env=env)
    assert again.exit_code == 2 and "exists" in again.output
    missing = CliRunner().invoke(main, ["export", "--json", "lot-2611-r9", "--study", str(study)], env=env)
    assert missing.exit_code == 1
    assert "no run 'lot-2611-r9' in the study (runs: lot-2611-r1, lot-2611-r2, lot-2611-r3)" in missing.output
    no_format = CliRunner().invoke(main, ["export", "lot-2611-r2", "--study", str(study)], env=env)
    assert no_format.exit_code == 2 and "--json" in no_format.output


def test_find_run_numbers_repeated_ids_like_the_pipeline(tmp_path: Path, registry) -> None:
    """Two files whose names slug alike ("a b.csv", "a-b.csv") get a-b-r1 and a-b-r1-2."""
    for name in ("a b.csv", "a-b.csv"):
        (tmp_path / name).write_text(f"sample: {name}\nShear rate [1/s],Viscosity [Pa·s]\n1,2\n2,1.5\n", encoding="utf-8")
    assert find_run(tmp_path, "a-b-r1-2", registry).metadata["sample"] == "a-b.csv"
