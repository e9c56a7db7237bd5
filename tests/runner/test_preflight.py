"""Preflight: station roles, calibration due dates, cautions and hazard acknowledgement."""

from __future__ import annotations

import datetime as _dt
from dataclasses import replace

import pytest
from runner_fakes import (
    Calibration,
    Hazard,
    InstrumentConfig,
    Recording,
    Station,
    make_bench,
    services,
    standard_plan,
)

from benchgate.cli.terminal import ACK_PHRASE
from benchgate.clock import ManualClock
from benchgate.errors import PreflightError
from benchgate.runner.options import RunOptions
from benchgate.runner.preflight import ACCEPTED_IN_ADVANCE, preflight, roles_used
from benchgate.runner.session import Runner

TODAY = _dt.date(2026, 12, 1)


def pf(plan, station, ask=None, **opts):
    face = Recording(ask or (lambda p: ""))
    options = RunOptions(today=TODAY, **opts)
    result = preflight(plan, station, options, face)
    return result, face.lines


def test_roles_include_what_steps_use():
    assert roles_used(standard_plan(requires=frozenset())) == {"adc", "supply"}


def test_missing_role_is_refused_naming_it():
    plan = standard_plan(requires=frozenset({"adc", "supply", "counter"}))
    with pytest.raises(PreflightError) as err:
        pf(plan, Station())
    assert "counter" in str(err.value) and err.value.where() == "station.yaml"
    assert err.value.exit_code == 2


def test_nothing_is_opened_when_preflight_refuses(tmp_path):
    opened = []
    svc, db = services(make_bench())
    svc.open_bench = lambda *a, **k: opened.append(1)
    plan = standard_plan(requires=frozenset({"dmm"}))
    with pytest.raises(PreflightError):
        Runner(plan, Station(), RunOptions(reports_dir=tmp_path), services=svc)
    assert opened == [] and db.rows == {}


def expired_station():
    return Station(instruments={
        "adc": InstrumentConfig("adc", calibration=Calibration(channels={
            "out": Calibration(due=_dt.date(2026, 11, 30))}), line=7),
        "supply": InstrumentConfig("supply", calibration=Calibration(due=_dt.date(2027, 6, 1))),
    })


def test_expired_calibration_stops_before_anything():
    with pytest.raises(PreflightError) as err:
        pf(standard_plan(), expired_station())
    text = err.value.one_line()
    assert "adc (channel out) calibration was due 2026-11-30" in text
    assert err.value.where() == "station.yaml:7"
    from benchgate.runner.attendant import Hint

    assert err.value.hint == Hint.ALLOW_EXPIRED_CALIBRATION and "--" not in text  # each face words the hint


def test_allowed_expired_calibration_is_recorded(tmp_path):
    svc, db = services(make_bench())
    options = RunOptions(reports_dir=tmp_path, today=TODAY, allow_expired_calibration=True,
                         clock=ManualClock())
    with Runner(standard_plan(), expired_station(), options, services=svc) as runner:
        rec = runner.run("SN1").record
    assert rec.flags["allow_expired_calibration"] is True
    assert rec.flags["expired_calibration"] == ["adc (channel out) calibration was due 2026-11-30"]


def test_cautions_are_shown():
    _, shown = pf(standard_plan(cautions=("Board gets warm",)), Station())
    assert "CAUTION: Board gets warm" in shown


HAZ = (Hazard("hot_surface", "The regulator reaches 70 °C"),)


@pytest.mark.parametrize("typed", ["hot_surface", ACK_PHRASE, "  YES I UNDERSTAND "])
def test_hazard_acknowledged_by_typing(typed):
    result, shown = pf(standard_plan(hazards=HAZ), Station(), ask=lambda p: typed)
    assert result.hazards_acknowledged == "typed by operator"
    assert any("hot_surface" in s and "70 °C" in s for s in shown)


@pytest.mark.parametrize("typed", ["", "y", "yes", "hot"])
def test_hazard_not_acknowledged_refuses(typed):
    with pytest.raises(PreflightError, match="not acknowledged"):
        pf(standard_plan(hazards=HAZ), Station(), ask=lambda p: typed)


def test_unattended_hazard_needs_acceptance_in_advance():
    from benchgate.runner.attendant import Hint

    with pytest.raises(PreflightError, match="hazards not acknowledged") as info:
        pf(standard_plan(hazards=HAZ), Station(), unattended=True)
    # the runner names no command-line option: each face words the hint its own way
    assert info.value.hint == Hint.ACCEPT_HAZARDS and "--" not in info.value.message
    result, _ = pf(standard_plan(hazards=HAZ), Station(), unattended=True, accept_hazards=True)
    assert result.hazards_acknowledged == ACCEPTED_IN_ADVANCE


def test_hazard_acknowledgement_lands_in_record(tmp_path):
    svc, _ = services(make_bench())
    options = RunOptions(reports_dir=tmp_path, accept_hazards=True, clock=ManualClock())
    plan = replace(standard_plan(hazards=HAZ))
    with Runner(plan, Station(), options, services=svc) as runner:
        rec = runner.run("SN1").record
    assert rec.hazards_acknowledged == ACCEPTED_IN_ADVANCE and rec.flags["accept_hazards"] is True
    assert rec.hazards == ["hot_surface: The regulator reaches 70 °C"]
