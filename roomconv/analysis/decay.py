"""Decay curves: onset, Lundeby truncation with noise compensation, Schroeder integration
and the least-squares line fits used for EDT, T20 and T30.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..measure.quality import energy_envelope

_LN10 = np.log(10.0)


def onset_index(h: np.ndarray, drop_db: float = 20.0) -> int:
    """First sample whose energy is within ``drop_db`` of the maximum.

    References
    ----------
    ISO 3382-1:2009, A.3.2 (start of the impulse response: the level first rises to within
    20 dB of the maximum) — from memory.
    """
    e = np.square(h)
    peak = e.max()
    if peak <= 0:
        raise ValueError("silent response")
    return int(np.flatnonzero(e >= peak * 10 ** (-drop_db / 10))[0])


@dataclass(frozen=True)
class Truncation:
    """Result of :func:`lundeby_truncation` (indices relative to the array given)."""

    index: int               #: truncation point: where the decay meets the noise
    noise_energy: float      #: mean squared amplitude of the noise per sample
    compensation: float      #: energy (sum of squares) the decay would add after ``index``
    slope_db_s: float        #: late-decay slope, dB/s (negative)
    inr_db: float            #: peak of the smoothed envelope over the noise, dB
    converged: bool
    noise_limited: bool      #: False when no noise floor was reached in the response


def _fit_line(t: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    a, b = np.polyfit(t, y, 1)
    return float(a), float(b)


def lundeby_truncation(h: np.ndarray, rate: int, *, interval_s: float = 0.01,
                       points_per_10db: int = 5, max_iter: int = 10) -> Truncation:
    """Iterative truncation point and late-energy compensation (Lundeby et al. 1995).

    ``h`` starts at the onset. Steps: envelope in short intervals; noise from the last 10 %;
    a first line from 0 dB to 10 dB above the noise; then, repeatedly, a new interval
    length giving ``points_per_10db`` intervals per 10 dB of decay, the noise read from the
    part more than 10 dB below the crossing point (at least the last 10 %), a late-decay
    line over 20 dB ending 5 dB above the noise, and the crossing point of that line with
    the noise, until the crossing point stops moving.

    References
    ----------
    Lundeby, A., Vigran, T. E., Bietz, H., Vorländer, M. (1995). Uncertainties of
    measurements in room acoustics. Acustica 81, 344–355.
    """
    h = np.asarray(h, dtype=np.float64)
    n = h.size
    e2 = np.square(h)
    env, m = energy_envelope(h, rate, interval_s)
    if env.size < 4 or env.max() <= 0:
        return Truncation(n, 0.0, 0.0, float("nan"), float("nan"), False, False)
    t_env = (np.arange(env.size) + 0.5) * m / rate
    with np.errstate(divide="ignore"):
        env_db = 10 * np.log10(env / env.max())
    tail_start = int(0.9 * env.size)
    noise = float(np.mean(env[tail_start:]))
    peak_env = float(env.max())
    inr_db = 10 * np.log10(peak_env / noise) if noise > 0 else float("inf")
    noise_db = 10 * np.log10(noise / peak_env) if noise > 0 else -np.inf

    # A first line over the part more than 10 dB above the noise.
    above = np.flatnonzero(env_db > noise_db + 10)
    if noise_db > -10 or above.size < 2:
        return Truncation(n, noise, 0.0, float("nan"), inr_db, False, True)
    stop = above[-1] + 1
    start = int(np.argmax(env))
    if stop - start < 2:
        return Truncation(n, noise, 0.0, float("nan"), inr_db, False, True)
    slope, icpt = _fit_line(t_env[start:stop], env_db[start:stop])
    if slope >= 0:
        return Truncation(n, noise, 0.0, float("nan"), inr_db, False, True)
    cross = (noise_db - icpt) / slope  # seconds
    # A response that never reaches its noise (e.g. synthetic, noise-free) is not truncated.
    if inr_db > 100 or cross >= n / rate:
        return Truncation(n, noise, _tail_energy(icpt, slope, n / rate, peak_env, rate),
                          slope, inr_db, True, False)

    converged = False
    for _ in range(max_iter):
        step = max(1, int(round(10.0 / -slope / points_per_10db * rate)))
        env, m = energy_envelope(h, rate, step / rate)
        if env.size < 4:
            break
        t_env = (np.arange(env.size) + 0.5) * m / rate
        with np.errstate(divide="ignore"):
            env_db = 10 * np.log10(np.maximum(env, 1e-300) / peak_env)
        # Noise: from 10 dB of decay below the crossing point, or the last 10 %.
        t_noise = cross + 10.0 / -slope
        i_noise = min(int(t_noise * rate), int(0.9 * n))
        noise = float(np.mean(e2[i_noise:])) if i_noise < n else noise
        noise_db = 10 * np.log10(noise / peak_env) if noise > 0 else -np.inf
        # Late decay: 20 dB of range ending 5 dB above the noise.
        hi_db, lo_db = noise_db + 25.0, noise_db + 5.0
        idx = np.flatnonzero((env_db <= hi_db) & (env_db >= lo_db))
        idx = idx[idx >= int(np.argmax(env))]
        if idx.size < 2:
            idx = np.flatnonzero(env_db >= lo_db)
        if idx.size < 2:
            break
        sel = slice(idx[0], idx[-1] + 1)
        new_slope, new_icpt = _fit_line(t_env[sel], env_db[sel])
        if new_slope >= 0:
            break
        new_cross = (noise_db - new_icpt) / new_slope
        moved = abs(new_cross - cross)
        slope, icpt, cross = new_slope, new_icpt, new_cross
        if moved < max(step / rate, 0.02 * cross):
            converged = True
            break
    idx_cross = int(np.clip(round(cross * rate), 1, n))
    inr_db = 10 * np.log10(peak_env / noise) if noise > 0 else float("inf")
    return Truncation(idx_cross, noise, _tail_energy(icpt, slope, idx_cross / rate, peak_env,
                                                     rate), slope, inr_db, converged, True)


def _tail_energy(icpt_db: float, slope_db_s: float, t_c: float, ref: float, rate: int) -> float:
    """Sum of squares an exponential decay adds after ``t_c`` (Lundeby's compensation).

    The line L(t) = icpt + slope·t (dB re ``ref``, an energy per sample) integrates to
    e(t_c) · 10 / (−slope · ln 10) seconds, i.e. that times ``rate`` samples.
    """
    if not np.isfinite(slope_db_s) or slope_db_s >= 0:
        return 0.0
    e_c = ref * 10 ** ((icpt_db + slope_db_s * t_c) / 10)
    return float(e_c * 10.0 / (-slope_db_s * _LN10) * rate)


def schroeder_integral(h: np.ndarray, *, truncation: int | None = None,
                       compensation: float = 0.0, noise_energy: float = 0.0) -> np.ndarray:
    """Backward-integrated energy E(t) = Σ_{τ≥t}^{truncation} (h²(τ) − noise) + compensation.

    ``noise_energy`` (mean square of the background noise) is subtracted from every sample
    before the truncation point, and ``compensation`` stands for the decay after it.
    Returns an array of ``truncation`` values (not normalized, not in dB).

    References
    ----------
    Schroeder, M. R. (1965). New method of measuring reverberation time. J. Acoust. Soc. Am.
    37, 409–412. ISO 3382-1:2009, 5.3.3.
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
    """Normalize a Schroeder curve to 0 dB at its start."""
    with np.errstate(divide="ignore"):
        return 10 * np.log10(np.maximum(schroeder, 1e-300) / schroeder[0])


@dataclass(frozen=True)
class LineFit:
    slope_db_s: float
    intercept_db: float
    r: float                #: correlation coefficient of the fit
    reverberation_s: float  #: −60 / slope


def fit_decay(curve_db: np.ndarray, rate: int, upper_db: float, lower_db: float) -> LineFit | None:
    """Least-squares line over the part of a decay curve between two levels.

    Returns ``None`` when the curve does not reach ``lower_db``.

    References
    ----------
    ISO 3382-1:2009, 5.3.3 and A.2 (evaluation ranges); ISO 3382-2:2008, B.1 (line fit).
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
