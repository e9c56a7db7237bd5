"""The preflight: what is verified before anything on the bench is touched.

1. The station provides every instrument role the plan ``requires`` (and every role a step uses).
2. No instrument's calibration is past due, unless the run allows it (then it is recorded).
3. The plan's cautions are shown; each hazard needs the operator's acknowledgement (each face asks
   in its own way) or ``accept_hazards`` (recorded either way).
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from benchgate.errors import PreflightError
from benchgate.runner.attendant import Attendant, Hint, Notice
from benchgate.runner.options import RunOptions

if TYPE_CHECKING:
    from benchgate.instruments.station import Calibration, Station
    from benchgate.plan.model import Plan

#: how hazards accepted before the run (``RunOptions.accept_hazards``) are recorded
ACCEPTED_IN_ADVANCE = "accepted in advance for this run"


def roles_used(plan: Plan) -> frozenset[str]:
    """Instrument roles the plan needs: its ``requires`` plus those its steps name."""
    roles = set(plan.requires)
    for step in plan.steps:
        if step.kind == "supply":
            roles.add("supply")
        elif step.kind in ("capture", "reading"):
            roles.add(str(getattr(step, "instrument")))  # noqa: B009 - capture and reading steps have one
        if step.kind == "capture" and getattr(step, "power_on", False):
            roles.add("supply")
    return frozenset(roles)


@dataclass
class Preflight:
    """What preflight found and decided, copied into the unit record."""

    roles: frozenset[str]
    expired: list[str] = field(default_factory=list)  # "adc (channel out) due 2026-01-01"
    hazards_acknowledged: str | None = None


def check_station(plan: Plan, station: Station) -> frozenset[str]:
    """Raise :class:`PreflightError` naming every role the station lacks; return the roles used."""
    roles = roles_used(plan)
    provided = frozenset(station.instruments)
    missing = sorted(roles - provided)
    if missing:
        have = ", ".join(sorted(provided)) or "none"
        raise PreflightError(
            f"plan {plan.id!r} needs {', '.join(missing)} but the station provides {have}",
            where=station.path,
        )
    return roles


def _calibrations(role: str, cal: Calibration | None) -> Iterator[tuple[str, Calibration]]:
    if cal is None:
        return
    channels = getattr(cal, "channels", None) or {}
    if not channels:
        yield role, cal
    for channel, sub in channels.items():
        yield f"{role} (channel {channel})", sub


def expired_calibrations(station: Station, roles: frozenset[str], today: _dt.date) -> list[str]:
    """Each instrument (or ADC channel) among ``roles`` whose calibration is past due."""
    out = []
    for role in sorted(roles):
        config = station.instruments.get(role)
        if config is None:
            continue
        for label, cal in _calibrations(role, config.calibration):
            if cal.status(today) == "expired":
                out.append(f"{label} calibration was due {cal.due}")
    return out


def first_expired_position(station: Station, roles: frozenset[str], today: _dt.date) -> str:
    """file:line of the first instrument with an expired calibration (or the station file)."""
    for role in sorted(roles):
        config = station.instruments.get(role)
        cal = None if config is None else config.calibration
        if cal is not None and cal.status(today) == "expired":
            file = getattr(config, "file", None) or station.path
            line = getattr(config, "line", None)
            return f"{file}:{line}" if line else str(file)
    return str(station.path)


def acknowledge_hazards(plan: Plan, options: RunOptions, attendant: Attendant) -> str | None:
    """Get the acknowledgement of every hazard, or raise :class:`PreflightError`.

    Returns how the hazards were acknowledged (for the record), None when there are none.
    """
    hazards = tuple(plan.hazards)
    if not hazards:
        return None
    for hazard in hazards:
        attendant.announce(Notice("hazard", f"{hazard.name}: {hazard.text}"))
    if options.accept_hazards:
        return ACCEPTED_IN_ADVANCE
    names = ", ".join(h.name for h in hazards)
    if options.unattended:
        raise PreflightError(f"hazards not acknowledged: plan {plan.id!r} has hazards ({names}) and an "
                             "unattended run has nobody to acknowledge them; nothing was switched on",
                             where=str(plan.path), hint=Hint.ACCEPT_HAZARDS)
    for hazard in hazards:
        if not attendant.acknowledge(hazard.name, hazard.text):
            raise PreflightError(f"hazard {hazard.name!r} was not acknowledged; nothing was switched on",
                                 where=str(plan.path), hint=Hint.ACCEPT_HAZARDS)
    return "typed by operator"


def preflight(plan: Plan, station: Station, options: RunOptions, attendant: Attendant) -> Preflight:
    """Run every check before the bench is touched (see the module docstring)."""
    roles = check_station(plan, station)
    expired = expired_calibrations(station, roles, options.today_utc())
    if expired and not options.allow_expired_calibration:
        raise PreflightError("; ".join(expired) + "; nothing was switched on",
                             where=first_expired_position(station, roles, options.today_utc()),
                             hint=Hint.ALLOW_EXPIRED_CALIBRATION)
    for caution in plan.cautions:
        attendant.announce(Notice("caution", caution))
    for line in expired:
        attendant.announce(Notice("warning", f"{line}; running anyway (expired calibration allowed for "
                                             "this run, recorded)"))
    ack = acknowledge_hazards(plan, options, attendant)
    return Preflight(roles=roles, expired=expired, hazards_acknowledged=ack)
