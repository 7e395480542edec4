"""Curves for plotting: energy–time curve, smoothed magnitude response, decay lines."""

import numpy as np
import pytest
from scipy import signal

from roomconv.analysis.curves import (
    band_decays,
    decay_line,
    energy_time_curve,
    smoothed_magnitude_db,
)
from roomconv.analysis.parameters import room_parameters

FS = 48000


def exponential_noise(T, seconds, seed=0, lead_s=0.0):
    """Gaussian noise under exp(−3 ln10 · t / T): its energy falls 60 dB in T seconds."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * FS)) / FS
    h = rng.standard_normal(t.size) * np.exp(-3 * np.log(10) * t / T)
    return np.r_[np.zeros(int(lead_s * FS)), h]


@pytest.mark.parametrize("T", [0.4, 1.2])
def test_etc_slope_is_minus_60_over_T(T):
    # Closed form: 10·log10(exp(−6 ln10 · t / T)) = −60 t / T dB, so the slope is −60/T dB/s.
    h = exponential_noise(T, 0.8 * T, lead_s=0.01)
    etc = energy_time_curve(h, FS, average_s=0.01)
    t0 = etc.onset_s
    sel = (etc.t_s > t0 + 0.05 * T) & (etc.t_s < t0 + 0.6 * T)
    slope = np.polyfit(etc.t_s[sel], etc.smooth_db[sel], 1)[0]
    assert slope == pytest.approx(-60 / T, rel=0.03)
    # The onset: the first sample within 20 dB of the peak (ISO 3382-1:2009, A.3.2, from
    # memory) lies just after the 10 ms of silence.
    assert 0.01 <= etc.onset_s < 0.012
    assert etc.peak_db.max() == pytest.approx(0.0)


def test_etc_peak_curve_holds_each_steps_maximum():
    # Closed form: the largest squared sample per step, in dB re the largest overall.
    h = np.zeros(96)
    h[10], h[60] = 1.0, 0.1
    etc = energy_time_curve(h, FS, step_s=24 / FS)
    assert etc.peak_db.tolist() == pytest.approx([0.0, -120.0, -20.0, -120.0])


def test_etc_refuses_a_silent_response():
    with pytest.raises(ValueError, match="silent"):
        energy_time_curve(np.zeros(100), FS)


def test_third_octave_smoothing_of_a_known_filter_matches_freqz():
    # Reference: scipy.signal.freqz of the same biquad on a dense grid inside each
    # third-octave window, power-averaged the same way (mean of |H|² over the window).
    b, a = signal.butter(2, [300, 3000], btype="bandpass", fs=FS)
    h = signal.lfilter(b, a, np.r_[1.0, np.zeros(FS - 1)])  # decays far below 1e-12 in 1 s
    f, db = smoothed_magnitude_db(h, FS, fraction=3, points=40, low_hz=50, high_hz=16000)
    half = 2 ** (1 / 6)
    ref = []
    for fc in f:
        grid = np.linspace(fc / half, fc * half, 400)
        _, H = signal.freqz(b, a, worN=grid, fs=FS)
        ref.append(10 * np.log10(np.mean(np.abs(H) ** 2)))
    assert db == pytest.approx(np.array(ref), abs=0.1)


def test_smoothing_of_a_unit_impulse_is_flat_at_zero_db():
    # Closed form: a unit impulse has |H| = 1 at every frequency.
    f, db = smoothed_magnitude_db(np.r_[1.0, np.zeros(255)], 44100, fraction=6)
    assert np.allclose(db, 0.0, atol=1e-9)
    assert f[-1] <= 0.95 * 44100 / 2


def test_decay_line_of_a_straight_decay():
    # Closed form: a straight decay of T = 0.8 s falls 60 dB in 0.8 s; the T30 line over
    # −5 … −35 dB (ISO 3382-1:2009, A.2, from memory) is the curve itself.
    rate = 1000
    curve = -60 * np.arange(rate) / rate / 0.8
    line = decay_line(curve, rate, -5, -35, down_to_db=-40)
    assert line.reverberation_s == pytest.approx(0.8)
    assert line.t_s.tolist() == pytest.approx([0.0, 40 / 60 * 0.8])
    assert line.level_db.tolist() == pytest.approx([0.0, -40.0])
    assert decay_line(curve[:100], rate) is None  # the curve never reaches −35 dB


def test_band_decays_lines_agree_with_the_analysis():
    # The line drawn is the one the decay time came from: −60 / slope equals the analysed T30
    # (same fit), and for exponential noise with T = 0.9 s both lie near 0.9 s (closed form;
    # 10 % allows for band filtering and noise, common practice).
    h = exponential_noise(0.9, 2.0, seed=3) * 0.3
    res, wide, _ = room_parameters(h, FS, bands="octave", low=250, high=2000)
    decays = band_decays(res, FS)
    assert [d.band_hz for d in decays] == [r.band_hz for r in res if r.curve_db is not None]
    for d, r in zip(decays, res, strict=True):
        if r.t30_s is None:
            continue
        assert d.metric == "t30_s"
        assert d.line.reverberation_s == pytest.approx(r.t30_s, rel=1e-9)
        assert d.line.reverberation_s == pytest.approx(0.9, rel=0.1)
        assert d.t_s[0] == 0.0 and d.curve_db[0] <= 0.0 and np.all(np.diff(d.curve_db) <= 1e-9)
