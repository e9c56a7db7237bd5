"""IEC 60063 preferred number series."""

from __future__ import annotations

import math

import pytest

from benchgate.units import is_preferred, nearest_preferred, series, series_for_tolerance


def test_sizes():
    assert [len(series(n)) for n in ("E6", "E12", "E24", "E48", "E96")] == [6, 12, 24, 48, 96]


def test_e24_irregular_values():
    # IEC 60063 E24 (docs/references.md): these differ from 10^(i/24) rounded to two figures
    e24 = series("E24")
    for v in (2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 8.2, 9.1):
        assert v in e24
    rounded = [round(10 ** (i / 24), 1) for i in range(24)]
    differing = {v for v, r in zip(e24, rounded, strict=True) if not math.isclose(v, r)}
    assert {2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2} <= differing


def test_e12_e6_are_subsets_of_e24():
    # IEC 60063: every other E24 value is E12, every fourth is E6
    assert series("E12") == (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)
    assert series("E6") == (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)


def test_e96_rounded_geometric():
    # docs/references.md: E96 equals 10^(i/96) rounded to three significant figures
    e96 = series("E96")
    assert e96[:6] == (1.0, 1.02, 1.05, 1.07, 1.1, 1.13)
    assert e96[-3:] == (9.31, 9.53, 9.76)
    assert series("E48") == e96[::2]


@pytest.mark.parametrize(("value", "name", "member"),
                         [(6800, "E24", True), (6800, "E12", True), (16e3, "E24", True),
                          (16e3, "E12", False), (6900, "E24", False), (10e-9, "E6", True),
                          (4.75e3, "E96", True), (4.7e3, "E96", False), (1e6, "E6", True)])
def test_membership(value, name, member):
    assert is_preferred(value, name) is member


@pytest.mark.parametrize(("value", "name", "nearest"),
                         [(6900, "E24", 6800), (6.5e3, "E12", 6.8e3), (9.6e3, "E24", 10e3),
                          (1.04e-9, "E96", 1.05e-9), (2.9, "E24", 3.0), (500, "E6", 470)])
def test_nearest(value, name, nearest):
    assert math.isclose(nearest_preferred(value, name), nearest)


def test_series_for_tolerance():
    # common practice, from memory: ±5 % parts come in E24 values, ±10 % in E12, ±1 % in E96
    assert [series_for_tolerance(p) for p in (0.5, 1, 2, 5, 10, 20, 50)] == [
        "E96", "E96", "E48", "E24", "E12", "E6", "E6"]


def test_bad_values():
    with pytest.raises(ValueError):
        is_preferred(0.0)
    with pytest.raises(KeyError):
        series("E7")
