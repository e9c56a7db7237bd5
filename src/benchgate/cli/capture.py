"""``benchgate capture STATION --instrument NAME --duration 1s --out FILE.npz``: one capture."""

from __future__ import annotations

import argparse
import sys

from benchgate.cli._argtypes import positive_quantity as _quantity
from benchgate.cli._argtypes import rate as _rate


def add_parser(subparsers) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "capture",
        help="take one capture through a station's instrument into a .npz file",
        description="Take one capture through an instrument of a station (the serial ADC or "
        "the digitizer) into the .npz capture format, with the instrument's identity, "
        "calibration and loss counts in its metadata. `benchgate analyze FILE.npz` measures it.",
        epilog="Exit codes: 0 written, 2 bad station file or arguments, 3 instrument error "
        "(a disconnect still writes what arrived, marked partial).",
    )
    parser.add_argument("station", metavar="STATION", help="station file (YAML)")
    parser.add_argument("--instrument", default="adc", metavar="NAME",
                        help="instrument role to capture with: adc or digitizer (default adc)")
    parser.add_argument("--duration", required=True, type=_quantity("s"), metavar="TIME",
                        help="capture length, e.g. 1s, 250ms")
    parser.add_argument("--rate", type=_rate, metavar="RATE",
                        help="sample rate, e.g. 50k or 50 kHz (default: the station's or the device's)")
    parser.add_argument("--channel", metavar="NAME",
                        help="channel to capture (default: the instrument's first channel)")
    parser.add_argument("--out", required=True, metavar="FILE.npz", help="where to write the capture")
    parser.add_argument("--supply", type=_quantity("V"), metavar="VOLTS",
                        help="power the unit from the station's supply at this voltage for the capture "
                        "(needs --current-limit); the output is switched off afterwards, whatever happens")
    parser.add_argument("--current-limit", type=_quantity("A"), metavar="AMPS",
                        help="supply current limit for --supply, e.g. 50mA")
    parser.add_argument("--settle", type=_quantity("s"), default=0.5, metavar="TIME",
                        help="wait after switching the supply on before recording (default 0.5 s)")
    parser.set_defaults(func=run)
    return parser


def run(args) -> int:
    from benchgate.capfile import save_capture
    from benchgate.clock import SystemClock
    from benchgate.errors import BenchgateError, InstrumentDisconnected
    from benchgate.instruments import load_station, open_station
    from benchgate.units import format_quantity

    station = load_station(args.station)
    role = args.instrument
    if args.supply is not None and args.current_limit is None:
        raise BenchgateError("--supply needs --current-limit: set the limit before any power is applied")
    roles = [role] + (["supply"] if args.supply is not None else [])
    clock = SystemClock()
    with open_station(station, roles=roles, clock=clock) as bench:  # its exit switches the supply off
        inst = bench[role]
        channel = args.channel or _default_channel(station.instruments[role])
        if args.supply is not None:
            supply = bench.supply
            supply.set_current_limit(args.current_limit)
            supply.set_voltage(args.supply)
            supply.output(True)
            clock.sleep(args.settle)
        try:
            capture = inst.capture(channel, duration=args.duration, rate=args.rate)
        except InstrumentDisconnected as exc:
            if exc.partial is not None:
                save_capture(exc.partial.with_metadata(partial=True), args.out)
                print(f"benchgate: {role}: partial capture ({exc.partial.n} samples) written to {args.out}",
                      file=sys.stderr)
            raise
    digest = save_capture(capture, args.out)
    loss = capture.metadata.get("loss", {}) if isinstance(capture.metadata.get("loss"), dict) else {}
    lost = loss.get("lost_samples", 0)
    print(f"{args.out}: {capture.n} samples of {channel!r} at {format_quantity(capture.sample_rate, 'Hz')} "
          f"({format_quantity(capture.duration, 's')}), {lost} lost, sha256 {digest[:16]}")
    for warning in capture.metadata.get("warnings", []) or []:
        print(f"warning: {warning}")
    return 0


def _default_channel(config) -> str:
    channels = config.options.get("channels")
    if channels:
        return list(channels)[0]
    return str(config.options.get("channel", "ch1"))
