"""The exponential sine sweep and its analytic inverse filter.

A :class:`Sweep` is a frozen description; :func:`sweep_signal` and :func:`inverse_filter`
turn it into samples.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, fields

import numpy as np

from ..errors import InputError
from ..signal import cosine_step


@dataclass(frozen=True)
class Sweep:
    """Parameters of an exponential sine sweep as played back.

    The playback file is ``silence_pre`` seconds of silence, then ``repeats`` periods each made
    of the sweep (``duration`` seconds) followed by ``silence_post`` seconds of silence.
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
        if self.rate < 8000:
            raise InputError(f"sample rate {self.rate} Hz is too low (at least 8000 Hz)")
        if not (0 < self.f_low < self.f_high):
            raise InputError(f"sweep band {self.f_low:g}-{self.f_high:g} Hz is not increasing "
                             "and positive (set the start below the stop frequency)")
        if self.f_high > self.rate / 2:
            raise InputError(f"sweep end {self.f_high:g} Hz is above the Nyquist frequency "
                             f"{self.rate / 2:g} Hz (lower the stop frequency or raise the "
                             "sample rate)")
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
        return int(round(self.duration * self.rate))

    @property
    def n_pre(self) -> int:
        return int(round(self.silence_pre * self.rate))

    @property
    def n_post(self) -> int:
        return int(round(self.silence_post * self.rate))

    @property
    def n_period(self) -> int:
        return self.n_sweep + self.n_post

    @property
    def n_total(self) -> int:
        return self.n_pre + self.repeats * self.n_period

    @property
    def rate_constant(self) -> float:
        """L = T / ln(f2/f1), seconds: the sweep spends L·ln 2 seconds per octave."""
        return self.duration / np.log(self.f_high / self.f_low)

    def to_dict(self) -> dict:
        return {"kind": "exponential_sine_sweep", **asdict(self)}

    @classmethod
    def from_dict(cls, d, source=None) -> "Sweep":
        """Rebuild a sweep from its sidecar's content, checking every field's type and value.

        ``source`` (the sidecar's path) is put in front of any refusal.
        """
        from .. import validate  # noqa: PLC0415
        where = f"{source}: " if source is not None else ""
        if not isinstance(d, dict):
            raise InputError(f"{where}the sweep description must be a JSON object with the "
                             f"sweep's settings, not a {type(d).__name__} (write it again "
                             "with 'roomconv sweep')")
        names = {f.name for f in fields(cls)}
        missing = sorted(names - d.keys())
        if missing:
            raise InputError(f"{where}sweep description is incomplete: missing "
                             f"{', '.join(missing)}")
        clean = {}
        for k in names:
            v = d[k]
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                raise InputError(f"{where}field '{k}' must be a number, not {v!r}")
            try:
                clean[k] = (validate.count(v, f"field '{k}'", 0) if k in ("rate", "repeats")
                            else validate.finite(v, f"field '{k}'"))
            except InputError as exc:
                raise InputError(f"{where}{exc}") from None
        try:
            return cls(**clean)
        except InputError as exc:
            raise InputError(f"{where}{exc}") from None


def instantaneous_frequency(sweep: Sweep, t: np.ndarray) -> np.ndarray:
    """f(t) = f1·exp(t/L) for 0 ≤ t ≤ T (Farina 2000, eq. for the exponential sweep).

    References
    ----------
    Farina, A. (2000). Simultaneous measurement of impulse response and distortion with a
    swept-sine technique. 108th AES Convention, preprint 5093.
    """
    return sweep.f_low * np.exp(np.asarray(t) / sweep.rate_constant)


def harmonic_delay(sweep: Sweep, order: int) -> float:
    """Time by which harmonic ``order`` precedes the linear response: Δt_k = L·ln k.

    References
    ----------
    Farina, A. (2000), see :func:`instantaneous_frequency`.
    """
    if order < 1:
        raise ValueError("harmonic order starts at 1")
    return sweep.rate_constant * np.log(order)


def sweep_only(sweep: Sweep) -> np.ndarray:
    """One sweep without silences, at the requested level, with half-Hann fades.

    x(t) = A·sin(2π f1 L (exp(t/L) − 1)).

    References
    ----------
    Farina, A. (2000). Simultaneous measurement of impulse response and distortion with a
    swept-sine technique. 108th AES Convention, preprint 5093.
    """
    n = sweep.n_sweep
    t = np.arange(n) / sweep.rate
    L = sweep.rate_constant
    x = np.sin(2 * np.pi * sweep.f_low * L * np.expm1(t / L))
    x *= _fade_window(n, int(round(sweep.fade_in * sweep.rate)),
                      int(round(sweep.fade_out * sweep.rate)))
    return x * 10.0 ** (sweep.level_dbfs / 20.0)


def _fade_window(n: int, n_in: int, n_out: int) -> np.ndarray:
    w = np.ones(n)
    if n_in > 0:
        w[:n_in] = cosine_step(np.arange(n_in) / n_in)
    if n_out > 0:
        w[n - n_out:] = cosine_step(1.0 - (np.arange(n_out) + 1) / n_out)
    return w


def sweep_signal(sweep: Sweep) -> np.ndarray:
    """The whole playback signal: silence, then ``repeats`` × (sweep + silence). 1-D."""
    one = sweep_only(sweep)
    out = np.zeros(sweep.n_total)
    for r in range(sweep.repeats):
        start = sweep.n_pre + r * sweep.n_period
        out[start:start + sweep.n_sweep] = one
    return out


def inverse_filter(sweep: Sweep) -> np.ndarray:
    """Analytic inverse of one sweep: time-reversed, with a −6 dB/octave envelope.

    The envelope exp(−t/L) (applied to the reversed sweep) compensates the sweep's pink
    spectrum; the result is scaled so that ``sweep_only(s) ⊛ inverse_filter(s)`` has unit gain
    across the swept band, i.e. it is a band-limited unit impulse at sample ``n_sweep − 1``.

    References
    ----------
    Farina, A. (2000). Simultaneous measurement of impulse response and distortion with a
    swept-sine technique. 108th AES Convention, preprint 5093.
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
