"""The exponential sweep against Farina's closed forms."""

import numpy as np
import pytest
from scipy.signal import hilbert

from roomconv.errors import InputError
from roomconv.measure.sweep import (
    Sweep,
    harmonic_delay,
    instantaneous_frequency,
    inverse_filter,
    sweep_only,
    sweep_signal,
)


def test_instantaneous_frequency_follows_farina_closed_form():
    # Farina (2000): f(t) = f1·exp(t/L), L = T / ln(f2/f1). Measured from the analytic
    # signal's phase derivative (scipy.signal.hilbert), away from the fades.
    s = Sweep(rate=48000, f_low=50, f_high=10000, duration=2.0, fade_in=0.0, fade_out=0.0)
    x = sweep_only(s)
    phase = np.unwrap(np.angle(hilbert(x)))
    # Averaged over 10 ms: the discrete Hilbert transform's own ripple is about 1 %.
    f_meas = np.convolve(np.diff(phase), np.ones(480) / 480, mode="same") * s.rate / (2 * np.pi)
    t = (np.arange(f_meas.size) + 0.5) / s.rate
    mid = slice(int(0.1 * s.rate), int(1.9 * s.rate))
    expected = instantaneous_frequency(s, t[mid])
    assert np.max(np.abs(f_meas[mid] / expected - 1)) < 0.005
    # Start and end frequencies of the law itself.
    assert instantaneous_frequency(s, 0.0) == pytest.approx(50.0)
    assert instantaneous_frequency(s, 2.0) == pytest.approx(10000.0)


def test_duration_silences_and_repeats():
    s = Sweep(rate=44100, duration=1.5, silence_pre=0.25, silence_post=0.75, repeats=3)
    x = sweep_signal(s)
    assert s.n_sweep == round(1.5 * 44100)
    assert x.size == round(0.25 * 44100) + 3 * (round(1.5 * 44100) + round(0.75 * 44100))
    assert np.all(x[: s.n_pre] == 0)
    # Peak equals the level (−6 dBFS default).
    assert np.max(np.abs(x)) == pytest.approx(10 ** (-6 / 20), rel=1e-3)


def test_harmonic_delay_closed_form():
    # Farina (2000): Δt_k = T·ln(k)/ln(f2/f1).
    s = Sweep(rate=48000, f_low=20, f_high=20000, duration=10.0)
    for k in (2, 3, 4, 5):
        assert harmonic_delay(s, k) == pytest.approx(10.0 * np.log(k) / np.log(1000.0))


def test_inverse_filter_gives_flat_unit_response_in_band():
    # Sweep ⊛ inverse = band-limited unit impulse: flat to ±0.01 dB well inside the band.
    s = Sweep(rate=48000, f_low=20, f_high=20000, duration=2.0)
    x, inv = sweep_only(s), inverse_filter(s)
    n = 1 << 18
    spec = np.fft.rfft(x, n) * np.fft.rfft(inv, n)
    f = np.fft.rfftfreq(n, 1 / 48000)
    band = (f > 200) & (f < 10000)
    mag_db = 20 * np.log10(np.abs(spec[band]))
    assert np.max(np.abs(mag_db)) < 0.01


@pytest.mark.parametrize(
    "kwargs, text",
    [
        (dict(f_low=100, f_high=50), "not increasing"),
        (dict(rate=48000, f_high=30000), "Nyquist"),
        (dict(repeats=0), "at least 1"),
        (dict(level_dbfs=3.0), "above full scale"),
    ],
)
def test_bad_parameters_are_explained(kwargs, text):
    with pytest.raises(InputError, match=text):
        Sweep(**kwargs)
