"""The published JSON Schema of results.json names every field that results.json writes.

Real results.json files come from the runs that tests/test_docs.py builds to reach the rare branches
(empty and one-row cells, outliers, cell summaries, many rows, every follow-up family); each must
validate against reporter/schema/results-1.schema.json (JSON Schema Draft 2020-12, checked with the
jsonschema library), and each of its field paths must be a property of the schema.
"""

from __future__ import annotations

import copy
import json

import jsonschema
import pytest

from reporter.render.results_json import load_schema
from test_docs import _json_paths, _results_projects, _schema_paths, _writer_keys


def _inline(node, defs: dict):
    """The schema with every local ``$ref`` to ``#/$defs/...`` replaced by its target."""
    if isinstance(node, dict):
        if "$ref" in node:
            target = defs[node["$ref"].removeprefix("#/$defs/")]
            return _inline(copy.deepcopy(target), defs)
        return {k: _inline(v, defs) for k, v in node.items()}
    if isinstance(node, list):
        return [_inline(v, defs) for v in node]
    return node


def _maps(node, prefix: str, out: set[str]) -> None:
    """Paths of objects whose keys are data (a schema for every value, no named properties)."""
    if not isinstance(node, dict):
        return
    if isinstance(node.get("additionalProperties"), dict) and not node.get("properties"):
        out.add(prefix)
    for key in ("anyOf", "oneOf", "allOf"):
        for sub in node.get(key, []):
            _maps(sub, prefix, out)
    for key, sub in node.get("properties", {}).items():
        _maps(sub, f"{prefix}.{key}" if prefix else key, out)
    if isinstance(node.get("items"), dict):
        _maps(node["items"], prefix + "[]", out)


@pytest.fixture(scope="module")
def schema() -> dict:
    return load_schema()


@pytest.fixture(scope="module")
def schema_paths(schema) -> tuple[set[str], set[str]]:
    inlined = _inline(schema, schema.get("$defs", {}))
    paths: set[str] = set()
    maps: set[str] = set()
    _schema_paths(inlined, "", paths)
    _maps(inlined, "", maps)
    return paths, maps


@pytest.fixture(scope="module")
def runs(tmp_path_factory) -> list[tuple[str, dict]]:
    """(plan, results.json) for each run, written by ``anova-report run`` to a folder."""
    from reporter.cli import main

    folder = tmp_path_factory.mktemp("schema_runs")
    out = []
    for i, plan in enumerate(_results_projects(folder)):
        dest = folder / f"out{i}"
        assert main(["run", str(plan), "--format", "json", "--out", str(dest)]) == 0, plan
        out.append((plan.name, json.loads((dest / "results.json").read_text(encoding="utf-8"))))
    return out


def test_schema_is_a_valid_draft_2020_12_schema(schema):
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    jsonschema.Draft202012Validator.check_schema(schema)


def test_every_run_validates_against_the_schema(runs, schema):
    validator = jsonschema.Draft202012Validator(schema)
    for plan, doc in runs:
        errors = sorted(validator.iter_errors(doc), key=lambda e: list(e.absolute_path))
        assert not errors, f"{plan}: " + "; ".join(
            f"{'/'.join(map(str, e.absolute_path))}: {e.message}" for e in errors[:5])


def test_every_written_field_path_is_in_the_schema(runs, schema_paths):
    paths, maps = schema_paths
    written: set[str] = set()
    for _, doc in runs:
        _json_paths(doc, "", written)
    missing = sorted(p for p in written if p not in paths and not any(p.startswith(m + ".") for m in maps))
    assert not missing, f"field paths results.json writes but the schema leaves out: {missing}"


def test_every_writer_key_is_a_schema_property(schema_paths):
    """Keys of reporter/render/results_json.py that the runs above may not reach still need a property."""
    paths, _ = schema_paths
    names = {p.rsplit(".", 1)[-1].removesuffix("[]") for p in paths}
    missing = sorted(_writer_keys() - names)
    assert not missing, f"keys written by results_json.py with no property in the schema: {missing}"

