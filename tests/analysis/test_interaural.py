"""IACC of binaural responses against closed forms and a direct numpy computation."""

import numpy as np
import pytest
from scipy.signal import butter, sosfreqz

from roomconv.analysis.bands import all_bands
from roomconv.analysis.interaural import (
    iacc,
    interaural_correlation,
    interaural_single_numbers,
)
from roomconv.analysis.parameters import NOT_EVALUABLE
from roomconv.errors import InputError

FS = 48000
ONSET = 480


def room(seed, t60=0.8, seconds=1.0, direct=3.0):
    """A diffuse decay of our own with a direct sound (no background noise)."""
    rng = np.random.default_rng(seed)
    n = int(seconds * FS)
    t = np.arange(n) / FS
    h = rng.standard_normal(n) * 10 ** (-3 * t / t60)
    h[:ONSET] = 0.0
    h[ONSET] = direct
    return h


def octaves(*nominal):
    return [b for b in all_bands() if b.nominal in nominal]


def test_identical_ears_give_iacc_one():
    # IACF(0) = ∫p²/∫p² = 1 for p_l = p_r (definition, ISO 3382-1:2009, Annex B — from
    # memory).
    h = room(1)
    rows = interaural_correlation(h, h, FS, bands=octaves(125.0, 500.0, 1000.0, 2000.0, 4000.0))
    for row in rows:
        for key in ("iacc_early", "iacc_late", "iacc_full"):
            assert row.values[key] == pytest.approx(1.0, abs=1e-9), (row.band_hz, key)
    assert interaural_single_numbers(rows)["values"]["one_minus_iacc_e3"] == pytest.approx(
        0.0, abs=1e-9
    )


@pytest.mark.parametrize("delay_ms", [0.25, 0.5, 0.9])
def test_delay_within_one_millisecond_keeps_iacc_one(delay_ms):
    # A pure delay τ ≤ 1 ms lies inside the lag range: max |IACF| = 1 apart from the samples
    # the shift moves across a window limit.
    h = room(2)
    d = int(round(delay_ms * FS / 1000))
    right = np.r_[np.zeros(d), h[:-d]]
    (row,) = interaural_correlation(h, right, FS, bands=octaves(1000.0))
    assert row.values["iacc_early"] > 0.99
    assert row.values["iacc_full"] > 0.99


def test_delay_beyond_one_millisecond_drops_to_the_band_autocorrelation():
    # Delay 2 ms: the nearest lag searched is 1 ms away, so IACC is the band signal's
    # normalized autocorrelation at ≥ 1 ms. Reference: the same band applied in the
    # frequency domain (scipy design of the IEC 61260-1 octave, |H|², zero phase), the
    # correlation computed with numpy over the whole response.
    h = room(3)
    d = int(round(0.002 * FS))
    right = np.r_[np.zeros(d), h[:-d]]
    (row,) = interaural_correlation(h, right, FS, bands=octaves(2000.0))
    g = 10**0.3
    fm = 1000 * g
    sos = butter(3, [fm * g**-0.5, fm * g**0.5], btype="bandpass", fs=FS, output="sos")
    m = 1 << 17
    _, H = sosfreqz(sos, worN=m, whole=True)
    xl = np.real(np.fft.ifft(np.fft.fft(h, m) * np.abs(H) ** 2))
    xr = np.real(np.fft.ifft(np.fft.fft(right, m) * np.abs(H) ** 2))
    lag = int(round(0.001 * FS))
    # Cross-correlation by numpy's FFT; the zero padding (m > twice the length) makes the
    # circular result the linear one.
    cc = np.real(np.fft.ifft(np.conj(np.fft.fft(xl)) * np.fft.fft(xr)))
    c = np.r_[cc[-lag:], cc[: lag + 1]]
    want = np.max(np.abs(c)) / np.sqrt(np.dot(xl, xl) * np.dot(xr, xr))
    assert want < 0.5  # the delay is out of range: the ears decorrelate
    assert row.values["iacc_full"] == pytest.approx(want, abs=0.03)


@pytest.mark.parametrize("fm", [2000.0, 4000.0])
def test_independent_ears_give_iacc_near_zero(fm):
    # Independent diffuse decays: the correlation coefficient of B·T independent values has
    # a standard deviation of about 1/sqrt(B·T) (Bendat & Piersol 2010 — from memory); the
    # maximum over the ±1 ms lags (about 4·B·1 ms independent lags) stays within a few of
    # them. T: the effective length of an exponential energy decay, 2/k with
    # k = 6·ln10/T60 (closed form of (∫e)²/∫e²).
    t60 = 0.8
    left, right = room(10, t60, direct=0.0), room(11, t60, direct=0.0)
    left[ONSET] = right[ONSET] = 1e-9  # no common direct sound
    (row,) = interaural_correlation(left, right, FS, bands=octaves(fm))
    band = octaves(fm)[0]
    bt = band.bandwidth * 2 / (6 * np.log(10) / t60)
    bound = 4 / np.sqrt(bt)
    assert row.values["iacc_full"] < bound
    assert row.values["iacc_late"] < bound


def test_whole_signal_helper_against_numpy_correlate():
    rng = np.random.default_rng(8)
    a = rng.standard_normal(2000)
    b = 0.6 * np.roll(a, 12) + 0.8 * rng.standard_normal(2000)
    lag = 48
    full = np.correlate(np.r_[np.zeros(lag), b, np.zeros(lag)], a, mode="valid")
    want = np.max(np.abs(full)) / np.sqrt(np.dot(a, a) * np.dot(b, b))
    assert iacc(a, b, FS) == pytest.approx(want, rel=1e-9)


def test_bands_outside_125_to_4000_are_null_with_reason():
    h = room(4)
    rows = interaural_correlation(h, h, FS, bands=octaves(63.0, 8000.0))
    for row in rows:
        assert row.verdicts["iacc_early"] == NOT_EVALUABLE
        assert "iacc_band_outside" in row.warning_codes


def test_late_window_buried_in_noise_is_not_given():
    rng = np.random.default_rng(9)
    h = room(5, t60=0.3, seconds=1.0)
    left = h + 0.05 * rng.standard_normal(h.size)
    right = h + 0.05 * rng.standard_normal(h.size)
    (row,) = interaural_correlation(left, right, FS, bands=octaves(1000.0))
    # Whatever is given has its noise removed or is flagged; a late value that the noise
    # dominates is withheld.
    assert row.values["iacc_late"] is None or row.verdicts["iacc_late"] != "ok"


def test_unequal_lengths_refused():
    h = room(6)
    with pytest.raises(InputError, match="differ in length"):
        interaural_correlation(h, h[:-1], FS)


def test_ears_further_apart_than_a_head_are_flagged():
    # Woodworth's spherical head gives at most about 0.66 ms between the ears
    # ((r/c)(π/2 + 1), r = 8.75 cm, c = 343 m/s — from memory); 3 ms is no head.
    h = room(7)
    d = int(round(0.003 * FS))
    right = np.r_[np.zeros(d), h[:-d]]
    (row,) = interaural_correlation(h, right, FS, bands=octaves(1000.0))
    assert "ears_offset" in row.warning_codes
    d = int(round(0.0005 * FS))
    right = np.r_[np.zeros(d), h[:-d]]
    (row,) = interaural_correlation(h, right, FS, bands=octaves(1000.0))
    assert "ears_offset" not in row.warning_codes
