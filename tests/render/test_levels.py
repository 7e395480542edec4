"""Level meters against ITU-R BS.1770-4, EBU Tech 3341 and pyloudnorm's public API."""

from __future__ import annotations

import numpy as np
import pyloudnorm
import pytest
from scipy.signal import resample_poly, sosfilt, sosfreqz

from roomconv.render.levels import LoudnessMeter, TruePeakMeter, k_weighting_sos
from roomconv.signal import raised_cosine

FS = 48000


def test_k_weighting_at_48k_matches_the_published_coefficients():
    # ITU-R BS.1770-4, Annex 1, Table 1 (pre-filter) and Table 2 (RLB high-pass); the values
    # below are quoted from memory of those tables.
    shelf_b = [1.53512485958697, -2.69169618940638, 1.19839281085285]
    shelf_a = [1.0, -1.69065929318241, 0.73248077421585]
    hp_b = [1.0, -2.0, 1.0]
    hp_a = [1.0, -1.99004745483398, 0.99007225036621]
    sos = k_weighting_sos(48000)
    np.testing.assert_allclose(sos[0], shelf_b + shelf_a, atol=1e-8)
    np.testing.assert_allclose(sos[1], hp_b + hp_a, atol=1e-8)


@pytest.mark.parametrize("rate", [44100, 96000])
def test_k_weighting_response_is_the_same_at_other_rates(rate):
    # The bilinear transform with pre-warped corner frequencies keeps the response below about
    # a quarter of the rate (closed form of the transform): compare with 48 kHz on 20 Hz-10 kHz.
    f = np.geomspace(20, 10000, 60)
    _, h48 = sosfreqz(k_weighting_sos(48000), worN=f, fs=48000)
    _, h = sosfreqz(k_weighting_sos(rate), worN=f, fs=rate)
    db = 20 * np.log10(np.abs(h) / np.abs(h48))
    assert np.max(np.abs(db)) < 0.05


def _stereo_sine(level_dbfs, seconds, f=1000.0):
    t = np.arange(int(seconds * FS)) / FS
    x = 10 ** (level_dbfs / 20) * np.sin(2 * np.pi * f * t)
    return np.stack([x, x], axis=1)


def _meter(x, block=4801):
    m = LoudnessMeter(FS, x.shape[1])
    for i in range(0, x.shape[0], block):  # an odd block size: gating blocks span feeds
        m.feed(x[i : i + block])
    return m.integrated()


@pytest.mark.parametrize(
    "parts",
    [
        # EBU Tech 3341 (2016) minimum requirements, test cases 1, 3 and 4 (from memory): 1 kHz
        # stereo sines, expected -23.0 +/- 0.1 LUFS. Cases 3 and 4 need both gates: the -36 dBFS
        # parts fall below the relative gate, the -72 dBFS parts below the absolute gate.
        [(-23, 20)],
        [(-36, 10), (-23, 60), (-36, 10)],
        [(-72, 10), (-36, 10), (-23, 60), (-36, 10), (-72, 10)],
    ],
)
def test_gated_loudness_ebu_3341_cases(parts):
    x = np.concatenate([_stereo_sine(level, sec) for level, sec in parts])
    assert _meter(x) == pytest.approx(-23.0, abs=0.1)


def test_gating_with_quiet_passages_against_pyloudnorm_public_api():
    # Noise programme with pauses of digital silence and a passage 25 dB down: both gates act.
    # pyloudnorm.Meter(rate).integrated_loudness is an independent BS.1770-4 implementation;
    # its K-filter is a slightly different fit, so agreement within 0.1 LU is asked (the
    # EBU Tech 3341 tolerance, from memory).
    rng = np.random.default_rng(5)
    loud = 0.1 * rng.standard_normal((6 * FS, 2))
    quiet = 0.1 * 10 ** (-25 / 20) * rng.standard_normal((4 * FS, 2))
    x = np.concatenate([np.zeros((2 * FS, 2)), loud, quiet, np.zeros((3 * FS, 2)), loud[:FS]])
    ours = _meter(x)
    ref = pyloudnorm.Meter(FS).integrated_loudness(x)
    assert ours == pytest.approx(ref, abs=0.1)
    # The gates must have acted: the ungated mean power (eq. (2) of BS.1770-4 over the whole
    # programme) lies about 10·log10(7/16) = -3.6 dB below the loud parts, the gated value
    # within a few tenths of them.
    y = sosfilt(k_weighting_sos(FS), x, axis=0)
    ungated = -0.691 + 10 * np.log10(np.sum(np.mean(y * y, axis=0)))
    assert ours - ungated > 2.5


def test_silence_and_too_short_read_minus_infinity():
    assert _meter(np.zeros((FS, 2))) == float("-inf")  # every block below the absolute gate
    assert _meter(_stereo_sine(-20, 0.3)) == float("-inf")  # shorter than one 400 ms block


def test_true_peak_against_8x_oversampled_reference():
    # A sine at fs/4 with a 45 degree phase has samples at 0.707 of its crest; the true peak
    # is the crest (closed form). Slow fades at both ends, so that switching the tone on
    # adds no overshoot of its own. Reference: scipy.signal.resample_poly at 16x.
    n = np.arange(FS // 10)
    env = np.ones(n.size)
    env[:480], env[-480:] = raised_cosine(480), raised_cosine(480, rising=False)
    x = (0.5 * env * np.sin(2 * np.pi * 0.25 * n + np.pi / 4))[:, None]
    m = TruePeakMeter(1)
    for i in range(0, x.shape[0], 1000):
        m.feed(x[i : i + 1000])
    m.finish()
    ref = np.max(np.abs(resample_poly(x[:, 0], 16, 1, window=("kaiser", 10.0))))
    assert m.peak == pytest.approx(0.5, abs=0.005)
    assert 20 * np.log10(m.peak / ref) == pytest.approx(0.0, abs=0.05)
