"""Hearing and equipment safety: the caution text, level caps, ramps and an output limiter.

Every code path that sends sound to a device goes through here first.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .signal import db_to_gain, raised_cosine

__all__ = [
    "HEARING_CAUTION",
    "OUTPUT_CAP_DBFS",
    "START_LEVEL_DBFS",
    "RAMP_S",
    "caution_text",
    "db_to_gain",
    "check_level",
    "apply_ramps",
    "hard_cap",
    "OutputLimiter",
    "PlayResult",
    "safe_play",
]

HEARING_CAUTION = """\
CAUTION - HEARING AND EQUIPMENT
  * Sweeps and test signals are loud and rich in high frequencies. Set the amplifier and
    monitor volume LOW before starting, and raise it gradually.
  * Do not wear headphones or stand close to the loudspeaker during a measurement.
    Hearing protection is advised for anyone in the room.
  * High levels at low or high frequencies can destroy loudspeaker drivers (tweeters
    especially). Respect the loudspeaker's rated power and band.
  * Follow local noise regulations, site rules and your licensed practice; this program
    does not replace them.
roomconv starts well below full scale, ramps levels in and out, and caps its output at
{cap:.0f} dBFS, but it cannot know the gain of your amplifier."""

#: Hard cap on anything roomconv sends to a sound card, dBFS peak.
OUTPUT_CAP_DBFS = -1.0
#: Default level of a live sweep: well below full scale.
START_LEVEL_DBFS = -20.0
#: Ramp applied at the start and end of every playback, seconds.
RAMP_S = 0.05


def caution_text(cap_dbfs: float = OUTPUT_CAP_DBFS) -> str:
    """The hearing and equipment caution shown (and confirmed) before any sound is played.

    Parameters
    ----------
    cap_dbfs : float
        The output cap quoted in the text, dBFS.

    Returns
    -------
    str

    Examples
    --------
    >>> print(caution_text().splitlines()[0])
    CAUTION - HEARING AND EQUIPMENT
    """
    return HEARING_CAUTION.format(cap=cap_dbfs)


def check_level(level_dbfs: float, cap_dbfs: float = OUTPUT_CAP_DBFS) -> float:
    """Validate a playback level against the hard cap.

    Parameters
    ----------
    level_dbfs : float
        Peak playback level, dBFS.
    cap_dbfs : float
        Highest level accepted, dBFS.

    Returns
    -------
    float
        ``level_dbfs``.

    Raises
    ------
    InputError
        When the level is not finite or above the cap.

    Examples
    --------
    >>> check_level(-20.0)
    -20.0
    """
    if not np.isfinite(level_dbfs):
        raise InputError(f"level {level_dbfs} dBFS is not a finite number")
    if level_dbfs > cap_dbfs:
        raise InputError(
            f"level {level_dbfs:g} dBFS is above the output cap of {cap_dbfs:g} dBFS "
            "(lower the level)"
        )
    return level_dbfs


def apply_ramps(signal: np.ndarray, rate: int, ramp_s: float = RAMP_S) -> np.ndarray:
    """Raised-cosine fade-in and fade-out over ``ramp_s`` at both ends (a copy).

    Parameters
    ----------
    signal : ndarray, shape (samples,) or (samples, channels)
    rate : int
        Sample rate, Hz.
    ramp_s : float
        Length of each ramp, s (at most half the signal).

    Returns
    -------
    ndarray
        float64, shaped like ``signal``.

    Examples
    --------
    >>> apply_ramps(np.ones(8), 1000, ramp_s=0.002).tolist()
    [0.0, 0.5, 1.0, 1.0, 1.0, 1.0, 0.5, 0.0]
    """
    out = np.array(signal, dtype=np.float64, copy=True)
    n = min(int(round(ramp_s * rate)), out.shape[0] // 2)
    if n > 0:
        w = raised_cosine(n)
        shape = (n,) + (1,) * (out.ndim - 1)
        out[:n] *= w.reshape(shape)
        out[-n:] *= w[::-1].reshape(shape)
    return out


def hard_cap(signal: np.ndarray, cap_dbfs: float = OUTPUT_CAP_DBFS) -> np.ndarray:
    """Clip anything above the cap: a last line of defence after the limiter.

    NaN becomes silence and ±inf the cap (``np.clip`` alone would let NaN through).

    Parameters
    ----------
    signal : ndarray
    cap_dbfs : float
        Cap, dBFS; never above :data:`OUTPUT_CAP_DBFS`.

    Returns
    -------
    ndarray

    Examples
    --------
    >>> hard_cap(np.array([0.5, 2.0, np.nan]), cap_dbfs=-6.0206).round(3).tolist()
    [0.5, 0.5, 0.0]
    """
    g = float(db_to_gain(min(cap_dbfs, OUTPUT_CAP_DBFS)))
    return np.clip(np.nan_to_num(signal, nan=0.0, posinf=g, neginf=-g), -g, g)


class OutputLimiter:
    """A look-ahead-free peak limiter for live output: instant attack, smooth release.

    Gain never lets a sample exceed the ceiling; the release is exponential.

    Parameters
    ----------
    rate : int
        Sample rate, Hz.
    ceiling_dbfs : float
        Ceiling, dBFS.
    release_s : float
        Release time constant, s (the gain recovers by a factor e per ``release_s``).

    Examples
    --------
    >>> lim = OutputLimiter(48000, ceiling_dbfs=-6.0206)
    >>> y = lim.process(np.array([0.25, 1.0, 0.25]))
    >>> round(float(np.max(np.abs(y))), 3), round(lim.max_reduction_db, 1)
    (0.5, 6.0)
    """

    #: Longest stretch handled in one vectorized pass (r^-n must stay finite).
    CHUNK = 8192

    def __init__(self, rate: int, ceiling_dbfs: float = OUTPUT_CAP_DBFS, release_s: float = 0.2):
        self.ceiling = float(db_to_gain(ceiling_dbfs))
        self._release = float(np.exp(-1.0 / max(release_s * rate, 1.0)))
        self._gain = 1.0
        self.max_reduction_db = 0.0
        self._powers: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        self.last_peak = 0.0  #: peak of the last block returned, linear
        self.nonfinite = 0  #: blocks in which NaN/inf samples were replaced by silence

    def process(self, block: np.ndarray, *, in_place: bool = False) -> np.ndarray:
        """Limit one block.

        The gain reduction u = 1 − g follows u[n] = max(1 − need[n], r·u[n−1]) (instant
        attack, exponential release r); unrolled, u[n] = r^(n+1)·max(u_prev, max_k v[k]·r^−(k+1)),
        a cumulative maximum, so the block needs no per-sample Python loop.

        Parameters
        ----------
        block : ndarray, shape (samples,) or (samples, channels)
        in_place : bool
            Change ``block`` itself instead of returning a new array.

        Returns
        -------
        ndarray
            The limited block; its peak is left in :attr:`last_peak` (linear), for meters.

        Examples
        --------
        >>> lim = OutputLimiter(48000, ceiling_dbfs=0.0)
        >>> lim.process(np.array([[0.5, -2.0]])).tolist()
        [[0.25, -1.0]]
        """
        if block.shape[0] > self.CHUNK:
            parts, top = [], 0.0
            for i in range(0, block.shape[0], self.CHUNK):
                parts.append(self.process(block[i : i + self.CHUNK], in_place=in_place))
                top = max(top, self.last_peak)
            self.last_peak = top
            return block if in_place else np.concatenate(parts)
        if block.size == 0:
            self.last_peak = 0.0
            return block if in_place else block.copy()
        c = self.ceiling
        mag = np.abs(block)
        peaks = mag.reshape(-1) if block.ndim == 1 or block.shape[1] == 1 else mag.max(axis=1)
        top = float(peaks.max())
        if not math.isfinite(top):
            # NaN would poison the gain state for good and pass the final clip: silence those
            # samples instead (np.max propagates NaN, so this costs nothing when all is well).
            self.nonfinite += 1
            bad = ~np.isfinite(block)
            if in_place:
                block[bad] = 0.0
            else:
                block = np.where(bad, 0.0, block)
                in_place = True
            mag = np.abs(block)
            peaks = mag.reshape(-1) if block.ndim == 1 or block.shape[1] == 1 else mag.max(axis=1)
            top = float(peaks.max())
        if self._gain == 1.0 and top <= c:
            # Nothing to limit: the common case, kept cheap.
            self.last_peak = top
            return block if in_place else block.copy()
        n = peaks.size
        if n not in self._powers:
            k = np.arange(1, n + 1)
            self._powers[n] = (self._release**k, self._release**-k)
        up, down = self._powers[n]
        # 1 − need, where need = min(1, c / peak) is the gain each sample needs on its own.
        v = np.maximum(peaks, c)
        np.divide(c, v, out=v)
        np.subtract(1.0, v, out=v)
        v *= down
        np.maximum.accumulate(v, out=v)
        np.maximum(v, 1.0 - self._gain, out=v)
        v *= up
        gains = np.subtract(1.0, v, out=v)
        self._gain = float(gains[-1])
        lowest = float(gains.min())
        if lowest < 1.0:
            self.max_reduction_db = max(self.max_reduction_db, -20 * math.log10(lowest))
        self.last_peak = min(c, float((peaks * gains).max()))
        g = gains[:, None] if block.ndim == 2 else gains
        out = np.multiply(block, g, out=block if in_place else None)
        # A last line of defence against rounding: never above the ceiling.
        np.minimum(out, c, out=out)
        return np.maximum(out, -c, out=out)


@dataclass
class PlayResult:
    """What :func:`safe_play` did.

    Attributes
    ----------
    played_s : float
        Seconds handed to the device (0 when nothing was played).
    peak_dbfs : float
        Peak of the signal as sent, dBFS, after ramps, limiter and cap.
    limited_db : float
        Largest gain reduction the limiter applied, dB.
    message : str or None
        Why nothing (or not everything) was played: a device error in words; None when the
        device took the whole signal.

    Examples
    --------
    >>> PlayResult(0.0, -6.0, message="no output device").ok
    False
    """

    played_s: float
    peak_dbfs: float
    limited_db: float = 0.0
    message: str | None = None

    @property
    def ok(self) -> bool:
        """True when the sound was played to the end (no device error, no refusal)."""
        return self.message is None


def safe_play(
    signal: np.ndarray,
    rate: int,
    *,
    confirm: Callable[[], None],
    play: Callable[[np.ndarray, int], None],
    attenuation_db: float = 0.0,
    ramp_s: float = RAMP_S,
    ceiling_dbfs: float = OUTPUT_CAP_DBFS,
) -> PlayResult:
    """Play a signal the one safe way: attenuated, ramped, limited, capped, then confirmed.

    The order matters: the ramps come first so the limiter never sees a step at the start,
    the limiter keeps peaks under ``ceiling_dbfs`` smoothly, and :func:`hard_cap` catches
    anything left (and NaN). ``confirm`` runs after all of that and before the device is
    touched; it shows the hearing caution and raises to refuse (its exception propagates:
    a refusal is the user's answer, not a device fault). Any error the device raises is
    caught and returned as :attr:`PlayResult.message`, so a missing or busy sound card never
    ends the program that asked for the sound.

    Parameters
    ----------
    signal : ndarray, shape (samples,) or (samples, channels)
        Full scale = 1.
    rate : int
        Sample rate, Hz.
    confirm : callable
        ``confirm()``; raises to refuse.
    play : callable
        ``play(block_float32, rate)``: hands the samples to the device and returns when
        they have been played (the sound card layer supplies it).
    attenuation_db : float
        Gain applied first, dB (at most 0: this function never raises a level).
    ramp_s : float
        Fade-in and fade-out length, s.
    ceiling_dbfs : float
        Limiter ceiling, dBFS (never above :data:`OUTPUT_CAP_DBFS`).

    Returns
    -------
    PlayResult

    Examples
    --------
    >>> sent = []
    >>> r = safe_play(np.full(4800, 2.0), 48000, confirm=lambda: None,
    ...               play=lambda y, rate: sent.append(y))
    >>> r.ok, float(np.max(np.abs(sent[0]))) <= db_to_gain(OUTPUT_CAP_DBFS)
    (True, True)
    >>> def no_card(y, rate):
    ...     raise OSError("Error querying device -1")
    >>> safe_play(np.zeros(480), 48000, confirm=lambda: None, play=no_card).message
    'the sound card could not play: Error querying device -1'
    """
    if attenuation_db > 0 or not math.isfinite(attenuation_db):
        raise InputError(f"attenuation {attenuation_db} dB: give 0 dB or less")
    ceiling = min(ceiling_dbfs, OUTPUT_CAP_DBFS)
    x = np.nan_to_num(np.asarray(signal, dtype=np.float64), nan=0.0, posinf=0.0, neginf=0.0)
    y = apply_ramps(x * db_to_gain(attenuation_db), rate, ramp_s)
    lim = OutputLimiter(rate, ceiling_dbfs=ceiling)
    y = hard_cap(lim.process(y), ceiling).astype(np.float32)
    top = float(np.max(np.abs(y))) if y.size else 0.0
    peak = 20 * math.log10(top) if top > 0 else float("-inf")
    confirm()
    try:
        play(y, rate)
    except Exception as exc:  # noqa: BLE001 - PortAudio and the OS raise many kinds
        return PlayResult(0.0, peak, lim.max_reduction_db, f"the sound card could not play: {exc}")
    return PlayResult(y.shape[0] / rate, peak, lim.max_reduction_db)
