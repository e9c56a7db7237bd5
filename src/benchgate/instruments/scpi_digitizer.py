"""SCPI digitizer: channel, rate, points, arm, wait, fetch a float32 block (``kind: scpi-digitizer``).

The waveform comes back as an IEEE 488.2 definite-length block of little-endian float32
(``FORM:DATA REAL,32`` and ``FORM:BORD SWAP`` are sent before each acquisition), checked
against its header and the number of points asked for. Station options: ``rate`` (default
sample rate, Hz), ``channels`` (plan channel -> instrument channel name), ``clock_ppm``
(time-base tolerance), ``range`` (default input range, V).
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np

from benchgate.analysis.capture import Capture
from benchgate.errors import InstrumentError
from benchgate.instruments.options import OptionSpec
from benchgate.instruments.preview import preview_sink, whole_preview
from benchgate.instruments.scpi import station_error
from benchgate.instruments.scpi_instrument import ScpiInstrument


class ScpiDigitizer(ScpiInstrument):
    """Implements :class:`benchgate.instruments.base.Digitizer`.

    ``capture`` does everything; ``setup``, ``arm``, ``wait`` and ``fetch`` are the same steps
    one at a time (a runner can switch a supply on between ``arm`` and ``wait``).
    """

    DEFAULT_COMMANDS = {
        "select_channel": "ACQ:CHAN {channel}",
        "set_rate": "ACQ:SRAT {value}",
        "rate_query": "ACQ:SRAT?",
        "set_points": "ACQ:POIN {value}",
        "set_range": "VOLT:RANG {value}",
        "data_format": "FORM:DATA REAL,32",
        "byte_order": "FORM:BORD SWAP",
        "arm": "INIT",
        "wait": "*OPC?",
        "fetch": "FETC:WAV?",
    }

    OPTIONS = {
        "rate": OptionSpec("quantity", "default sample rate", unit="Hz", positive=True, maximum=1e10),
        "channels": OptionSpec("list_or_mapping", "plan channel names, or plan name -> instrument channel"),
        "clock_ppm": OptionSpec("number", "time-base tolerance, ± ppm", minimum=0.0, maximum=1e6),
        "range": OptionSpec("quantity", "default input range", unit="V", positive=True, maximum=1000.0),
        "channel_match": OptionSpec("fraction", "gain match between channels (relative bound, e.g. 0.001)"),
    }

    def __init__(self, config, session, *, clock=None):
        super().__init__(config, session, clock=clock)
        channels = config.option("channels") or {}
        if isinstance(channels, (list, tuple)):
            channels = {str(c): str(c) for c in channels}
        if not isinstance(channels, Mapping):
            raise station_error(config, "'channels' must be a list or a mapping plan name -> instrument channel")
        self.channel_map = {str(k): str(v) for k, v in channels.items()}
        self.channels = tuple(self.channel_map)
        self._setup: dict | None = None

    # ------------------------------------------------------------------ steps
    def setup(self, channel: str, *, duration: float, rate: float | None = None,
              range: float | None = None) -> dict:
        """Configure one acquisition; returns what was set (rate as the instrument reports it)."""
        return self._configure((channel,), duration=duration, rate=rate, range=range)

    def _configure(self, channels: tuple[str, ...], *, duration: float, rate: float | None,
                   range: float | None) -> dict:
        for channel in channels:
            if self.channel_map and channel not in self.channel_map:
                raise InstrumentError(self.name, f"no channel {channel!r} (station lists: {', '.join(self.channels)})")
        if len(set(channels)) != len(channels):
            raise InstrumentError(self.name, f"channels named twice: {', '.join(channels)}")
        rate = rate if rate is not None else self.config.option("rate")
        if rate is None:
            raise InstrumentError(self.name, "no sample rate: give one in the step or the station option 'rate'")
        rate = float(rate)
        if not (math.isfinite(rate) and rate > 0):
            raise InstrumentError(self.name, f"sample rate must be > 0 Hz, got {rate!r}")
        if not (math.isfinite(duration) and duration > 0):
            raise InstrumentError(self.name, f"capture duration must be > 0 s, got {duration!r}")
        points = int(round(duration * rate))
        if points < 2:
            raise InstrumentError(self.name, f"{duration:g} s at {rate:g} Hz is fewer than 2 points")
        inst_channels = tuple(self.channel_map.get(c, c) for c in channels)
        range = range if range is not None else self.config.option("range")
        self.configure("select_channel", channel=",".join(inst_channels))
        self.configure("data_format")
        self.configure("byte_order")
        self.configure("set_rate", value=rate)
        self.configure("set_points", value=points)
        if range is not None:
            self.configure("set_range", value=float(range))
        actual = self.session.query_float(self.session.command("rate_query"), check=True)
        if not (math.isfinite(actual) and actual > 0):
            raise InstrumentError(self.name, f"instrument reports a sample rate of {actual!r}")
        self._setup = {"channel": channels[0], "instrument_channel": inst_channels[0], "rate": actual,
                       "requested_rate": rate, "points": points, "range": range,
                       "channels": channels, "instrument_channels": inst_channels}
        return dict(self._setup)

    def arm(self) -> None:
        if self._setup is None:
            raise InstrumentError(self.name, "arm() before setup()")
        self.configure("arm")

    def wait(self) -> None:
        """Block until the acquisition is complete (``*OPC?``, timeout stretched by its length)."""
        if self._setup is None:
            raise InstrumentError(self.name, "wait() before setup()")
        speed = getattr(self.clock, "speed", 1.0) or 1.0
        length = self._setup["points"] / self._setup["rate"]
        wall = 0.0 if math.isinf(speed) else length / speed
        reply = self.session.query(self.session.command("wait"), timeout=self.session.timeout + 1.5 * wall,
                                   check=True)
        if reply.strip() != "1":
            raise InstrumentError(self.name, f"operation-complete query returned {reply[:30]!r}, not 1")

    def fetch(self) -> np.ndarray:
        """The acquired samples in volts (float64)."""
        if self._setup is None:
            raise InstrumentError(self.name, "fetch() before setup()")
        points = self._setup["points"] * len(self._setup.get("channels", (None,)))
        wall_per_mb = 0.5  # generous allowance for slow links on top of the station timeout
        timeout = self.session.timeout + wall_per_mb * points * 4 / 1e6
        return self.session.query_binary_values(self.session.command("fetch"), datatype="f",
                                                is_big_endian=False, points=points, timeout=timeout,
                                                check=True)

    # ------------------------------------------------------------------ whole capture
    def capture(self, channel: str, *, duration: float, rate: float | None = None,
                progress=None, range: float | None = None) -> Capture:
        setup = self.setup(channel, duration=duration, rate=rate, range=range)
        self.arm()
        if progress:
            progress(0.0, f"{self.name}: acquiring {setup['points']} points")
        sink = preview_sink(progress)  # the record is handed over only when complete
        if sink is not None:
            sink(whole_preview(channel, setup["rate"], (), setup["points"]))
        self.wait()
        samples = self.fetch()
        if progress:
            progress(1.0, f"{self.name}: {samples.size} points fetched")
        capture = self.to_capture(samples)
        if sink is not None:
            sink(whole_preview(channel, capture.sample_rate, capture.samples, setup["points"]))
        return capture

    def capture_channels(self, channels: tuple[str, ...], *, duration: float, rate: float | None = None,
                         progress=None, range: float | None = None) -> tuple[Capture, ...]:
        """Record ``channels`` at the same instants (one acquisition): one Capture per channel.

        The block interleaves the channels sample by sample. Each capture's metadata states
        ``channel_skew_s`` (0: the channels are sampled together) and, when the station gives
        ``channel_match``, the relative gain tolerance between channels (``channel_gain_tolerance``).
        """
        channels = tuple(channels)
        if not channels:
            raise InstrumentError(self.name, "no channel to record")
        setup = self._configure(channels, duration=duration, rate=rate, range=range)
        self.arm()
        if progress:
            progress(0.0, f"{self.name}: acquiring {setup['points']} points on {len(channels)} channels")
        sink = preview_sink(progress)  # of the first channel, once the record is handed over
        if sink is not None:
            sink(whole_preview(channels[0], setup["rate"], (), setup["points"]))
        self.wait()
        block = self.fetch()
        if progress:
            progress(1.0, f"{self.name}: {block.size} values fetched")
        table = block.reshape(setup["points"], len(channels))
        match = self.config.option("channel_match")
        out = []
        for i, channel in enumerate(channels):
            cap = self.to_capture(np.ascontiguousarray(table[:, i]), channel=channel,
                                  instrument_channel=setup["instrument_channels"][i])
            extra = {"channel_skew_s": 0.0, "channels_together": list(channels)}
            if match is not None:
                extra["channel_gain_tolerance"] = float(match)
            out.append(cap.with_metadata(**extra))
        if sink is not None:
            sink(whole_preview(channels[0], out[0].sample_rate, out[0].samples, setup["points"]))
        return tuple(out)

    def to_capture(self, samples: np.ndarray, *, channel: str | None = None,
                   instrument_channel: str | None = None) -> Capture:
        setup = dict(self._setup or {})
        if channel is not None:
            setup["channel"], setup["instrument_channel"] = channel, instrument_channel
        cal = self.calibration.for_channel(setup.get("channel", "")) if self.calibration else None
        if cal is not None and (cal.gain != 1.0 or cal.offset != 0.0):
            samples = cal.gain * samples + cal.offset
        ppm = self.config.option("clock_ppm")
        return Capture(
            samples=samples,
            sample_rate=setup.get("rate", 1.0),
            start_time=0.0,
            channel=setup.get("channel", "ch0"),
            clock_ppm=None if ppm is None else float(ppm),
            metadata={
                "instrument": self.name,
                "kind": self.config.kind,
                "identity": self.identity,
                "address": self.address,
                "instrument_channel": setup.get("instrument_channel"),
                "requested_rate": setup.get("requested_rate"),
                "range": setup.get("range"),
                "calibration": None if self.calibration is None else self.calibration.to_dict(),
                "lost_samples": 0,
            },
        )
