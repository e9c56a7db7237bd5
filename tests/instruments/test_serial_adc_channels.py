"""Two-channel capture on the serial ADC (framed protocol, one channel mask) over a real pty."""

from __future__ import annotations

import sys

import numpy as np
import pytest
from test_serial_adc import adc_config

from benchgate.analysis.response import Stimulated, gain, phase
from benchgate.clock import ScaledClock
from benchgate.errors import InstrumentError
from benchgate.instruments.base import MultiRecorder
from benchgate.instruments.serial_adc import SerialAdc
from benchgate.sim.serial_device import PtyAdcDevice, SineSource

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs POSIX pseudo-terminals")


def test_two_channels_at_the_same_instants():
    clock = ScaledClock(10.0)
    # SineSource: channel i carries amplitude/(i+1) in phase, so rail/out = 0.5 at 0° (by construction)
    source = SineSource(frequency=997.0, channels=("out", "rail"))
    with PtyAdcDevice(source, clock=clock) as dev:
        with SerialAdc.open(adc_config(dev.port), clock=clock) as adc:
            assert isinstance(adc, MultiRecorder)
            out, rail = adc.capture_channels(("out", "rail"), duration=0.2, rate=20_000)
    assert out.channel == "out" and rail.channel == "rail" and out.n == rail.n == 4000
    ref = SineSource(frequency=997.0, channels=("out", "rail"))
    ref.start(20_000.0, 3)
    codes = ref.read(4000)
    # codes -> volts: code * vref / 2**bits (common practice, no source)
    np.testing.assert_allclose(out.samples, codes[:, 0] * (3.3 / 4096), atol=1e-12)
    np.testing.assert_allclose(rail.samples, codes[:, 1] * (3.3 / 4096), atol=1e-12)
    assert rail.metadata["channel_skew_s"] == pytest.approx(1 / 20_000)
    rec = Stimulated(out, rail, 997.0)
    g, p = gain(rec), phase(rec)
    assert abs(g.value - 0.5) <= g.uncertainty
    assert abs(p.value) <= p.uncertainty  # the multiplexing bound covers a true 0°


def test_lines_mode_refuses_two_channels():
    clock = ScaledClock(10.0)
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock, protocol="lines") as dev:
        with SerialAdc.open(adc_config(dev.port, protocol="lines"), clock=clock) as adc:
            with pytest.raises(InstrumentError, match="lines mode streams one channel"):
                adc.capture_channels(("out", "rail"), duration=0.1)
            with pytest.raises(InstrumentError, match="named once"):
                adc.capture_channels(("out", "out"), duration=0.1)
