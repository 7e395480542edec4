"""The late reverberant tail: per-band noise with an evened envelope, decaying at a given
reverberation time, at the diffuse-field level a room of volume V implies."""

from __future__ import annotations

import numpy as np

from .air import speed_of_sound
from .image_source import band_weights
from .materials import OCTAVES

__all__ = ["band_noise", "diffuse_tail"]

_LN10 = np.log(10)
#: Envelope-evening window per band: 4 periods of the band's width, at least 10 ms (our
#: choice, common practice for smoothing a band envelope without following the decay).
_EVEN_PERIODS = 4.0
_EVEN_MIN_S = 0.01


def _moving_rms(x: np.ndarray, n: int) -> np.ndarray:
    k = np.ones(max(1, n)) / max(1, n)
    return np.sqrt(np.maximum(np.convolve(x * x, k, mode="same"), 1e-30))


def band_noise(rate: int, n_samples: int, rng: np.random.Generator, bands=OCTAVES) -> np.ndarray:
    """Unit-variance white noise split into bands (sum over bands = the white noise), each
    band's short-term level evened out.

    A plain Gaussian band noise fluctuates in level over a few periods of its bandwidth, so a
    decay imposed on it comes out several per cent off at low frequencies; dividing each band
    by its own smoothed envelope (window ≈ 4/bandwidth, at least 10 ms) removes that.

    Parameters
    ----------
    rate : int
        Sample rate, Hz.
    n_samples : int
        Length, samples.
    rng : numpy.random.Generator
        Source of the noise (reproducible with a seeded generator).
    bands : sequence of float
        Octave mid-band frequencies, Hz.

    Returns
    -------
    ndarray, shape (bands, samples)

    Examples
    --------
    >>> z = band_noise(48000, 48000, np.random.default_rng(0))
    >>> z.shape
    (8, 48000)
    >>> round(float(np.var(z.sum(axis=0))), 1)  # the bands add up to unit-variance noise
    1.0
    """
    z = rng.standard_normal(n_samples)
    nfft = 1 << int(np.ceil(np.log2(n_samples)))
    W = band_weights(np.fft.rfftfreq(nfft, 1.0 / rate), bands)
    Z = np.fft.rfft(z, nfft)
    out = np.empty((len(bands), n_samples))
    for i, fc in enumerate(bands):
        zb = np.fft.irfft(Z * W[i], nfft)[:n_samples]
        bw = fc * (2**0.5 - 2**-0.5)
        win = int(max(_EVEN_MIN_S, _EVEN_PERIODS / bw) * rate)
        env = _moving_rms(zb, win)
        out[i] = zb / env * np.sqrt(np.mean(zb * zb))
    return out


def diffuse_tail(
    rt: dict,
    volume: float,
    rate: int,
    n_samples: int,
    *,
    c: float | None = None,
    seed: int = 0,
    bands=OCTAVES,
    noise: np.ndarray | None = None,
) -> np.ndarray:
    """Σ_b noise_b(t) · sqrt(4πc / (V·fs)) · 10^(−3t/T_b).

    The level is the expected energy of image-source arrivals per unit time for a source
    whose direct sound has amplitude 1/r: 4πc/V (reflection density 4πc³t²/V times 1/(ct)²).

    Parameters
    ----------
    rt : dict
        Reverberation time per band, {band_hz: seconds}.
    volume : float
        Room volume, m³.
    rate : int
        Sample rate, Hz.
    n_samples : int
        Length, samples; sample 0 is the moment of emission.
    c : float, optional
        Speed of sound, m/s (default: :func:`~roomconv.synth.air.speed_of_sound` at 20 °C).
    seed : int
        Seed of the noise when ``noise`` is not given.
    bands : sequence of float
        Octave mid-band frequencies, Hz.
    noise : ndarray, optional
        (bands, samples) from :func:`band_noise`, to share or correlate noise between
        channels.

    Returns
    -------
    ndarray, shape (samples,)

    Examples
    --------
    The energy from 0 to 0.1 s against the closed form (4πc/V)·T/(6 ln10)·(1 − 10^(−0.6)):

    >>> x = diffuse_tail({b: 1.0 for b in OCTAVES}, 200.0, 48000, 4800, c=343.2)
    >>> expected = 4 * np.pi * 343.2 / 200.0 / (6 * np.log(10)) * (1 - 10 ** -0.6)
    >>> bool(abs(10 * np.log10(np.sum(x * x) / expected)) < 0.5)
    True

    References
    ----------
    Kuttruff, H. Room Acoustics (5th ed., 2009), 4.1 (density of reflections) and 5.1
    (exponential decay of the diffuse field).
    """
    if c is None:
        c = speed_of_sound(20.0)
    if noise is None:
        noise = band_noise(rate, n_samples, np.random.default_rng(seed), bands)
    t = np.arange(n_samples) / rate
    level = np.sqrt(4 * np.pi * c / (volume * rate))
    out = np.zeros(n_samples)
    for i, b in enumerate(bands):
        out += noise[i] * np.exp(-3 * _LN10 * t / rt[b])
    return out * level
