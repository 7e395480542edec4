"""Data-quality figures for a recording and the impulse response extracted from it.

Everything here is a number plus plain-language warnings; nothing is printed.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "REQUIRED_INR_DB",
    "CLIP_LEVEL",
    "CLIP_RUN",
    "clipped_samples",
    "peak_dbfs",
    "rms_dbfs",
    "energy_envelope",
    "envelope_inr",
    "inr_warnings",
]

#: Impulse-to-noise ratios (INR) an evaluation range needs: the range itself plus 10 dB above
#: the noise (ISO 3382-1:2009, 5.3.3 / ISO 3382-2:2008, 5.3.3 — from memory). EDT 0..-10,
#: T20 -5..-25, T30 -5..-35 dB.
REQUIRED_INR_DB = {"edt": 20.0, "t20": 35.0, "t30": 45.0}

CLIP_LEVEL = 0.999
CLIP_RUN = 3  # consecutive samples at full scale: the flat top that marks clipping


def clipped_samples(x: np.ndarray, level: float = CLIP_LEVEL, run: int = CLIP_RUN) -> np.ndarray:
    """Per channel: samples that lie in flat-topped runs at full scale (common practice).

    Counts samples with ``|x| >= level`` that belong to a run of at least ``run`` such
    consecutive samples; isolated full-scale peaks are not counted.
    """
    x2 = np.atleast_2d(x.T).T if x.ndim == 1 else x
    counts = np.zeros(x2.shape[1], dtype=int)
    for c in range(x2.shape[1]):
        hot = np.abs(x2[:, c]) >= level
        if not hot.any():
            continue
        edges = np.diff(np.concatenate(([0], hot.astype(np.int8), [0])))
        starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
        lengths = ends - starts
        counts[c] = int(lengths[lengths >= run].sum())
    return counts


def peak_dbfs(x: np.ndarray) -> np.ndarray:
    """Per-channel sample peak in dBFS (−inf for silence)."""
    with np.errstate(divide="ignore"):
        return 20 * np.log10(np.max(np.abs(x), axis=0))


def rms_dbfs(x: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        # Floor at -200 dBFS so digital silence reads as a number, not -inf.
        return 10 * np.log10(np.maximum(np.mean(np.square(x), axis=0), 1e-20))


def energy_envelope(h: np.ndarray, rate: int, interval_s: float = 0.01) -> tuple[np.ndarray, int]:
    """Mean squared amplitude over consecutive intervals (1-D input).

    Returns the envelope and the interval length in samples.

    References
    ----------
    Lundeby, A., Vigran, T. E., Bietz, H., Vorländer, M. (1995). Uncertainties of measurements
    in room acoustics. Acustica 81, 344–355 (step 1: local time averages of 10–50 ms).
    """
    n = max(1, int(round(interval_s * rate)))
    m = h.size // n
    if m == 0:
        return np.array([np.mean(np.square(h))]), h.size
    return np.mean(np.square(h[: m * n]).reshape(m, n), axis=1), n


def envelope_inr(
    h: np.ndarray, rate: int, interval_s: float = 0.01, tail_fraction: float = 0.1
) -> tuple[float, float]:
    """Impulse-to-noise ratio (INR, dB) of a 1-D IR from its smoothed energy envelope.

    The noise is the mean energy of the last ``tail_fraction`` of the response, the peak the
    largest interval mean. Returns ``(inr_db, noise_db_re_peak_sample)``.
    """
    env, _ = energy_envelope(h, rate, interval_s)
    tail = env[-max(1, int(round(tail_fraction * env.size))) :]
    noise = float(np.mean(tail))
    peak = float(np.max(env))
    if noise <= 0:
        return float("inf"), float("-inf")
    ref = float(np.max(np.square(h)))
    return 10 * np.log10(peak / noise), 10 * np.log10(noise / ref)


def inr_warnings(inr_db: float, label: str) -> list[str]:
    """Plain-language warnings for what an impulse-to-noise ratio (INR) rules out."""
    out = []
    for key in ("t30", "t20", "edt"):
        need = REQUIRED_INR_DB[key]
        if inr_db < need:
            out.append(
                f"{label}: impulse-to-noise ratio (INR) {inr_db:.1f} dB is below the "
                f"{need:.0f} dB that {key.upper()} needs; it will not be evaluated"
            )
    return out
