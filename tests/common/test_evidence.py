"""How evidence is kept (``benchgate.common.evidence``): JSON-safe values, UTC time, atomic
files, SHA-256."""

from __future__ import annotations

import datetime as _dt
import math

import numpy as np
import pytest

from benchgate.common import evidence as present


def test_finite_and_json_safe():
    assert present.finite(math.nan) is None and present.finite(math.inf) is None and present.finite(None) is None
    assert present.finite(2.5) == 2.5
    out = present.json_safe({"a": np.float64(1.5), "b": [math.nan, np.int64(3)], 4: (np.array([1.0, np.inf]),)})
    assert out == {"a": 1.5, "b": [None, 3], "4": [[1.0, None]]}
    assert type(out["a"]) is float and type(out["b"][1]) is int


def test_utc_now_is_iso_utc_with_milliseconds():
    t = _dt.datetime.fromisoformat(present.utc_now())
    assert t.utcoffset() == _dt.timedelta(0)
    assert abs((_dt.datetime.now(_dt.UTC) - t).total_seconds()) < 60


def test_sha256_known_answers(tmp_path):
    # FIPS 180-2, appendix B.1: SHA-256("abc")
    abc = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    assert present.sha256_hex(b"abc") == abc
    f = tmp_path / "abc.bin"
    f.write_bytes(b"abc")
    assert present.file_sha256(f) == abc
    big = tmp_path / "big.bin"  # more than one 1 MiB block
    data = bytes(range(256)) * 9000
    big.write_bytes(data)
    assert present.file_sha256(big) == present.sha256_hex(data)


def test_write_atomic_text_bytes_and_writer(tmp_path):
    p = present.write_atomic(tmp_path / "deep" / "a.txt", "héllo")
    assert p.read_text(encoding="utf-8") == "héllo"
    present.write_atomic(p, b"\x00\x01")
    assert p.read_bytes() == b"\x00\x01"
    present.write_atomic(p, lambda f: f.write(b"via writer"))
    assert p.read_bytes() == b"via writer"
    assert sorted(x.name for x in p.parent.iterdir()) == ["a.txt"]


def test_write_atomic_failure_keeps_the_old_file_and_leaves_no_temporary(tmp_path):
    p = tmp_path / "r.json"
    p.write_text("old", encoding="utf-8")

    def broken(f):
        f.write(b"half of the new")
        raise OSError("disk full")

    with pytest.raises(OSError, match="disk full"):
        present.write_atomic(p, broken)
    assert p.read_text(encoding="utf-8") == "old"
    assert [x.name for x in tmp_path.iterdir()] == ["r.json"]


def test_write_atomic_gives_the_usual_permissions(tmp_path):
    import os

    old = os.umask(0o022)
    try:
        p = present.write_atomic(tmp_path / "report.html", "x")
    finally:
        os.umask(old)
    # common practice: a new file is 0666 less the umask, readable by the web server or a colleague
    assert p.stat().st_mode & 0o777 == 0o644
