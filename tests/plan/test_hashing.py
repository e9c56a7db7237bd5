"""The plan content hash."""

from __future__ import annotations

import hashlib
from pathlib import Path

from benchgate.plan import load_plan, loads_plan
from benchgate.plan.hashing import canonical_json, content_hash

PLANS = Path(__file__).resolve().parents[2] / "testplans"


def test_is_sha256_of_canonical_json():
    # FIPS 180-4 SHA-256 via hashlib (reference implementation)
    data = {"b": [1, 2.5, None], "a": "µ"}
    assert canonical_json(data) == '{"a":"µ","b":[1,2.5,null]}'
    assert content_hash(data) == hashlib.sha256(canonical_json(data).encode()).hexdigest()


def test_stable_across_whitespace_comments_order_and_style():
    text = (PLANS / "tb3.yaml").read_text()
    ref = load_plan(str(PLANS / "tb3.yaml")).hash
    # comments, blank lines, trailing spaces
    # (not inside the folded description, where trailing spaces are content: YAML 1.1, 9.1)
    noisy = "\n".join(line + "   " if line.lstrip().startswith(("- id:", "kind:")) else line
                      for line in text.splitlines()).replace("\nsteps:", "\n\n# hi\nsteps:")
    noisy = noisy.replace("{min: 2 mA, max: 8 mA}", "{ min: 2 mA ,   max:  8 mA }")
    assert loads_plan(noisy, "x.yaml").hash == ref
    # key order at the top level and flow vs block style of a mapping
    top, rest = text.split("\nrequires:", 1)
    reordered = "requires:" + rest.split("\ndecision:", 1)[0] + "\n" + top + "\ndecision:" + rest.split("\ndecision:", 1)[1]
    assert loads_plan(reordered, "x.yaml").hash == ref
    flow = text.replace("limit: {min: 2 mA, max: 8 mA}", "limit:\n      max: 8 mA\n      min: 2 mA")
    assert flow != text and loads_plan(flow, "x.yaml").hash == ref


def test_changes_with_content():
    text = (PLANS / "tb3.yaml").read_text()
    ref = loads_plan(text, "x.yaml").hash
    assert loads_plan(text.replace("max: 8 mA", "max: 9 mA"), "x.yaml").hash != ref
    assert loads_plan(text.replace('version: "1.0"', 'version: "1.1"'), "x.yaml").hash != ref
