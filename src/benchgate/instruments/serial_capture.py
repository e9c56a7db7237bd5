"""The build of a serial ADC's captures from what arrived, and its live preview while recording.

:func:`build_captures` turns the samples of one capture (:class:`Arrived`) into one
:class:`~benchgate.analysis.capture.Capture` per channel, in volts, with every verification a
capture gets (loss against ``max_loss``, the declared rate against the host clock, a period
change) and the metadata that says how it was taken. :class:`LiveView` hands the samples of
one channel, as they arrive, to a :class:`~benchgate.instruments.preview.PreviewBuilder`.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING, Any

import numpy as np

from benchgate.analysis.capture import AdcInfo, Capture
from benchgate.errors import InstrumentError
from benchgate.instruments._serial_port import arrival_rate, least_rate
from benchgate.instruments.preview import CapturePreview, PreviewBuilder

if TYPE_CHECKING:
    from benchgate.instruments.serial_adc import SerialAdc

RATE_TOLERANCE = 0.05  # declared vs host-measured arrival rate
MIN_VERIFY_WALL = 0.3  # s of wall time a capture must span before verifying its rate means anything
MIN_VERIFY_POINTS = 12


def build_captures(adc: SerialAdc, channels: tuple[str, ...], state: Arrived, actual: float, decoder,
                   n: int, *, complete: bool) -> tuple[Capture, ...]:
    """The captures of ``channels`` from the first ``n`` samples asked for (``complete``: the
    capture ended as it should, so every verification applies; else a partial record)."""
    codes = state.codes()
    if complete is False and state.index == 0:
        return ()
    extra: dict = {}
    if adc.protocol == "framed":
        periods = sorted(state.periods)
        if len(periods) > 1 and complete:
            raise InstrumentError(adc.name, f"device on {adc.address} changed its sample period "
                                             f"during the capture ({periods[0]} to {periods[-1]} ps)")
        declared = 1e12 / periods[0] if periods else actual
        gaps = [(a, min(b, n - a)) for a, b in state.gaps if a < n]
        lost = sum(b for _a, b in gaps)
        rejected, garbage = state.rejected, state.garbage
        end_total = state.end_total
        codes = codes[:max(0, n - lost)]
        received = int(codes.shape[0])
        tail = max(0, n - received - lost) if complete else 0
        if tail:
            gaps = [*gaps, (received + lost, tail)]
            lost += tail
    else:
        res = decoder.result(n, complete=complete)
        if res.extra and complete:
            said = (f"says it sent {res.end_total} samples" if res.end_total is not None else
                    f"sent no readable END line for the {n} samples asked for")
            raise InstrumentError(adc.name, f"adc on {adc.address} {said} but {res.slots} lines "
                                             "arrived: lines were split or repeated, so samples may sit "
                                             "at the wrong index; capture refused (lines mode has no framing)")
        codes, gaps, lost = res.codes, res.gaps, res.lost
        declared = res.rate or float(adc.config.options.get("rate") or actual)
        rejected, garbage, end_total = len(res.bad_lines), 0, res.end_total
        extra = {"bad_lines": res.bad_lines[:100], "time_outliers": res.time_outliers[:100],
                 "repeated_lines": res.repeats, "unlocated": res.unlocated,
                 "extra_lines": res.extra, "end_count": res.end_total,
                 "rate_fit": res.fit or None}
    measured = arrival_rate(state.points, declared)
    span = state.points[-1][0] - state.points[0][0] if len(state.points) > 1 else 0.0
    wall = span / (getattr(adc.clock, "speed", 1.0) or 1.0)
    verifiable = measured is not None and wall >= MIN_VERIFY_WALL and len(state.points) >= MIN_VERIFY_POINTS
    warnings: list[str] = []
    if state.commanded_at is not None and complete:
        # too fast is decided causally: a sample cannot arrive before it was taken, so a device
        # at the declared rate cannot have delivered c samples sooner than (c - 1)/rate after
        # START was sent. A busy host only ever delays arrivals (and their catch-up burst keeps
        # the bound), so load can never make a correct device look fast here.
        fastest = least_rate(state.points, state.commanded_at)
        if fastest is not None and fastest > declared * (1 + RATE_TOLERANCE):
            raise InstrumentError(adc.name, f"adc on {adc.address} declares {declared:.6g} Hz but "
                                             f"samples arrived at no less than {fastest:.6g} Hz by the "
                                             f"host clock ({100 * (fastest / declared - 1):+.1f} %, limit "
                                             f"±{100 * RATE_TOLERANCE:.0f} %); capture refused")
        too_far = measured is not None and measured < declared * (1 - RATE_TOLERANCE)
    else:
        too_far = measured is not None and abs(measured / declared - 1) > RATE_TOLERANCE
    if measured is not None and verifiable and complete and too_far:
        raise InstrumentError(adc.name, f"adc on {adc.address} declares {declared:.6g} Hz but samples "
                                         f"arrived at {measured:.6g} Hz by the host clock "
                                         f"({100 * (measured / declared - 1):+.1f} %, limit "
                                         f"±{100 * RATE_TOLERANCE:.0f} %); capture refused")
    fraction = lost / n
    if complete and fraction > adc.max_loss:
        raise InstrumentError(adc.name, f"adc on {adc.address} lost {lost} of {n} samples "
                                         f"({100 * fraction:.3g} %) in {len(gaps)} gap(s), more than "
                                         f"max_loss {100 * adc.max_loss:.3g} %; capture refused")
    if lost:
        warnings.append(f"{lost} samples lost in {len(gaps)} gap(s) were left out; the capture is "
                        f"joined at those points")
    if extra.get("unlocated"):
        warnings.append(f"{extra['unlocated']} of the samples the device sent are missing at places "
                        "lines mode cannot locate; the capture is joined at its end")
    if adc.protocol == "lines" and not adc.free_running and end_total is None and complete:
        warnings.append("the device sent no readable END line; the lines were counted against the "
                        f"{n} samples asked for")
    if extra.get("time_outliers"):
        warnings.append(f"{len(extra['time_outliers'])} samples with an implausible time stamp were "
                        "counted as lost")
    return tuple(_one(adc, c, codes[:, frame_column(adc, channels, c)], declared, actual, measured, verifiable, lost, n,
                           gaps, rejected, garbage, end_total, extra, warnings, fraction, len(channels))
                 for c in channels)


def frame_column(adc: SerialAdc, channels: tuple[str, ...], channel: str) -> int:
    """Where ``channel`` sits in a frame of ``channels``: in channel-index order."""
    return sorted(channels, key=adc.channels.index).index(channel)


def code_scale(adc: SerialAdc, channel: str) -> tuple[float, Any]:
    """One code's volts (the LSB) and the channel's calibration, if any:
    volts = gain · (code · LSB) + offset with the calibration, code · LSB without."""
    cal = adc.calibration.for_channel(channel) if adc.calibration else None
    return adc.vref / 2.0**adc.bits, cal


def _one(adc: SerialAdc, channel, column, declared, actual, measured, verifiable, lost, n, gaps, rejected,
         garbage, end_total, extra, warnings, fraction, together) -> Capture:
    lsb, cal = code_scale(adc, channel)
    volts = column.astype(np.float64) * lsb
    if cal is not None:
        volts = cal.gain * volts + cal.offset
    meta = {
        "source": "serial-adc",
        "instrument": {"role": adc.name, "kind": adc.config.kind, "address": adc.address,
                       "identity": adc.identity, "protocol": adc.protocol},
        "calibration": None if cal is None else cal.to_dict(),
        "loss": {"lost_samples": int(lost), "requested_samples": int(n), "fraction": fraction,
                 "gaps": [[int(a), int(b)] for a, b in gaps], "rejected_frames": int(rejected),
                 "garbage_bytes": int(garbage), "max_loss": adc.max_loss,
                 "end_frame": end_total is not None, **extra},
        # "lines": taken without framing (no checksum, no sequence numbers); see
        # docs/serial-protocol.md for what such a capture cannot detect
        "framing": adc.protocol,
        "rate": {"declared": declared, "device_reply": actual, "host_measured": measured,
                 "verified": "ok" if verifiable else f"not verified (needs {MIN_VERIFY_WALL:g} s of wall time)"},
        "warnings": warnings,
    }
    if together > 1:  # one converter, channels multiplexed within each sample period
        meta["channel_skew_s"] = 1.0 / declared
    return Capture(samples=volts, sample_rate=declared, start_time=0.0, channel=channel,
                   adc=AdcInfo(adc.bits, adc.vref), clock_ppm=adc.config.options.get("clock_ppm"),
                   metadata=meta)


class Arrived:
    """What has arrived so far in one capture."""

    def __init__(self, n: int):
        self.n = n
        self.parts: list[np.ndarray] = []
        self.count = 0
        self.index = 0
        self.points: list[tuple[float, int]] = []
        self.commanded_at: float | None = None  # clock time START was sent (None: free-running)
        self.last_point_index = 0
        self.periods: set[int] = set()
        self.gaps: list[tuple[int, int]] = []
        self.lost = self.rejected = self.garbage = 0
        self.end_total: int | None = None

    def add(self, got, decoder, *, framed: bool) -> None:
        if framed:
            self.parts.append(got.samples)
            self.count += got.samples.shape[0]
            self.periods.update(got.periods_ps)
            self.gaps.extend(got.gaps)
            self.lost += got.lost
            self.rejected += got.rejected
            self.garbage += got.garbage_bytes
            if got.end_total is not None:
                self.end_total = got.end_total
        self.index = decoder.next_index

    def codes(self) -> np.ndarray:
        return np.concatenate(self.parts) if self.parts else np.empty((0, 1), dtype=np.uint16)


class LiveView:
    """Previews of one channel of a capture while it records (see :mod:`~benchgate.instruments.preview`).

    Called after every chunk read; only when a preview is due does it take the samples that
    arrived since the last one (framed: the channel's column of the new frames; lines: the new
    lines, an unreadable one as NaN), so between previews a chunk costs nothing. A fault in the
    picture turns the previews off for this capture: it never fails the capture.
    """

    def __init__(self, adc: SerialAdc, channel: str, channels: tuple[str, ...], state: Arrived,
                 decoder: Any, n: int, rate: float, sink: Callable[[CapturePreview], None]):
        lsb, cal = code_scale(adc, channel)
        gain, offset = (lsb, 0.0) if cal is None else (cal.gain * lsb, cal.offset)
        self.builder = PreviewBuilder(channel, rate, n, gain=gain, offset=offset)
        self.column = frame_column(adc, channels, channel)
        self.framed = adc.protocol == "framed"
        self.state, self.decoder = state, decoder
        self.sink: Callable[[CapturePreview], None] | None = sink
        self._seen = 0  # frames parts (framed) or lines (lines) already in the builder

    def __call__(self) -> None:
        if self.sink is None or not self.builder.due():
            return
        try:
            if self.framed:
                parts = self.state.parts[self._seen:]
                self._seen += len(parts)
                for part in parts:
                    self.builder.add(part[:, self.column])
            else:
                lines = self.decoder.codes[self._seen:]
                self._seen += len(lines)
                codes = np.asarray(lines, dtype=np.float64)
                codes[codes < 0] = np.nan  # a line that was not a sample
                self.builder.add(codes)
            preview = self.builder.take()
            self.sink(preview)
        except Exception:  # noqa: BLE001 - the picture is a courtesy; the capture goes on without it
            self.sink = None
