"""`benchgate analyze`: each input format, the --json shape (checked against the JSON Schema
in docs/), and every bad input giving one line on stderr and exit code 2."""

from __future__ import annotations

import json
import subprocess
import sys
import wave
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from benchgate.analysis import AdcInfo, Capture
from benchgate.capfile import save_capture
from benchgate.cli import main

ROOT = Path(__file__).resolve().parents[2]
SCHEMA = json.loads((ROOT / "docs" / "analyze-output.schema.json").read_text())
EXAMPLE = ROOT / "examples" / "tone-board-capture.csv"
FS = 20_000.0
X = 1.65 + np.sin(2 * np.pi * 955.0 * np.arange(8000) / FS)


@pytest.fixture
def csv1(tmp_path):
    p = tmp_path / "one.csv"
    p.write_text("".join(f"{v:.6f}\n" for v in X))
    return p


def run(argv, capsys):
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


class TestFormats:
    def test_csv_table(self, csv1, capsys):
        code, out, err = run(["analyze", str(csv1), "--rate", str(FS)], capsys)
        assert code == 0 and err == ""
        lines = out.splitlines()
        assert lines[0].startswith(f"{csv1}: 8000 samples at 20000 Hz")
        assert any(line.startswith("frequency ") and "955.000 Hz" in line for line in lines)
        assert any(line.startswith("thd ") and "harmonics 2–10 summed" in line for line in lines)

    def test_two_column_csv(self, tmp_path, capsys):
        p = tmp_path / "two.csv"
        t = np.arange(X.size) / FS
        p.write_text("time,volts\n" + "".join(f"{a:.8f},{b:.6f}\n" for a, b in zip(t, X, strict=True)))
        code, out, _ = run(["analyze", str(p), "--json"], capsys)
        assert code == 0
        assert abs(json.loads(out)["measurements"]["frequency"]["value"] - 955.0) < 1e-3

    def test_wav(self, tmp_path, capsys):
        p = tmp_path / "a.wav"
        with wave.open(str(p), "wb") as w:
            w.setnchannels(1)
            w.setsampwidth(2)
            w.setframerate(int(FS))
            w.writeframes(np.round((X - 1.65) * 0.5 * 32767).astype("<i2").tobytes())
        code, out, _ = run(["analyze", str(p), "--vref", "2.0", "--json"], capsys)
        assert code == 0
        m = json.loads(out)["measurements"]
        assert abs(m["amplitude"]["value"] - 1.0) < 1e-3  # 0.5 of full scale × 2 V

    def test_npz_with_adc(self, tmp_path, capsys):
        adc = AdcInfo(12, 3.3)
        p = tmp_path / "c.npz"
        save_capture(Capture(np.round(X / adc.lsb) * adc.lsb, FS, adc=adc, clock_ppm=50), p)
        code, out, _ = run(["analyze", str(p), "--json"], capsys)
        d = json.loads(out)
        jsonschema.validate(d, SCHEMA)
        assert d["measurements"]["enob"]["details"]["referred_to"] == "full scale"

    def test_example_capture(self, capsys):
        code, out, _ = run(["analyze", str(EXAMPLE), "--json"], capsys)
        assert code == 0
        d = json.loads(out)
        jsonschema.validate(d, SCHEMA)
        m = d["measurements"]
        assert all(v["valid"] for v in m.values())
        assert 0.6 <= m["amplitude"]["value"] <= 1.4  # TB-3 window (interfaces.md, invented board)
        assert m["startup_time"]["value"] <= 0.1


class TestJson:
    def test_shape_and_schema(self, csv1, capsys):
        code, out, _ = run(["analyze", str(csv1), "--rate", str(FS), "--clock-ppm", "50", "--json"], capsys)
        assert code == 0
        assert out.count("\n") == 1  # exactly one object
        d = json.loads(out)
        jsonschema.validate(d, SCHEMA)
        assert d["capture"]["samples"] == 8000 and d["capture"]["sample_rate"] == FS
        assert d["capture"]["duration"] == pytest.approx(0.4)
        assert list(d["measurements"]) == ["frequency", "amplitude", "vpp", "rms", "dc_offset", "thd", "thd_n",
                                           "sinad", "snr", "sfdr", "enob", "startup_time", "duty_cycle",
                                           "frequency_drift", "amplitude_dip"]
        f = d["measurements"]["frequency"]
        assert f["unit"] == "Hz" and f["valid"] is True and f["reason"] is None and f["uncertainty"] > 0

    def test_schema_rejects_wrong_shape(self, csv1, capsys):
        _, out, _ = run(["analyze", str(csv1), "--rate", str(FS), "--json"], capsys)
        d = json.loads(out)
        d["measurements"]["frequency"]["valid"] = False  # invalid needs a reason
        with pytest.raises(jsonschema.ValidationError):
            jsonschema.validate(d, SCHEMA)

    def test_cannot_measure_exits_zero(self, tmp_path, capsys):
        p = tmp_path / "flat.csv"
        p.write_text("1.0\n" * 100)
        code, out, _ = run(["analyze", str(p), "--rate", "1000", "--json"], capsys)
        assert code == 0
        d = json.loads(out)
        jsonschema.validate(d, SCHEMA)
        assert "flat line: no oscillation in the capture" in d["capture"]["warnings"]
        m = d["measurements"]
        assert not m["frequency"]["valid"] and "flat line" in m["frequency"]["reason"]
        assert not m["thd"]["valid"] and not m["startup_time"]["valid"]
        assert m["amplitude"]["valid"] and m["amplitude"]["details"]["no_oscillation"]


class TestBadInput:
    @pytest.mark.parametrize("name, text, extra, expect", [
        ("missing.csv", None, [], "{p}: no such file"),
        ("empty.csv", "", ["--rate", "10"], "{p}: empty file"),
        ("text.csv", "1.0\n2.0\nthree\n", ["--rate", "10"], "{p}:3: 'three' is not a number"),
        ("nan.csv", "1.0\nnan\n2.0\n", ["--rate", "10"], "{p}:2: 1 NaN or infinite sample(s)"),
        ("one.csv", "1.0\n", ["--rate", "10"], "{p}: only 1 sample"),
        ("data.xyz", "1\n2\n", [], "{p}: unknown capture format '.xyz'"),
        ("norate.csv", "1\n2\n3\n", [], "{p}: one-column CSV needs a sample rate"),
    ])
    def test_one_line_exit_2(self, tmp_path, capsys, name, text, extra, expect):
        p = tmp_path / name
        if text is not None:
            p.write_text(text)
        code, out, err = run(["analyze", str(p), *extra], capsys)
        assert code == 2
        assert out == ""
        assert err.count("\n") == 1 and "Traceback" not in err
        assert err.startswith("benchgate: " + expect.format(p=p))

    def test_no_traceback_from_console(self, tmp_path):
        p = tmp_path / "gone.wav"
        r = subprocess.run([sys.executable, "-m", "benchgate", "analyze", str(p)],
                           capture_output=True, text=True, timeout=60)
        assert r.returncode == 2
        assert r.stderr == f"benchgate: {p}: no such file\n"


class TestTerminal:
    def test_rich_table_on_a_terminal(self, csv1, capsys, monkeypatch):
        monkeypatch.setattr(sys.stdout, "isatty", lambda: True, raising=False)
        code, out, _ = run(["analyze", str(csv1), "--rate", str(FS)], capsys)
        assert code == 0
        assert "measurement" in out and "frequency" in out and "955.000 Hz" in out
