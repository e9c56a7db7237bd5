"""The shipped JSON Schema is generated from the models and accepts the example plans."""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest
import yaml

from benchgate.plan.schema import build_schema, schema_text

ROOT = Path(__file__).resolve().parents[2]
SHIPPED = ROOT / "src" / "benchgate" / "schemas" / "plan.schema.json"


def test_shipped_schema_is_in_sync():
    assert SHIPPED.read_text(encoding="utf-8") == schema_text(), (
        "regenerate: python -m benchgate.plan.schema")


def test_schema_is_valid_draft_2020_12():
    # jsonschema as the reference implementation of JSON Schema 2020-12
    jsonschema.Draft202012Validator.check_schema(build_schema())


@pytest.mark.parametrize("name", ["tb3", "wo1", "pf2"])
def test_examples_validate(name):
    data = yaml.safe_load((ROOT / "testplans" / f"{name}.yaml").read_text())
    jsonschema.Draft202012Validator(json.loads(SHIPPED.read_text())).validate(data)


@pytest.mark.parametrize(("path", "bad"), [
    (("steps", 0, "voltag"), "9 V"),
    (("steps", 2, "checks", "frequncy"), {"min": 1}),
    (("steps", 2, "kind"), "captur"),
    (("decision",), "strict"),
    (("steps", 2, "checks", "frequency", "from_circuit", "topology"), "rc_lader"),
])
def test_schema_rejects_typos(path, bad):
    data = yaml.safe_load((ROOT / "testplans" / "tb3.yaml").read_text())
    node = data
    for key in path[:-1]:
        node = node[key]
    node[path[-1]] = bad
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(data, build_schema(), cls=jsonschema.Draft202012Validator)


def test_example_plans_point_at_schema():
    for name in ("tb3", "wo1", "pf2"):
        first = (ROOT / "testplans" / f"{name}.yaml").read_text().splitlines()[0]
        assert first == "# yaml-language-server: $schema=../src/benchgate/schemas/plan.schema.json"
