"""Capture files: read CSV, WAV and the project's own .npz; write .npz.

Formats (docs/capture-format.md):

- CSV: one column of volts (needs a sample rate: ``rate=`` or a ``# sample_rate: <Hz>``
  comment) or two columns, time in seconds and volts. Comma, semicolon, tab or spaces
  separate fields; one header line is allowed before the data; ``#`` starts a comment line.
- WAV: PCM 8/16/24/32-bit or IEEE float 32/64, mono or the first channel; values are a
  fraction of full scale, or volts when ``vref`` is given. A PCM file describes its own
  converter (bits, ±full scale), so clipping at its rails is detected.
- .npz: arrays ``samples`` (V) and ``sample_rate`` (Hz), and a JSON string ``meta``
  holding start_time, channel, adc, clock_ppm and metadata.

Every problem raises :class:`benchgate.errors.CaptureError` naming the file (and line).
"""

from __future__ import annotations

import io
import json
import math
import os
import re
import struct
from pathlib import Path
from typing import Any

import numpy as np

from benchgate.analysis.capture import AdcInfo, Capture
from benchgate.common.evidence import json_safe, sha256_hex, write_atomic
from benchgate.errors import CaptureError

FORMATS = (".csv", ".txt", ".wav", ".npz")
_RATE_COMMENT = re.compile(r"^#\s*sample[_ ]rate\s*[:=]\s*([0-9.eE+-]+)\s*(hz)?\s*$", re.IGNORECASE)
_SPLIT = re.compile(r"[,;\t ]+")


def load_capture(path: str | os.PathLike, *, rate: float | None = None, adc_bits: int | None = None,
                 vref: float | None = None, clock_ppm: float | None = None) -> Capture:
    """Read a capture file (CSV, WAV or .npz, chosen by extension or content).

    Parameters
    ----------
    path : str or PathLike
    rate : float, optional
        Sample rate (Hz); required for a one-column CSV without a rate comment; for other
        files it must agree with the rate the file states.
    adc_bits, vref : optional
        The converter (bits and reference voltage, range 0 … vref) for CSV and .npz; for WAV,
        ``vref`` scales full scale to volts.
    clock_ppm : float, optional
        Sample-clock tolerance (ppm).

    Raises
    ------
    CaptureError
        Missing, empty or malformed file, non-finite samples, fewer than 2 samples, unknown
        format, missing sample rate.
    """
    name = str(path)
    p = Path(path)
    if not p.exists():
        raise CaptureError("no such file", file=name)
    if p.is_dir():
        raise CaptureError("is a directory, not a capture file", file=name)
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise CaptureError(f"cannot read: {exc.strerror or exc}", file=name) from None
    if not data.strip():
        raise CaptureError("empty file: no samples", file=name)
    if rate is not None and not (math.isfinite(rate) and rate > 0):
        raise CaptureError(f"sample rate must be a positive number of Hz, got {rate!r}", file=name)
    if (adc_bits is None) != (vref is None) and not _is_wav(p, data):
        raise CaptureError("give the ADC as both bits and reference voltage (--adc-bits with --vref)", file=name)
    kind = _kind(p, data)
    if kind == "csv":
        samples, file_rate, start, line_of = _read_csv(data, name)
        meta: dict[str, Any] = {}
        adc = _adc(adc_bits, vref, name, bipolar=False)
    elif kind == "wav":
        samples, file_rate, bits, is_float = _read_wav(data, name)
        start, line_of, meta = 0.0, None, {}
        scale = 1.0 if vref is None else float(vref)
        samples = samples * scale
        if adc_bits is not None:
            adc = _adc(adc_bits, scale, name, bipolar=True)
        else:
            adc = None if is_float else AdcInfo(bits=bits, vref=scale, bipolar=True)
    else:
        samples, file_rate, start, meta, adc_file = _read_npz(data, name)
        line_of = None
        adc = _adc(adc_bits, vref, name, bipolar=False) if adc_bits is not None else adc_file
        if clock_ppm is None:
            clock_ppm = meta.pop("clock_ppm", None)
        else:
            meta.pop("clock_ppm", None)
    if file_rate is None:
        if rate is None:
            raise CaptureError("one-column CSV needs a sample rate: give --rate HZ "
                               "(or a '# sample_rate: HZ' comment line)", file=name)
        file_rate = rate
    elif rate is not None and abs(rate - file_rate) > 1e-6 * file_rate:
        raise CaptureError(f"--rate {rate:g} Hz disagrees with the file's {file_rate:g} Hz", file=name)
    if samples.size < 2:
        raise CaptureError(f"only {samples.size} sample(s); a capture needs at least 2", file=name)
    bad = np.flatnonzero(~np.isfinite(samples))
    if bad.size:
        where = f" (line {line_of[bad[0]]})" if line_of is not None else ""
        raise CaptureError(f"{bad.size} NaN or infinite sample(s){where}", file=name,
                           line=None if line_of is None else int(line_of[bad[0]]))
    metadata = dict(meta.pop("metadata", {}) or {})
    metadata.setdefault("file", name)
    metadata.setdefault("format", kind)
    try:
        return Capture(samples=samples, sample_rate=file_rate, start_time=start,
                       channel=str(meta.get("channel", "ch0")), adc=adc, clock_ppm=clock_ppm,
                       metadata=metadata)
    except ValueError as exc:
        raise CaptureError(str(exc), file=name) from None


def save_capture(capture: Capture, path: str | os.PathLike) -> str:
    """Write ``capture`` as .npz (arrays ``samples``, ``sample_rate``, JSON ``meta``) atomically.

    Returns
    -------
    str
        SHA-256 (hex) of the written file.
    """
    meta = {
        "start_time": capture.start_time,
        "channel": capture.channel,
        "adc": capture.adc.to_dict() if capture.adc is not None else None,
        "clock_ppm": capture.clock_ppm,
        "metadata": json_safe(dict(capture.metadata)),
    }
    buf = io.BytesIO()
    np.savez_compressed(buf, samples=np.asarray(capture.samples, dtype=np.float64),
                        sample_rate=np.float64(capture.sample_rate), meta=np.array(json.dumps(meta)))
    payload = buf.getvalue()
    write_atomic(path, payload, sync=True)
    return sha256_hex(payload)  # the writer's digest: nobody needs to read the file back for it


def _is_wav(p: Path, data: bytes) -> bool:
    return _kind(p, data, strict=False) == "wav"


def _kind(p: Path, data: bytes, strict: bool = True) -> str:
    ext = p.suffix.lower()
    if ext in (".csv", ".txt"):
        return "csv"
    if ext == ".wav" or data[:4] == b"RIFF":
        return "wav"
    if ext == ".npz" or data[:4] == b"PK\x03\x04":
        return "npz"
    if not strict:
        return "unknown"
    raise CaptureError(f"unknown capture format {ext or '(no extension)'!r}; "
                       "expected .csv, .wav or .npz", file=str(p))


def _adc(bits: int | None, vref: float | None, name: str, *, bipolar: bool) -> AdcInfo | None:
    if bits is None:
        return None
    try:
        return AdcInfo(bits=int(bits), vref=float(1.0 if vref is None else vref), bipolar=bipolar)
    except (TypeError, ValueError) as exc:
        raise CaptureError(str(exc), file=name) from None


def _read_csv(data: bytes, name: str) -> tuple[np.ndarray, float | None, float, np.ndarray]:
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise CaptureError("not a text file (CSV must be UTF-8 or ASCII)", file=name) from None
    rows: list[list[float]] = []
    lines: list[int] = []
    rate_comment = None
    header_seen = False
    ncols = None
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line:
            continue
        if line.startswith("#"):
            m = _RATE_COMMENT.match(line)
            if m:
                try:
                    rate_comment = float(m.group(1))
                except ValueError:
                    raise CaptureError(f"bad sample rate in comment: {line!r}", file=name, line=lineno) from None
            continue
        fields = [f for f in _SPLIT.split(line) if f]
        try:
            values = [float(f) for f in fields]
        except ValueError:
            bad = next(f for f in fields if not _is_float(f))
            if not rows and not header_seen:
                header_seen = True
                continue
            raise CaptureError(f"{bad!r} is not a number", file=name, line=lineno) from None
        if ncols is None:
            ncols = len(values)
            if ncols not in (1, 2):
                raise CaptureError(f"expected 1 column (volts) or 2 (time s, volts), found {ncols}",
                                   file=name, line=lineno)
        elif len(values) != ncols:
            raise CaptureError(f"expected {ncols} column(s), found {len(values)}", file=name, line=lineno)
        rows.append(values)
        lines.append(lineno)
    if not rows:
        raise CaptureError("no samples (only a header or comments)", file=name)
    arr = np.array(rows, dtype=float)
    line_of = np.array(lines)
    if ncols == 1:
        return arr[:, 0], rate_comment, 0.0, line_of
    t, v = arr[:, 0], arr[:, 1]
    if t.size < 2:
        return v, None, float(t[0]), line_of
    if not np.all(np.isfinite(t)):
        i = int(np.flatnonzero(~np.isfinite(t))[0])
        raise CaptureError("time is not a finite number", file=name, line=int(line_of[i]))
    dt = np.diff(t)
    step = float(np.median(dt))
    if not step > 0:
        raise CaptureError("time column does not increase", file=name, line=int(line_of[1]))
    # gaps and repeats are refused; printing jitter (times rounded to a few digits) is not:
    # the rate comes from the end points, which averages it out
    off = np.flatnonzero(np.abs(dt - step) > 0.2 * step + 1e-12 * abs(t).max())
    if off.size:
        i = int(off[0]) + 1
        raise CaptureError(f"time column not evenly spaced (step {dt[i - 1]:g} s, expected {step:g} s)",
                           file=name, line=int(line_of[i]))
    rate = (t.size - 1) / float(t[-1] - t[0])
    return v, rate, float(t[0]), line_of


def _is_float(s: str) -> bool:
    try:
        float(s)
    except ValueError:
        return False
    return True


def _read_wav(data: bytes, name: str) -> tuple[np.ndarray, float, int, bool]:
    if len(data) < 12 or data[:4] != b"RIFF" or data[8:12] != b"WAVE":
        raise CaptureError("not a WAV file (no RIFF/WAVE header)", file=name)
    pos, fmt, payload = 12, None, None
    while pos + 8 <= len(data):
        cid, size = data[pos:pos + 4], struct.unpack("<I", data[pos + 4:pos + 8])[0]
        body = data[pos + 8:pos + 8 + size]
        if cid in (b"fmt ", b"data") and len(body) < size:
            # a chunk that promises more bytes than the file holds: the file was cut short
            # (an interrupted copy or recording); reading what is there would lose data silently
            raise CaptureError(f"truncated WAV file: its {cid.decode().strip()!r} chunk declares {size} bytes "
                               f"but only {len(body)} follow", file=name)
        if cid == b"fmt ":
            fmt = body
        elif cid == b"data":
            payload = body
        pos += 8 + size + (size & 1)
    if fmt is None or len(fmt) < 16:
        raise CaptureError("WAV file has no valid 'fmt ' chunk", file=name)
    if payload is None:
        raise CaptureError("WAV file has no 'data' chunk", file=name)
    tag, channels, rate, _, align, bits = struct.unpack("<HHIIHH", fmt[:16])
    if tag == 0xFFFE and len(fmt) >= 26:
        tag = struct.unpack("<H", fmt[24:26])[0]
    if channels < 1 or rate <= 0 or bits == 0:
        raise CaptureError(f"WAV header not usable ({channels} channels, {rate} Hz, {bits} bits)", file=name)
    width = bits // 8
    if align < max(channels * width, 1):
        raise CaptureError("WAV block alignment smaller than its sample size", file=name)
    frames, rest = divmod(len(payload), align)
    if rest:
        raise CaptureError(f"truncated WAV file: the data chunk ends {rest} byte(s) into a sample frame "
                           f"of {align} bytes", file=name)
    raw = np.frombuffer(payload[: frames * align], dtype=np.uint8).reshape(frames, align)[:, :width]
    if tag == 1 and bits in (8, 16, 24, 32):
        if bits == 8:
            x = (raw[:, 0].astype(np.float64) - 128.0) / 128.0
        elif bits == 24:
            b = raw.astype(np.int32)
            v = b[:, 0] | (b[:, 1] << 8) | (b[:, 2] << 16)
            v = np.where(v >= 1 << 23, v - (1 << 24), v)
            x = v / float(1 << 23)
        else:
            dtype = "<i2" if bits == 16 else "<i4"
            x = np.ascontiguousarray(raw).view(dtype)[:, 0] / float(1 << (bits - 1))
        return x.astype(np.float64), float(rate), int(bits), False
    if tag == 3 and bits in (32, 64):
        x = np.ascontiguousarray(raw).view("<f4" if bits == 32 else "<f8")[:, 0].astype(np.float64)
        return x, float(rate), int(bits), True
    raise CaptureError(f"unsupported WAV encoding (format tag {tag}, {bits} bits); "
                       "expected PCM 8/16/24/32-bit or float 32/64", file=name)


def _read_npz(data: bytes, name: str) -> tuple[np.ndarray, float, float, dict, AdcInfo | None]:
    try:
        with np.load(io.BytesIO(data), allow_pickle=False) as z:
            files = set(z.files)
            missing = {"samples", "sample_rate"} - files
            if missing:
                raise CaptureError(f".npz capture lacks array(s) {', '.join(sorted(missing))}", file=name)
            samples = np.asarray(z["samples"], dtype=np.float64).ravel()
            rate = float(np.asarray(z["sample_rate"]).reshape(-1)[0])
            meta_text = str(z["meta"][()]) if "meta" in files else "{}"
    except CaptureError:
        raise
    except Exception as exc:  # zipfile/numpy raise many kinds for a damaged file
        raise CaptureError(f"not a readable .npz capture ({type(exc).__name__}: {exc})", file=name) from None
    try:
        meta = json.loads(meta_text)
        if not isinstance(meta, dict):
            raise ValueError("meta is not an object")
        adc = AdcInfo.from_dict(meta["adc"]) if meta.get("adc") else None
    except (ValueError, KeyError, TypeError) as exc:
        raise CaptureError(f".npz capture has a bad 'meta' entry ({exc})", file=name) from None
    return samples, rate, float(meta.get("start_time", 0.0) or 0.0), meta, adc
