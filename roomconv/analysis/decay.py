"""Decay curves: the broadband onset, Lundeby's iterative truncation with noise compensation,
Schroeder's backward integral and the least-squares line fits behind EDT, T20 and T30.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..signal import energy_envelope

__all__ = [
    "onset_index",
    "Truncation",
    "lundeby_truncation",
    "schroeder_integral",
    "decay_db",
    "LineFit",
    "fit_decay",
    "available_range_db",
]

_LN10 = np.log(10.0)

#: Lundeby et al. (1995), step 3: the first regression runs from the peak down to a level
#: 5–10 dB above the noise; we take 10 dB.
FIRST_FIT_ABOVE_NOISE_DB = 10.0
#: Lundeby et al. (1995), step 8: the late-decay regression covers 10–20 dB of decay and ends
#: 5–10 dB above the noise; we take 20 dB ending 5 dB above it.
LATE_FIT_ABOVE_NOISE_DB = 5.0
LATE_FIT_RANGE_DB = 20.0
#: Lundeby et al. (1995), step 7: the noise is read from the point where the late line has
#: fallen 5–10 dB below the noise level past the crossing point (we take 10 dB), but never from
#: less than the last 10 % of the response.
NOISE_START_BELOW_CROSSING_DB = 10.0
NOISE_MIN_FRACTION = 0.1
#: Lundeby et al. (1995), step 5: 3–10 intervals per 10 dB of decay.
INTERVALS_PER_10DB = 5


def onset_index(h: np.ndarray, drop_db: float = 20.0) -> int:
    """First sample whose energy is within ``drop_db`` of the maximum.

    Used on the *broadband* response: time zero of every band is the direct sound of the
    unfiltered response, not the band filter's own build-up.

    Raises
    ------
    InputError
        When the response is empty or silent (no onset exists); an :class:`InputError` so
        every command refuses it as a bad input rather than failing internally.

    References
    ----------
    ISO 3382-1:2009, A.3.2 (start of the impulse response: the level first rises to within
    20 dB of the maximum) — from memory.

    Examples
    --------
    >>> onset_index(np.array([0.0, 0.01, 0.5, 1.0, 0.3]))
    2
    """
    e = np.square(np.asarray(h, dtype=np.float64))
    peak = e.max() if e.size else 0.0
    if peak <= 0:
        raise InputError("the response is silent (all zeros); check the file and its channel")
    return int(np.flatnonzero(e >= peak * 10 ** (-drop_db / 10))[0])


@dataclass(frozen=True)
class Truncation:
    """Result of :func:`lundeby_truncation` (indices relative to the array given).

    Examples
    --------
    >>> h = np.zeros(20)
    >>> h[0] = 1.0
    >>> tr = lundeby_truncation(h, 1000)  # two 10 ms intervals
    >>> tr.noise_limited, tr.reason
    (False, 'the response is too short for a noise-floor search')
    """

    index: int  #: truncation point (samples): where the decay meets the noise
    noise_energy: float  #: mean square of the background noise per sample (0: none found)
    compensation: float  #: energy (sum of squares) the decay would add after ``index``
    slope_db_s: float  #: late-decay slope, dB/s (negative; NaN when not found)
    inr_db: float  #: impulse-to-noise ratio: peak of the smoothed envelope over noise
    converged: bool  #: the crossing point settled (or no noise floor was reached)
    noise_limited: bool  #: a noise floor was reached inside the response
    noise_start: int  #: first sample of the stretch the noise was read from
    reason: str = ""  #: why the search gave up, when it did


def _db(x: np.ndarray | float, ref: float) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return 10 * np.log10(np.maximum(x, 1e-300) / ref)


def _fit_line(t: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    a, b = np.polyfit(t, y, 1)
    return float(a), float(b)


def _first_below(env_db: np.ndarray, level_db: float, start: int) -> int:
    """Index of the first interval at or after ``start`` below ``level_db`` (a three-interval
    running mean guards against one deep dip of a narrow band), or the length when none is."""
    if env_db.size - start < 1:
        return env_db.size
    lin = 10 ** (env_db[start:] / 10)
    if lin.size >= 3:
        smooth = np.convolve(lin, np.ones(3) / 3, mode="same")
        smooth[0], smooth[-1] = lin[0], lin[-1]
    else:
        smooth = lin
    below = np.flatnonzero(10 * np.log10(np.maximum(smooth, 1e-300)) < level_db)
    return start + int(below[0]) if below.size else env_db.size


def _envelope(h: np.ndarray, rate: int, interval_s: float):
    env, m = energy_envelope(h, rate, interval_s)
    t = (np.arange(env.size) + 0.5) * m / rate
    return env, t


def lundeby_truncation(
    h: np.ndarray,
    rate: int,
    *,
    interval_s: float = 0.01,
    min_interval_s: float = 0.001,
    bandwidth_hz: float | None = None,
    max_iter: int = 12,
) -> Truncation:
    """Iterative truncation point, noise level and late-energy compensation.

    ``h`` starts at the onset. The steps of Lundeby et al. (1995), as numbered there:

    1. average the squared response in intervals of ``interval_s`` (10–50 ms);
    2. read the noise from the last 10 % of the response;
    3. fit a line from the envelope's peak to the *first* interval after it that falls within
       10 dB of the noise;
    4. the crossing of that line with the noise level is the preliminary truncation point;
    5. choose a new interval length giving five intervals per 10 dB of that slope;
    6. average the squared response again in those intervals;
    7. read the noise from the point 10 dB of decay past the crossing point (at least the
       last 10 %);
    8. fit the late decay over 20 dB ending 5 dB above the noise, from the first crossings
       after the peak;
    9. a new crossing point; repeat 7–9 until it moves by less than one interval.

    When the noise stretch of step 7 is itself still decaying, the response never reached a
    noise floor: it is not truncated and the compensation continues the late line from its
    end. The compensation is the energy of the late line past the truncation point,
    e(t_c)/k with k the energy decay rate (the line meets the noise there, so e(t_c) is the
    noise level).

    Parameters
    ----------
    h : ndarray, 1-D
        Response from its onset.
    rate : int
        Sample rate, Hz.
    interval_s : float
        Step 1 interval length, s. Narrow bands need longer intervals (a few over the
        bandwidth) so that one deep dip of the envelope is not taken for the noise.
    min_interval_s : float
        Shortest interval the iteration may choose, s.
    bandwidth_hz : float, optional
        Bandwidth of the signal (default: half the rate); sets how much a stretch of noise
        may fluctuate when telling a noise floor from a decay that goes on.
    max_iter : int
        Iterations of steps 7–9 at most; ``converged`` is False when they ran out.

    Returns
    -------
    Truncation

    References
    ----------
    Lundeby, A., Vigran, T. E., Bietz, H., Vorländer, M. (1995). Uncertainties of
    measurements in room acoustics. Acustica 81, 344–355.

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> h = rng.standard_normal(t.size) * 10 ** (-3 * t / T) + 1e-3 * rng.standard_normal(t.size)
    >>> tr = lundeby_truncation(h, rate)
    >>> tr.noise_limited, round(tr.index / rate, 1), round(-60 / tr.slope_db_s, 1)
    (True, 0.5, 0.5)
    """
    h = np.asarray(h, dtype=np.float64)
    n = h.size
    e2 = np.square(h)
    bw = float(bandwidth_hz) if bandwidth_hz else rate / 2.0
    interval_s = max(interval_s, 1.0 / rate)
    env, t_env = _envelope(h, rate, interval_s)  # step 1
    peak_i = int(np.argmax(env))
    peak = float(env[peak_i]) if env.size else 0.0
    if env.size < 3 or peak <= 0:
        return _gave_up(
            n, 0.0, float("nan"), n, "the response is too short for a noise-floor search"
        )
    found = _preliminary_crossing(h, e2, rate, env, t_env, peak_i, peak, bw, interval_s)
    if isinstance(found, Truncation):
        return found
    found = _iterate_late_line(h, e2, rate, found, peak, min_interval_s, max_iter)
    if isinstance(found, Truncation):
        return found
    return _truncate_at_crossing(h, e2, rate, found, peak, bw)


@dataclass
class _LateLine:
    """Where Lundeby's search stands: the current envelope, noise estimate and decay line.

    Times in s, levels in dB re the envelope's step-1 peak, indices in samples (``i_noise``)
    or intervals (``peak_i``).
    """

    env: np.ndarray  #: the envelope in the current intervals (mean square)
    t_env: np.ndarray  #: the intervals' centre times, s
    peak_i: int  #: the envelope's peak interval
    i_noise: int  #: first sample of the stretch the noise was read from
    noise: float  #: mean square of the noise
    slope: float  #: the line's slope, dB/s
    cross: float  #: where the line meets the noise, s
    step_s: float  #: the interval length, s
    converged: bool = False


def _gave_up(n: int, noise: float, inr_db: float, noise_start: int, reason: str) -> Truncation:
    """No truncation: keep the whole response, uncompensated, and say why."""
    return Truncation(n, noise, 0.0, float("nan"), inr_db, False, noise > 0, noise_start, reason)


def _preliminary_crossing(
    h: np.ndarray,
    e2: np.ndarray,
    rate: int,
    env: np.ndarray,
    t_env: np.ndarray,
    peak_i: int,
    peak: float,
    bandwidth_hz: float,
    interval_s: float,
) -> Truncation | _LateLine:
    """Steps 2–4 of Lundeby et al. (1995): the noise from the last 10 %, a first line from the
    envelope's peak to the first interval within 10 dB of that noise, and its crossing with
    the noise level.

    Returns the search's starting point, or the final :class:`Truncation` when the response
    has no noise floor or too little decay above it.
    """
    n = h.size
    # Step 2: noise from the last 10 %.
    i_noise = int((1 - NOISE_MIN_FRACTION) * n)
    noise = float(np.mean(e2[i_noise:]))
    if noise <= 0:  # digital silence at the end: no floor at all
        return _no_floor(h, rate, env, t_env, peak_i, peak, n)
    inr = float(_db(peak, noise))
    if inr < FIRST_FIT_ABOVE_NOISE_DB + 1:
        return _gave_up(
            n, noise, inr, i_noise, f"the decay rises only {inr:.1f} dB above the noise"
        )

    # Steps 3–4: first line from the peak to the first interval within 10 dB of the noise.
    env_db = _db(env, peak)
    noise_db = float(_db(noise, peak))
    stop = _first_below(env_db, noise_db + FIRST_FIT_ABOVE_NOISE_DB, peak_i + 1)
    stop = max(stop, peak_i + 2)  # a pulse: peak and next interval still give a slope
    slope, icpt = _fit_line(t_env[peak_i:stop], env_db[peak_i:stop])
    if not slope < 0:
        return _gave_up(n, noise, inr, i_noise, "the envelope does not decay from its peak")
    cross = (noise_db - icpt) / slope
    if _still_decaying(e2, rate, i_noise, slope, bandwidth_hz):
        return _no_floor(h, rate, env, t_env, peak_i, peak, n)
    return _LateLine(env, t_env, peak_i, i_noise, noise, slope, cross, interval_s)


def _iterate_late_line(
    h: np.ndarray,
    e2: np.ndarray,
    rate: int,
    line: _LateLine,
    peak: float,
    min_interval_s: float,
    max_iter: int,
) -> Truncation | _LateLine:
    """Steps 5–9 of Lundeby et al. (1995), repeated until the crossing point settles.

    Each round chooses intervals giving five per 10 dB of the current slope, reads the noise
    from 10 dB of decay past the crossing point (at least the last 10 %), fits the late decay
    over 20 dB ending 5 dB above the noise and moves the crossing point. ``line`` is updated
    in place and returned (``converged`` set when the point moved by less than one interval);
    a :class:`Truncation` comes back when the noise stretch turns out to be digital silence.
    """
    n = h.size
    step_s = line.step_s
    slope, cross = line.slope, line.cross
    for _ in range(max_iter):
        # Steps 5–6: intervals giving INTERVALS_PER_10DB per 10 dB of decay.
        step_s = max(min_interval_s, 10.0 / -slope / INTERVALS_PER_10DB, 1.0 / rate)
        line.step_s = step_s
        line.env, line.t_env = _envelope(h, rate, step_s)
        if line.env.size < 3:
            break
        line.peak_i = int(np.argmax(line.env))
        env_db = _db(line.env, peak)
        # Step 7: the noise from 10 dB of decay past the crossing point, at least the last 10 %.
        t_noise = cross + NOISE_START_BELOW_CROSSING_DB / -slope
        line.i_noise = int(min(max(t_noise, 0.0) * rate, (1 - NOISE_MIN_FRACTION) * n))
        line.noise = float(np.mean(e2[line.i_noise :]))
        if line.noise <= 0:
            return _no_floor(h, rate, line.env, line.t_env, line.peak_i, peak, n)
        noise_db = float(_db(line.noise, peak))
        # Step 8: the late line over 20 dB ending 5 dB above the noise (first crossings).
        hi = noise_db + LATE_FIT_ABOVE_NOISE_DB + LATE_FIT_RANGE_DB
        lo = noise_db + LATE_FIT_ABOVE_NOISE_DB
        i_hi = _first_below(env_db, hi, line.peak_i) if hi < 0 else line.peak_i
        i_lo = _first_below(env_db, lo, i_hi)
        if i_lo - i_hi < 2:
            i_hi = max(line.peak_i, i_lo - 2)
        if i_lo - i_hi < 2:
            break
        new_slope, new_icpt = _fit_line(line.t_env[i_hi:i_lo], env_db[i_hi:i_lo])
        if not new_slope < 0:
            break
        # Step 9: the new crossing point; stop when it has settled.
        new_cross = (noise_db - new_icpt) / new_slope
        moved = abs(new_cross - cross)
        slope, cross = new_slope, new_cross
        line.slope, line.cross = slope, cross
        if moved <= max(step_s, 0.01 * cross):
            line.converged = True
            break
    return line


def _truncate_at_crossing(
    h: np.ndarray, e2: np.ndarray, rate: int, line: _LateLine, peak: float, bandwidth_hz: float
) -> Truncation:
    """Cut at the settled crossing point and compensate with the late line's energy past it.

    The compensation is e(t_c)/k (k the energy decay rate, e(t_c) the noise level where the
    line meets it), in sums of squares. A crossing beyond the response, or a noise stretch
    still decaying, means no floor was reached after all.
    """
    n = h.size
    if line.cross >= n / rate or _still_decaying(e2, rate, line.i_noise, line.slope, bandwidth_hz):
        return _no_floor(h, rate, line.env, line.t_env, line.peak_i, peak, n)
    # Never truncate inside the peak's own interval: a clean pulse keeps its energy.
    first_allowed = min(n, int(round(line.step_s * rate)) * (line.peak_i + 1))
    idx = int(np.clip(round(line.cross * rate), first_allowed, n))
    k = -line.slope * _LN10 / 10.0  # energy decay rate, 1/s
    compensation = line.noise * rate / k
    return Truncation(
        idx,
        line.noise,
        compensation,
        line.slope,
        float(_db(peak, line.noise)),
        line.converged,
        True,
        line.i_noise,
        "" if line.converged else "the crossing point did not settle",
    )


def _still_decaying(
    e2: np.ndarray, rate: int, start: int, slope_db_s: float, bandwidth_hz: float
) -> bool:
    """True when the stretch read as noise is still falling like the decay, not flat.

    Compares the mean energy of the two halves of the stretch: noise gives equal means within
    its own fluctuation, a decay a drop of about ``slope``·(half the stretch). The mean of
    B·d independent energy values fluctuates by about 4.34·sqrt(1/(B·d)) dB (B bandwidth,
    d duration); a drop over three of those (and 1 dB) and over 40 % of what the decay would
    give counts as decay (common practice).
    """
    seg = e2[start:]
    if seg.size < 8 or not np.isfinite(slope_db_s) or slope_db_s >= 0:
        return False
    half = seg.size // 2
    a, b = float(np.mean(seg[:half])), float(np.mean(seg[half:]))
    if b <= 0:
        return a > 0
    drop = float(_db(a, b))
    expected = -slope_db_s * (half / rate)
    dof = max(1.0, bandwidth_hz * half / rate)
    spread = 10 / _LN10 * np.sqrt(2.0 / dof)
    return drop > max(1.0, 3.0 * spread) and drop > 0.4 * expected


def _no_floor(h, rate, env, t_env, peak_i, peak, n) -> Truncation:
    """No noise floor in the response: keep all of it and continue the late decay.

    The late line is fitted over the last 20 dB of the envelope above its end (or what there
    is of it), and its energy past the end is the compensation.
    """
    env_db = _db(env, peak)
    end_db = float(np.mean(env_db[-max(1, env.size // 20) :]))
    i_hi = _first_below(env_db, end_db + LATE_FIT_RANGE_DB, peak_i)
    i_hi = min(i_hi, max(peak_i, env.size - 3))
    slope = float("nan")
    if env.size - i_hi >= 2:
        slope, icpt = _fit_line(t_env[i_hi:], env_db[i_hi:])
    comp = 0.0
    if np.isfinite(slope) and slope < 0:
        k = -slope * _LN10 / 10.0
        e_end = peak * 10 ** ((icpt + slope * n / rate) / 10)
        comp = e_end * rate / k
    e_end_db = float(env_db[-1]) if env.size else float("nan")
    return Truncation(n, 0.0, comp, slope, -e_end_db, True, False, n)


def schroeder_integral(
    h: np.ndarray,
    *,
    truncation: int | None = None,
    compensation: float = 0.0,
    noise_energy: float = 0.0,
) -> np.ndarray:
    """Backward-integrated energy E(t) = Σ_{τ≥t}^{truncation} (h²(τ) − noise) + compensation.

    ``noise_energy`` (mean square of the background noise) is subtracted from every sample
    before the truncation point, and ``compensation`` stands for the decay after it.
    Returns an array of ``truncation`` values (not normalized, not in dB).

    References
    ----------
    Schroeder, M. R. (1965). New method of measuring reverberation time. J. Acoust. Soc. Am.
    37, 409–412. ISO 3382-1:2009, 5.3.3.

    Examples
    --------
    >>> schroeder_integral(np.array([2.0, 1.0, 1.0]))
    array([6., 2., 1.])
    """
    n = h.size if truncation is None else int(truncation)
    e = np.square(h[:n]) - noise_energy
    out = np.cumsum(e[::-1])[::-1] + compensation
    # Subtraction can leave the last few values at or below zero; hold the smallest positive.
    pos = out > 0
    if not pos.all():
        floor = out[pos].min() if pos.any() else 1e-300
        out = np.where(pos, out, floor)
    return out


def decay_db(schroeder: np.ndarray) -> np.ndarray:
    """Normalize a Schroeder curve to 0 dB at its start.

    Examples
    --------
    >>> decay_db(np.array([10.0, 1.0])).round(1)
    array([  0., -10.])
    """
    with np.errstate(divide="ignore"):
        return 10 * np.log10(np.maximum(schroeder, 1e-300) / schroeder[0])


def available_range_db(curve_db: np.ndarray) -> float:
    """Decay range the curve covers before the noise (or the window's end), dB (positive).

    With the compensation of :func:`lundeby_truncation` the curve's last value is the level
    the decay had reached at the truncation point, which is where noise or the end of the
    response took over.

    Examples
    --------
    >>> available_range_db(np.array([0.0, -20.0, -47.5]))
    47.5
    """
    return float(-curve_db[-1]) if curve_db.size else 0.0


@dataclass(frozen=True)
class LineFit:
    """A least-squares line over part of a decay curve.

    Examples
    --------
    >>> fit = fit_decay(-60 * np.arange(3000) / 3000, 1000, -5, -25)   # 60 dB in 3 s
    >>> round(fit.slope_db_s, 6), round(fit.reverberation_s, 6), round(fit.r, 6)
    (-20.0, 3.0, -1.0)
    """

    slope_db_s: float
    intercept_db: float
    r: float  #: correlation coefficient of the fit
    reverberation_s: float  #: −60 / slope


def fit_decay(curve_db: np.ndarray, rate: int, upper_db: float, lower_db: float) -> LineFit | None:
    """Least-squares line over the part of a decay curve between two levels.

    Returns ``None`` when the curve does not reach ``lower_db``.

    References
    ----------
    ISO 3382-1:2009, 5.3.3 and A.2 (evaluation ranges); ISO 3382-2:2008, B.1 (line fit).

    Examples
    --------
    >>> rate = 1000
    >>> curve = -60 * np.arange(2 * rate) / rate / 1.5      # a straight decay, T = 1.5 s
    >>> round(fit_decay(curve, rate, -5, -35).reverberation_s, 6)
    1.5
    """
    if curve_db.size < 3 or curve_db.min() > lower_db:
        return None
    i0 = int(np.flatnonzero(curve_db <= upper_db)[0])
    below = np.flatnonzero(curve_db < lower_db)
    i1 = int(below[0]) if below.size else curve_db.size
    if i1 - i0 < 3:
        return None
    t = np.arange(i0, i1) / rate
    y = curve_db[i0:i1]
    slope, icpt = _fit_line(t, y)
    if slope >= 0:
        return None
    r = float(np.corrcoef(t, y)[0, 1])
    return LineFit(slope, icpt, r, -60.0 / slope)
