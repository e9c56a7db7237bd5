"""File names from hostile serial numbers (issue 5: no traversal, no control characters, unique)."""

from __future__ import annotations

import re

import pytest
from hypothesis import given
from hypothesis import strategies as st

from benchgate.report.layout import MAX_NAME, ReportLayout, safe_name, utc_stamp

HOSTILE = [
    "../../x",
    "..",
    ".",
    "/etc/passwd",
    "C:\\Windows\\x",
    "<script>alert(1)</script>",
    "\"quoted\" 'single'",
    "A" * 500,
    "A" * 499 + "B",
    "",
    " ",
    "Ünit-7 ✓ 号",
    "Unit-7 ✓ 号",
    "line\nbreak",
    "nul\x00byte",
    "esc\x1b[31m",
    "tab\tchar",
    ".hidden",
    "-rf",
    "CON",
    "nul.txt",
    "a/b",
    "a\\b",
    "a_b",
    "a__b",
    "trailing.",
]

# common practice, no source: portable file-name characters (POSIX "portable filename
# character set", IEEE Std 1003.1, 3.282) plus our "~" separator.
_PORTABLE = re.compile(r"[A-Za-z0-9._~-]+")


@pytest.mark.parametrize("serial", HOSTILE)
def test_hostile_serial_gives_a_safe_name(serial, tmp_path):
    name = safe_name(serial)
    assert _PORTABLE.fullmatch(name), name
    assert not name.startswith((".", "-"))
    assert name not in (".", "..")
    assert "/" not in name and "\\" not in name
    assert len(name) <= MAX_NAME + 11
    # the folder really lands inside the reports directory
    layout = ReportLayout(tmp_path, "tb3", serial, "2026-12-01T22:37:22Z")
    folder = layout.ensure().resolve()
    assert folder.parent == (tmp_path / "tb3").resolve()
    assert layout.report_path("pass", "json").resolve().parent == folder


def test_hostile_serials_give_distinct_names():
    names = [safe_name(s) for s in HOSTILE]
    assert len(set(names)) == len(HOSTILE)


def test_plain_serial_kept_as_is_and_changed_ones_get_a_hash():
    assert safe_name("TB3-0001") == "TB3-0001"
    assert safe_name("lot4.unit_12") == "lot4.unit_12"
    changed = safe_name("TB3 0001")
    assert changed.startswith("TB3_0001~") and len(changed.split("~")[1]) == 10
    # a kept-as-is name never contains "~", so it cannot equal a sanitised one
    assert "~" not in safe_name("TB3_0001")
    assert safe_name("TB3_0001") != changed


def test_safe_name_is_stable():
    assert safe_name("../../x") == safe_name("../../x")


def test_layout_paths():
    layout = ReportLayout("reports", "tb3", "TB3-0001", "2026-12-01T22:37:22.456789+00:00")
    assert str(layout.folder) == "reports/tb3/TB3-0001"
    assert layout.report_path("fail", "html").name == "20261201T223722.456Z-fail.html"
    assert layout.capture_path("capture-tone").name == "20261201T223722.456Z-capture-tone.npz"
    assert layout.relative(layout.capture_path("s1")) == "20261201T223722.456Z-s1.npz"
    with pytest.raises(ValueError):
        layout.report_path("pass", "../x")


def test_utc_stamp_converts_offsets_and_rejects_garbage():
    assert utc_stamp("2026-12-01T23:37:22+01:00") == "20261201T223722.000Z"
    assert utc_stamp("2026-12-01T22:37:22") == "20261201T223722.000Z"
    with pytest.raises(ValueError, match="ISO 8601"):
        utc_stamp("yesterday")


@given(st.text(max_size=80), st.text(max_size=80))
def test_any_text_gives_a_safe_name_and_distinct_texts_distinct_names(a, b):
    for s in (a, b):
        name = safe_name(s)
        assert _PORTABLE.fullmatch(name) and not name.startswith((".", "-"))
        assert len(name) <= MAX_NAME + 11
    if a != b:
        assert safe_name(a) != safe_name(b)
