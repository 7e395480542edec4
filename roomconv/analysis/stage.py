"""Stage support ST_early and ST_late of a response measured on stage 1 m from the source,
per octave band with a verdict each, and their 250 Hz–2 kHz averages.
"""

from __future__ import annotations

import numpy as np

from .bands import Band, bands_for_rate
from .decay import onset_index
from .parameters import CAUTION, NOT_EVALUABLE
from .windowed import (
    JudgedRow,
    band_average,
    band_signal,
    flag_early_start,
    judge_filter,
    judge_sigma,
    judge_statistics,
    window_bounds,
)

__all__ = ["KEYS", "ST_BANDS", "JND_DB", "stage_support", "stage_single_numbers"]

KEYS = ("st_early_db", "st_late_db")
#: Octaves ST is measured and averaged in (ISO 3382-1:2009, Annex C — from memory).
ST_BANDS = (250.0, 500.0, 1000.0, 2000.0)
#: ISO 3382-1 gives no JND for ST (from memory); 1 dB, the JND of the other energy level
#: ratios (C80, G), is used to judge it (common practice).
JND_DB = 1.0
#: Windows, seconds after the direct sound (ISO 3382-1:2009, Annex C — from memory).
DIRECT = (0.0, 0.010)
EARLY = (0.020, 0.100)
LATE = (0.100, 1.000)
_K10 = 10 / np.log(10)


def _st(sig, window, ref) -> tuple[float | None, float, float]:
    """(10·lg(E_window/E_ref) noise removed, σ in dB from the noise, raw-minus-corrected dB)."""
    e, n_e, s_e = sig.energy(*window)
    r, n_r, s_r = sig.energy(*ref)
    ec, rc = e - n_e, r - n_r
    if ec <= 0 or rc <= 0:
        return None, np.inf, 0.0
    sigma = _K10 * float(np.hypot(sig.noise_sigma(ec, s_e) / ec, sig.noise_sigma(rc, s_r) / rc))
    bias = 10 * np.log10((e / r) / (ec / rc)) if e > 0 and r > 0 else 0.0
    return float(10 * np.log10(ec / rc)), sigma, float(bias)


def _one_band(h, rate, band: Band, onset: int) -> JudgedRow:
    label = f"{band.label} Hz"
    row = JudgedRow(band.nominal)
    if band.nominal not in ST_BANDS:
        row.flag(
            KEYS,
            NOT_EVALUABLE,
            "st_band_outside",
            f"{label}: ST is defined in the octaves 250 Hz–2 kHz only (ISO 3382-1)",
        )
        return row.finish(KEYS)
    sig = band_signal(h, rate, band, onset)
    one_way = [band_signal(h, rate, band, onset, filtering=f) for f in ("forward", "reverse")]
    for key, name, window in (("st_early_db", "ST_early", EARLY), ("st_late_db", "ST_late", LATE)):
        if not window_bounds(sig, window[1]):
            row.flag(
                (key,),
                NOT_EVALUABLE,
                "st_response_short",
                f"{label}: {name} not evaluated: the response ends before "
                f"{window[1] * 1000:.0f} ms and its decay had not ended",
            )
            continue
        value, sigma, bias = _st(sig, window, DIRECT)
        if value is None:
            row.flag(
                (key,),
                NOT_EVALUABLE,
                "st_no_energy",
                f"{label}: {name} not evaluated: no energy above the noise in "
                f"{window[0] * 1000:.0f}–{window[1] * 1000:.0f} ms or 0–10 ms",
            )
            continue
        row.values[key] = value
        judge_sigma(row, key, name, sigma, JND_DB, " dB", label)
        if abs(bias) > 0.5 * JND_DB and row.values.get(key) is not None:
            row.flag(
                (key,),
                CAUTION,
                "st_noise_bias",
                f"{label}: {name}: the background noise moves it by {abs(bias):.2g} dB (more "
                f"than half its JND of {JND_DB:g} dB); it was removed, but the correction is "
                "only as good as the noise estimate",
            )
        # The direct sound at 1 m is deterministic; the reflected window is random.
        judge_statistics(row, key, name, _K10 * sig.random_sigma(*window), JND_DB, " dB", label)
        ends = [_st(s, window, DIRECT)[0] for s in one_way]
        judge_filter(row, key, name, ends[0], ends[1], JND_DB, " dB", label)
    if not sig.noise_limited and not sig.late_known and row.values.get("st_late_db") is not None:
        row.flag(
            ("st_late_db",),
            NOT_EVALUABLE,
            "late_energy_unknown",
            f"{label}: ST_late not evaluated: the response ends only {sig.inr_db:.0f} dB below "
            "its peak and no noise floor could be separated",
        )
    return row.finish(KEYS)


def stage_support(
    h: np.ndarray, rate: int, *, bands: list[Band] | None = None, onset: int | None = None
) -> list[JudgedRow]:
    """ST_early and ST_late per octave band, each with its verdict.

    ST_early = 10·lg(E(20–100 ms) / E(0–10 ms)), ST_late = 10·lg(E(100–1000 ms) / E(0–10 ms)),
    times from the direct sound, of a response measured on stage 1 m from the source.

    Parameters
    ----------
    h : ndarray, 1-D
        The response (not cut at its onset).
    rate : int
        Sample rate, Hz.
    bands : list of Band, optional
        Default: every octave band the rate holds. Bands outside 250 Hz–2 kHz get null values
        with the reason.
    onset : int, optional
        Sample of the direct sound (default: the broadband onset, as for every parameter).

    Returns
    -------
    list of JudgedRow
        Keys ``st_early_db`` and ``st_late_db``.

    Notes
    -----
    The band signal is zero-phase filtered, so no energy moves across the 10, 20 and 100 ms
    limits by the filter's group delay; the 0–10 ms window reaches back over the filter's
    symmetric spread. Background noise is removed from each window and judged by the
    uncertainty it leaves.

    References
    ----------
    Gade, A. C. (1989). Investigations of musicians' room acoustic conditions in concert halls,
    parts I and II. Acustica 69, 193–203 and 249–262 (support, from memory).
    ISO 3382-1:2009, Annex C (stage measures ST_early, ST_late — from memory).

    Examples
    --------
    >>> rate = 16000
    >>> t = np.arange(rate) / rate
    >>> h = np.random.default_rng(1).standard_normal(rate) * 0.05 * 10 ** (-3 * t)
    >>> h[0] = 1.0
    >>> rows = stage_support(h, rate)
    >>> [r.band_hz for r in rows if r.values["st_early_db"] is not None]
    [250.0, 500.0, 1000.0, 2000.0]
    """
    h = np.asarray(h, dtype=np.float64)
    if bands is None:
        bands, _ = bands_for_rate("octave", rate)
    if onset is None:
        onset = onset_index(h)
    rows = [_one_band(h, rate, b, onset) for b in bands]
    flag_early_start(rows, KEYS, onset, rate)  # both ratios divide by E(0–10 ms)
    return rows


def stage_single_numbers(rows: list[JudgedRow]) -> dict:
    """The 250 Hz–2 kHz octave means of ST_early and ST_late, verdicts and reasons.

    Parameters
    ----------
    rows : list of JudgedRow
        The octave rows of :func:`stage_support`.

    Returns
    -------
    dict
        ``values`` (``st_early_avg_db``, ``st_late_avg_db``, dB; None when a band has no
        value), ``verdicts`` (the worst of the bands') and ``reasons`` (why a value is None).

    References
    ----------
    ISO 3382-1:2009, Annex C (ST averaged over the 250 Hz–2 kHz octaves — from memory).
    Gade, A. C. (1989). Investigations of musicians' room acoustic conditions in concert
    halls, part I. Acustica 69, 193–203 (from memory).

    Examples
    --------
    The mean of −10, −12, −14 and −16 dB is −13 dB; a band without ST_late leaves its mean
    null with the reason:

    >>> rows = [JudgedRow(f, values={"st_early_db": e, "st_late_db": -15.0}).finish(KEYS)
    ...         for f, e in ((250.0, -10.0), (500.0, -12.0), (1000.0, -14.0), (2000.0, -16.0))]
    >>> rows[3].flag(("st_late_db",), NOT_EVALUABLE, "st_no_energy", "2 kHz: no energy")
    >>> out = stage_single_numbers(rows)
    >>> out["values"]
    {'st_early_avg_db': -13.0, 'st_late_avg_db': None}
    >>> out["reasons"]
    {'st_late_avg_db': 'no value in the 2000 Hz band(s)'}
    """
    out: dict = {"values": {}, "verdicts": {}, "reasons": {}}
    for key, name in (("st_early_db", "st_early_avg_db"), ("st_late_db", "st_late_avg_db")):
        v, verdict, why = band_average(rows, key, ST_BANDS[0], ST_BANDS[-1])
        out["values"][name] = v
        out["verdicts"][name] = verdict
        if why:
            out["reasons"][name] = why
    return out
