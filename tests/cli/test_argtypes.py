"""One reader for sample rates and other engineering numbers on the command line (issue 9)."""

from __future__ import annotations

import argparse
import json

import numpy as np
import pytest

from benchgate.cli import _argtypes, analyze, capture, main

FS = 20_000.0


@pytest.fixture
def csv1(tmp_path):
    x = 1.65 + np.sin(2 * np.pi * 955.0 * np.arange(4000) / FS)
    p = tmp_path / "one.csv"
    p.write_text("".join(f"{v:.6f}\n" for v in x))
    return p


def test_analyze_takes_a_prefixed_rate(csv1, capsys):
    # the old `analyze --rate` was type=float: "20k" was refused while capture took "50k"
    code = main(["analyze", str(csv1), "--rate", "20k", "--json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    assert json.loads(out)["capture"]["sample_rate"] == FS


@pytest.mark.parametrize("bad", ["nan", "inf", "0", "-20k", "20 V"])
def test_analyze_refuses_a_bad_rate(csv1, capsys, bad):
    with pytest.raises(SystemExit) as exc:
        main(["analyze", str(csv1), "--rate", bad])
    assert exc.value.code == 2
    assert "--rate" in capsys.readouterr().err


def _parser(module) -> argparse.ArgumentParser:
    top = argparse.ArgumentParser()
    return module.add_parser(top.add_subparsers())


def test_both_commands_use_the_one_rate_reader():
    for module in (analyze, capture):
        rate = next(a for a in _parser(module)._actions if "--rate" in a.option_strings)
        assert rate.type is _argtypes.rate, module.__name__
    assert _argtypes.rate("48k") == _argtypes.rate("48 kHz") == _argtypes.rate("48 kS/s") == 48e3
