"""Two-channel response: gain, phase and output THD against known answers and scipy.signal."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from benchgate.analysis import Capture
from benchgate.analysis.registry import RESPONSE_MEASUREMENTS, measure_response
from benchgate.analysis.response import Stimulated, gain, gain_db, output_thd, phase

FS = 48_000.0


def _pair(ref: np.ndarray, out: np.ndarray, f: float, fs: float = FS, **meta) -> Stimulated:
    return Stimulated(Capture(ref, fs, channel="in"), Capture(out, fs, channel="out", metadata=meta), f)


def _tone(f: float, amp: float, phase_deg: float = 0.0, n: int = 9600, fs: float = FS,
          noise: float = 0.0, seed: int = 1) -> np.ndarray:
    t = np.arange(n) / fs
    y = amp * np.cos(2 * np.pi * f * t + math.radians(phase_deg))
    if noise:
        y = y + np.random.default_rng(seed).normal(0.0, noise, n)
    return y


class TestGainPhase:
    def test_known_gain_and_phase(self):
        # known answer by construction: out = 3.2·in shifted by −37°
        rec = _pair(_tone(1000, 0.5, noise=1e-4, seed=2), _tone(1000, 1.6, -37.0, noise=1e-4, seed=3), 1000)
        g, p, gd = gain(rec), phase(rec), gain_db(rec)
        assert g.valid and p.valid and gd.valid
        assert abs(g.value - 3.2) <= g.uncertainty
        assert abs(p.value - (-37.0)) <= p.uncertainty
        assert abs(gd.value - 20 * math.log10(3.2)) <= gd.uncertainty
        assert g.unit == "V/V" and p.unit == "deg" and gd.unit == "dB"

    def test_uncertainty_covers_noise(self):
        # the U (k = 2) should cover the true gain in about 95 % of noisy trials
        # (JCGM 100:2008 coverage; Rife and Boorstyn (1974) amplitude bound)
        inside = 0
        trials = 60
        for seed in range(trials):
            rec = _pair(_tone(700, 0.2, n=2400, noise=0.02, seed=seed),
                        _tone(700, 0.1, 80.0, n=2400, noise=0.02, seed=1000 + seed), 700)
            g = gain(rec)
            inside += abs(g.value - 0.5) <= g.uncertainty
        assert inside >= 0.85 * trials

    def test_first_order_rc_against_scipy_freqs(self):
        # time-domain response of an RC low-pass (scipy.signal.lsim) measured and compared with
        # its transfer function evaluated by scipy.signal.freqs (scipy.signal reference)
        r, c = 10e3, 10e-9
        b, a = [1.0], [r * c, 1.0]
        f = 2500.0
        fs = 200_000.0
        t = np.arange(40_000) / fs
        u = 0.8 * np.sin(2 * np.pi * f * t)
        _, y, _ = signal.lsim((b, a), u, t)
        keep = slice(20_000, None)  # 100 ms ≫ RC = 0.1 ms: the transient is long gone
        rec = _pair(u[keep], y[keep], f, fs)
        _, h = signal.freqs(b, a, worN=[2 * np.pi * f])
        # lsim's first-order hold at 80 samples per cycle errs by about (ωT)²/12 ≈ 5e-4
        # (derived), so the two references agree to about 1e-3
        assert gain(rec).value == pytest.approx(abs(h[0]), rel=1.5e-3)
        assert phase(rec).value == pytest.approx(math.degrees(np.angle(h[0])), abs=0.1)

    def test_inverting_stage_phase_is_180(self):
        # an inverting stage: −Rf/Rin (handbook formula, from memory) is a 180° phase shift
        rec = _pair(_tone(1000, 0.1), -4.7 * _tone(1000, 0.1), 1000)
        assert abs(abs(phase(rec).value) - 180.0) < 1e-6
        assert gain(rec).value == pytest.approx(4.7, rel=1e-9)

    def test_generator_clock_off_by_small_amount_is_followed(self):
        # the stated frequency is the generator's setting; the reference fit finds the real one
        rec = _pair(_tone(1001.5, 0.3), _tone(1001.5, 0.6, 20.0), 1000.0)
        g = gain(rec)
        assert g.valid and g.value == pytest.approx(2.0, rel=1e-6)
        assert g.details["frequency_hz"] == pytest.approx(1001.5, rel=1e-6)


class TestRefusals:
    def test_no_stimulus(self):
        rec = _pair(np.random.default_rng(4).normal(0, 1e-3, 9600), _tone(1000, 1.0), 1000)
        for m in (gain(rec), phase(rec), gain_db(rec)):
            assert not m.valid and "stimulus" in m.reason

    def test_reference_at_wrong_frequency(self):
        rec = _pair(_tone(1200, 0.3), _tone(1200, 0.3), 1000)
        assert not gain(rec).valid and "not at the stimulus frequency" in gain(rec).reason

    def test_channels_must_share_instants(self):
        rec = Stimulated(Capture(_tone(1000, 1), FS), Capture(_tone(1000, 1), FS / 2), 1000)
        assert "different rates" in gain(rec).reason
        rec = Stimulated(Capture(_tone(1000, 1), FS), Capture(_tone(1000, 1)[:-10], FS), 1000)
        assert "same sample instants" in gain(rec).reason

    def test_too_few_cycles_and_near_nyquist(self):
        assert "fewer than 3" in gain(_pair(_tone(10, 1.0), _tone(10, 1.0), 10)).reason
        assert "above 0.45" in gain(_pair(_tone(23_000, 1.0), _tone(23_000, 1.0), 23_000)).reason

    def test_dead_output_fails_not_passes(self):
        # open coupling capacitor: nothing at the output. The gain is a valid small number, the
        # phase has nothing to measure, the dB value is an upper bound without U
        rec = _pair(_tone(1000, 0.5), np.random.default_rng(5).normal(0, 1e-4, 9600), 1000)
        g, p, gd = gain(rec), phase(rec), gain_db(rec)
        assert g.valid and g.value < 1e-3 and g.details["no_response"]
        assert not p.valid
        assert gd.valid and gd.uncertainty is None and gd.details["upper_bound"] and gd.value < -50


class TestOutputThd:
    def test_third_harmonic(self):
        # known answer by construction: 1 % third harmonic → THD 1 % (IEEE Std 1241-2010 definition)
        out = _tone(1000, 1.0) + _tone(3000, 0.01, 30.0)
        m = output_thd(_pair(_tone(1000, 0.1), out, 1000))
        assert m.value == pytest.approx(1.0, rel=1e-6)

    def test_band_limited_square(self):
        # docs/references.md "Analytic THD of ideal waveforms": square wave band-limited to 10 harmonics,
        # 42.88 % (Fourier series of the square wave)
        t = np.arange(9600) / FS
        sq = sum(np.sin(2 * np.pi * k * 500 * t) / k for k in (1, 3, 5, 7, 9))
        m = output_thd(_pair(_tone(500, 0.2), sq, 500))
        assert m.value == pytest.approx(42.88, abs=0.01)

    def test_noise_bias_removed_and_covered(self):
        # a clean sine in noise: the true THD is 0 and the U should reach it in most trials
        # (JCGM 100:2008 coverage, about 95 %)
        covered = 0
        for seed in range(30):
            rec = _pair(_tone(1000, 0.5, noise=1e-3, seed=seed), _tone(1000, 1.0, noise=1e-3, seed=99 + seed), 1000)
            m = output_thd(rec)
            assert m.valid and m.value < 0.02
            covered += m.value - m.uncertainty <= 0.0
        assert covered >= 27

    def test_flat_tops_of_the_unit_are_measured(self):
        # a stage clipping at its rails makes flat tops: measured, not refused
        out = np.clip(_tone(1000, 2.0), -1.5, 1.5)
        m = output_thd(_pair(_tone(1000, 0.2), out, 1000))
        assert m.valid and m.value > 3.0


def test_registry_names_match_units():
    from benchgate.common.names import RESPONSE_UNITS

    assert tuple(RESPONSE_MEASUREMENTS) == tuple(RESPONSE_UNITS)
    rec = _pair(_tone(1000, 0.5), _tone(1000, 1.0), 1000)
    got = measure_response(list(RESPONSE_UNITS), rec)
    for name, m in got.items():
        assert m.unit == RESPONSE_UNITS[name]
    with pytest.raises(ValueError, match="unknown response measurement"):
        measure_response(["gian"], rec)
