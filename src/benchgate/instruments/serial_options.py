"""The station options of the serial ADC driver (``kind: serial-adc``), declared and checked.

Kept apart from the driver so reading a station file does not load the port code. The
meaning of each option is in ``docs/stations.md``; the protocol in ``docs/serial-protocol.md``.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from benchgate.instruments.options import OptionSpec, check_all, with_defaults

MAX_TIMEOUT = 3600.0  # s; longer is a typo, and would overflow some OS timeouts
MAX_CHANNELS = 8  # the frame's channel mask is 8 bits

ADC_OPTIONS: Mapping[str, OptionSpec] = {
    "baudrate": OptionSpec("integer", "serial baud rate (USB CDC ignores it)", minimum=50, maximum=10_000_000,
                           default=115200),
    "protocol": OptionSpec("choice", "what the device streams", choices=("framed", "lines"), default="framed"),
    "channels": OptionSpec("names", "the device's channels, in mask bit order", default=("ch0",)),
    "bits": OptionSpec("integer", "converter resolution", minimum=1, maximum=16, default=12),
    "vref": OptionSpec("quantity", "converter reference (full scale)", unit="V", positive=True, maximum=1000.0,
                       default=3.3),
    "clock_ppm": OptionSpec("number", "sample-clock tolerance, ± ppm", minimum=0.0, maximum=1e6, default=None),
    "dtr_low": OptionSpec("bool", "hold DTR low at open (no reset of DTR-wired boards)", default=False),
    "rts_low": OptionSpec("bool", "hold RTS low at open (default: as dtr_low)", default=None),
    "identify_timeout": OptionSpec("quantity", "how long to wait for the identify reply", unit="s",
                                   positive=True, maximum=MAX_TIMEOUT, default=2.0),
    "max_loss": OptionSpec("fraction", "fraction of samples a capture may lose", default=0.0),
    "rate": OptionSpec("quantity", "sample rate (needed by a device without commands)", unit="Hz",
                       positive=True, maximum=1e10, default=None),
    "timestamps": OptionSpec("bool", "lines mode: lines are microseconds,code", default=False),
    "exclusive": OptionSpec("bool", "open the port exclusively", default=True),
    "handshake": OptionSpec("bool", "false: a lines device without commands", default=True),
}

#: every option at its default (rts_low still None: it follows dtr_low, see complete())
ADC_DEFAULTS: dict[str, Any] = with_defaults(ADC_OPTIONS, {})


def check(options: Mapping[str, Any], specs: Mapping[str, OptionSpec] = ADC_OPTIONS,
          ) -> list[tuple[tuple[str, ...], str]]:
    """Problems with a serial-adc entry's options, as (key path, message) pairs."""
    problems = check_all(specs, options)
    if problems:
        return problems
    channels = options.get("channels", ())
    if len(channels) > MAX_CHANNELS:
        problems.append((("channels",), f"at most {MAX_CHANNELS} channels (the frame's channel mask is "
                                         f"{MAX_CHANNELS} bits), got {len(channels)}"))
    if options.get("handshake", True) is False:
        at = ("handshake",)
        opts = complete(options, specs)
        if opts["protocol"] != "lines":
            problems.append((at, "'handshake: false' (a device without commands) needs 'protocol: lines'"))
        elif opts["rate"] is None:
            problems.append((at, "a device without commands needs its sample 'rate' in the station"))
        elif len(opts["channels"]) != 1:
            problems.append((at, "a device without commands streams one channel: give exactly one in 'channels'"))
    return problems


def complete(options: Mapping[str, Any], specs: Mapping[str, OptionSpec] = ADC_OPTIONS) -> dict[str, Any]:
    """The options with defaults filled in (``rts_low`` follows ``dtr_low`` unless given)."""
    opts = with_defaults(specs, options)
    if "channels" in options:
        opts["channels"] = tuple(options["channels"])
    if opts["rts_low"] is None:
        opts["rts_low"] = opts["dtr_low"]
    return opts
