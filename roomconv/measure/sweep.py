"""The exponential sine sweep and its analytic inverse filter.

A :class:`Sweep` is a frozen description; :func:`sweep_signal` and :func:`inverse_filter`
turn it into samples.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, fields
from typing import Any

import numpy as np

from ..errors import InputError
from ..signal import db_to_gain, raised_cosine

__all__ = [
    "Sweep",
    "instantaneous_frequency",
    "harmonic_delay",
    "sweep_only",
    "sweep_signal",
    "inverse_filter",
]


#: Longest sweep plus silences accepted, s: far beyond any measurement (common practice), and
#: the recording of a few such sweeps still fits in memory.
MAX_SWEEP_SECONDS = 600.0


@dataclass(frozen=True)
class Sweep:
    """Parameters of an exponential sine sweep as played back.

    The playback signal is ``silence_pre`` seconds of silence, then ``repeats`` periods each
    made of the sweep (``duration`` seconds) followed by ``silence_post`` seconds of silence.
    Values are checked on construction; a bad one raises :class:`~roomconv.errors.InputError`.

    Parameters
    ----------
    rate : int
        Sample rate, Hz (at least 8000).
    f_low, f_high : float
        Start and end frequency, Hz; ``0 < f_low < f_high <= rate / 2``.
    duration : float
        Length of one sweep, s (more than 0.05 s).
    level_dbfs : float
        Peak level, dB re full scale (at most 0).
    fade_in, fade_out : float
        Half-Hann fades at the start and end of the sweep, s.
    silence_pre, silence_post : float
        Silence before the first sweep and after each sweep, s.
    repeats : int
        Number of sweep periods (at least 1), averaged synchronously on extraction.

    References
    ----------
    Farina, A. (2000). Simultaneous measurement of impulse response and distortion with a
    swept-sine technique. 108th AES Convention, preprint 5093.

    Examples
    --------
    >>> s = Sweep(rate=48000, f_low=20.0, f_high=20000.0, duration=2.0, silence_pre=0.5,
    ...           silence_post=1.0, repeats=2)
    >>> s.n_total == round(0.5 * 48000) + 2 * round(3.0 * 48000)
    True
    """

    rate: int = 48000
    f_low: float = 20.0
    f_high: float = 20000.0
    duration: float = 5.0
    level_dbfs: float = -6.0
    fade_in: float = 0.05
    fade_out: float = 0.01
    silence_pre: float = 0.5
    silence_post: float = 2.0
    repeats: int = 1

    def __post_init__(self):
        for name in (
            "rate",
            "f_low",
            "f_high",
            "duration",
            "level_dbfs",
            "fade_in",
            "fade_out",
            "silence_pre",
            "silence_post",
            "repeats",
        ):
            v = getattr(self, name)
            if not (isinstance(v, (int, float, np.integer, np.floating)) and np.isfinite(v)):
                raise InputError(f"sweep {name.replace('_', ' ')} {v!r} is not a finite number")
        if self.duration + self.silence_pre + self.silence_post > MAX_SWEEP_SECONDS:
            raise InputError(
                f"a sweep with its silences lasts at most {MAX_SWEEP_SECONDS:g} s "
                f"(got {self.duration + self.silence_pre + self.silence_post:g} s)"
            )
        if self.rate < 8000:
            raise InputError(f"sample rate {self.rate} Hz is too low (at least 8000 Hz)")
        if not (0 < self.f_low < self.f_high):
            raise InputError(
                f"sweep band {self.f_low:g}-{self.f_high:g} Hz is not increasing "
                "and positive (set the start below the stop frequency)"
            )
        if self.f_high > self.rate / 2:
            raise InputError(
                f"sweep end {self.f_high:g} Hz is above the Nyquist frequency "
                f"{self.rate / 2:g} Hz (lower the stop frequency or raise the sample rate)"
            )
        if self.duration <= 0.05:
            raise InputError(f"sweep duration {self.duration:g} s is too short (more than 0.05 s)")
        if self.fade_in < 0 or self.fade_out < 0 or self.fade_in + self.fade_out > self.duration:
            raise InputError("fades must be non-negative and shorter than the sweep together")
        if self.silence_pre < 0 or self.silence_post < 0:
            raise InputError("silence before and after the sweep must be non-negative")
        if self.repeats < 1:
            raise InputError(f"the number of sweeps must be at least 1 (got {self.repeats})")
        if self.level_dbfs > 0:
            raise InputError(f"level {self.level_dbfs:g} dBFS is above full scale")

    # Derived sample counts ------------------------------------------------------------------
    @property
    def n_sweep(self) -> int:
        """Samples in one sweep, ``round(duration · rate)``."""
        return int(round(self.duration * self.rate))

    @property
    def n_pre(self) -> int:
        """Samples of silence before the first sweep."""
        return int(round(self.silence_pre * self.rate))

    @property
    def n_post(self) -> int:
        """Samples of silence after each sweep."""
        return int(round(self.silence_post * self.rate))

    @property
    def n_period(self) -> int:
        """Samples in one period (sweep plus the silence after it)."""
        return self.n_sweep + self.n_post

    @property
    def n_total(self) -> int:
        """Samples in the whole playback signal."""
        return self.n_pre + self.repeats * self.n_period

    @property
    def rate_constant(self) -> float:
        """L = T / ln(f2/f1), s: the sweep spends L·ln 2 seconds per octave.

        References
        ----------
        Farina, A. (2000), see :class:`Sweep`.

        Examples
        --------
        >>> round(float(Sweep(f_low=20.0, f_high=20000.0, duration=6.907755).rate_constant), 6)
        1.0
        """
        return self.duration / np.log(self.f_high / self.f_low)

    def to_dict(self) -> dict:
        """The sweep as a JSON-ready dict (the sidecar's content), with ``kind`` added.

        Returns
        -------
        dict
            ``{"kind": "exponential_sine_sweep", "rate": ..., ...}``; field names as in
            :class:`Sweep`.

        Examples
        --------
        >>> d = Sweep().to_dict()
        >>> d["kind"], d["rate"]
        ('exponential_sine_sweep', 48000)
        >>> Sweep.from_dict(d) == Sweep()
        True
        """
        return {"kind": "exponential_sine_sweep", **asdict(self)}

    @classmethod
    def from_dict(cls, d, source=None) -> Sweep:
        """Rebuild a sweep from its sidecar's content, checking every field's type and value.

        Parameters
        ----------
        d : dict
            The content written by :meth:`to_dict` (extra keys such as ``kind`` are ignored).
        source : str or Path, optional
            The sidecar's path, put in front of any refusal.

        Returns
        -------
        Sweep

        Raises
        ------
        InputError
            When ``d`` is not a dict, lacks a field, or holds a non-number or bad value.

        Examples
        --------
        >>> Sweep.from_dict({**Sweep().to_dict(), "duration": 3.0}).duration
        3.0
        """
        from .. import validate  # noqa: PLC0415

        where = f"{source}: " if source is not None else ""
        if not isinstance(d, dict):
            raise InputError(
                f"{where}the sweep description must be a JSON object with the "
                f"sweep's settings, not a {type(d).__name__} (write it again "
                "with 'roomconv sweep')"
            )
        names = {f.name for f in fields(cls)}
        missing = sorted(names - d.keys())
        if missing:
            raise InputError(
                f"{where}sweep description is incomplete: missing {', '.join(missing)}"
            )
        clean: dict[str, Any] = {}
        for k in names:
            v = d[k]
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                raise InputError(f"{where}field '{k}' must be a number, not {v!r}")
            try:
                clean[k] = (
                    validate.count(v, f"field '{k}'", 0)
                    if k in ("rate", "repeats")
                    else validate.finite(v, f"field '{k}'")
                )
            except InputError as exc:
                raise InputError(f"{where}{exc}") from None
        try:
            return cls(**clean)
        except InputError as exc:
            raise InputError(f"{where}{exc}") from None


def instantaneous_frequency(sweep: Sweep, t: np.ndarray) -> np.ndarray:
    """Instantaneous frequency of the sweep, f(t) = f1·exp(t/L), Hz.

    Parameters
    ----------
    sweep : Sweep
    t : ndarray or float
        Time from the sweep's start, s (0 ≤ t ≤ ``sweep.duration``).

    Returns
    -------
    ndarray
        Frequency, Hz, shaped like ``t``.

    References
    ----------
    Farina, A. (2000). Simultaneous measurement of impulse response and distortion with a
    swept-sine technique. 108th AES Convention, preprint 5093.

    Examples
    --------
    >>> s = Sweep(f_low=20.0, f_high=20000.0, duration=5.0)
    >>> float(instantaneous_frequency(s, 5.0))
    20000.0
    """
    return sweep.f_low * np.exp(np.asarray(t) / sweep.rate_constant)


def harmonic_delay(sweep: Sweep, order: int) -> float:
    """Time by which harmonic ``order`` precedes the linear response, Δt_k = L·ln k, s.

    Parameters
    ----------
    sweep : Sweep
    order : int
        Harmonic order k (1 is the linear response).

    Returns
    -------
    float
        Delay, s.

    References
    ----------
    Farina, A. (2000). Simultaneous measurement of impulse response and distortion with a
    swept-sine technique. 108th AES Convention, preprint 5093.

    Examples
    --------
    >>> s = Sweep(f_low=20.0, f_high=20000.0, duration=10.0)
    >>> round(float(harmonic_delay(s, 2)), 4)  # 10 · ln 2 / ln 1000
    1.0034
    """
    if order < 1:
        raise ValueError("harmonic order starts at 1")
    return sweep.rate_constant * np.log(order)


def sweep_only(sweep: Sweep) -> np.ndarray:
    """One sweep without silences, at the requested level, with half-Hann fades.

    x(t) = A·sin(2π f1 L (exp(t/L) − 1)), A = 10^(level_dbfs/20).

    Parameters
    ----------
    sweep : Sweep

    Returns
    -------
    ndarray, shape (sweep.n_sweep,)
        Samples, float64, full scale = 1.

    References
    ----------
    Farina, A. (2000). Simultaneous measurement of impulse response and distortion with a
    swept-sine technique. 108th AES Convention, preprint 5093.

    Examples
    --------
    >>> x = sweep_only(Sweep(duration=1.0, level_dbfs=-6.0))
    >>> x.shape, round(float(20 * np.log10(np.max(np.abs(x)))), 2)
    ((48000,), -6.0)
    """
    n = sweep.n_sweep
    t = np.arange(n) / sweep.rate
    L = sweep.rate_constant
    x = np.sin(2 * np.pi * sweep.f_low * L * np.expm1(t / L))
    x *= _fade_window(
        n, int(round(sweep.fade_in * sweep.rate)), int(round(sweep.fade_out * sweep.rate))
    )
    return x * db_to_gain(sweep.level_dbfs)


def _fade_window(n: int, n_in: int, n_out: int) -> np.ndarray:
    w = np.ones(n)
    w[:n_in] = raised_cosine(n_in)
    if n_out > 0:
        w[n - n_out :] = raised_cosine(n_out, rising=False)
    return w


def sweep_signal(sweep: Sweep) -> np.ndarray:
    """The whole playback signal: silence, then ``repeats`` × (sweep + silence).

    Parameters
    ----------
    sweep : Sweep

    Returns
    -------
    ndarray, shape (sweep.n_total,)
        Samples, float64.

    Examples
    --------
    >>> s = Sweep(duration=1.0, silence_pre=0.25, silence_post=0.5, repeats=2)
    >>> x = sweep_signal(s)
    >>> x.size == s.n_total, bool(np.all(x[: s.n_pre] == 0))
    (True, True)
    """
    one = sweep_only(sweep)
    out = np.zeros(sweep.n_total)
    for r in range(sweep.repeats):
        start = sweep.n_pre + r * sweep.n_period
        out[start : start + sweep.n_sweep] = one
    return out


def inverse_filter(sweep: Sweep) -> np.ndarray:
    """Analytic inverse of one sweep: time-reversed, with a −6 dB/octave envelope.

    The envelope exp(−t/L) (applied to the reversed sweep) compensates the sweep's pink
    spectrum; the result is scaled so that ``sweep_only(s) ⊛ inverse_filter(s)`` has unit gain
    across the swept band, i.e. it is a band-limited unit impulse at sample ``n_sweep − 1``.

    Parameters
    ----------
    sweep : Sweep

    Returns
    -------
    ndarray, shape (sweep.n_sweep,)
        The inverse filter, float64.

    References
    ----------
    Farina, A. (2000). Simultaneous measurement of impulse response and distortion with a
    swept-sine technique. 108th AES Convention, preprint 5093.

    Examples
    --------
    >>> s = Sweep(duration=1.0)
    >>> from scipy.signal import fftconvolve
    >>> y = fftconvolve(sweep_only(s), inverse_filter(s))
    >>> int(np.argmax(np.abs(y))) == s.n_sweep - 1
    True
    """
    x = sweep_only(sweep)
    n = x.size
    t = np.arange(n) / sweep.rate
    inv = x[::-1] * np.exp(-t / sweep.rate_constant)
    # Normalize on the flat middle of the band (one octave in from each end).
    nfft = 1 << int(np.ceil(np.log2(2 * n)))
    spec = np.fft.rfft(x, nfft) * np.fft.rfft(inv, nfft)
    f = np.fft.rfftfreq(nfft, 1.0 / sweep.rate)
    lo, hi = sweep.f_low * 2, sweep.f_high / 2
    band = (f >= lo) & (f <= hi)
    if not np.any(band):
        band = (f >= sweep.f_low) & (f <= sweep.f_high)
    gain = np.median(np.abs(spec[band]))
    return inv / gain
