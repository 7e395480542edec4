"""Harmonic distortion of the measuring chain, read from an exponential-sweep measurement.

An exponential sweep's k-th harmonic deconvolves into its own response, Δt_k = L·ln k ahead
of the linear one (:func:`~roomconv.measure.sweep.harmonic_delay`); the extraction cuts them
out. Because the k-th harmonic of a sweep is the same sweep advanced in time, its
deconvolved spectrum at output frequency k·f is the harmonic's amplitude relative to the
fundamental at input frequency f. This module turns those responses into one level per
order relative to the linear response, with a noise reference beside each, so that an order
hidden in the measurement noise reads as a bound ("below the noise floor, < X dB") and never
as a number.

Everything here takes and returns arrays and plain dicts; nothing is printed.
"""

from __future__ import annotations

import functools

import numpy as np

__all__ = ["harmonic_levels", "ideal_responses", "NOISE_MARGIN_DB", "describe_levels"]

#: A harmonic whose window holds less than this much more than the noise alone is reported
#: as below the noise floor (common practice: 3 dB, where noise and signal are equal).
NOISE_MARGIN_DB = 3.0
#: Width of the bands the spectra are averaged in, octaves (our choice): equal weight per
#: sixth of an octave, as a room's or a loudspeaker's response is judged.
_BAND_OCT = 1.0 / 6.0
#: Kept clear of the sweep's top, octaves (our choice): the sweep's fade-out makes the
#: deconvolved response unreliable within half an octave of its end frequency.
_EDGE_OCT = 0.5
#: Kept clear of the sweep's start, octaves (our choice, from this module's test chain):
#: the linear response rings ahead of its zero lag at the sweep's lowest frequencies, far
#: enough to reach back into the harmonic windows. For a delay-only chain and a 2 s sweep
#: from 20 Hz that ringing reads as a 2nd harmonic of −48 dB over fundamentals from half an
#: octave above the start, −60 dB from one octave, −79 dB from two octaves.
_LOW_EDGE_OCT = 2.0
#: Shortest noise window, samples (our choice): fewer and the noise spectrum is too ragged.
_MIN_NOISE = 1024
_NOT_COVERED = {
    "level_db": None,
    "floor_db": None,
    "noise_db": None,
    "method_floor_db": None,
    "below_floor": False,
}


def _psd(x: np.ndarray, nfft: int) -> np.ndarray:
    # Power per bin normalized by the window length: a stationary noise reads the same
    # whatever the window's length, an impulse response reads |H|²/n.
    return np.abs(np.fft.rfft(x, nfft)) ** 2 / max(1, x.size)


def _band_sums(psd: np.ndarray, freqs: np.ndarray, centres: np.ndarray, k: int) -> np.ndarray:
    """Mean of ``psd`` over the band k·[fc·2^(−1/12), fc·2^(1/12)] for each centre (nan where
    the band holds no bin)."""
    half = 2 ** (_BAND_OCT / 2)
    out = np.full(centres.size, np.nan)
    for i, fc in enumerate(centres):
        sel = (freqs >= k * fc / half) & (freqs < k * fc * half)
        if np.any(sel):
            out[i] = float(np.mean(psd[sel]))
    return out


def harmonic_levels(
    ir: np.ndarray,
    harmonics: dict,
    rate: int,
    band: tuple[float, float],
    *,
    margin_db: float = NOISE_MARGIN_DB,
    ideal: tuple | None = None,
) -> list[dict]:
    """Level of each harmonic order relative to the linear response, with a noise reference.

    For order k the harmonic response's power spectrum at k·f is set against the linear
    response's at f (both over the harmonic's window length, from their zero lags), averaged
    in sixth-octave bands of f from two octaves above the sweep's start to half an octave
    below f_high / k (or the Nyquist frequency / k). The noise reference is the power
    spectrum of the last quarter of the linear response, where the response has decayed
    into the noise (the same part from which the impulse-to-noise ratio is read; common
    practice), taken at the same output frequencies k·f. An order whose window holds less
    than ``margin_db`` above that noise is reported as below the noise floor, with the noise
    level as its bound; otherwise the floor's expected share is subtracted. With ``ideal``
    the floor also holds the method's own leak (below).

    Parameters
    ----------
    ir : ndarray, shape (samples,) or (samples, channels)
        The linear impulse response, starting at its zero lag.
    harmonics : dict
        {k: ndarray (samples_k,) or (samples_k, channels)}, the harmonic responses from
        :func:`~roomconv.measure.deconvolve.extract_ir`, each starting at its own zero lag.
    rate : int
        Sample rate, Hz.
    band : (float, float)
        The sweep's start and end frequency, Hz.
    margin_db : float
        How far above the floor a harmonic must be to be given a level, dB.
    ideal : (ndarray, dict), optional
        The linear and harmonic responses the same sweep gives through a perfect chain
        (:func:`ideal_responses`): what they hold in the harmonic windows is the method's
        own leak, added to the floor in proportion to this response's level per band.

    Returns
    -------
    list of dict, one per channel
        ``orders``: {k: {"level_db", "floor_db", "noise_db", "method_floor_db",
        "below_floor"}}, levels in dB re the linear response: the order's level (None when
        it does not rise ``margin_db`` above the floor, or when the sweep leaves no band for
        that order), the floor (noise plus the method's leak), its two parts, and whether
        the order lies below the floor; ``total_db`` and ``total_percent``:
        the orders above the noise summed in power (a THD-like figure; None when none is),
        and ``total_orders``: the orders it includes.

    Notes
    -----
    If the response has not decayed into the noise by its last quarter, the reference holds
    late reverberation and overstates the noise: the figures then err towards "below the
    noise floor", never towards a confident level. A reflective room spreads each harmonic
    over its decay; a window shorter than that decay (orders spaced closely in time) cuts
    harmonic and linear alike, so their ratio holds. The method's own floor is the linear
    response's low-frequency ringing ahead of its zero lag (see ``_LOW_EDGE_OCT``): about
    −80 dB for a delay-only chain; ``ideal`` measures it for the sweep in use (a chain
    without delay, the worst case), so that it is never read as distortion.

    Examples
    --------
    A chain whose output holds x + 0.1·x² for a sweep of amplitude A = 0.5 has a second
    harmonic of 0.1·A/2 = 0.025 relative to the fundamental, −32 dB:

    >>> from roomconv.measure.sweep import Sweep, sweep_signal
    >>> from roomconv.measure.deconvolve import extract_ir
    >>> s = Sweep(f_low=50.0, f_high=6000.0, duration=2.0, silence_pre=1.0,
    ...           silence_post=0.5, level_dbfs=-6.0206)
    >>> x = np.concatenate([np.zeros(300), sweep_signal(s)])  # an acoustic delay
    >>> noise = 1e-5 * np.random.default_rng(0).standard_normal(x.size)
    >>> ex = extract_ir(x + 0.1 * x**2 + noise, s.rate, sweep=s)
    >>> lv = harmonic_levels(ex.ir, ex.harmonics, s.rate, (s.f_low, s.f_high))[0]
    >>> round(lv["orders"][2]["level_db"])
    -32
    >>> lv["orders"][3]["below_floor"]
    True

    References
    ----------
    Farina, A. (2000). Simultaneous measurement of impulse response and distortion with a
    swept-sine technique. 108th AES Convention, preprint 5093.
    Müller, S., Massarani, P. (2001). Transfer-function measurement with sweeps. J. Audio
    Eng. Soc. 49(6), 443–471.
    """
    h1 = np.asarray(ir, float)
    h1 = h1[:, None] if h1.ndim == 1 else h1
    n_out = h1.shape[0]
    n_noise = max(n_out // 4, min(_MIN_NOISE, n_out))
    f_lo, f_hi = float(band[0]), min(float(band[1]), 0.5 * rate)
    results = []
    for c in range(h1.shape[1]):
        orders: dict = {}
        total, included = 0.0, []
        for k in sorted(harmonics):
            hk = np.asarray(harmonics[k], float)
            hk = hk[:, None] if hk.ndim == 1 else hk
            n_k = min(hk.shape[0], n_out)
            lo = f_lo * 2**_LOW_EDGE_OCT
            hi = f_hi / k * 2**-_EDGE_OCT
            if n_k < 1 or hi <= lo:
                orders[k] = _NOT_COVERED
                continue
            centres = lo * 2 ** (np.arange(int(np.log2(hi / lo) / _BAND_OCT) + 1) * _BAND_OCT)
            nfft = 1 << int(np.ceil(np.log2(max(n_k, n_noise))))
            freqs = np.fft.rfftfreq(nfft, 1.0 / rate)
            p1 = _band_sums(_psd(h1[:n_k, c], nfft), freqs, centres, 1)
            pk = _band_sums(_psd(hk[:n_k, c], nfft), freqs, centres, k)
            pn = _band_sums(_psd(h1[n_out - n_noise :, c], nfft), freqs, centres, k)
            leak = np.zeros_like(p1)
            if ideal is not None and k in ideal[1]:
                # The method's own leak, scaled by this response's level in each band.
                i1 = np.asarray(ideal[0], float).reshape(ideal[0].shape[0], -1)[:n_k, 0]
                ik = np.asarray(ideal[1][k], float).reshape(ideal[1][k].shape[0], -1)[:n_k, 0]
                q1 = _band_sums(_psd(i1, nfft), freqs, centres, 1)
                qk = _band_sums(_psd(ik, nfft), freqs, centres, k)
                leak = np.where(q1 > 0, qk / np.where(q1 > 0, q1, 1.0), 0.0) * p1
            ok = np.isfinite(p1) & np.isfinite(pk) & np.isfinite(pn) & np.isfinite(leak)
            s1, sk, sn, sl = (float(np.sum(p[ok])) for p in (p1, pk, pn, leak))
            if not np.any(ok) or s1 <= 0:
                orders[k] = _NOT_COVERED
                continue
            ref = sn + sl
            below = sk < ref * 10 ** (margin_db / 10)
            level = None if below else float(10 * np.log10((sk - ref) / s1))
            orders[k] = {
                "level_db": level,
                "floor_db": float(10 * np.log10(max(ref, 1e-300) / s1)),
                "noise_db": float(10 * np.log10(max(sn, 1e-300) / s1)),
                "method_floor_db": float(10 * np.log10(sl / s1)) if sl > 0 else None,
                "below_floor": bool(below),
            }
            if level is not None:
                total += 10 ** (level / 10)
                included.append(int(k))
        results.append(
            {
                "orders": orders,
                "total_db": float(10 * np.log10(total)) if included else None,
                "total_percent": float(100 * np.sqrt(total)) if included else None,
                "total_orders": included,
            }
        )
    return results


def ideal_responses(sweep, length_s: float) -> tuple[np.ndarray, dict]:
    """The linear and harmonic responses ``sweep`` gives through a perfect chain (no delay,
    no noise, no distortion): the reference for the method's own leak in
    :func:`harmonic_levels`.

    Parameters
    ----------
    sweep : Sweep
        The exponential sweep of the measurement (:class:`~roomconv.measure.sweep.Sweep`).
    length_s : float
        Length of the linear response, s (as the measurement's).

    Returns
    -------
    ir : ndarray, shape (samples, 1)
        The linear response, ``round(length_s · rate)`` samples from its zero lag.
    harmonics : dict
        {k: ndarray (samples_k, 1)}, the harmonic responses, each from its zero lag.

    Notes
    -----
    The deconvolution of a sweep is kept for reuse (a small cache); the arrays returned are
    copies, so changing them changes nothing that a later call returns.

    References
    ----------
    Farina, A. (2000). Simultaneous measurement of impulse response and distortion with a
    swept-sine technique. 108th AES Convention, preprint 5093.
    Müller, S., Massarani, P. (2001). Transfer-function measurement with sweeps. J. Audio
    Eng. Soc. 49(6), 443–471.

    Examples
    --------
    A perfect chain has no delay, so the linear response peaks at its first sample:

    >>> from roomconv.measure.sweep import Sweep
    >>> s = Sweep(rate=8000, f_low=50.0, f_high=3000.0, duration=1.0, silence_pre=0.2,
    ...           silence_post=0.3)
    >>> ir, harmonics = ideal_responses(s, 0.25)
    >>> ir.shape, int(np.argmax(np.abs(ir[:, 0])))
    ((2000, 1), 0)
    >>> 2 in harmonics and harmonics[2].shape[1] == 1
    True
    """
    ir, harmonics = _ideal(sweep, float(length_s))
    return ir.copy(), {k: v.copy() for k, v in harmonics.items()}


@functools.lru_cache(maxsize=4)
def _ideal(sweep, length_s: float) -> tuple[np.ndarray, dict]:
    # One deconvolution per sweep: every position of a study is measured with the same one.
    from .deconvolve import extract_ir
    from .sweep import sweep_signal

    ex = extract_ir(sweep_signal(sweep), sweep.rate, sweep=sweep, length_s=length_s)
    return ex.ir, ex.harmonics


def describe_levels(levels: dict) -> str:
    """One line for a channel's figures, e.g. ``H2 −32.1 dB, H3 < −71 dB (noise), …``.

    Examples
    --------
    >>> describe_levels({"orders": {2: {"level_db": -32.04, "floor_db": -80.0,
    ...     "below_floor": False}, 3: {"level_db": None, "floor_db": -71.2,
    ...     "below_floor": True}}, "total_db": -32.04, "total_percent": 2.5,
    ...     "total_orders": [2]})
    'H2 -32.0 dB, H3 below the noise floor (< -71 dB); total of H2: -32.0 dB (2.50 %)'
    """
    parts = []
    for k, o in sorted(levels["orders"].items(), key=lambda kv: int(kv[0])):
        if o["below_floor"]:
            parts.append(f"H{k} below the noise floor (< {o['floor_db']:.0f} dB)")
        elif o["level_db"] is None:
            parts.append(f"H{k} not covered by the sweep")
        else:
            parts.append(f"H{k} {o['level_db']:.1f} dB")
    text = ", ".join(parts)
    if levels["total_orders"]:
        names = "+".join(f"H{k}" for k in levels["total_orders"])
        text += f"; total of {names}: {levels['total_db']:.1f} dB ({levels['total_percent']:.2f} %)"
    else:
        text += "; no order above the noise"
    return text
