"""The TB-3 plan through the reference firmware in the loop gives the verdicts the Python device
model gives, for a good unit and for each defect the simulator has."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest
from firmware_support import need_firmware

from benchgate.judge.rules import Verdict
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner
from benchgate.sim.boards import get_board

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs POSIX pseudo-terminals")

TB3 = Path(__file__).resolve().parents[2] / "testplans" / "tb3.yaml"
UNITS = [("FW-GOOD-1", None)] + [(f"FW-{i}", d) for i, d in enumerate(get_board("tb3").defects, 2)]
SPEED = {"python": 4.0, "firmware": 5.0}  # the firmware's is a ceiling (the bench clock is the AVR's)


def run_lot(device: str, tmp_path: Path) -> dict[str, tuple[Verdict, str, dict]]:
    from benchgate.instruments.station import load_station
    from benchgate.plan import load_plan
    from benchgate.sim.bench import UnderstudyBench

    plan = load_plan(TB3)
    out = {}
    with UnderstudyBench("tb3", speed=SPEED[device], workdir=tmp_path / device, adc_device=device) as ub:
        assert ub.adc_device == device
        options = RunOptions(reports_dir=tmp_path / device / "reports", unattended=True, clock=ub.clock)
        with Runner(plan, load_station(ub.station_path), options) as runner:
            for serial, defect in UNITS:
                ub.load_unit(serial, defect)
                rec = runner.run(serial).record
                checks = {(c.step_id, c.measurement): c.verdict for c in rec.checks()}
                out[serial] = (rec.verdict, rec.reason, checks)
                assert ub.supply_output is False
    return out


@pytest.fixture(scope="module")
def lots(tmp_path_factory):
    need_firmware()
    tmp = tmp_path_factory.mktemp("plan")
    return {device: run_lot(device, tmp) for device in ("python", "firmware")}


def test_good_unit_passes_and_every_defect_fails_through_the_firmware(lots):
    firmware = lots["firmware"]
    for serial, defect in UNITS:
        verdict, reason, _checks = firmware[serial]
        if defect is None:
            assert verdict == Verdict.PASS, reason
        else:
            assert verdict == Verdict.FAIL, f"{defect}: {verdict} ({reason})"


def test_same_verdicts_as_the_python_device_model(lots):
    for serial, defect in UNITS:
        py, fw = lots["python"][serial], lots["firmware"][serial]
        assert fw[0] == py[0], f"{serial} ({defect}): firmware {fw[0]} ({fw[1]}), python {py[0]} ({py[1]})"
        # and the checks that decided it fail on both
        py_failing = {k for k, v in py[2].items() if v == Verdict.FAIL}
        fw_failing = {k for k, v in fw[2].items() if v == Verdict.FAIL}
        if defect == "intermittent":
            # where the contact drops out depends on the instants each capture starts, which the
            # two devices do not share to the microsecond: the dip fails on both, THD+N may not
            assert ("steady", "amplitude_dip") in py_failing & fw_failing, serial
        else:
            assert py_failing == fw_failing, serial
