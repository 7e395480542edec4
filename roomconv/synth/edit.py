"""Editing impulse responses: trim, fades, normalization, reversal, decay scaling per band,
early/late balance and resampling. Each function takes and returns (samples × channels)."""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..signal import cosine_step, db_to_gain, raised_cosine
from ..signal import resample as _resample
from .image_source import band_weights
from .materials import OCTAVES

_LN10 = np.log(10)


def _2d(x):
    x = np.asarray(x, dtype=np.float64)
    return x[:, None] if x.ndim == 1 else x


def trim(ir: np.ndarray, rate: int, *, threshold_db: float = -60.0,
         lead_s: float = 0.001) -> tuple[np.ndarray, int, int]:
    """Cut silence before the first and after the last sample above ``threshold_db`` re peak.

    Keeps ``lead_s`` before the start. Returns (trimmed, samples cut at start, at end).
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
    """Raised-cosine fade-in and fade-out."""
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


def normalize(ir: np.ndarray, *, peak_dbfs: float | None = None,
              energy_db: float | None = None) -> np.ndarray:
    """Scale to a peak level (dBFS) or to a total energy 10·log10(Σh²) (dB)."""
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
    return _2d(ir)[::-1].copy()


def scale_decay(ir: np.ndarray, rate: int, factor, *, onset: int | None = None) -> np.ndarray:
    """Stretch (factor > 1) or shrink the decay time by multiplying with an exponential.

    A decay of time T becomes factor·T: each band is multiplied by
    exp(3·ln10·t/T·(1 − 1/factor)), where T is that band's own decay time. ``factor`` is a
    number or {band_hz: factor}; T per band is read from the response (T30, else T20).
    """
    from ..analysis.parameters import room_parameters
    x = _2d(ir)
    factors = factor if isinstance(factor, dict) else {b: float(factor) for b in OCTAVES}
    for b, f in factors.items():
        if not (f > 0 and np.isfinite(f)):
            raise InputError(f"decay scale {f} for {b} Hz must be a positive number")
    n = x.shape[0]
    nfft = 1 << int(np.ceil(np.log2(2 * n)))
    W = band_weights(np.fft.rfftfreq(nfft, 1.0 / rate))
    out = np.zeros_like(x)
    for ch in range(x.shape[1]):
        res, wide, _ = room_parameters(x[:, ch], rate, low=63, high=8000)
        t0 = onset if onset is not None else int(np.argmax(np.abs(x[:, ch])))
        t = np.maximum(np.arange(n) - t0, 0) / rate
        X = np.fft.rfft(x[:, ch], nfft)
        by_band = {int(r.band_hz): (r.t30_s or r.t20_s or r.edt_s) for r in res}
        for i, b in enumerate(OCTAVES):
            T = by_band.get(b) or wide.t30_s or wide.t20_s
            if T is None:
                raise InputError(f"the decay time at {b} Hz cannot be read from the response")
            f = factors.get(b, 1.0)
            band = np.fft.irfft(X * W[i], nfft)[:n]
            out[:, ch] += band * np.exp(3 * _LN10 * t / T * (1 - 1 / f))
    return out


def early_late_balance(ir: np.ndarray, rate: int, gain_db: float, *, split_s: float = 0.08,
                       crossfade_s: float = 0.01) -> np.ndarray:
    """Raise (or lower) the late part after ``split_s`` from the peak by ``gain_db``."""
    x = _2d(ir)
    t0 = int(np.argmax(np.max(np.abs(x), axis=1)))
    t = (np.arange(x.shape[0]) - t0) / rate
    u = np.clip((t - split_s) / crossfade_s + 0.5, 0, 1)
    g = 1 + (db_to_gain(gain_db) - 1) * cosine_step(u)
    return x * g[:, None]


def resample(ir: np.ndarray, rate: int, new_rate: int) -> np.ndarray:
    """Resample to ``new_rate`` with soxr's very-high-quality filter (see
    :func:`roomconv.signal.resample`), keeping (samples × channels)."""
    if new_rate <= 0:
        raise InputError(f"sample rate {new_rate} must be positive")
    return _resample(_2d(ir), rate, new_rate)
