"""``benchgate reanalyze``: re-judge a stored run against another plan version, without hardware."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from benchgate.cli import main

REPO = Path(__file__).resolve().parents[2]
TB3 = REPO / "testplans" / "tb3.yaml"


@pytest.fixture(scope="module")
def stored(tmp_path_factory):
    """One good unit run on the understudy bench; the bench is gone afterwards."""
    from benchgate.sim.bench import UnderstudyBench

    root = tmp_path_factory.mktemp("reanalyze")
    with UnderstudyBench("tb3", speed=4.0, workdir=root / "vb") as vb:
        vb.load_unit("OH-RE-1")
        code = main(["run", str(TB3), "--station", str(vb.station_path), "--serial", "OH-RE-1",
                     "--unattended", "--display", "quiet", "--reports", str(root / "reports"),
                     "--clock-speed", "4"])
    assert code == 0
    (report,) = (root / "reports").rglob("*-pass.json")
    return root, report


def tighter_plan(tmp_path):
    text = TB3.read_text()
    assert text.count("thd: {max: 5 %}") == 2
    text = text.replace("thd: {max: 5 %}", "thd: {max: 0.1 %}").replace('version: "1.0"', 'version: "1.1"')
    path = tmp_path / "tb3-1.1.yaml"
    path.write_text(text)
    return path


def test_reanalysis_under_a_tighter_plan(stored, tmp_path, capsys):
    root, report = stored
    code = main(["reanalyze", str(report), "--plan", str(tighter_plan(tmp_path)), "--json"])
    out = json.loads(capsys.readouterr().out)
    assert code == 1 and out["verdict"] == "fail"
    assert "thd" in out["reason"] and "above 0.1000 %" in out["reason"]
    new = json.loads(Path(out["report"]["json"]).read_text())
    import jsonschema

    from benchgate.report.json_report import load_schema

    jsonschema.Draft202012Validator(load_schema()).validate(new)
    original = json.loads(report.read_text())
    assert new["reanalysis_of"]["run_id"] == original["run_id"]
    assert new["reanalysis_of"]["plan_version"] == "1.0" and new["plan"]["version"] == "1.1"
    assert new["reason"].startswith("reanalysis:")
    # the captures named by the new report are the stored ones, byte for byte
    for step in new["steps"]:
        if step["capture"]:
            (was,) = [s for s in original["steps"] if s["id"] == step["id"]]
            assert step["capture"]["sha256"] == was["capture"]["sha256"]
            assert (Path(out["report"]["json"]).parent / step["capture"]["file"]).exists()
    thd = [c for s in new["steps"] for c in s["checks"] if c["measurement"] == "thd"]
    old_thd = [c for s in original["steps"] for c in s["checks"] if c["measurement"] == "thd"]
    assert [c["verdict"] for c in thd] == ["fail", "fail"]
    # same stored data, same analysis: the value is the original one
    assert [c["result"]["value"] for c in thd] == pytest.approx([c["result"]["value"] for c in old_thd])


def test_reanalysis_under_the_same_plan_agrees(stored, capsys):
    _, report = stored
    code = main(["reanalyze", str(report), "--plan", str(TB3)])
    out = capsys.readouterr().out
    assert code == 0 and out.startswith("PASS") and "was pass under tb3-final v1.0" in out


def test_not_a_report_is_one_clear_line(tmp_path, capsys):
    bad = tmp_path / "bad.json"
    bad.write_text("{not json")
    code = main(["reanalyze", str(bad), "--plan", str(TB3)])
    err = capsys.readouterr().err
    assert code == 2 and err.startswith("benchgate: ") and "bad.json" in err and len(err.splitlines()) == 1


def test_reanalysis_files_say_so_in_their_names_and_headline(stored, tmp_path, capsys):
    root, report = stored
    code = main(["reanalyze", str(report), "--plan", str(tighter_plan(tmp_path)), "--json"])
    out = json.loads(capsys.readouterr().out)
    assert code == 1
    for ext in ("json", "html"):
        name = Path(out["report"][ext]).name
        # <time>-reanalysis-v<plan version>-<verdict>, beside (never over) the original run
        assert name.endswith(f"-reanalysis-v1.1-fail.{ext}"), name
    assert Path(out["report"]["json"]).parent == report.parent
    assert report.exists() and report.with_suffix(".html").exists()
    html = Path(out["report"]["html"]).read_text(encoding="utf-8")
    assert "Reanalysis without hardware" in html and "the original run was pass under plan v1.0" in html


def test_a_run_keeps_its_views_and_capture_metadata_in_the_record(stored):
    _, report = stored
    data = json.loads(report.read_text())
    caps = [s["capture"] for s in data["steps"] if s["capture"]]
    assert caps
    for cap in caps:
        views = cap["views"]
        assert views is not None and views["fundamental"] is not None
        assert len(views["spectrum"]["f"]) == len(views["spectrum"]["db"]) > 100
        assert len(views["envelope"]["t"]) == len(views["envelope"]["low"]) > 10
        assert cap["metadata"]["instrument"]["role"] == "adc"
