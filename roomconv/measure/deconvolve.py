"""From a recorded sweep to impulse responses: linear IR, harmonic IRs, repeats averaged.

Alignment contract: sample 0 of every extracted IR is zero lag between playback (or, with a
reference channel, the loopback) and the microphone. A pure delay of d samples gives a peak at d.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import fft as sfft
from scipy.signal import fftconvolve

from ..errors import InputError
from ..signal import cosine_step, raised_cosine
from . import quality as q
from .sweep import Sweep, harmonic_delay, inverse_filter

__all__ = [
    "HARMONIC_ORDERS",
    "Extraction",
    "extract_ir",
]

HARMONIC_ORDERS = (2, 3, 4, 5)


@dataclass
class Extraction:
    """Result of :func:`extract_ir`.

    Attributes
    ----------
    ir : ndarray, shape (samples, channels)
        The linear impulse response of each microphone channel, float64; sample 0 is zero lag.
    rate : int
        Sample rate, Hz.
    harmonics : dict of int to ndarray
        Harmonic order k (2–5) to its impulse response (samples × channels), when separated.
    quality : dict
        Recording and response figures (peak and noise floor in dBFS, INR in dB, latency in
        samples, warnings); JSON-ready.
    trimmed_samples : int
        Leading samples cut by ``trim=True``.
    method : str
        ``"analytic_inverse"`` (from a sweep description) or ``"regularized_division"``.

    Examples
    --------
    >>> from roomconv.measure.sweep import Sweep, sweep_signal
    >>> s = Sweep(duration=0.5, silence_pre=0.1, silence_post=0.3)
    >>> ex = extract_ir(sweep_signal(s), s.rate, sweep=s, harmonics=False)
    >>> ex.ir.shape, ex.method
    ((14400, 1), 'analytic_inverse')
    """

    ir: np.ndarray
    rate: int
    harmonics: dict[int, np.ndarray] = field(default_factory=dict)
    quality: dict = field(default_factory=dict)
    trimmed_samples: int = 0
    method: str = "analytic_inverse"


def extract_ir(
    recording: np.ndarray,
    rate: int,
    *,
    sweep: Sweep | None = None,
    excitation: np.ndarray | None = None,
    reference_channel: int | None = None,
    length_s: float | None = None,
    harmonics: bool = True,
    trim: bool = False,
    allow_clipped: bool = False,
    band_hz: tuple[float, float] | None = None,
) -> Extraction:
    """Deconvolve a sweep recording into impulse responses.

    Parameters
    ----------
    recording : ndarray, shape (samples,) or (samples, channels)
        What the microphone(s) (and optionally the loopback) recorded, started together with
        playback.
    rate : int
        Sample rate of ``recording``, Hz; must equal the sweep's.
    sweep : Sweep, optional
        The sweep description (from its sidecar). Enables the analytic inverse filter, repeats
        and harmonic separation.
    excitation : ndarray, optional
        The played signal when no description is known; deconvolved by regularized spectral
        division (Müller & Massarani 2001). Exactly one of ``sweep``/``excitation`` is needed.
    reference_channel : int, optional
        0-based index of a loopback channel; the microphone IRs are divided by its response so that
        the sound card's latency and response cancel.
    length_s : float, optional
        Length of the returned IR, s. Defaults to the silence after the sweep (or 2 s).
    harmonics : bool
        Separate harmonic orders 2–5 (needs ``sweep``).
    trim : bool
        Cut leading samples before the onset (ISO 3382-1 rule, 20 dB below peak) minus 1 ms.
    allow_clipped : bool
        Accept a recording with clipped samples (they are still reported).
    band_hz : (float, float), optional
        Band for spectral division, Hz; default from the sweep or estimated from the excitation.

    Returns
    -------
    Extraction
        The responses, harmonic responses and quality figures.

    Raises
    ------
    InputError
        For a silent, clipped (unless allowed), too short or non-finite recording, a
        reference channel that does not exist, or a rate that differs from the sweep's.

    References
    ----------
    Farina, A. (2000). Simultaneous measurement of impulse response and distortion with a
    swept-sine technique. 108th AES Convention, preprint 5093.
    Müller, S., Massarani, P. (2001). Transfer-function measurement with sweeps. J. Audio
    Eng. Soc. 49(6), 443–471.

    Examples
    --------
    A pure delay of 100 samples comes back as a peak at sample 100:

    >>> from roomconv.measure.sweep import Sweep, sweep_signal
    >>> s = Sweep(duration=0.5, silence_pre=0.1, silence_post=0.3)
    >>> rec = np.concatenate([np.zeros(100), sweep_signal(s)])
    >>> ex = extract_ir(rec, s.rate, sweep=s, length_s=0.1)
    >>> int(np.argmax(np.abs(ex.ir[:, 0])))
    100
    >>> sorted(ex.harmonics)
    [2, 3, 4, 5]
    """
    y = np.asarray(recording, dtype=np.float64)
    if y.ndim == 1:
        y = y[:, None]
    mic_channels = _microphone_channels(y, rate, sweep, excitation, reference_channel)
    _check_recording(y, rate, sweep, excitation, allow_clipped)
    quality: dict = {"recording": _recording_quality(y, sweep, mic_channels, reference_channel)}
    warnings: list[str] = []

    raw, zeros, method, (f_lo, f_hi), default_len = _deconvolve(y, rate, sweep, excitation, band_hz)
    n_out = int(round((length_s if length_s is not None else default_len) * rate))
    if n_out < 1:
        raise InputError(f"IR length {length_s} s is too short")
    n_out, len_warn = _limit_length(n_out, raw.shape[0], zeros, sweep, rate)
    if len_warn:
        warnings.append(len_warn)

    ir_all, segments, latency = _linear_responses(
        raw, zeros, n_out, mic_channels, reference_channel, sweep, rate, (f_lo, f_hi)
    )
    if reference_channel is not None:
        quality["reference_latency_samples"] = int(latency)
    if sweep is not None and sweep.repeats > 1:
        quality["repeats"] = _repeat_figures(segments, rate)

    harm: dict[int, np.ndarray] = {}
    if harmonics and sweep is not None:
        harm, h_warn = _harmonic_irs(
            raw, zeros, sweep, rate, mic_channels, latency, reference_channel, n_out
        )
        warnings += h_warn

    trimmed = 0
    if trim:
        trimmed = _onset_trim_point(ir_all, rate)
        ir_all = ir_all[trimmed:]
        harm = {k: v[trimmed:] for k, v in harm.items()}

    quality["ir"] = _ir_quality(ir_all, rate, warnings)
    quality["method"] = method
    quality["band_hz"] = [float(f_lo), float(f_hi)]
    quality["trimmed_samples"] = int(trimmed)
    quality["warnings"] = quality["recording"].pop("warnings") + warnings
    return Extraction(
        ir=ir_all,
        rate=rate,
        harmonics=harm,
        quality=quality,
        trimmed_samples=trimmed,
        method=method,
    )


# --- steps ---------------------------------------------------------------------------------
def _microphone_channels(
    y: np.ndarray,
    rate: int,
    sweep: Sweep | None,
    excitation: np.ndarray | None,
    reference_channel: int | None,
) -> list[int]:
    """The recording's microphone channels (0-based): every channel but the reference.

    Refuses a reference channel that does not exist, a recording with no microphone left,
    and a rate that differs from the sweep's.
    """
    if (sweep is None) == (excitation is None):
        raise ValueError("give exactly one of sweep or excitation")
    n_ch = y.shape[1]
    if reference_channel is not None and not (0 <= reference_channel < n_ch):
        raise InputError(
            f"reference channel {reference_channel} does not exist: the recording "
            f"has {n_ch} channel(s), numbered 0..{n_ch - 1}"
        )
    mic_channels = [c for c in range(n_ch) if c != reference_channel]
    if not mic_channels:
        raise InputError("the recording holds only the reference channel; no microphone left")
    if sweep is not None and sweep.rate != rate:
        raise InputError(
            f"the recording is at {rate} Hz but the sweep at {sweep.rate} Hz "
            "(record at the sweep's rate)"
        )
    return mic_channels


def _deconvolve(
    y: np.ndarray,
    rate: int,
    sweep: Sweep | None,
    excitation: np.ndarray | None,
    band: tuple[float, float] | None,
) -> tuple[np.ndarray, list[int], str, tuple[float, float], float]:
    """Deconvolve every channel: the analytic inverse filter of a described sweep (Farina
    2000), else regularized spectral division by the played signal (Müller & Massarani 2001).

    Returns the deconvolved channels (samples × channels), the zero-lag index of each repeat,
    the method's name, the band (Hz) and the default response length (s).
    """
    if sweep is not None:
        default_len = sweep.silence_post if sweep.silence_post >= 0.1 else 2.0
        return (
            _analytic(y, sweep),
            _zero_indices(sweep),
            "analytic_inverse",
            (sweep.f_low, sweep.f_high),
            default_len,
        )
    exc = np.asarray(excitation, dtype=np.float64).reshape(-1)
    f_lo, f_hi = band or _estimate_band(exc, rate)
    raw, z = _spectral_division(y, exc, rate, (f_lo, f_hi))
    return raw, [z], "regularized_division", (f_lo, f_hi), 2.0


def _linear_responses(
    raw: np.ndarray,
    zeros: list[int],
    n_out: int,
    mic_channels: list[int],
    reference_channel: int | None,
    sweep: Sweep | None,
    rate: int,
    band: tuple[float, float],
) -> tuple[np.ndarray, np.ndarray, int]:
    """Cut each repeat's linear response and average the repeats; with a loopback channel,
    divide the microphones by it so that the sound card's latency and response cancel.

    Returns the averaged responses (samples × microphones), the single repeats
    (repeats × samples × microphones) and the loopback's latency in samples (0 without one).
    """
    segments = np.stack([raw[z : z + n_out] for z in zeros])  # repeats × samples × channels
    if reference_channel is None:
        segments = segments[:, :, mic_channels]
        return segments.mean(axis=0), segments, 0
    # Divide with some negative time kept in both windows: the deconvolved responses ring
    # before lag 0 (band edges), and cutting mic and loopback differently would not cancel.
    pre = _reference_lead(zeros[0], sweep, rate)
    ext = np.mean([raw[z - pre : z + n_out] for z in zeros], axis=0)
    ir_all, latency = _divide_by_reference(
        ext, mic_channels, reference_channel, rate, band, n_out, pre
    )
    segments = np.stack([_shift(s[:, mic_channels], latency, n_out) for s in segments])
    return ir_all, segments, latency


# --- checks --------------------------------------------------------------------------------
def _check_recording(y, rate, sweep, excitation, allow_clipped):
    if not np.all(np.isfinite(y)):
        raise InputError("the recording holds NaN or infinite samples")
    peak = np.max(np.abs(y), axis=0)
    # 1e-9 is −180 dBFS, below any converter's noise: only digital silence is this quiet.
    if np.any(peak < 1e-9):
        silent = [int(c) for c in np.flatnonzero(peak < 1e-9)]
        raise InputError(
            f"the recording is silent on channel(s) {silent} "
            "(check the microphone, the input channel and the gain)"
        )
    need = (
        sweep.n_pre + (sweep.repeats - 1) * sweep.n_period + sweep.n_sweep
        if sweep is not None
        else np.asarray(excitation).reshape(-1).size
    )
    if y.shape[0] < need:
        raise InputError(
            f"the recording ({y.shape[0] / rate:.2f} s) is shorter than the sweep "
            f"it should contain ({need / rate:.2f} s); record for longer"
        )
    clipped = q.clipped_samples(y)
    if clipped.sum() and not allow_clipped:
        chans = [int(c) + 1 for c in np.flatnonzero(clipped)]  # counted from 1
        raise InputError(
            f"the recording is clipped on channel(s) {chans} "
            f"({int(clipped.sum())} samples at full scale); lower the input gain "
            "or the sweep level and measure again (or accept a clipped "
            "recording explicitly)"
        )


def _recording_quality(y, sweep, mics, ref) -> dict:
    pk = q.peak_dbfs(y)
    clipped = q.clipped_samples(y)
    out = {
        "peak_dbfs": pk.tolist(),
        "clipped_samples": clipped.tolist(),
        "noise_floor_dbfs": None,
        "warnings": [],
    }
    if sweep is not None and sweep.n_pre >= int(0.05 * sweep.rate):
        # Leading silence, minus a 20 % margin for the system's latency (common practice).
        head = y[: int(sweep.n_pre * 0.8)]
        out["noise_floor_dbfs"] = q.rms_dbfs(head).tolist()
    for c in mics:
        # Within 1 dB of full scale risks clipping; below −40 dBFS wastes converter range
        # (both common practice, not from a standard).
        if pk[c] > -1.0:
            out["warnings"].append(
                f"channel {c}: recording peak {pk[c]:.1f} dBFS is within 1 dB "
                "of full scale; lower the input gain"
            )
        elif pk[c] < -40.0:
            out["warnings"].append(
                f"channel {c}: recording peak {pk[c]:.1f} dBFS is low; raise "
                "the input gain or the level for a better signal-to-noise ratio"
            )
        if clipped[c]:
            out["warnings"].append(f"channel {c}: {clipped[c]} clipped samples")
    return out


# --- deconvolution -------------------------------------------------------------------------
def _analytic(y: np.ndarray, sweep: Sweep) -> np.ndarray:
    inv = inverse_filter(sweep)
    return fftconvolve(y, inv[:, None], axes=0)


def _zero_indices(sweep: Sweep) -> list[int]:
    """Index of zero lag in the analytic result, for each repeat."""
    return [sweep.n_pre + r * sweep.n_period + sweep.n_sweep - 1 for r in range(sweep.repeats)]


def _band_weights(
    f: np.ndarray, band: tuple[float, float], rate: int, transition_oct: float = 1 / 3
) -> np.ndarray:
    """1 across ``band``, 0 well outside it, raised-cosine transitions *outside* the band.

    The upper transition runs from f2 up to f2·2^transition_oct (or to Nyquist, whichever
    comes first; none if f2 is Nyquist), the lower one from f1·2^−transition_oct up to f1, on
    a log-frequency axis. Keeping both transitions outside [f1, f2] is what keeps a divided
    response flat up to the swept band's edges: a transition inside the band would weigh the
    regularization in where the sweep still carries full energy.
    """
    lo, hi = band
    nyq = rate / 2.0
    with np.errstate(divide="ignore"):
        lf = np.log2(np.maximum(f, 1e-12))
    w = np.ones_like(f)
    # Below f1: rises from 0 at f1/2^t to 1 at f1.
    x_lo = np.clip((lf - (np.log2(lo) - transition_oct)) / transition_oct, 0.0, 1.0)
    w *= cosine_step(x_lo)
    top = min(hi * 2.0**transition_oct, nyq)
    if top > hi * (1 + 1e-9):
        # Above f2: falls from 1 at f2 to 0 at ``top`` (Nyquist at the latest).
        x_hi = np.clip((np.log2(top) - lf) / (np.log2(top) - np.log2(hi)), 0.0, 1.0)
        w *= cosine_step(x_hi)
    return w


def _regularized_inverse(P: np.ndarray, f: np.ndarray, band, rate: int) -> np.ndarray:
    """conj(P) / (|P|² + ε(f)) with ε small in band and large outside (Kirkeby-style).

    ε is 10⁻⁸ of the spectrum's peak power across the band (it only keeps the division
    finite) and rises to the peak power itself outside, with the transitions of
    :func:`_band_weights` lying outside the band.

    References
    ----------
    Kirkeby, O., Nelson, P. A. (1999). Digital filter design for inversion problems in sound
    reproduction. J. Audio Eng. Soc. 47(7/8), 583–595.
    """
    p2 = np.abs(P) ** 2
    top = p2.max()
    w = _band_weights(f, band, rate)
    # 1e-8 (−80 dB re the peak power) only keeps the division finite in band; 1.0 outside
    # leaves at most unit gain where the excitation carries nothing (common practice).
    eps = top * (1e-8 * w + 1.0 * (1 - w))
    return np.conj(P) / (p2 + eps)


def _spectral_division(y, exc, rate, band) -> tuple[np.ndarray, int]:
    nfft = sfft.next_fast_len(y.shape[0] + exc.size)
    P = sfft.rfft(exc, nfft)
    f = sfft.rfftfreq(nfft, 1.0 / rate)
    Hinv = _regularized_inverse(P, f, band, rate)
    h = sfft.irfft(sfft.rfft(y, nfft, axis=0) * Hinv[:, None], nfft, axis=0)
    # Keep a stretch of negative time in front so that sample index z is zero lag.
    z = min(nfft // 4, int(rate))
    return np.roll(h, z, axis=0), z


def _estimate_band(exc: np.ndarray, rate: int) -> tuple[float, float]:
    """Where the excitation carries energy: within 40 dB of its smoothed spectral peak."""
    nfft = sfft.next_fast_len(exc.size)
    p = np.abs(sfft.rfft(exc, nfft)) ** 2
    f = sfft.rfftfreq(nfft, 1.0 / rate)
    k = max(1, p.size // 512)
    sm = np.convolve(p, np.ones(k) / k, mode="same")
    # Within 40 dB of the peak (1e-4 in power): common practice for a usable band.
    live = np.flatnonzero(sm >= sm.max() * 1e-4)
    lo, hi = max(f[live[0]], 1.0), min(f[live[-1]], rate / 2 * 0.999)
    if not hi > lo * 1.5:
        raise InputError("the sweep file does not look like a broadband excitation")
    return float(lo), float(hi)


def _limit_length(n_out, n_raw, zeros, sweep, rate):
    warn = None
    avail = n_raw - zeros[-1]
    if sweep is not None and sweep.repeats > 1:
        # The next repeat's highest harmonic arrives at n_period - D_5 after this zero lag.
        clean = sweep.n_period - int(round(harmonic_delay(sweep, max(HARMONIC_ORDERS)) * rate))
        avail = min(avail, clean)
    if n_out > avail:
        warn = (
            f"IR length cut to {avail / rate:.2f} s: the recording or the gap between "
            "repeated sweeps holds no more (use a longer silence after the sweep)"
        )
        n_out = avail
    return n_out, warn


def _shift(x: np.ndarray, d: int, n: int) -> np.ndarray:
    """Advance ``x`` by ``d`` samples, zero-padding the end, keeping ``n`` samples."""
    out = np.zeros((n,) + x.shape[1:])
    seg = x[d : d + n]
    out[: seg.shape[0]] = seg
    return out


def _reference_lead(z0: int, sweep, rate: int) -> int:
    """Negative time kept for the loopback division: clear of harmonic 2, at most 0.2 s."""
    # 0.2 s covers the band-edge ringing of any sweep down to 20 Hz (common practice).
    lead = int(0.2 * rate)
    if sweep is not None:
        lead = min(lead, int(0.5 * harmonic_delay(sweep, 2) * rate))
    return max(0, min(lead, z0))


def _divide_by_reference(ext, mics, ref, rate, band, n_out, pre):
    """Divide each microphone IR by the loopback IR (regularized, band-limited).

    ``ext`` holds both from ``pre`` samples before zero lag; the common offset cancels in the
    ratio, so the quotient's sample 0 is zero lag relative to the loopback.
    """
    h_ref = ext[:, ref]
    latency = int(np.argmax(np.abs(h_ref))) - pre
    nfft = sfft.next_fast_len(2 * ext.shape[0])
    f = sfft.rfftfreq(nfft, 1.0 / rate)
    R = sfft.rfft(h_ref, nfft)
    Rinv = _regularized_inverse(R, f, band, rate)
    H = sfft.rfft(ext[:, mics], nfft, axis=0) * Rinv[:, None]
    h = sfft.irfft(H, nfft, axis=0)[:n_out]
    return h, max(latency, 0)


def _harmonic_irs(raw, zeros, sweep, rate, mics, latency, ref, n_out):
    """Window harmonic orders 2..5 out of the negative-time part (averaged over repeats)."""
    delays = {k: int(round(harmonic_delay(sweep, k) * rate)) for k in HARMONIC_ORDERS}
    out, warnings = {}, []
    prev = 0
    for k in HARMONIC_ORDERS:
        d = delays[k]
        gap = d - prev  # room before the next-lower order's own zero lag
        prev = d
        # Keep 5 % of the gap free before the next-lower order, and refuse windows shorter
        # than 5 ms (a response that short says nothing): both common practice.
        n_k = min(n_out, gap - max(1, gap // 20))
        if n_k < int(0.005 * rate):
            warnings.append(
                f"harmonic {k} lies too close to harmonic {k - 1} to be separated "
                "(use a longer or wider sweep)"
            )
            continue
        segs = []
        for z in zeros:
            start = z - d + latency
            if start < 0:
                break
            segs.append(raw[start : start + n_k])
        if len(segs) < len(zeros):
            warnings.append(
                f"harmonic {k} falls before the recording starts (add silence before the sweep)"
            )
            continue
        h = np.mean(segs, axis=0)[:, mics]
        if ref is not None:
            # Scale by the loopback gain so harmonic levels are relative to the same reference.
            g = np.max(np.abs(np.mean([raw[z : z + n_out, ref] for z in zeros], axis=0)))
            h = h / g
        # A raised-cosine fade over the window's last tenth (common practice) keeps the cut
        # from adding a click to the harmonic's spectrum.
        fade = max(1, n_k // 10)
        h[-fade:] *= raised_cosine(fade, rising=False)[:, None]
        out[k] = h
    d2 = delays[2] / rate
    warnings.append(
        f"harmonic 2 arrives {d2:.2f} s before the linear response; reverberation "
        "longer than that mixes distortion into the linear IR"
    ) if d2 < 0.5 else None
    return out, [w for w in warnings if w]


def _repeat_figures(segments: np.ndarray, rate: int) -> dict:
    """Signal-to-noise gain of synchronous averaging and a time-variance figure.

    The noise is read from the last 10 % of each response; the time variance is the energy
    of each repeat's deviation from the mean over the first 100 ms after the peak, relative
    to the mean's energy there, averaged over repeats (dB).
    """
    n_rep = segments.shape[0]
    mean = segments.mean(axis=0)
    tail = slice(int(0.9 * segments.shape[1]), None)
    single_noise = np.mean(np.square(segments[:, tail]))
    mean_noise = np.mean(np.square(mean[tail]))
    gain = 10 * np.log10(single_noise / mean_noise) if mean_noise > 0 else float("inf")
    pk = int(np.argmax(np.sum(np.square(mean), axis=1)))
    win = slice(pk, pk + int(0.1 * rate))
    dev = np.mean([np.sum(np.square(s[win] - mean[win])) for s in segments])
    ref = np.sum(np.square(mean[win]))
    variance_db = 10 * np.log10(dev / ref) if dev > 0 and ref > 0 else float("-inf")
    return {
        "count": int(n_rep),
        "snr_gain_db": float(gain),
        "expected_snr_gain_db": float(10 * np.log10(n_rep)),
        "repeat_mismatch_db": float(variance_db),
    }


def _onset_trim_point(ir: np.ndarray, rate: int) -> int:
    """First sample 20 dB below the peak (ISO 3382-1:2009, A.3.2 — from memory), less 1 ms."""
    e = np.sum(np.square(ir), axis=1)
    first = int(np.flatnonzero(e >= e.max() * 0.01)[0])
    return max(0, first - int(0.001 * rate))


def _ir_quality(ir: np.ndarray, rate: int, warnings: list[str]) -> dict:
    inrs, floors = [], []
    for c in range(ir.shape[1]):
        inr, floor = q.envelope_inr(ir[:, c], rate)
        inrs.append(inr)
        floors.append(floor)
        warnings += q.inr_warnings(inr, f"IR channel {c}")
    return {
        "inr_db": inrs,
        "noise_floor_db_re_peak": floors,
        "peak_sample": [int(np.argmax(np.abs(ir[:, c]))) for c in range(ir.shape[1])],
    }
