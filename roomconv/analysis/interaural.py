"""Interaural cross-correlation of a binaural response: IACC early, late and full per octave
band with a verdict each, and 1 − IACC_E3.
"""

from __future__ import annotations

import numpy as np
from scipy.signal import correlate

from ..errors import InputError
from .bands import Band, bands_for_rate
from .decay import onset_index
from .parameters import CAUTION, NOISE_SIGMA_CAUTION_JND, NOISE_SIGMA_NULL_JND, NOT_EVALUABLE
from .windowed import (
    BandSignal,
    JudgedRow,
    band_average,
    band_signal,
    check_same_shape,
    flag_early_start,
    judge_filter,
)

__all__ = [
    "KEYS",
    "JND",
    "MAX_LAG_S",
    "REPORTED_BANDS",
    "interaural_correlation",
    "iacc",
    "interaural_single_numbers",
]

KEYS = ("iacc_early", "iacc_late", "iacc_full")
#: Lags searched: |τ| ≤ 1 ms (ISO 3382-1:2009, Annex B — from memory).
MAX_LAG_S = 0.001
#: Windows after the direct sound: early 0–80 ms, late 80 ms to the end, full (ISO 3382-1:2009,
#: Annex B — from memory). None: to where the response meets its noise.
WINDOWS = {"iacc_early": (0.0, 0.080), "iacc_late": (0.080, None), "iacc_full": (0.0, None)}
#: ISO 3382-1 lists no JND for IACC (from memory); about 0.075 is the value reported in
#: listening tests on IACC differences (from memory), used here to judge it.
JND = 0.075
#: Octaves the values are given in (125 Hz–4 kHz, as the other ISO 3382-1 parameters — from
#: memory); below, ±1 ms is a small part of a period and any two ears correlate.
REPORTED_BANDS = (125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0)
#: 1 − IACC_E3 averages the early IACC of these octaves (ISO 3382-1:2009, Annex B — from
#: memory).
E3_BANDS = (500.0, 1000.0, 2000.0)
#: Largest interaural delay of a direct sound: about 0.7 ms for an adult head (Woodworth's
#: spherical-head formula, r = 8.75 cm: (r/c)(θ + sin θ) at 90° — from memory), rounded up
#: to the IACF's own lag limit. Ears further apart than this are not one head's.
MAX_EAR_OFFSET_S = 0.001
#: A window whose energy is more than half background noise gives no IACC: the correction
#: would be larger than what is left (common practice, an impulse-to-noise ratio of 0 dB).
MAX_NOISE_SHARE = 0.5
_NAMES = {"iacc_early": "IACC_E", "iacc_late": "IACC_L", "iacc_full": "IACC_A"}


def iacc(left: np.ndarray, right: np.ndarray, rate: int, *, max_lag_s: float = MAX_LAG_S) -> float:
    """max over |τ| ≤ ``max_lag_s`` of |IACF(τ)| of two equal-length signals, taken whole.

    IACF(τ) = ∫ p_l(t)·p_r(t+τ) dt / sqrt(∫ p_l² dt · ∫ p_r² dt), the integrals over the
    signals given (the window is the caller's choice).

    References
    ----------
    Ando, Y. (1985). Concert Hall Acoustics. Springer (IACF and IACC).
    ISO 3382-1:2009, Annex B (|τ| ≤ 1 ms — from memory).

    Examples
    --------
    >>> x = np.random.default_rng(0).standard_normal(4800)
    >>> round(iacc(x, x, 48000), 6)
    1.0
    >>> round(iacc(x, np.roll(x, 24), 48000), 2)  # 0.5 ms later: still fully correlated
    1.0
    """
    left = np.asarray(left, dtype=np.float64)
    right = np.asarray(right, dtype=np.float64)
    check_same_shape({"left": left, "right": right})
    m = int(round(max_lag_s * rate))
    value, _ = _iacf_max(left, np.concatenate([np.zeros(m), right, np.zeros(m)]), m)
    el, er = float(np.dot(left, left)), float(np.dot(right, right))
    if el <= 0 or er <= 0:
        raise InputError("IACC of a silent channel is not defined")
    return float(value / np.sqrt(el * er))


def _iacf_max(seg_l: np.ndarray, ext_r: np.ndarray, m: int) -> tuple[float, int]:
    """max |Σ seg_l(n)·ext_r(n + m + τ)| over τ = −m..m, and the τ found."""
    c = correlate(ext_r, seg_l, mode="valid", method="fft" if seg_l.size > 4096 else "direct")
    k = int(np.argmax(np.abs(c)))
    return float(abs(c[k])), k - m


def _window(L: BandSignal, R: BandSignal, key: str, m: int):
    """(IACC noise removed, IACC raw, noise share, window seconds), or None when empty."""
    t0, t1 = WINDOWS[key]
    i0 = L.index(t0)
    end = min(L.end, R.end)
    i1 = end if t1 is None else min(L.index(t1), end)
    if i1 - i0 < 2 * m + 1:
        return None
    seg_l = L.x[i0:i1]
    lo, hi = i0 - m, i1 + m
    ext = np.zeros(hi - lo)
    a, b = max(lo, 0), min(hi, R.x.size)
    ext[a - lo : b - lo] = R.x[a:b]
    num, _ = _iacf_max(seg_l, ext, m)
    el, er = float(np.dot(seg_l, seg_l)), float(np.dot(R.x[i0:i1], R.x[i0:i1]))
    n = i1 - i0
    nl, nr = L.noise * n, R.noise * n
    if el <= 0 or er <= 0:
        return None
    raw = num / np.sqrt(el * er)
    share = max(nl / el, nr / er)
    if el - nl <= 0 or er - nr <= 0:
        return None, raw, share, n / L.rate
    # The two ears' background noise is uncorrelated: it adds to the energies, not to the
    # cross-correlation, so it is removed from the denominators only.
    return min(1.0, num / np.sqrt((el - nl) * (er - nr))), raw, share, n / L.rate


def _one_band(left, right, rate, band: Band, onset: int) -> JudgedRow:
    label = f"{band.label} Hz"
    row = JudgedRow(band.nominal)
    if band.nominal not in REPORTED_BANDS:
        row.flag(
            KEYS,
            NOT_EVALUABLE,
            "iacc_band_outside",
            f"{label}: IACC is given in the octaves 125 Hz–4 kHz only",
        )
        return row.finish(KEYS)
    m = int(round(MAX_LAG_S * rate))
    L, R = band_signal(left, rate, band, onset), band_signal(right, rate, band, onset)
    one_way = [
        (
            band_signal(left, rate, band, onset, filtering=f),
            band_signal(right, rate, band, onset, filtering=f),
        )
        for f in ("forward", "reverse")
    ]
    for key in KEYS:
        name = _NAMES[key]
        w = _window(L, R, key, m)
        if w is None:
            row.flag(
                (key,),
                NOT_EVALUABLE,
                "iacc_window_empty",
                f"{label}: {name} not evaluated: the response holds no signal above the noise "
                "in its window",
            )
            continue
        value, raw, share, seconds = w
        if value is None:
            row.flag(
                (key,),
                NOT_EVALUABLE,
                "iacc_noise",
                f"{label}: {name} not evaluated: the background noise holds {100 * share:.0f} % "
                "of the window's energy or more",
            )
            continue
        if share > MAX_NOISE_SHARE or abs(value - raw) > NOISE_SIGMA_NULL_JND * JND:
            row.flag(
                (key,),
                NOT_EVALUABLE,
                "iacc_noise",
                f"{label}: {name} not evaluated: the background noise holds {100 * share:.0f} % "
                f"of the window's energy and moves the value by {abs(value - raw):.2g}",
            )
            continue
        row.values[key] = float(value)
        if abs(value - raw) > NOISE_SIGMA_CAUTION_JND * JND:
            row.flag(
                (key,),
                CAUTION,
                "iacc_noise_bias",
                f"{label}: {name}: the background noise moves it by {abs(value - raw):.2g} "
                f"(more than half its JND of {JND:g}); it was removed from the energies, but "
                "the correction is only as good as the noise estimate",
            )
        # A diffuse decay is random: a correlation coefficient estimated from B·T independent
        # values varies by (1 − ρ²)/sqrt(B·T) (Bendat & Piersol 2010 — from memory). T is the
        # window, or for a decaying window its effective length 2/k (k the energy decay rate).
        # The direct sound is not random, so this overstates the spread of a window it
        # dominates; it is a caution, not a null.
        k = min(L.decay_rate, R.decay_rate) * rate
        eff = min(seconds, 2.0 / k) if k > 0 else seconds
        sigma = (1 - value**2) / np.sqrt(max(band.bandwidth * eff, 1.0))
        if sigma > NOISE_SIGMA_CAUTION_JND * JND:
            row.flag(
                (key,),
                CAUTION,
                "statistical_uncertainty",
                f"{label}: {name} at one position is uncertain by ±{sigma:.2g} (the randomness "
                f"of a diffuse decay over {eff:.2f} s in this band), more than half its JND of "
                f"{JND:g}; average several positions",
            )
        ends = []
        for lw, rw in one_way:
            e = _window(lw, rw, key, m)
            ends.append(None if e is None else e[0])
        judge_filter(row, key, name, ends[0], ends[1], JND, "", label)
    return row.finish(KEYS)


def interaural_correlation(
    left: np.ndarray,
    right: np.ndarray,
    rate: int,
    *,
    bands: list[Band] | None = None,
    onset: int | None = None,
) -> list[JudgedRow]:
    """IACC early (0–80 ms), late (80 ms to the noise) and full per octave band.

    Parameters
    ----------
    left, right : ndarray, 1-D, same length
        The two ears of a binaural response (a head and torso simulator or in-ear
        microphones).
    rate : int
    bands : list of Band, optional
        Default: every octave band the rate holds (values in 125 Hz–4 kHz, null elsewhere).
    onset : int, optional
        Time zero (default: the earlier of the two ears' broadband direct sounds).

    Returns
    -------
    list of JudgedRow
        Keys ``iacc_early``, ``iacc_late``, ``iacc_full``.

    Notes
    -----
    Both ears share one zero-phase band filter and one time zero, so the filter moves no
    energy between them. The ears' background noise is taken as uncorrelated and removed from
    the energies; the late windows end where the decay meets the noise.

    References
    ----------
    Ando, Y. (1985). Concert Hall Acoustics. Springer.
    Hidaka, T., Beranek, L. L., Okano, T. (1995). Interaural cross-correlation, lateral
    fraction, and low- and high-frequency sound levels as measures of acoustical quality in
    concert halls. J. Acoust. Soc. Am. 98, 988–1007 (1 − IACC_E3).
    ISO 3382-1:2009, Annex B (from memory).

    Examples
    --------
    Identical ears correlate fully: IACF(0) = ∫p²/∫p² = 1, so every window's IACC is 1 in
    each octave it is given in (closed form); the 63 Hz octave is outside 125 Hz–4 kHz.

    >>> rate = 16000
    >>> t = np.arange(rate // 2) / rate
    >>> h = np.random.default_rng(1).standard_normal(t.size) * 0.05 * 10 ** (-3 * t / 0.4)
    >>> h[50] = 1.0
    >>> rows = interaural_correlation(h, h, rate)
    >>> {r.band_hz: round(r.values["iacc_early"], 6) for r in rows if r.band_hz >= 500}
    {500.0: 1.0, 1000.0: 1.0, 2000.0: 1.0, 4000.0: 1.0}
    >>> [r.values["iacc_full"] for r in rows if r.band_hz == 63.0]
    [None]
    """
    left = np.asarray(left, dtype=np.float64)
    right = np.asarray(right, dtype=np.float64)
    check_same_shape({"left": left, "right": right})
    if not np.any(left) or not np.any(right):
        raise InputError("one ear of the binaural response is silent")
    if bands is None:
        bands, _ = bands_for_rate("octave", rate)
    ol, orr = onset_index(left), onset_index(right)
    if onset is None:
        onset = min(ol, orr)
    rows = [_one_band(left, right, rate, b, onset) for b in bands]
    flag_early_start(rows, ("iacc_early", "iacc_full"), onset, rate)
    apart_s = abs(ol - orr) / rate
    if apart_s > MAX_EAR_OFFSET_S:
        for row in rows:
            given = [k for k in KEYS if row.values.get(k) is not None]
            if given:
                row.flag(
                    given,
                    CAUTION,
                    "ears_offset",
                    f"the ears' direct sounds are {1000 * apart_s:.1f} ms apart, more than a "
                    f"head allows ({1000 * MAX_EAR_OFFSET_S:g} ms): are the two channels "
                    "aligned, and is the source in front?",
                )
    return rows


def interaural_single_numbers(rows: list[JudgedRow]) -> dict:
    """1 − IACC_E3: one minus the mean early IACC of the 500 Hz, 1 kHz and 2 kHz octaves.

    Parameters
    ----------
    rows : list of JudgedRow
        The octave rows of :func:`interaural_correlation`.

    Returns
    -------
    dict
        ``values`` (``one_minus_iacc_e3``; None when one of the three octaves has no early
        IACC), ``verdicts`` (the worst of the three) and ``reasons``.

    References
    ----------
    Hidaka, T., Beranek, L. L., Okano, T. (1995). J. Acoust. Soc. Am. 98, 988–1007
    (1 − IACC_E3). ISO 3382-1:2009, Annex B (from memory).

    Examples
    --------
    Early IACC 0.4, 0.5 and 0.6: 1 − (0.4 + 0.5 + 0.6)/3 = 0.5.

    >>> rows = [JudgedRow(f, values={"iacc_early": v}).finish(KEYS)
    ...         for f, v in ((500.0, 0.4), (1000.0, 0.5), (2000.0, 0.6))]
    >>> out = interaural_single_numbers(rows)
    >>> round(out["values"]["one_minus_iacc_e3"], 12), out["verdicts"]["one_minus_iacc_e3"]
    (0.5, 'ok')
    """
    v, verdict, why = band_average(rows, "iacc_early", E3_BANDS[0], E3_BANDS[-1])
    out: dict = {
        "values": {"one_minus_iacc_e3": None if v is None else 1.0 - v},
        "verdicts": {"one_minus_iacc_e3": verdict},
        "reasons": {},
    }
    if why:
        out["reasons"]["one_minus_iacc_e3"] = why
    return out
