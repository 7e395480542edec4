"""Curves to look at beside the parameters: the energy–time curve in dB, the fractional-octave
smoothed magnitude response, and each band's decay curve with its fitted evaluation line.

One computation for every front end that draws them (the report's figures, the terminal
workbench's plots): arrays and a rate in, arrays out; no I/O, no drawing.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .decay import fit_decay, onset_index

__all__ = [
    "EnergyTimeCurve",
    "energy_time_curve",
    "smoothed_magnitude_db",
    "DecayLine",
    "decay_line",
    "BandDecay",
    "band_decays",
    "EVALUATION_RANGES_DB",
]

#: Floor of every dB curve here, re peak: far below any measured noise floor, and keeps
#: log10 away from zero.
FLOOR_DB = -120.0

#: The evaluation ranges of the decay times, dB below the start of the decay curve
#: (ISO 3382-1:2009, A.2: EDT 0 to −10, T20 −5 to −25, T30 −5 to −35; from memory).
EVALUATION_RANGES_DB = {"edt_s": (0.0, -10.0), "t20_s": (-5.0, -25.0), "t30_s": (-5.0, -35.0)}


@dataclass(frozen=True)
class EnergyTimeCurve:
    """Result of :func:`energy_time_curve`; every level in dB re the response's peak energy.

    Attributes
    ----------
    t_s : ndarray
        Time of each point from the file's first sample, s (the middle of its step).
    peak_db : ndarray
        The largest squared sample in each step, dB.
    smooth_db : ndarray
        The moving-average energy at each point, dB.
    onset_s : float
        Start of the response (ISO 3382-1 onset rule), s from the first sample.

    Examples
    --------
    An exponential decay with T = 0.5 s falls at 60/T = 120 dB per second (closed form), read
    here on the smoothed curve between two points 0.1 s apart.

    >>> rate, T = 8000, 0.5
    >>> h = np.exp(-3 * np.log(10) * np.arange(rate) / rate / T)
    >>> etc = energy_time_curve(h, rate, step_s=0.01, average_s=0.01)
    >>> drop_db = etc.smooth_db[10] - etc.smooth_db[20]
    >>> round(float(drop_db / (etc.t_s[20] - etc.t_s[10])), 6)
    120.0
    >>> etc.onset_s, float(etc.peak_db[0])
    (0.0, 0.0)
    """

    t_s: np.ndarray  #: time of each point from the file's first sample, s
    peak_db: np.ndarray  #: the largest squared sample in each step
    smooth_db: np.ndarray  #: the moving-average energy at each point
    onset_s: float  #: start of the response (ISO 3382-1 onset rule), s from the first sample


def _db(power: np.ndarray, ref: float) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.maximum(10 * np.log10(np.maximum(power, 0.0) / ref), FLOOR_DB)


def energy_time_curve(
    h: np.ndarray, rate: int, *, step_s: float = 0.0005, average_s: float = 0.002
) -> EnergyTimeCurve:
    """Energy–time curve of a response: squared samples in dB re their maximum.

    Two curves on one time grid of ``step_s``: the largest squared sample in each step (what
    the eye sees of the raw curve at any plot size, at a fraction of the points) and the
    energy averaged over a sliding ``average_s`` window (where the decay's slope can be read;
    for an exponential decay exp(−3 ln10 · t / T) its slope is −60/T dB/s).

    Parameters
    ----------
    h : ndarray, shape (samples,)
        The impulse response.
    rate : int
        Sample rate, Hz.
    step_s, average_s : float
        Time step of the curve and length of the moving average, s.

    Returns
    -------
    EnergyTimeCurve

    References
    ----------
    ISO 3382-1:2009, A.3.2 (the onset: the level first within 20 dB of the maximum), via
    :func:`roomconv.analysis.decay.onset_index`. Kuttruff, H. Room Acoustics (the energy of a
    diffuse field decays exponentially: a straight line in dB) — from memory.

    Examples
    --------
    >>> etc = energy_time_curve(np.array([0.0, 1.0, 0.1, 0.01]), 4, step_s=0.25)
    >>> etc.peak_db.round(1).tolist()
    [-120.0, 0.0, -20.0, -40.0]
    """
    h = np.asarray(h, dtype=np.float64).reshape(-1)
    if h.size == 0 or not np.any(h):
        raise ValueError("the response is empty or silent: it has no energy–time curve")
    e = h * h
    ref = float(e.max())
    step = max(1, int(round(step_s * rate)))
    n = e.size // step * step
    if n == 0:
        step, n = 1, e.size
    peak = e[:n].reshape(-1, step).max(axis=1)
    k = max(1, int(round(average_s * rate)))
    # Cumulative sums give the moving average in one pass over long responses.
    c = np.concatenate([[0.0], np.cumsum(e)])
    centre = np.arange(0, n, step) + step // 2
    lo = np.clip(centre - k // 2, 0, e.size)
    hi = np.clip(lo + k, 0, e.size)
    smooth = (c[hi] - c[lo]) / np.maximum(hi - lo, 1)
    t = (np.arange(peak.size) * step + step / 2) / rate
    return EnergyTimeCurve(t, _db(peak, ref), _db(smooth, ref), onset_index(h) / rate)


def smoothed_magnitude_db(
    h: np.ndarray,
    rate: int,
    *,
    fraction: int = 3,
    points: int = 160,
    low_hz: float = 20.0,
    high_hz: float = 20000.0,
) -> tuple[np.ndarray, np.ndarray]:
    """Magnitude response in dB, power-averaged over 1/``fraction`` octave around
    log-spaced frequencies.

    At each centre f the mean of |H|² over the DFT bins from f·2^(−1/(2·fraction)) to
    f·2^(1/(2·fraction)) (at least one bin), the response zero-padded to a power of two.

    Parameters
    ----------
    h : ndarray, shape (samples,)
    rate : int
        Sample rate, Hz.
    fraction : int
        3 for third-octave smoothing, 6 for sixth-octave.
    points : int
        Number of log-spaced centre frequencies.
    low_hz, high_hz : float
        Range of the centres; the top is held to 95 % of the Nyquist frequency.

    Returns
    -------
    f_hz, level_db : ndarray
        Centre frequencies and levels in dB re |H| = 1.

    References
    ----------
    Hatziantoniou, P. D., & Mourjopoulos, J. N. (2000). Generalized fractional-octave
    smoothing of audio and acoustic responses. J. Audio Eng. Soc. 48(4), 259–280 (power
    smoothing over a constant-relative-bandwidth window; here rectangular) — from memory.

    Examples
    --------
    >>> f, db = smoothed_magnitude_db(np.r_[1.0, np.zeros(63)], 48000)
    >>> bool(np.allclose(db, 0.0))
    True
    """
    h = np.asarray(h, dtype=np.float64).reshape(-1)
    if h.size == 0:
        raise ValueError("the response is empty: it has no magnitude response")
    n = 1 << int(np.ceil(np.log2(max(h.size, 2))))
    spec = np.abs(np.fft.rfft(h, n)) ** 2
    f = np.fft.rfftfreq(n, 1 / rate)
    top = min(high_hz, rate / 2 * 0.95)
    centres = np.geomspace(low_hz, top, points)
    cum = np.concatenate([[0.0], np.cumsum(spec)])
    half = 2 ** (1 / (2 * fraction))
    lo = np.searchsorted(f, centres / half)
    hi = np.maximum(np.searchsorted(f, centres * half), lo + 1)
    hi = np.minimum(hi, spec.size)
    lo = np.minimum(lo, hi - 1)
    power = (cum[hi] - cum[lo]) / (hi - lo)
    with np.errstate(divide="ignore"):
        return centres, 10 * np.log10(np.maximum(power, 1e-30))


@dataclass(frozen=True)
class DecayLine:
    """A fitted evaluation line drawn over a decay curve: two end points.

    Attributes
    ----------
    t_s : ndarray, shape (2,)
        Start (0) and end time, s from the onset.
    level_db : ndarray, shape (2,)
        The line's levels at those times, dB.
    reverberation_s : float
        −60 / slope, s.

    Examples
    --------
    A line falling 60 dB in 2 s has a reverberation time of 2 s:

    >>> line = decay_line(-30 * np.arange(3000) / 1000, 1000)
    >>> round(line.reverberation_s, 6), line.t_s.round(6).tolist()
    (2.0, [0.0, 1.333333])
    """

    t_s: np.ndarray  #: start (0) and end time, s from the onset
    level_db: np.ndarray  #: the line's levels at those times
    reverberation_s: float  #: −60 / slope


def decay_line(
    curve_db: np.ndarray,
    rate: int,
    upper_db: float = -5.0,
    lower_db: float = -35.0,
    *,
    down_to_db: float = -40.0,
) -> DecayLine | None:
    """The least-squares line of a decay time over its evaluation range, from t = 0 down
    to ``down_to_db``; ``None`` when the curve does not reach ``lower_db``.

    Parameters
    ----------
    curve_db : ndarray, 1-D
        The decay curve, dB re its start, one value per sample from the onset.
    rate : int
        Sample rate, Hz.
    upper_db, lower_db : float
        The evaluation range, dB (−5 and −35 for T30).
    down_to_db : float
        Level the drawn line ends at, dB.

    Returns
    -------
    DecayLine or None

    References
    ----------
    ISO 3382-1:2009, 5.3.3 and A.2; ISO 3382-2:2008, B.1 — the fit itself is
    :func:`roomconv.analysis.decay.fit_decay`, the one the parameters use.

    Examples
    --------
    >>> line = decay_line(-60 * np.arange(2000) / 1000 / 1.5, 1000)
    >>> round(line.reverberation_s, 6), line.level_db.round(6).tolist()
    (1.5, [0.0, -40.0])
    """
    fit = fit_decay(np.asarray(curve_db, dtype=np.float64), rate, upper_db, lower_db)
    if fit is None:
        return None
    t = np.array([0.0, (down_to_db - fit.intercept_db) / fit.slope_db_s])
    return DecayLine(t, fit.intercept_db + fit.slope_db_s * t, fit.reverberation_s)


@dataclass(frozen=True)
class BandDecay:
    """One band's decay curve ready to draw.

    Attributes
    ----------
    band_hz : float or None
        Nominal band centre, Hz; None for the broadband response.
    t_s : ndarray
        Time from the onset, s.
    curve_db : ndarray
        The decay curve (Schroeder integral, truncated and compensated), dB.
    line : DecayLine or None
        The fit over the evaluation range of ``metric``.
    metric : str
        "t30_s", "t20_s" or "edt_s": whose range ``line`` covers.
    truncation_s : float or None
        Where the decay met the noise, s from the onset.
    noise_db : float or None
        The noise floor, dB re the band's peak energy.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> r = SimpleNamespace(band_hz=1000.0, curve_db=-60 * np.arange(1500) / 1000,
    ...                     t30_s=1.0, truncation_s=None, noise_db=None)
    >>> d = band_decays([r], 1000)[0]
    >>> d.band_hz, d.metric, round(d.line.reverberation_s, 6)
    (1000.0, 't30_s', 1.0)
    """

    band_hz: float | None  #: None for the broadband response
    t_s: np.ndarray  #: time from the onset, s
    curve_db: np.ndarray  #: the decay curve (Schroeder integral, truncated and compensated)
    line: DecayLine | None  #: the fit over the evaluation range of ``metric``
    metric: str  #: "t30_s", "t20_s" or "edt_s": whose range ``line`` covers
    truncation_s: float | None  #: where the decay met the noise, s from the onset
    noise_db: float | None  #: the noise floor, dB re the band's peak energy


def band_decays(band_results, rate: int, *, max_points: int = 2000) -> list[BandDecay]:
    """Decay curves of analysed bands, each with the line of its longest-range decay time
    that has a value (T30, else T20, else EDT); bands without a curve are left out.

    ``band_results`` are :class:`roomconv.analysis.parameters.BandResult` objects (or any
    with ``band_hz``, ``curve_db``, ``truncation_s``, ``noise_db`` and the decay times).
    Curves longer than ``max_points`` are decimated for drawing; lines are fitted on the
    full curve.

    Parameters
    ----------
    band_results : iterable
        The analysed bands.
    rate : int
        Sample rate of the curves, Hz (one value per sample).
    max_points : int
        Most points drawn of one curve.

    Returns
    -------
    list of BandDecay

    References
    ----------
    ISO 3382-1:2009, 5.3.3 (decay curve by backward integration) and A.2 (ranges).

    Examples
    --------
    A band whose T30 is null falls back to T20; one without a curve is left out. The curve
    falls 60 dB in 0.8 s, so the fitted line gives T = 0.8 s (closed form); 4000 values
    drawn with at most 1000 points keep every 4th.

    >>> from types import SimpleNamespace
    >>> curve = -60 * np.arange(4000) / 4000 / 0.8
    >>> rs = [SimpleNamespace(band_hz=500.0, curve_db=curve, t30_s=None, t20_s=0.8),
    ...       SimpleNamespace(band_hz=1000.0, curve_db=None)]
    >>> (d,) = band_decays(rs, 4000, max_points=1000)
    >>> d.metric, round(d.line.reverberation_s, 6), d.t_s.size, d.truncation_s
    ('t20_s', 0.8, 1000, None)
    """
    out = []
    for r in band_results:
        curve = getattr(r, "curve_db", None)
        if curve is None or curve.size == 0:
            continue
        metric = next(
            (m for m in ("t30_s", "t20_s", "edt_s") if getattr(r, m, None) is not None), "t30_s"
        )
        upper, lower = EVALUATION_RANGES_DB[metric]
        line = decay_line(curve, rate, upper, lower) if getattr(r, metric, None) else None
        step = max(1, curve.size // max_points)
        out.append(
            BandDecay(
                r.band_hz,
                np.arange(0, curve.size, step) / rate,
                np.asarray(curve[::step], dtype=np.float64),
                line,
                metric,
                getattr(r, "truncation_s", None),
                getattr(r, "noise_db", None),
            )
        )
    return out
