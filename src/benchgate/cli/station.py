"""``benchgate station STATION``: what is on this bench, and does each instrument answer."""

from __future__ import annotations

import argparse
import sys


def add_parser(subparsers) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "station",
        help="list serial ports, open each instrument of a station, show identities and calibration",
        description="List the serial ports this computer sees, then open each instrument of the "
        "station in turn and print what it says it is and its calibration status; "
        "calibrations past their due date are flagged EXPIRED.",
        epilog="Exit codes: 0 every instrument answered, 2 bad station file, 3 an instrument "
        "could not be opened (each printed as `benchgate: <instrument>: <message>`).",
    )
    parser.add_argument("station", metavar="STATION", help="station file (YAML)")
    parser.add_argument("--no-open", action="store_true",
                        help="only read the station file and list ports; do not open instruments")
    parser.set_defaults(func=run)
    return parser


def _ports() -> list[str]:
    try:
        from serial.tools import list_ports

        ports = sorted(list_ports.comports(), key=lambda p: p.device)
    except Exception as exc:  # noqa: BLE001 - listing is informative only
        return [f"  (cannot list serial ports: {exc})"]
    lines = []
    for p in ports:
        usb = f" usb {p.vid:04x}:{p.pid:04x}" if p.vid is not None and p.pid is not None else ""
        serial_no = f" serial {p.serial_number}" if getattr(p, "serial_number", None) else ""
        desc = f" — {p.description}" if p.description and p.description != "n/a" else ""
        lines.append(f"  {p.device}{usb}{serial_no}{desc}")
    return lines or ["  (none found)"]


def _calibration(cal, today) -> str:
    if cal is None:
        return "no calibration on record"
    status = cal.status(today)
    d = cal.to_dict(today)
    due = d.get("due")
    if status == "expired":
        return f"calibration EXPIRED (due {due})"
    if status == "valid":
        return f"calibration valid until {due}"
    return "calibration has no due date"


def run(args) -> int:
    import datetime as dt

    from benchgate.errors import BenchgateError
    from benchgate.instruments import load_station, open_station

    station = load_station(args.station)
    today = dt.date.today()
    print(f"station {station.id} ({station.path})")
    print("serial ports:")
    for line in _ports():
        print(line)
    print("instruments:")
    failures = []
    for role, cfg in station.instruments.items():
        head = f"  {role:<9} {cfg.kind:<15} {cfg.address}"
        cal = _calibration(cfg.calibration, today)
        if args.no_open:
            print(f"{head}\n            {cal}")
            continue
        try:
            with open_station(station, roles=[role]) as bench:
                identity = bench[role].identity or "(no identity reported)"
        except BenchgateError as exc:
            print(f"{head}\n            NOT ANSWERING; {cal}")
            failures.append(exc)
            continue
        print(f"{head}\n            {identity}; {cal}")
    for exc in failures:
        print(f"benchgate: {exc.one_line()}", file=sys.stderr)
    return 3 if failures else 0
