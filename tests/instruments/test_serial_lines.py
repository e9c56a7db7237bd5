"""Plain-lines mode: the decoder, and the driver over a real pseudo-terminal."""

from __future__ import annotations

import sys

import numpy as np
import pytest

from benchgate.clock import ScaledClock
from benchgate.errors import InstrumentError
from benchgate.instruments.serial_adc import SerialAdc
from benchgate.instruments.serial_lines import LinesDecoder
from benchgate.instruments.serial_options import ADC_DEFAULTS as _ADC_DEFAULTS
from benchgate.instruments.station import InstrumentConfig
from benchgate.sim.serial_device import PtyAdcDevice, SineSource


def decode(text: bytes, n: int, *, bits: int = 12, timestamps: bool = False, chunk: int | None = None):
    dec = LinesDecoder(bits, timestamps=timestamps)
    step = chunk or len(text) or 1
    for i in range(0, len(text), step):
        dec.feed(text[i:i + step])
    return dec.result(n)


class TestDecoder:
    def test_plain_integers_any_chunking(self):
        text = b"".join(f"{v}\r\n".encode() for v in range(100, 140)) + b"END 40\n"
        res = decode(text, 40, chunk=7)
        assert res.codes[:, 0].tolist() == list(range(100, 140)) and res.lost == 0
        assert res.indices.tolist() == list(range(40)) and res.extra == res.unlocated == 0

    def test_bad_lines_and_out_of_range_codes_are_lost_at_their_index(self):
        res = decode(b"10\n1x\n4096\n-1\n11\nEND 5\n", 5)
        assert res.codes[:, 0].tolist() == [10, 11] and res.indices.tolist() == [0, 4]
        assert res.lost == 3 and res.gaps == [(1, 3)] and res.bad_lines == [1, 2, 3]
        assert res.end_total == 5 and res.extra == 0

    def test_wrong_field_count_is_a_bad_line(self):
        res = decode(b"100,200\n300\n 7 \nEND 3\n", 3)
        assert res.codes[:, 0].tolist() == [300, 7] and res.indices.tolist() == [1, 2]
        res = decode(b"1,100\n2\n3,300,4\n4,400\nEND 4\n", 4, timestamps=True)
        assert res.bad_lines == [1, 2] and res.codes[:, 0].tolist() == [100, 400]

    def test_split_line_forming_two_codes_is_caught_by_the_end_count(self):
        # the case: "200" split into "2" and "00" used to give four samples, none lost
        res = decode(b"100\n2\n00\n300\nEND 3\n", 3)
        assert res.extra == 1 and res.slots == 4

    def test_without_end_the_count_asked_for_is_the_check(self):
        dec = LinesDecoder(12)
        dec.feed(b"100\n2\n00\n300\n")  # a split line, and the END line lost
        assert dec.result(3).extra == 1
        dec = LinesDecoder(12, expect_end=False)  # a free-running device streams on past n
        dec.feed(b"100\n200\n300\n400\n")
        res = dec.result(3)
        assert res.extra == 0 and res.codes[:, 0].tolist() == [100, 200, 300]

    def test_fewer_lines_than_end_count_is_an_unlocated_loss(self):
        res = decode(b"10\n11\nEND 5\n", 5)
        assert res.unlocated == 3 and res.lost == 3 and res.gaps == [(2, 3)]

    def test_end_below_request_is_a_tail_loss_not_unlocated(self):
        res = decode(b"10\n11\nEND 2\n", 5)
        assert res.unlocated == 0 and res.gaps == [(2, 3)] and res.lost == 3

    def test_lines_after_end_are_not_samples(self):
        res = decode(b"10\nEND 1\n11\nOK STOP\n", 1)
        assert res.codes[:, 0].tolist() == [10] and res.extra == 0

    def test_timestamp_gap_is_located_and_rate_exact(self):
        lines = [f"{t},{t // 100}\n" for t in range(0, 2000, 100) if t not in (700, 800)]
        res = decode("".join(lines).encode() + b"END 20\n", 20, timestamps=True)
        assert res.codes.shape[0] == 18 and res.lost == 2 and res.gaps == [(7, 2)]
        assert res.unlocated == 0
        # 100 µs apart -> 10 kHz
        assert res.rate == pytest.approx(10_000.0, rel=1e-12)

    def test_one_bad_time_stamp_costs_one_sample(self):
        t = np.round(np.arange(2000) / 48_000 * 1e6).astype(int)  # 48 kHz: 20.833 µs, rounded
        lines = [f"{a},{i % 4096}" for i, a in enumerate(t)]
        lines[700] = f"{t[700] + 555_555},{700}"  # corrupted time stamp, far ahead
        lines[1500] = f"{t[1500] // 10},{1500}"  # corrupted time stamp, far behind
        res = decode(("\n".join(lines) + "\nEND 2000\n").encode(), 2000, timestamps=True)
        assert res.time_outliers == [700, 1500] and res.lost == 2 and res.gaps == [(700, 1), (1500, 1)]
        assert np.array_equal(res.codes[:, 0], res.indices % 4096)  # everything else in place
        assert res.rate == pytest.approx(48_000.0, rel=1e-6)

    def test_repeated_time_stamp_line_is_not_a_sample(self):
        lines = ["0,1", "100,2", "100,2", "200,3", "300,4", "400,5"]
        res = decode(("\n".join(lines) + "\nEND 5\n").encode(), 5, timestamps=True)
        assert res.codes[:, 0].tolist() == [1, 2, 3, 4, 5] and res.repeats == 1 and res.extra == 0


# ----------------------------------------------------------------------------- the driver
posix = pytest.mark.skipif(sys.platform == "win32", reason="needs POSIX pseudo-terminals")


def lines_config(port: str, **options) -> InstrumentConfig:
    # generous clock-time limits: the clock runs 4x, and a loaded CI machine must not time out
    opts = dict(_ADC_DEFAULTS, channels=("out",), bits=12, vref=3.3, identify_timeout=20.0,
                protocol="lines", max_loss=0.0)
    opts.update(options)
    if opts["rts_low"] is None:
        opts["rts_low"] = opts["dtr_low"]
    return InstrumentConfig("adc", "serial-adc", port, 8.0, opts, None)


def true_codes(n: int, rate: float) -> np.ndarray:
    source = SineSource(frequency=50.0, channels=("out",))
    source.start(rate, 1)
    return source.read(n)[:, 0]


@posix
def test_capture_without_faults_is_marked_unframed():
    clock = ScaledClock(4.0)
    with PtyAdcDevice(SineSource(frequency=50.0, channels=("out",)), protocol="lines", clock=clock) as dev:
        with SerialAdc.open(lines_config(dev.port), clock=clock) as adc:
            cap = adc.capture("out", duration=0.25, rate=2000)
    assert cap.metadata["framing"] == "lines" and cap.metadata["loss"]["end_count"] == 500
    np.testing.assert_array_equal(np.round(cap.samples / (3.3 / 4096)), true_codes(500, 2000))


@posix
def test_split_line_is_refused_not_shifted():
    clock = ScaledClock(4.0)
    with PtyAdcDevice(SineSource(frequency=50.0, channels=("out",)), protocol="lines", clock=clock) as dev:
        dev.faults.line_faults = {100: "split"}
        with SerialAdc.open(lines_config(dev.port, max_loss=0.01), clock=clock) as adc:
            with pytest.raises(InstrumentError, match="lines were split or repeated"):
                adc.capture("out", duration=0.25, rate=2000)


@posix
def test_garbled_line_is_lost_at_its_index():
    clock = ScaledClock(4.0)
    with PtyAdcDevice(SineSource(frequency=50.0, channels=("out",)), protocol="lines", clock=clock) as dev:
        dev.faults.line_faults = {123: "garble"}
        with SerialAdc.open(lines_config(dev.port, max_loss=0.01), clock=clock) as adc:
            cap = adc.capture("out", duration=0.25, rate=2000)
    loss = cap.metadata["loss"]
    assert loss["gaps"] == [[123, 1]] and loss["bad_lines"] == [123] and loss["lost_samples"] == 1
    truth = true_codes(500, 2000)
    np.testing.assert_array_equal(np.round(cap.samples / (3.3 / 4096)), np.delete(truth, 123))


@posix
def test_bad_time_stamp_costs_one_sample_not_the_capture():
    clock = ScaledClock(4.0)
    with PtyAdcDevice(SineSource(frequency=50.0, channels=("out",)), protocol="lines",
                      lines_timestamps=True, clock=clock) as dev:
        dev.faults.line_faults = {250: "bad_time"}
        with SerialAdc.open(lines_config(dev.port, timestamps=True, max_loss=0.01), clock=clock) as adc:
            cap = adc.capture("out", duration=0.5, rate=2000)
    loss = cap.metadata["loss"]
    assert loss["time_outliers"] == [250] and loss["gaps"] == [[250, 1]] and loss["lost_samples"] == 1
    assert cap.sample_rate == pytest.approx(2000.0, rel=1e-9)
    truth = true_codes(1000, 2000)
    np.testing.assert_array_equal(np.round(cap.samples / (3.3 / 4096)), np.delete(truth, 250))


@posix
def test_dropped_line_without_time_stamps_is_counted_and_flagged():
    clock = ScaledClock(4.0)
    with PtyAdcDevice(SineSource(frequency=50.0, channels=("out",)), protocol="lines", clock=clock) as dev:
        dev.faults.line_faults = {40: "drop"}
        with SerialAdc.open(lines_config(dev.port), clock=clock) as adc:
            with pytest.raises(InstrumentError, match="lost 1 of 500"):
                adc.capture("out", duration=0.25, rate=2000)  # max_loss 0: refused
        with SerialAdc.open(lines_config(dev.port, max_loss=0.01), clock=clock) as adc:
            cap = adc.capture("out", duration=0.25, rate=2000)
    assert cap.metadata["loss"]["unlocated"] == 1 and cap.metadata["loss"]["lost_samples"] == 1
    assert any("cannot locate" in w for w in cap.metadata["warnings"])


@posix
@pytest.mark.parametrize("timestamps", [False, True])
def test_driver_under_random_line_faults_never_shifts_a_sample(timestamps):
    """Random link faults through the real port: refused, or every sample at its true index."""
    rng = np.random.default_rng(77 if timestamps else 78)
    kinds = ["drop", "repeat", "split", "garble"] + (["bad_time"] if timestamps else [])
    clock = ScaledClock(4.0)
    n, rate = 400, 2000
    truth = true_codes(n, rate)
    outcomes = []
    with PtyAdcDevice(SineSource(frequency=50.0, channels=("out",)), protocol="lines",
                      lines_timestamps=timestamps, clock=clock) as dev:
        with SerialAdc.open(lines_config(dev.port, timestamps=timestamps, max_loss=0.05), clock=clock) as adc:
            for _trial in range(6):
                # without time stamps one fault per capture (two can cancel out: documented);
                # with time stamps several
                count = int(rng.integers(1, 4)) if timestamps else 1
                faults = {int(i): str(rng.choice(kinds)) for i in rng.choice(np.arange(5, n - 5), count, False)}
                dev.faults.line_faults = faults
                try:
                    cap = adc.capture("out", duration=n / rate, rate=rate)
                except InstrumentError as exc:
                    assert "split or repeated" in exc.message, (faults, exc.message)
                    outcomes.append("refused")
                    continue
                loss = cap.metadata["loss"]
                got = np.round(cap.samples / (3.3 / 4096)).astype(int)
                assert got.size + loss["lost_samples"] == n
                if loss["unlocated"]:
                    outcomes.append("unlocated")
                    continue
                lost = np.zeros(n, dtype=bool)
                for start, length in loss["gaps"]:
                    lost[start:start + length] = True
                index = np.flatnonzero(~lost)
                np.testing.assert_array_equal(got, truth[index], err_msg=str(faults))
                outcomes.append("accepted")
    assert "accepted" in outcomes, outcomes
