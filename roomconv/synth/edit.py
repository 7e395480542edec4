"""Editing impulse responses: trim, fades, normalization, reversal, decay scaling per band,
early/late balance and resampling. Each function takes and returns (samples × channels)."""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..signal import cosine_step, db_to_gain, raised_cosine
from ..signal import resample as _resample
from .image_source import band_weights
from .materials import OCTAVES

__all__ = ["trim", "fade", "normalize", "reverse", "scale_decay", "early_late_balance", "resample"]

_LN10 = np.log(10)


def _2d(x):
    x = np.asarray(x, dtype=np.float64)
    return x[:, None] if x.ndim == 1 else x


def trim(
    ir: np.ndarray, rate: int, *, threshold_db: float = -60.0, lead_s: float = 0.001
) -> tuple[np.ndarray, int, int]:
    """Cut silence before the first and after the last sample above ``threshold_db`` re peak.

    Parameters
    ----------
    ir : ndarray, shape (samples,) or (samples, channels)
    rate : int
        Sample rate, Hz.
    threshold_db : float
        Level re the peak below which samples count as silence, dB.
    lead_s : float
        Time kept before the first sample above the threshold, s.

    Returns
    -------
    trimmed : ndarray, shape (samples, channels)
    cut_start_samples, cut_end_samples : int

    Examples
    --------
    >>> y, a, b = trim(np.r_[np.zeros(100), 1.0, 0.5, np.zeros(50)], 48000, lead_s=0.0)
    >>> y[:, 0].tolist(), a, b
    ([1.0, 0.5], 100, 50)
    """
    x = _2d(ir)
    e = np.max(np.abs(x), axis=1)
    if e.max() == 0:
        raise InputError("the response is silent; nothing to trim")
    live = np.flatnonzero(e >= e.max() * db_to_gain(threshold_db))
    start = max(0, live[0] - int(lead_s * rate))
    end = live[-1] + 1
    return x[start:end], int(start), int(x.shape[0] - end)


def fade(ir: np.ndarray, rate: int, *, fade_in_s: float = 0.0, fade_out_s: float = 0.0):
    """Raised-cosine fade-in and fade-out (:func:`roomconv.signal.raised_cosine`).

    Parameters
    ----------
    ir : ndarray, shape (samples,) or (samples, channels)
    rate : int
        Sample rate, Hz.
    fade_in_s, fade_out_s : float
        Fade lengths, s (0 for none).

    Returns
    -------
    ndarray, shape (samples, channels)

    Examples
    --------
    >>> fade(np.ones(6), 6, fade_out_s=0.5)[:, 0].round(2).tolist()
    [1.0, 1.0, 1.0, 0.75, 0.25, 0.0]
    """
    x = _2d(ir).copy()
    for dur, head in ((fade_in_s, True), (fade_out_s, False)):
        n = min(int(round(dur * rate)), x.shape[0])
        if n <= 0:
            continue
        if head:
            x[:n] *= raised_cosine(n, rising=True)[:, None]
        else:
            x[-n:] *= raised_cosine(n, rising=False)[:, None]
    return x


def normalize(
    ir: np.ndarray, *, peak_dbfs: float | None = None, energy_db: float | None = None
) -> np.ndarray:
    """Scale to a peak level (dBFS) or to a total energy 10·log10(Σh²) (dB).

    Parameters
    ----------
    ir : ndarray, shape (samples,) or (samples, channels)
    peak_dbfs : float, optional
        Wanted sample peak, dBFS (wins over ``energy_db``).
    energy_db : float, optional
        Wanted total energy, dB re 1.

    Returns
    -------
    ndarray, shape (samples, channels)

    Examples
    --------
    >>> float(np.max(np.abs(normalize(np.array([0.1, -0.2]), peak_dbfs=-6.0206))))
    0.5
    """
    x = _2d(ir)
    if peak_dbfs is not None:
        pk = np.max(np.abs(x))
        if pk == 0:
            raise InputError("cannot normalize a silent response")
        return x * (db_to_gain(peak_dbfs) / pk)
    if energy_db is not None:
        en = np.sum(x * x)
        if en == 0:
            raise InputError("cannot normalize a silent response")
        return x * (db_to_gain(energy_db) / np.sqrt(en))
    return x


def reverse(ir: np.ndarray) -> np.ndarray:
    """Time-reversed copy, (samples × channels).

    Examples
    --------
    >>> reverse(np.array([1.0, 2.0, 3.0]))[:, 0].tolist()
    [3.0, 2.0, 1.0]
    """
    return _2d(ir)[::-1].copy()


def scale_decay(
    ir: np.ndarray, rate: int, factor, *, decay_times_s, onset: int | None = None
) -> np.ndarray:
    """Stretch (factor > 1) or shrink the decay time by multiplying with an exponential.

    A decay of time T becomes factor·T: each band is multiplied by
    exp(3·ln10·t/T·(1 − 1/factor)), where T is that band's own decay time. ``factor`` is a
    number or {band_hz: factor}; T per band is given by the caller (measured from the response
    by the analysis, which synth does not import).

    Parameters
    ----------
    ir : ndarray, shape (samples,) or (samples, channels)
    rate : int
        Sample rate, Hz.
    factor : float or dict
        New T / old T, for every band or per octave band {band_hz: factor}.
    decay_times_s : sequence of dict
        Per channel, the present decay time in seconds per octave band {band_hz: T}; a band
        that is missing is refused.
    onset : int, optional
        Sample where the decay starts (default: each channel's peak).

    Returns
    -------
    ndarray, shape (samples, channels)

    References
    ----------
    ISO 3382-1:2009, 3.10 and 5.3 (the decay times read from the response).

    Examples
    --------
    Doubling T = 0.5 s multiplies the level 1 s into the decay by
    60 dB·(1 s / 0.5 s)·(1 − 1/2) = 60 dB:

    >>> from roomconv.synth.materials import OCTAVES
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> y = scale_decay(h, rate, 2.0, decay_times_s=[{b: T for b in OCTAVES}], onset=0)
    >>> w = slice(rate - 160, rate + 160)  # 1 s ± 20 ms
    >>> round(float(10 * np.log10(np.mean(y[w, 0] ** 2) / np.mean(h[w] ** 2))))
    60
    """
    x = _2d(ir)
    factors = factor if isinstance(factor, dict) else {b: float(factor) for b in OCTAVES}
    for b, f in factors.items():
        if not (f > 0 and np.isfinite(f)):
            raise InputError(f"decay scale {f} for {b} Hz must be a positive number")
    n = x.shape[0]
    nfft = 1 << int(np.ceil(np.log2(2 * n)))
    W = band_weights(np.fft.rfftfreq(nfft, 1.0 / rate))
    out = np.zeros_like(x)
    if len(decay_times_s) != x.shape[1]:
        raise InputError(
            f"decay times are given for {len(decay_times_s)} channel(s) but the "
            f"response has {x.shape[1]}"
        )
    for ch in range(x.shape[1]):
        t0 = onset if onset is not None else int(np.argmax(np.abs(x[:, ch])))
        t = np.maximum(np.arange(n) - t0, 0) / rate
        X = np.fft.rfft(x[:, ch], nfft)
        by_band = decay_times_s[ch]
        for i, b in enumerate(OCTAVES):
            T = by_band.get(b)
            if T is None or not (T > 0 and np.isfinite(T)):
                raise InputError(f"the decay time at {b} Hz cannot be read from the response")
            f = factors.get(b, 1.0)
            band = np.fft.irfft(X * W[i], nfft)[:n]
            t_c = _noise_time(band, rate, t0, T)
            # Up to where the decay meets the band's noise, reshape the decay; past it the
            # response is noise, which would be raised without bound: it is carried on at
            # the new rate from the level reached (a decay cannot be stretched below the
            # noise it was measured in).
            log_gain = 3 * _LN10 / T * (1 - 1 / f) * np.minimum(t, t_c) - 3 * _LN10 / (
                f * T
            ) * np.maximum(t - t_c, 0.0)
            out[:, ch] += band * np.exp(log_gain)
    return out


def _noise_time(band: np.ndarray, rate: int, t0: int, T: float) -> float:
    """Seconds after ``t0`` at which a decay of time ``T`` meets the band's noise floor.

    The floor is the mean energy of the last 10 % of the band signal, the start the largest
    10 ms mean; 60 dB take T seconds. With no noise (a synthetic response) the decay runs on.
    """
    n = max(1, int(round(0.01 * rate)))
    m = band[t0:].size // n
    if m < 4:
        return float("inf")
    env = np.mean(np.square(band[t0 : t0 + m * n]).reshape(m, n), axis=1)
    floor = float(np.mean(env[-max(1, m // 10) :]))
    peak = float(env.max())
    if floor <= 0 or peak <= 0:
        return float("inf")
    drop_db = 10 * np.log10(peak / floor)
    return max(0.0, T * drop_db / 60.0)


def early_late_balance(
    ir: np.ndarray, rate: int, gain_db: float, *, split_s: float = 0.08, crossfade_s: float = 0.01
) -> np.ndarray:
    """Raise (or lower) the late part after ``split_s`` from the peak by ``gain_db``.

    The change fades in over ``crossfade_s`` centred on the split (a raised-cosine step).

    Parameters
    ----------
    ir : ndarray, shape (samples,) or (samples, channels)
    rate : int
        Sample rate, Hz.
    gain_db : float
        Gain of the late part, dB.
    split_s : float
        Start of the late part after the peak, s (80 ms, the C80 split of ISO 3382-1).
    crossfade_s : float
        Width of the transition, s.

    Returns
    -------
    ndarray, shape (samples, channels)

    Examples
    --------
    >>> y = early_late_balance(np.ones(48000), 48000, -20.0)
    >>> float(y[0, 0]), round(float(y[-1, 0]), 6)
    (1.0, 0.1)
    """
    x = _2d(ir)
    t0 = int(np.argmax(np.max(np.abs(x), axis=1)))
    t = (np.arange(x.shape[0]) - t0) / rate
    u = np.clip((t - split_s) / crossfade_s + 0.5, 0, 1)
    g = 1 + (db_to_gain(gain_db) - 1) * cosine_step(u)
    return x * g[:, None]


def resample(ir: np.ndarray, rate: int, new_rate: int) -> np.ndarray:
    """Resample to ``new_rate`` with soxr's very-high-quality filter (see
    :func:`roomconv.signal.resample`), keeping (samples × channels).

    Parameters
    ----------
    ir : ndarray, shape (samples,) or (samples, channels)
    rate, new_rate : int
        Sample rates, Hz.

    Returns
    -------
    ndarray, shape (samples · new_rate / rate, channels)

    Examples
    --------
    >>> resample(np.zeros(4800), 48000, 44100).shape
    (4410, 1)
    """
    if new_rate <= 0:
        raise InputError(f"sample rate {new_rate} must be positive")
    return _resample(_2d(ir), rate, new_rate)
