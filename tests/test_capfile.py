"""Capture files: CSV, WAV (PCM written by the stdlib ``wave`` module as a reference, float by
hand), the project's .npz, and every bad input naming its file (and line)."""

from __future__ import annotations

import hashlib
import json
import struct
import wave

import numpy as np
import pytest
from numpy.testing import assert_allclose

from benchgate.analysis import AdcInfo, Capture
from benchgate.capfile import load_capture, save_capture
from benchgate.errors import CaptureError

SINE = 0.5 * np.sin(2 * np.pi * 50 * np.arange(400) / 1000.0)


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text)
    return p


class TestCsv:
    def test_one_column_with_rate(self, tmp_path):
        p = write(tmp_path, "a.csv", "".join(f"{v:.9f}\n" for v in SINE))
        cap = load_capture(p, rate=1000.0)
        assert cap.sample_rate == 1000.0 and cap.n == 400
        assert_allclose(cap.samples, SINE, atol=1e-9)
        assert cap.metadata["file"] == str(p) and cap.metadata["format"] == "csv"

    def test_rate_comment_and_header(self, tmp_path):
        p = write(tmp_path, "a.csv", "# bench log\n# sample_rate: 2000 Hz\nvolts\n1.0\n2.0\n3.0\n")
        cap = load_capture(p)
        assert cap.sample_rate == 2000.0
        assert_allclose(cap.samples, [1, 2, 3])

    @pytest.mark.parametrize("sep", [",", ";", "\t", "  "])
    def test_two_columns(self, tmp_path, sep):
        t = 0.5 + np.arange(400) / 1000.0
        body = "time_s,volts\n".replace(",", sep) + "".join(f"{a:.6f}{sep}{b:.9f}\n" for a, b in zip(t, SINE, strict=True))
        cap = load_capture(write(tmp_path, "a.csv", body))
        assert_allclose(cap.sample_rate, 1000.0, rtol=1e-9)
        assert_allclose(cap.start_time, 0.5)
        assert_allclose(cap.samples, SINE, atol=1e-9)

    def test_rounded_time_stamps(self, tmp_path):
        # 44.1 kHz printed to the microsecond: ±0.5 µs jitter on a 22.7 µs step
        t = np.arange(400) / 44_100.0
        body = "".join(f"{a:.6f},{b:.6f}\n" for a, b in zip(t, SINE, strict=True))
        cap = load_capture(write(tmp_path, "r.csv", body))
        assert_allclose(cap.sample_rate, 44_100.0, rtol=1e-4)

    def test_adc(self, tmp_path):
        cap = load_capture(write(tmp_path, "a.csv", "1\n2\n"), rate=10, adc_bits=12, vref=3.3, clock_ppm=50)
        assert cap.adc == AdcInfo(12, 3.3) and cap.clock_ppm == 50

    @pytest.mark.parametrize("text, line, words", [
        ("1.0\n2.0\nabc\n4.0\n", 3, "'abc' is not a number"),
        ("v\n1.0\nnan\n", 3, "NaN or infinite"),
        ("0,1\n0.001,2\n0.002,x\n", 3, "'x' is not a number"),
        ("0,1\n0.001,2\n0.002,2\n0.003,2\n0.007,3\n", 5, "not evenly spaced"),
        ("1,2,3\n", 1, "found 3"),
        ("1,2\n3\n", 2, "expected 2 column"),
    ])
    def test_bad_lines(self, tmp_path, text, line, words):
        p = write(tmp_path, "bad.csv", text)
        with pytest.raises(CaptureError) as info:
            load_capture(p, rate=1000.0)
        assert words in str(info.value)
        assert info.value.one_line().startswith(f"{p}:{line}: ")

    @pytest.mark.parametrize("text, words", [
        ("", "empty file"), ("  \n\n", "empty file"), ("volts\n", "no samples"),
        ("1.5\n", "only 1 sample"),
    ])
    def test_empty_and_tiny(self, tmp_path, text, words):
        with pytest.raises(CaptureError, match=words):
            load_capture(write(tmp_path, "e.csv", text), rate=10.0)

    def test_one_column_needs_rate(self, tmp_path):
        with pytest.raises(CaptureError, match="--rate"):
            load_capture(write(tmp_path, "a.csv", "1\n2\n3\n"))

    def test_rate_disagrees(self, tmp_path):
        with pytest.raises(CaptureError, match="disagrees"):
            load_capture(write(tmp_path, "a.csv", "0,1\n0.001,2\n"), rate=50.0)


class TestFiles:
    def test_missing(self, tmp_path):
        p = tmp_path / "nope.csv"
        with pytest.raises(CaptureError) as info:
            load_capture(p)
        assert info.value.one_line() == f"{p}: no such file"

    def test_unknown_format(self, tmp_path):
        with pytest.raises(CaptureError, match="unknown capture format '.xyz'"):
            load_capture(write(tmp_path, "a.xyz", "1\n2\n"))

    def test_directory(self, tmp_path):
        with pytest.raises(CaptureError, match="directory"):
            load_capture(tmp_path)

    def test_adc_needs_both(self, tmp_path):
        with pytest.raises(CaptureError, match="both bits and reference"):
            load_capture(write(tmp_path, "a.csv", "1\n2\n"), rate=1.0, adc_bits=12)


def _pcm_wav(path, data, width, rate=8000, channels=1):
    with wave.open(str(path), "wb") as w:  # stdlib writer as the reference
        w.setnchannels(channels)
        w.setsampwidth(width)
        w.setframerate(rate)
        w.writeframes(data)


def _float_wav(path, x, bits=32, rate=8000, channels=1):
    dtype = "<f4" if bits == 32 else "<f8"
    frames = np.repeat(np.asarray(x, dtype=dtype)[:, None], channels, axis=1)
    if channels > 1:
        frames[:, 1:] = 0.0
    payload = frames.tobytes()
    align = channels * bits // 8
    fmt = struct.pack("<HHIIHH", 3, channels, rate, rate * align, align, bits)
    body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt + b"data" + struct.pack("<I", len(payload)) + payload
    path.write_bytes(b"RIFF" + struct.pack("<I", len(body)) + body)


class TestWav:
    @pytest.mark.parametrize("width", [1, 2, 3, 4])
    def test_pcm(self, tmp_path, width):
        bits = 8 * width
        full = 2 ** (bits - 1)
        codes = np.round(SINE * (full - 1)).astype(np.int64)
        if width == 1:
            data = (codes + 128).astype(np.uint8).tobytes()
        elif width == 3:
            u = codes & 0xFFFFFF
            data = np.stack([u & 0xFF, (u >> 8) & 0xFF, (u >> 16) & 0xFF], axis=1).astype(np.uint8).tobytes()
        else:
            data = codes.astype("<i2" if width == 2 else "<i4").tobytes()
        p = tmp_path / f"pcm{bits}.wav"
        _pcm_wav(p, data, width)
        cap = load_capture(p)
        assert cap.sample_rate == 8000.0
        assert_allclose(cap.samples, codes / full, atol=1e-12)  # fraction of full scale
        assert cap.adc == AdcInfo(bits, 1.0, bipolar=True)
        volts = load_capture(p, vref=2.5)
        assert_allclose(volts.samples, 2.5 * codes / full, atol=1e-12)

    def test_stereo_first_channel(self, tmp_path):
        left = np.round(SINE * 30000).astype("<i2")
        frames = np.stack([left, np.full_like(left, 1234)], axis=1).tobytes()
        p = tmp_path / "st.wav"
        _pcm_wav(p, frames, 2, channels=2)
        assert_allclose(load_capture(p).samples, left / 32768.0)

    @pytest.mark.parametrize("bits", [32, 64])
    def test_float(self, tmp_path, bits):
        p = tmp_path / "f.wav"
        _float_wav(p, SINE, bits=bits, channels=2)
        cap = load_capture(p)
        assert_allclose(cap.samples, SINE, atol=1e-7)
        assert cap.adc is None

    def test_truncated(self, tmp_path):
        p = tmp_path / "t.wav"
        p.write_bytes(b"RIFF\x00\x00\x00\x00WAVEjunk")
        with pytest.raises(CaptureError, match="fmt"):
            load_capture(p)


class TestNpz:
    def test_round_trip(self, tmp_path):
        cap = Capture(SINE, 1000.0, start_time=1.5, channel="out", adc=AdcInfo(12, 3.3),
                      clock_ppm=50.0, metadata={"instrument": "owl-adc-1", "loss": 0})
        p = tmp_path / "sub" / "c.npz"
        digest = save_capture(cap, p)
        assert digest == hashlib.sha256(p.read_bytes()).hexdigest()
        back = load_capture(p)
        assert_allclose(back.samples, SINE, rtol=0, atol=0)
        assert back.sample_rate == 1000.0 and back.start_time == 1.5 and back.channel == "out"
        assert back.adc == cap.adc and back.clock_ppm == 50.0
        assert back.metadata["instrument"] == "owl-adc-1"
        with np.load(p) as z:  # the documented layout (docs/capture-format.md)
            assert set(z.files) == {"samples", "sample_rate", "meta"}
            meta = json.loads(str(z["meta"][()]))
            assert set(meta) == {"start_time", "channel", "adc", "clock_ppm", "metadata"}

    def test_minimal(self, tmp_path):
        p = tmp_path / "m.npz"
        np.savez(p, samples=SINE, sample_rate=1000.0)
        cap = load_capture(p, adc_bits=10, vref=2.0)
        assert cap.n == 400 and cap.adc == AdcInfo(10, 2.0)

    def test_missing_array(self, tmp_path):
        p = tmp_path / "m.npz"
        np.savez(p, samples=SINE)
        with pytest.raises(CaptureError, match="lacks array"):
            load_capture(p)

    def test_damaged(self, tmp_path):
        p = tmp_path / "d.npz"
        p.write_bytes(b"PK\x03\x04 this is not a zip")
        with pytest.raises(CaptureError, match="not a readable .npz"):
            load_capture(p)


class TestTruncatedWav:
    """A WAV file cut short (interrupted copy or recording) is refused, never read in part."""

    def _full(self, tmp_path):
        p = tmp_path / "whole.wav"
        _pcm_wav(p, np.round(SINE * 30000).astype("<i2").tobytes(), 2)
        return p

    def test_whole_file_reads(self, tmp_path):
        assert load_capture(self._full(tmp_path)).n == SINE.size

    @pytest.mark.parametrize("cut", [1, 2, 101, 400])
    def test_data_chunk_cut_short(self, tmp_path, cut):
        data = self._full(tmp_path).read_bytes()
        p = tmp_path / "cut.wav"
        p.write_bytes(data[:-cut])
        with pytest.raises(CaptureError, match="truncated WAV") as err:
            load_capture(p)
        assert err.value.where().endswith("cut.wav") and "\n" not in str(err.value)

    def test_cli_refuses_in_one_line(self, tmp_path, capsys):
        from benchgate.cli import main

        data = self._full(tmp_path).read_bytes()
        p = tmp_path / "cut.wav"
        p.write_bytes(data[:-3])
        code = main(["analyze", str(p)])
        err = capsys.readouterr().err
        assert code != 0
        lines = [line for line in err.splitlines() if line.strip()]
        assert len(lines) == 1 and "cut.wav" in lines[0] and "truncated" in lines[0]
