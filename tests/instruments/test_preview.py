"""The live preview of a capture being taken: the builder alone, then through the serial ADC driver."""

from __future__ import annotations

import json
import sys
import time

import numpy as np
import pytest
from test_serial_adc import adc_config

from benchgate.clock import ScaledClock
from benchgate.instruments.preview import (
    PREVIEW_COLUMNS,
    RECENT_SAMPLES,
    CapturePreview,
    PreviewBuilder,
    preview_sink,
    whole_preview,
)
from benchgate.instruments.serial_adc import SerialAdc
from benchgate.sim.serial_device import PtyAdcDevice, SineSource


class FakeTime:
    """A wall clock the test moves by hand."""

    def __init__(self) -> None:
        self.t = 1000.0

    def __call__(self) -> float:
        return self.t


def column_extremes(x: np.ndarray, expected: int, columns: int) -> tuple[np.ndarray, np.ndarray]:
    """Least and greatest sample of each column, one column at a time (the definition, slowly)."""
    col = np.arange(x.size) * columns // expected
    lo = np.full(columns, np.nan)
    hi = np.full(columns, np.nan)
    for c in range(columns):
        part = x[col == c]
        part = part[np.isfinite(part)]
        if part.size:
            lo[c], hi[c] = part.min(), part.max()
    return lo, hi


class TestPreviewBuilder:
    def test_a_single_sample_spike_stays_visible(self):
        n = 1_000_000
        x = np.zeros(n)
        x[123_457] = 1.0  # one sample in a million
        b = PreviewBuilder("out", 50_000.0, n)
        b.add(x)
        p = b.take()
        assert p.columns == PREVIEW_COLUMNS
        column = 123_457 * PREVIEW_COLUMNS // n
        assert p.hi[column] == 1.0 and max(p.hi) == 1.0
        assert max(p.lo) == 0.0  # the least of that column is still the floor
        assert x[:: n // PREVIEW_COLUMNS].max() == 0.0  # what keeping every k-th sample would show

    def test_columns_do_not_depend_on_how_the_samples_arrive(self):
        rng = np.random.default_rng(7)
        n = 12_345  # not a multiple of the column count
        x = rng.normal(size=n)
        x[[5, 4000, 9999]] = np.nan  # unreadable samples
        x[777] = 40.0
        b = PreviewBuilder("out", 1000.0, n)
        cuts = np.sort(rng.choice(np.arange(1, n), size=60, replace=False))
        for part in np.split(x, cuts):
            b.add(part)
        p = b.take()
        lo, hi = column_extremes(x, n, PREVIEW_COLUMNS)
        np.testing.assert_array_equal(np.array(p.lo), lo)
        np.testing.assert_array_equal(np.array(p.hi), hi)
        assert p.received == n and p.fraction == 1.0

    def test_columns_not_reached_yet_are_empty(self):
        b = PreviewBuilder("out", 1000.0, 8000, columns=800)
        b.add(np.arange(2000.0))
        p = b.take()
        assert p.received == 2000 and p.fraction == 0.25
        filled = np.isfinite(np.array(p.hi))
        assert filled[:200].all() and not filled[200:].any()
        d = p.to_dict()
        assert d["hi"][200] is None and d["hi"][199] == 1999.0
        json.dumps(d, allow_nan=False)  # what the page gets is plain JSON

    def test_size_is_bounded_whatever_the_capture(self):
        b = PreviewBuilder("out", 2e6, 50_000_000)
        chunk = (np.arange(100_000) % 4096).astype(np.uint16)  # 12-bit codes
        for _ in range(30):  # three million samples fed
            b.add(chunk)
        p = b.take()
        assert p.columns == PREVIEW_COLUMNS and len(p.recent) == RECENT_SAMPLES
        assert b._lo.size == PREVIEW_COLUMNS and b._newest.size == RECENT_SAMPLES  # the memory held
        assert p.recent_start == 3_000_000 - RECENT_SAMPLES
        assert p.recent[-1] == 99_999 % 4096
        assert len(json.dumps(p.to_dict())) < 40_000  # bytes per preview on the wire
        short = PreviewBuilder("out", 1000.0, 10)  # fewer samples than columns: one column each
        short.add(np.arange(10.0))
        assert short.take().lo == tuple(float(v) for v in range(10))

    def test_samples_beyond_the_length_asked_for_are_counted_not_drawn(self):
        b = PreviewBuilder("out", 1000.0, 100, columns=10)
        b.add(np.zeros(100))
        b.add(np.full(5, 9.0))
        p = b.take()
        assert p.received == 105 and max(p.hi) == 0.0 and p.recent[-1] == 9.0

    def test_scale_to_volts_with_a_negative_gain(self):
        b = PreviewBuilder("out", 1000.0, 4, columns=2, gain=-0.5, offset=1.0)
        b.add(np.array([0, 2, 4, 6]))
        p = b.take()
        assert p.lo == (0.0, -2.0) and p.hi == (1.0, -1.0)  # least and greatest after scaling
        assert p.recent == (1.0, 0.0, -1.0, -2.0)

    def test_at_most_one_preview_per_interval_samples_counted_between(self):
        now = FakeTime()
        b = PreviewBuilder("out", 10_000.0, 1_000_000, interval=0.1, now=now)
        taken: list[CapturePreview] = []
        for _ms in range(1000):  # one second of 1 ms chunks of 10 samples
            b.add(np.ones(10))
            p = b.poll()
            if p is not None:
                taken.append(p)
            now.t += 0.001
        assert 9 <= len(taken) <= 11  # one every 100 ms (float steps may land either side)
        assert all(b2.received - b1.received >= 990 for b1, b2 in zip(taken, taken[1:], strict=False))
        assert taken[0].received == 10  # the first comes at once
        assert b.received == 10_000  # nothing dropped from the count, nothing queued

    def test_bad_arguments_are_refused(self):
        with pytest.raises(ValueError, match="expected >= 1"):
            PreviewBuilder("out", 1000.0, 0)
        with pytest.raises(ValueError, match="sample rate > 0"):
            PreviewBuilder("out", 0.0, 10)

    def test_whole_preview_of_a_record_handed_over_at_once(self):
        p = whole_preview("in", 1e6, np.sin(np.linspace(0, 20, 5000)), 5000)
        assert p.received == 5000 and p.columns == PREVIEW_COLUMNS
        empty = whole_preview("in", 1e6, (), 5000)
        assert empty.received == 0 and empty.to_dict()["lo"][0] is None


def test_only_a_progress_with_a_preview_method_gets_previews():
    class Watching:
        def __init__(self):
            self.got = []

        def __call__(self, fraction, text):
            pass

        def preview(self, p):
            self.got.append(p)

    assert preview_sink(lambda f, t: None) is None
    w = Watching()
    sink = preview_sink(w)
    sink("x")
    assert w.got == ["x"]


# ---------------------------------------------------------------------- through the driver

class Recording:
    """A progress callback that keeps every preview with the fraction reported before it."""

    def __init__(self, fail: bool = False):
        self.fractions: list[float] = []
        self.previews: list[CapturePreview] = []
        self.fail = fail

    def __call__(self, fraction: float, text: str) -> None:
        self.fractions.append(fraction)

    def preview(self, p: CapturePreview) -> None:
        self.previews.append(p)
        if self.fail:
            raise RuntimeError("a face that cannot draw")


pytestmark_pty = pytest.mark.skipif(sys.platform == "win32", reason="needs POSIX pseudo-terminals")


@pytestmark_pty
def test_framed_capture_previews_while_recording():
    from benchgate.instruments.station import Calibration

    clock = ScaledClock(2.0)  # 1.5 s of capture in 0.75 s of wall time: several previews
    cal = Calibration(channels={"out": Calibration(gain=1.02, offset=-0.01)})
    rec = Recording()
    with PtyAdcDevice(SineSource(frequency=97.0, channels=("out", "rail")), clock=clock) as dev:
        with SerialAdc.open(adc_config(dev.port, calibration=cal), clock=clock) as adc:
            wall = time.monotonic()
            cap = adc.capture("out", duration=1.5, rate=20_000, progress=rec)
            wall = time.monotonic() - wall
    n = cap.n
    got = rec.previews
    assert len(got) >= 3, [p.received for p in got]
    assert len(got) <= wall / 0.1 + 1  # at most one per 100 ms of wall time, by construction
    assert all(p.expected == n and p.channel == "out" and p.sample_rate == 20_000.0 for p in got)
    received = [p.received for p in got]
    assert received == sorted(received) and received[0] < received[-1] < n  # taken while recording
    x = np.asarray(cap.samples)
    for p in got[1:]:
        # the newest samples are the capture's own, in volts with the calibration applied
        np.testing.assert_allclose(p.recent, x[p.recent_start:p.recent_start + len(p.recent)], atol=1e-9)
        full_lo, full_hi = column_extremes(x[:p.received], n, PREVIEW_COLUMNS)
        np.testing.assert_allclose(np.array(p.lo), full_lo, atol=1e-9)
        np.testing.assert_allclose(np.array(p.hi), full_hi, atol=1e-9)


@pytestmark_pty
def test_lines_capture_previews_and_a_failing_face_does_not_fail_the_capture():
    clock = ScaledClock(2.0)
    rec = Recording(fail=True)
    with PtyAdcDevice(SineSource(frequency=50.0, channels=("out", "rail")), protocol="lines", clock=clock) as dev:
        with SerialAdc.open(adc_config(dev.port, protocol="lines"), clock=clock) as adc:
            cap = adc.capture("out", duration=1.0, rate=4000, progress=rec)
            ok = Recording()
            again = adc.capture("out", duration=1.0, rate=4000, progress=ok)
    assert cap.n == 4000 and len(rec.previews) == 1  # the first preview failed: no more were made
    assert len(ok.previews) >= 2
    p = ok.previews[-1]
    np.testing.assert_allclose(p.recent, again.samples[p.recent_start:p.recent_start + len(p.recent)], atol=1e-9)


def test_a_digitizer_previews_nothing_while_armed_then_its_whole_record():
    from scpi_testbench import config_for, make_bench

    from benchgate.clock import ManualClock
    from benchgate.instruments.scpi_digitizer import ScpiDigitizer

    bench = make_bench(frequency=1234.5, amplitude=0.8, offset=0.1)
    try:
        rec = Recording()
        with ScpiDigitizer.open(config_for(bench, "digitizer", timeout=2.0), clock=ManualClock()) as dig:
            cap = dig.capture("ch1", duration=0.02, rate=100e3, progress=rec)
            two = Recording()
            dig.capture_channels(("ch1", "ch2"), duration=0.01, rate=100e3, progress=two)
    finally:
        bench.stop()
    # the record is handed over only when complete: nothing while armed, then all of it
    assert [(p.received, p.expected) for p in rec.previews] == [(0, 2000), (2000, 2000)]
    lo, hi = column_extremes(np.asarray(cap.samples), 2000, PREVIEW_COLUMNS)
    np.testing.assert_array_equal(np.array(rec.previews[-1].hi), hi)
    np.testing.assert_array_equal(np.array(rec.previews[-1].lo), lo)
    assert [(p.channel, p.received) for p in two.previews] == [("ch1", 0), ("ch1", 1000)]
