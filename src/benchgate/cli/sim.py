"""``benchgate sim``: run an understudy bench until interrupted."""

from __future__ import annotations

import argparse


def add_parser(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "sim",
        help="run an understudy bench (simulated board on a pty and loopback SCPI ports)",
        description="Start a simulated unit of one of the demo boards behind a serial ADC on a "
        "pseudo-terminal and a SCPI supply, DMM, counter and digitizer on 127.0.0.1, write a "
        "station file pointing at them, and run until interrupted (Ctrl-C).",
    )
    p.add_argument("--board", default="tb3", metavar="MODEL", help="tb3, wo1 or pf2 (default tb3)")
    p.add_argument("--defect", default=None, metavar="NAME",
                   help="wrong_capacitor, low_gain, high_gain, open_section, supply_noise or intermittent")
    p.add_argument("--serial", default="SIM-0001", metavar="SN",
                   help="serial number of the simulated unit (seeds its part values)")
    p.add_argument("--speed", type=float, default=1.0, metavar="X",
                   help="virtual seconds per wall-clock second (default 1)")
    p.add_argument("--protocol", choices=("framed", "lines"), default="framed",
                   help="serial ADC protocol (default framed)")
    p.add_argument("--adc", choices=("python", "firmware", "auto"), default="python",
                   help="who serves the serial ADC: the Python device model (default), the reference "
                   "firmware running on simavr (needs 'make -C firmware'; --speed is then a ceiling, "
                   "the bench runs on the AVR's clock), or auto (the firmware when it is built); "
                   "the station file is the same")
    p.add_argument("--write-station", default=None, metavar="FILE",
                   help="also write the station file here")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of text")
    p.set_defaults(func=run)
    return p


def run(args) -> int:
    import json
    import math
    import signal
    import sys
    import threading

    from benchgate.errors import SimError
    from benchgate.sim.bench import UnderstudyBench

    if not (math.isfinite(args.speed) and args.speed > 0):
        raise SimError(f"--speed must be a positive number, got {args.speed!r}")
    stop = threading.Event()

    def _stop(_signum, _frame) -> None:
        stop.set()

    previous = {}
    for sig in (signal.SIGINT, signal.SIGTERM):
        previous[sig] = signal.signal(sig, _stop)
    try:
        with UnderstudyBench(args.board, speed=args.speed, protocol=args.protocol,
                             serial=args.serial, defect=args.defect, adc_device=args.adc) as vb:
            station = vb.station_path
            if args.write_station:
                try:
                    station = vb.write_station(args.write_station).resolve()
                except OSError as exc:
                    raise SimError(f"cannot write the station file {args.write_station}: "
                                   f"{exc.strerror or exc}") from None
            resources = vb.resources
            if args.json:
                print(json.dumps({
                    "serial_port": vb.serial_port,
                    "scpi_resource": resources["supply"],
                    "scpi_resources": resources,
                    "station_file": str(station),
                    "board": vb.board.model,
                    "serial": args.serial,
                    "defect": args.defect,
                    "speed": args.speed,
                    "protocol": args.protocol,
                    "adc_device": vb.adc_device,
                }))
            else:
                defect = args.defect or "no defect"
                print(f"understudy bench: {vb.board.name}, unit {args.serial} ({defect}), speed {args.speed:g}x")
                print(f"  serial ADC   {vb.serial_port}  ({args.protocol})")
                print(f"               served by {vb.adc_note.split(': ', 1)[1]}")
                for role, res in resources.items():
                    print(f"  {role:<12} {res}")
                print(f"  station file {station}")
                print("Ctrl-C stops.")
            sys.stdout.flush()
            while not stop.wait(0.2):
                pass
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)
    if not args.json:
        print("understudy bench stopped")
    return 0
