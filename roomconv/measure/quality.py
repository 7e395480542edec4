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


def energy_envelope(h: np.ndarray, rate: int, interval_s: float = 0.01) -> tuple[np.ndarray, int]:
    """Mean squared amplitude over consecutive intervals of a 1-D response.

    Parameters
    ----------
    h : ndarray, shape (samples,)
        Impulse response.
    rate : int
        Sample rate, Hz.
    interval_s : float
        Averaging interval, s (10–50 ms in Lundeby et al.).

    Returns
    -------
    envelope : ndarray
        Mean of h² over each whole interval (a trailing partial interval is dropped).
    interval_samples : int
        Interval length, samples.

    References
    ----------
    Lundeby, A., Vigran, T. E., Bietz, H., Vorländer, M. (1995). Uncertainties of measurements
    in room acoustics. Acustica 81, 344–355 (step 1: local time averages of 10–50 ms).

    Examples
    --------
    >>> env, n = energy_envelope(np.ones(1000), 1000, interval_s=0.1)
    >>> env.tolist(), n
    ([1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0], 100)
    """
    n = max(1, int(round(interval_s * rate)))
    m = h.size // n
    if m == 0:
        return np.array([np.mean(np.square(h))]), h.size
    return np.mean(np.square(h[: m * n]).reshape(m, n), axis=1), n


def envelope_inr(
    h: np.ndarray, rate: int, interval_s: float = 0.01, tail_fraction: float = 0.1
) -> tuple[float, float]:
    """Impulse-to-noise ratio (INR) of a 1-D response from its smoothed energy envelope.

    The noise is the mean energy of the last ``tail_fraction`` of the response, the peak the
    largest interval mean.

    Parameters
    ----------
    h : ndarray, shape (samples,)
        Impulse response (it should end in noise, not be cut inside the decay).
    rate : int
        Sample rate, Hz.
    interval_s : float
        Averaging interval of :func:`energy_envelope`, s.
    tail_fraction : float
        Fraction of the response at its end taken as noise (0–1).

    Returns
    -------
    inr_db : float
        Peak interval energy over noise energy, dB (+inf without noise).
    noise_db_re_peak_sample : float
        Noise energy relative to the largest squared sample, dB.

    Examples
    --------
    >>> h = np.full(10000, 1e-3)
    >>> h[:1000] = 1.0  # 100 ms at 0 dB, then noise 60 dB down
    >>> round(float(envelope_inr(h, 10000)[0]), 6)
    60.0
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
