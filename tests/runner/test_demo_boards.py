"""`benchgate demo --board aa1|lp2`: the generator-driven lots, and their shipped plan copies."""

from __future__ import annotations

from pathlib import Path

import pytest

from benchgate.errors import PreflightError
from benchgate.runner.demo import DEMO_BOARDS, find_plan, run_demo

REPO = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize("board", ["aa1", "lp2"])
def test_shipped_plan_copies_match_testplans(board):
    shipped = REPO / "src" / "benchgate" / "demo" / f"{board}.yaml"
    assert shipped.read_bytes() == (REPO / "testplans" / f"{board}.yaml").read_bytes()
    assert find_plan(f"{board}.yaml") == REPO / "testplans" / f"{board}.yaml"


def test_lp2_lot_good_passes_defect_fails(tmp_path):
    result = run_demo(board="lp2", units=2, speed=20, reports_dir=tmp_path)
    assert result.lot == "LP2-2612"
    (good, bad) = result.units
    assert good.defect is None and good.verdict == "pass"
    assert bad.defect is not None and bad.verdict == "fail"
    assert result.summary_html.is_file()
    page = result.summary_html.read_text(encoding="utf-8")
    # the lot statistics include the sweep's −3 dB frequency and the tone's gain
    assert 'aria-label="f_3db_high histogram, 2 values"' in page
    assert 'aria-label="gain_db histogram, 2 values"' in page


def test_unknown_board_is_refused(tmp_path):
    assert set(DEMO_BOARDS) == {"tb3", "aa1", "lp2"}
    with pytest.raises(PreflightError, match="no demo for board 'zz9'"):
        run_demo(board="zz9", units=1, reports_dir=tmp_path)
