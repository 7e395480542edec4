"""Averages over source–receiver positions, their spread, the ISO 3382-2 statistical
uncertainty of decay times, and the mid-frequency single numbers used in reports.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .bands import all_bands
from .parameters import (
    CAUTION,
    DECAYS_PER_POSITION_IR,
    JND,
    METRICS,
    NOISE_SIGMA_CAUTION_JND,
    NOT_EVALUABLE,
    OK,
    STATISTICAL,
    decay_time_sigma,
)

__all__ = [
    "DECAYS_PER_POSITION_IR",
    "JND",
    "decay_time_uncertainty",
    "spatial_average",
    "single_numbers",
    "position_single_numbers",
    "SINGLE_NUMBERS",
]


def decay_time_uncertainty(
    t: float,
    bandwidth_hz: float,
    positions: int,
    kind: str,
    decays_per_position: int = DECAYS_PER_POSITION_IR,
) -> float:
    """Standard deviation of a spatially averaged T20 or T30.

    σ(T20) = 0.88·T·sqrt((1 + 1.90/n) / (N·B·T)),  σ(T30) = 0.55·T·sqrt((1 + 1.52/n) / (N·B·T)),
    with B the bandwidth (Hz), N the number of positions and n the decays averaged at each.

    References
    ----------
    ISO 3382-2:2008, Annex A, eqs. (A.1)–(A.2) (from memory).

    Examples
    --------
    T = 2 s in the 1 kHz octave (B = 707 Hz), one position, an integrated response counted
    as n = 10 decays: 0.55·2·sqrt((1 + 1.52/10)/(1·707.1·2)):

    >>> round(decay_time_uncertainty(2.0, 707.1, 1, "t30"), 4)
    0.0314
    >>> round(float(0.55 * 2 * np.sqrt((1 + 1.52 / 10) / (707.1 * 2))), 4)
    0.0314
    """
    if kind not in ("t20", "t30"):
        raise ValueError("kind is t20 or t30")
    # The constants live with the single-position check (parameters.STATISTICAL_CONSTANTS).
    return t * decay_time_sigma(f"{kind}_s", t, bandwidth_hz, positions, decays_per_position)


def _flagged_beyond_statistics(row: dict, metric: str) -> bool:
    """A position's value is flagged for a reason other than its single-position statistical
    uncertainty (which the average reduces and judges afresh)."""
    if (row.get("verdicts") or {}).get(metric, OK) != CAUTION:
        return False
    codes = (row.get("warning_codes_by_value") or {}).get(metric, [])
    return not codes or any(c != STATISTICAL for c in codes)


def _bandwidth(band_hz: float, kind: str) -> float | None:
    for b in all_bands(kind):
        if b.nominal == band_hz:
            return b.bandwidth
    return None


def spatial_average(
    positions: list[list[dict]], kind: str = "octave", with_g: bool = False
) -> list[dict]:
    """Average per band over positions (each a list of band dicts from ``as_dict``).

    Null values are left out of a mean; ``n`` says how many were used. The mean's
    ``verdict`` is "caution" when any value in it was flagged, "not evaluable" when none
    could be used.

    Examples
    --------
    >>> from roomconv.analysis.parameters import BandResult
    >>> rows = []
    >>> for t30 in (1.0, 1.2):
    ...     r = BandResult(500.0, t30_s=t30)
    ...     r.finish(with_g=False)
    ...     rows.append([r.as_dict()])
    >>> avg = spatial_average(rows)
    >>> avg[0]["t30_s"]["mean"], round(avg[0]["t30_s"]["std"], 4), avg[0]["t30_s"]["n"]
    (1.1, 0.1414, 2)
    """
    by_band: dict[float, list[dict]] = {}
    for pos in positions:
        for row in pos:
            by_band.setdefault(row["band_hz"], []).append(row)
    metrics = METRICS + (("g_db",) if with_g else ())
    out = []
    for band_hz in sorted(by_band):
        rows = by_band[band_hz]
        # The JSON document's entries: numbers, counts, verdict strings and nulls.
        entry: dict[str, Any] = {"band_hz": band_hz}
        for m in metrics:
            vals = np.array([r[m] for r in rows if r.get(m) is not None], dtype=float)
            stat: dict[str, Any] = {
                "mean": None,
                "std": None,
                "n": int(vals.size),
                "verdict": NOT_EVALUABLE if m in JND else None,
            }
            if vals.size and m in JND:
                flagged = any(
                    _flagged_beyond_statistics(r, m) for r in rows if r.get(m) is not None
                )
                bw = _bandwidth(band_hz, kind) if band_hz is not None else None
                if m in ("edt_s", "t20_s", "t30_s") and bw:
                    # The average's own statistical uncertainty, with N positions.
                    sigma = decay_time_sigma(m, float(vals.mean()), bw, positions=vals.size)
                    stat["relative_uncertainty"] = sigma
                    flagged = flagged or sigma > NOISE_SIGMA_CAUTION_JND * JND[m][1]
                stat["verdict"] = CAUTION if flagged else OK
            if vals.size:
                stat["mean"] = float(vals.mean())
                stat["std"] = float(vals.std(ddof=1)) if vals.size > 1 else None
            if m in ("t20_s", "t30_s") and vals.size:
                bw = _bandwidth(band_hz, kind)
                stat["uncertainty"] = (
                    decay_time_uncertainty(stat["mean"], bw, vals.size, m[:3]) if bw else None
                )
            entry[m] = stat
        out.append(entry)
    return out


#: Mid-frequency single numbers: key → parameter (ISO 3382-1:2009, A.3 and Table A.1: the
#: mean of the 500 Hz and 1 kHz octaves — from memory).
SINGLE_NUMBERS = {
    "edt_mid_s": "edt_s",
    "t20_mid_s": "t20_s",
    "t30_mid_s": "t30_s",
    "c50_mid_db": "c50_db",
    "c80_mid_db": "c80_db",
    "d50_mid": "d50",
    "ts_mid_ms": "ts_ms",
    "g_mid_db": "g_db",
}


def single_numbers(average: list[dict], kind: str = "octave", *, with_verdicts: bool = False):
    """Mid-frequency values: mean of the 500 Hz and 1 kHz octaves, or of the six
    third-octaves 400 Hz–1.25 kHz (ISO 3382-1:2009, A.3 — from memory).

    A value needs every mid band; G appears only when the average holds G. With
    ``with_verdicts`` also returns a verdict per value: the worst of its bands'.

    Examples
    --------
    >>> avg = [{"band_hz": f, **{m: {"mean": None} for m in METRICS}} for f in (500, 1000)]
    >>> avg[0]["t30_s"]["mean"], avg[1]["t30_s"]["mean"] = 1.2, 1.0
    >>> round(single_numbers(avg)["t30_mid_s"], 6), single_numbers(avg)["c80_mid_db"]
    (1.1, None)
    """
    mids = (500, 1000) if kind == "octave" else (400, 500, 630, 800, 1000, 1250)
    rows = [r for r in average if r["band_hz"] in mids]
    has_g = bool(average) and "g_db" in average[0]
    out, verdicts = {}, {}
    for key, m in SINGLE_NUMBERS.items():
        if m == "g_db" and not has_g:
            continue
        vals = [r[m]["mean"] for r in rows if r[m]["mean"] is not None]
        ok = len(vals) == len(mids)
        out[key] = float(np.mean(vals)) if ok else None
        marks = [r[m].get("verdict") or OK for r in rows]
        verdicts[key] = NOT_EVALUABLE if not ok else CAUTION if CAUTION in marks else OK
    return (out, verdicts) if with_verdicts else out


def position_single_numbers(bands: list[dict], kind: str = "octave") -> dict:
    """Mid-frequency values of one position from its band rows, by the same rule as
    :func:`single_numbers` (ISO 3382-1:2009, A.3 — from memory).

    Examples
    --------
    >>> rows = [{"band_hz": 500, "t30_s": 1.0}, {"band_hz": 1000, "t30_s": 1.2}]
    >>> round(position_single_numbers(rows)["t30_mid_s"], 3)
    1.1
    """
    as_average = [
        {
            "band_hz": r["band_hz"],
            **{
                m: {"mean": r.get(m)} for m in SINGLE_NUMBERS.values() if m != "g_db" or "g_db" in r
            },
        }
        for r in bands
    ]
    return single_numbers(as_average, kind)
