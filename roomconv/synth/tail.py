"""The late reverberant tail: per-band noise with an evened envelope, decaying at a given
reverberation time, at the diffuse-field level a room of volume V implies."""

from __future__ import annotations

import numpy as np

from .image_source import band_weights
from .materials import OCTAVES

_LN10 = np.log(10)


def _moving_rms(x: np.ndarray, n: int) -> np.ndarray:
    k = np.ones(max(1, n)) / max(1, n)
    return np.sqrt(np.maximum(np.convolve(x * x, k, mode="same"), 1e-30))


def band_noise(rate: int, n_samples: int, rng: np.random.Generator, bands=OCTAVES) -> np.ndarray:
    """Unit-variance white noise split into bands (sum over bands = the white noise), each
    band's short-term level evened out. Shape (bands, samples).

    A plain Gaussian band noise fluctuates in level over a few periods of its bandwidth, so a
    decay imposed on it comes out several per cent off at low frequencies; dividing each band
    by its own smoothed envelope (window ≈ 4/bandwidth, at least 10 ms) removes that.
    """
    z = rng.standard_normal(n_samples)
    nfft = 1 << int(np.ceil(np.log2(n_samples)))
    W = band_weights(np.fft.rfftfreq(nfft, 1.0 / rate), bands)
    Z = np.fft.rfft(z, nfft)
    out = np.empty((len(bands), n_samples))
    for i, fc in enumerate(bands):
        zb = np.fft.irfft(Z * W[i], nfft)[:n_samples]
        bw = fc * (2 ** 0.5 - 2 ** -0.5)
        win = int(max(0.01, 4.0 / bw) * rate)
        env = _moving_rms(zb, win)
        out[i] = zb / env * np.sqrt(np.mean(zb * zb))
    return out


def diffuse_tail(rt: dict, volume: float, rate: int, n_samples: int, *, c: float = 343.2,
                 seed: int = 0, bands=OCTAVES, noise: np.ndarray | None = None) -> np.ndarray:
    """Σ_b noise_b(t) · sqrt(4πc / (V·fs)) · 10^(−3t/T_b).

    The level is the expected energy of image-source arrivals per unit time for a source
    whose direct sound has amplitude 1/r: 4πc/V (reflection density 4πc³t²/V times 1/(ct)²).

    References
    ----------
    Kuttruff, H. Room Acoustics (5th ed., 2009), 4.1 (density of reflections) and 5.1
    (exponential decay of the diffuse field).
    """
    if noise is None:
        noise = band_noise(rate, n_samples, np.random.default_rng(seed), bands)
    t = np.arange(n_samples) / rate
    level = np.sqrt(4 * np.pi * c / (volume * rate))
    out = np.zeros(n_samples)
    for i, b in enumerate(bands):
        out += noise[i] * np.exp(-3 * _LN10 * t / rt[b])
    return out * level
