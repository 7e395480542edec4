"""Data-quality figures for a recording and the impulse response extracted from it.

Everything here is a number plus plain-language warnings; nothing is printed.
"""

from __future__ import annotations

import numpy as np

# The envelope and INR live in roomconv.signal so that analysis can use them without
# reaching into measure; they stay importable from here.
from ..signal import energy_envelope, envelope_inr  # noqa: F401

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

#: Linear amplitude that counts as full scale (−0.009 dBFS; common practice).
CLIP_LEVEL = 0.999
#: Consecutive samples at full scale that mark the flat top of clipping (common practice).
CLIP_RUN = 3


def clipped_samples(x: np.ndarray, level: float = CLIP_LEVEL, run: int = CLIP_RUN) -> np.ndarray:
    """Per channel: samples that lie in flat-topped runs at full scale (common practice).

    Counts samples with ``|x| >= level`` that belong to a run of at least ``run`` such
    consecutive samples; isolated full-scale peaks are not counted.

    Parameters
    ----------
    x : ndarray, shape (samples,) or (samples, channels)
        Audio, full scale = 1.
    level : float
        Linear amplitude that counts as full scale (default 0.999, common practice).
    run : int
        Shortest run of such samples that counts as clipping, samples (default 3).

    Returns
    -------
    ndarray of int, shape (channels,)
        Clipped samples per channel.

    Examples
    --------
    >>> x = np.array([0.1, 1.0, 1.0, 1.0, 0.2, 1.0, 0.0])
    >>> clipped_samples(x).tolist()  # the lone peak at index 5 does not count
    [3]
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
    """Per-channel sample peak, dBFS (−inf for silence).

    Parameters
    ----------
    x : ndarray, shape (samples,) or (samples, channels)
        Audio, full scale = 1.

    Returns
    -------
    ndarray or float
        Peak level per channel, dB re full scale.

    Examples
    --------
    >>> peak_dbfs(np.array([[0.5, 0.0], [-1.0, 0.0]])).tolist()
    [0.0, -inf]
    """
    with np.errstate(divide="ignore"):
        return 20 * np.log10(np.max(np.abs(x), axis=0))


def rms_dbfs(x: np.ndarray) -> np.ndarray:
    """Per-channel RMS level, dBFS, floored at −200 dBFS so that digital silence is a number.

    Parameters
    ----------
    x : ndarray, shape (samples,) or (samples, channels)
        Audio, full scale = 1.

    Returns
    -------
    ndarray or float
        RMS level per channel, dB re full scale (a full-scale sine reads −3.01).

    Examples
    --------
    >>> t = np.arange(48000) / 48000
    >>> round(float(rms_dbfs(np.sin(2 * np.pi * 1000 * t))), 2)
    -3.01
    """
    with np.errstate(divide="ignore"):
        # Floor at -200 dBFS so digital silence reads as a number, not -inf.
        return 10 * np.log10(np.maximum(np.mean(np.square(x), axis=0), 1e-20))


def inr_warnings(inr_db: float, label: str) -> list[str]:
    """Plain-language warnings for what an impulse-to-noise ratio rules out.

    Each of T30, T20 and EDT is named when ``inr_db`` is below the INR in
    :data:`REQUIRED_INR_DB` that its evaluation range needs.

    Parameters
    ----------
    inr_db : float
        Impulse-to-noise ratio, dB.
    label : str
        What the figure belongs to, put in front of each warning (e.g. ``"IR channel 1"``).

    Returns
    -------
    list of str

    Examples
    --------
    >>> [w.split(" needs")[0][-3:] for w in inr_warnings(40.0, "mic 1")]
    ['T30']
    """
    out = []
    for key in ("t30", "t20", "edt"):
        need = REQUIRED_INR_DB[key]
        if inr_db < need:
            out.append(
                f"{label}: impulse-to-noise ratio (INR) {inr_db:.1f} dB is below the "
                f"{need:.0f} dB that {key.upper()} needs; it will not be evaluated"
            )
    return out
