"""``benchgate analyze FILE``: measure a recorded capture and print the results."""

from __future__ import annotations

import argparse
import sys

from benchgate.cli._argtypes import rate as _rate


def add_parser(subparsers) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "analyze",
        help="measure a recorded capture (CSV, WAV or .npz)",
        description="Measure frequency, levels, distortion, start-up, duty cycle and drift of a "
        "recorded capture, each with its expanded uncertainty (k = 2) and a validity flag.",
        epilog="Exit codes: 0 analyzed (some measurements may be invalid, with a reason), "
        "2 the file cannot be read.",
    )
    parser.add_argument("file", metavar="FILE", help="capture file: .csv, .wav or .npz")
    parser.add_argument("--rate", type=_rate, metavar="RATE",
                        help="sample rate, e.g. 48k or 48 kHz (needed for a one-column CSV)")
    parser.add_argument("--adc-bits", type=int, metavar="N", help="ADC resolution in bits")
    parser.add_argument("--vref", type=float, metavar="V",
                        help="ADC reference voltage (range 0 … V); for WAV, volts at full scale")
    parser.add_argument("--clock-ppm", type=float, metavar="PPM", help="sample-clock tolerance in ppm")
    parser.add_argument("--harmonics", type=int, default=10, metavar="N",
                        help="highest harmonic order summed for THD (default 10)")
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    parser.set_defaults(func=run)
    return parser


def run(args) -> int:
    import json
    import math

    from benchgate.analysis.core import analyze
    from benchgate.capfile import load_capture
    from benchgate.errors import CaptureError

    if args.harmonics is not None and args.harmonics < 1:
        raise CaptureError(f"--harmonics must be at least 1, got {args.harmonics}", file=args.file)
    capture = load_capture(args.file, rate=args.rate, adc_bits=args.adc_bits, vref=args.vref,
                           clock_ppm=args.clock_ppm)
    result = analyze(capture, harmonics=args.harmonics)
    if args.json:
        print(json.dumps(result.to_dict(), allow_nan=False, default=_json_default))
        return 0
    rows = _rows(result, math)
    out = sys.stdout
    if out.isatty():
        _print_rich(args.file, capture, result, rows)
    else:
        _print_plain(args.file, capture, result, rows, out)
    return 0


def _json_default(obj):
    import numpy as np

    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    return str(obj)


def _rows(result, math) -> list[tuple[str, str, str, str]]:
    from benchgate.common.names import MEASUREMENT_UNITS
    from benchgate.units.format import format_quantity

    rows = []
    for name, m in result.measurements.items():
        unit = MEASUREMENT_UNITS.get(name, m.unit)
        if math.isfinite(m.value):
            value = format_quantity(m.value, unit, digits=6 if name == "frequency" else 4)
            if m.uncertainty is not None:
                value += f" ± {format_quantity(m.uncertainty, unit, digits=2)}"
        else:
            value = "—"
        note = "" if m.valid else f"INVALID: {m.reason}"
        if m.valid and m.details and "harmonics_summed" in m.details and name == "thd":
            orders = m.details["harmonics_summed"]
            note = f"harmonics {orders[0]}–{orders[-1]} summed" if orders else "no harmonic below Nyquist"
        rows.append((name, value, unit, note))
    return rows


def _header(file, capture, result) -> list[str]:
    lines = [f"{file}: {capture.n} samples at {capture.sample_rate:g} Hz ({capture.duration:.6g} s); "
             f"steady part from {result.steady_start:.4g} s"]
    lines += [f"warning: {w}" for w in result.warnings]
    return lines


def _print_plain(file, capture, result, rows, out) -> None:
    for line in _header(file, capture, result):
        print(line, file=out)
    widths = [max(len(r[i]) for r in rows + [("measurement", "value ± U (k=2)", "unit", "note")])
              for i in range(3)]
    head = ("measurement", "value ± U (k=2)", "unit", "note")
    for r in [head] + rows:
        print(f"{r[0]:<{widths[0]}}  {r[1]:<{widths[1]}}  {r[2]:<{widths[2]}}  {r[3]}".rstrip(), file=out)


def _print_rich(file, capture, result, rows) -> None:
    from rich.console import Console
    from rich.table import Table

    console = Console()
    for line in _header(file, capture, result):
        console.print(line, style="yellow" if line.startswith("warning") else None, markup=False)
    table = Table(show_header=True, header_style="bold")
    for col in ("measurement", "value ± U (k=2)", "unit", "note"):
        table.add_column(col)
    for r in rows:
        table.add_row(*r, style="red" if r[3].startswith("INVALID") else None)
    console.print(table)
