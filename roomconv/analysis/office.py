"""Open-plan offices (ISO 3382-3): speech level and STI along a line of positions, and the
single numbers D2,S, Lp,A,S,4m, rD, rC and rP from regressions over distance.

Edition: ISO 3382-3:2022 (rC is new there); rP is the privacy distance of the 2012 edition,
given for comparison. Constants marked "from memory" were recalled, not read from the
standard at the time of writing.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .sti import a_weighted_level

__all__ = [
    "EDITION",
    "NORMAL_SPEECH_1M_DB",
    "FIT_RANGE_M",
    "speech_octaves_at",
    "level_re_1m_from_strength",
    "band_strengths",
    "spatial_decay",
    "sti_distances",
    "comfort_distance",
    "OfficeNumbers",
    "office_numbers",
]

EDITION = "ISO 3382-3:2022"
#: Normal-effort speech, free field at 1 m in front of the talker, octaves 125 Hz → 8 kHz,
#: dB SPL (ISO 3382-3, Table 1 — from memory). A-weighted: 57.4 dB.
NORMAL_SPEECH_1M_DB = (49.9, 54.3, 58.0, 52.0, 44.8, 38.8, 33.5)
#: Distance range of the regressions, m (ISO 3382-3 — from memory).
FIT_RANGE_M = (2.0, 16.0)
#: Fewest positions inside the range for a regression (ISO 3382-3 asks for at least four
#: positions along the line — from memory).
MIN_POSITIONS = 4
#: STI of the distraction distance rD and the privacy distance rP (ISO 3382-3).
STI_DISTRACTION = 0.50
STI_PRIVACY = 0.20
#: A-weighted speech level defining the comfort distance rC, dB (ISO 3382-3:2022).
COMFORT_LEVEL_DB = 45.0
#: Below this coefficient of determination a regression line is flagged (our threshold:
#: the points scatter too much for one line to stand for them).
MIN_R2 = 0.8
#: Values of good open-plan offices (ISO 3382-3:2022, Annex A), for the report's context.
GOOD_OFFICE = {"d2s_db": 7.0, "lp_a_s_4m_db": 48.0, "r_d_m": 5.0}


def speech_octaves_at(level_re_1m_db) -> np.ndarray:
    """Octave speech levels at a position: normal-effort speech at 1 m plus the measured
    level of the position relative to 1 m in a free field (per octave, dB).

    Parameters
    ----------
    level_re_1m_db : sequence of 7 floats
        Level at the position relative to the same source at 1 m in a free field, per
        octave 125 Hz → 8 kHz, dB (see :func:`level_re_1m_from_strength`).

    Returns
    -------
    ndarray, shape (7,)
        Speech octave levels at the position, dB SPL.

    Raises
    ------
    InputError
        When not seven values are given.

    References
    ----------
    ISO 3382-3:2022, Table 1 (normal-effort speech spectrum at 1 m) — from memory.

    Examples
    --------
    6 dB below the 1 m free-field level in every octave (twice the distance, inverse-square
    law):

    >>> speech_octaves_at([-6.0] * 7)
    array([43.9, 48.3, 52. , 46. , 38.8, 32.8, 27.5])
    """
    d = np.asarray(level_re_1m_db, dtype=np.float64)
    if d.shape != (7,):
        raise InputError("give seven octave attenuations, 125 Hz to 8 kHz")
    return np.asarray(NORMAL_SPEECH_1M_DB) + d


def level_re_1m_from_strength(g_db) -> np.ndarray:
    """Level relative to the same source at 1 m in a free field, from the strength G
    (relative to 10 m): G − 20 dB, the inverse-square law between 1 m and 10 m
    (ISO 3382-1, A.2).

    Parameters
    ----------
    g_db : float or array
        Strength G per band, dB.

    Returns
    -------
    ndarray
        Level relative to 1 m in a free field, dB.

    References
    ----------
    ISO 3382-1:2009, Annex A (sound strength G, reference at 10 m) — from memory.

    Examples
    --------
    20·lg(10 m / 1 m) = 20 dB: G = 20 dB is the level at 1 m, G = 0 dB that at 10 m:

    >>> level_re_1m_from_strength([20.0, 0.0])
    array([  0., -20.])
    """
    return np.asarray(g_db, dtype=np.float64) - 20.0


def band_strengths(h: np.ndarray, rate: int, reference) -> tuple[list[float | None], list[str]]:
    """Strength G per octave 125 Hz → 8 kHz from the broadband onset: the single-pass band
    energy with the noise removed and the decay beyond the noise added, over the
    reference's level at 10 m.

    ``reference`` is a :class:`~roomconv.analysis.calibration.StrengthReference`. Returns the
    seven values (None where not evaluable) and the reasons for those.

    Parameters
    ----------
    h : ndarray, shape (samples,)
        The room impulse response, one channel, full-scale units as extracted.
    rate : int
        Sample rate, Hz.
    reference : StrengthReference
        The source's energy at 10 m in a free field, per octave.

    Returns
    -------
    values : list of float or None
        G per octave 125 Hz → 8 kHz, dB.
    reasons : list of str
        One line per band left out.

    References
    ----------
    ISO 3382-1:2009, A.2.2 (sound strength G) — from memory.
    Lundeby, A., Vigran, T. E., Bietz, H., Vorländer, M. (1995). Uncertainties of
    measurements in room acoustics. Acustica 81, 344–355.

    Examples
    --------
    The same free-field pulse as reference (measured at 1 m) and as "room": by the
    inverse-square law G = 20·lg(10 m / 1 m) = 20 dB in every octave:

    >>> from roomconv.analysis.calibration import reference_from_response
    >>> rate = 32000
    >>> h = 1e-6 * np.random.default_rng(1).standard_normal(rate // 2)
    >>> h[100] += 1.0
    >>> ref = reference_from_response(h, rate, distance_m=1.0)
    >>> g, why = band_strengths(h, rate, ref)
    >>> [round(v, 2) for v in g], why
    ([20.0, 20.0, 20.0, 20.0, 20.0, 20.0, 20.0], [])
    """
    from .bands import all_bands, filter_band
    from .decay import lundeby_truncation, onset_index
    from .sti import MIN_INR_DB, OCTAVES_HZ

    h = np.asarray(h, dtype=np.float64)
    onset = onset_index(h)
    out: list[float | None] = []
    why: list[str] = []
    for b in (b for b in all_bands("octave") if b.nominal in OCTAVES_HZ):
        ref, problem = reference.lookup(b, rate, band_set="octave")
        if ref is None:
            out.append(None)
            why.append(f"{b.label} Hz: {problem}")
            continue
        if b.upper >= 0.9 * rate / 2:
            out.append(None)
            why.append(f"{b.label} Hz: above the usable band at {rate} Hz")
            continue
        # A lead before the onset keeps the filter's build-up in the sum.
        lead = min(onset, int(np.ceil(3.0 * rate / b.bandwidth)))
        x = filter_band(h, rate, b)[onset - lead :]
        tr = lundeby_truncation(x[lead:], rate, bandwidth_hz=b.bandwidth)
        if tr.inr_db < MIN_INR_DB:
            out.append(None)
            why.append(f"{b.label} Hz: INR {tr.inr_db:.0f} dB (needs {MIN_INR_DB:.0f} dB)")
            continue
        e = np.square(x[: lead + tr.index])
        noise = tr.noise_energy if tr.noise_limited else 0.0
        total = float(e.sum()) - noise * e.size + tr.compensation
        if not total > 0:
            out.append(None)
            why.append(f"{b.label} Hz: no energy above the noise")
            continue
        out.append(float(10 * np.log10(total / rate)) - ref)
    return out, why


def _in_range(r: np.ndarray) -> np.ndarray:
    lo, hi = FIT_RANGE_M
    return (r >= lo) & (r <= hi)


def _line(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float]:
    """Least-squares y = a + b·x; returns a, b and the coefficient of determination."""
    b, a = np.polyfit(x, y, 1)
    fit = a + b * x
    ss = float(np.sum((y - y.mean()) ** 2))
    r2 = 1.0 - float(np.sum((y - fit) ** 2)) / ss if ss > 0 else 1.0
    return float(a), float(b), r2


def _check_distances(r: np.ndarray) -> None:
    if r.ndim != 1 or not np.all(np.isfinite(r)) or np.any(r <= 0):
        raise InputError("distances must be positive numbers in metres")


@dataclass
class Regression:
    """A line fitted over the standard's range; ``used`` marks the positions in it.

    Attributes
    ----------
    intercept, slope : float or None
        a and b of y = a + b·x (x is lg r for the speech level, r in m for the STI); None
        when the line cannot be made.
    r2 : float or None
        Coefficient of determination of the fit.
    used : list of bool
        Per position: inside the distance range with a value.
    reason : str or None
        Why there is no line, or why no distance comes from it.

    Examples
    --------
    Four STI values on the line 0.8 − 0.05·r:

    >>> reg, r_d, r_p = sti_distances([2.0, 4.0, 8.0, 16.0], [0.7, 0.6, 0.4, 0.0])
    >>> round(reg.slope, 6), round(reg.r2, 6), reg.as_dict()["positions_used"]
    (-0.05, 1.0, 4)
    """

    intercept: float | None = None
    slope: float | None = None
    r2: float | None = None
    used: list[bool] = field(default_factory=list)
    reason: str | None = None

    def as_dict(self) -> dict:
        """The line as JSON-ready values: intercept, slope, r² (4 decimals), positions used
        and the reason.

        Returns
        -------
        dict
        """
        return {
            "intercept": self.intercept,
            "slope": self.slope,
            "r2": None if self.r2 is None else round(self.r2, 4),
            "positions_used": int(sum(self.used)),
            "reason": self.reason,
        }


def _regression(x_of_r, r: np.ndarray, y: np.ndarray, what: str) -> Regression:
    ok = _in_range(r) & np.isfinite(y)
    reg = Regression(used=[bool(v) for v in ok])
    lo, hi = FIT_RANGE_M
    if ok.sum() < MIN_POSITIONS:
        reg.reason = (
            f"{what}: {int(ok.sum())} position(s) with a value between {lo:g} and {hi:g} m; "
            f"the regression needs at least {MIN_POSITIONS}"
        )
        return reg
    if np.ptp(r[ok]) < 1.0:
        reg.reason = f"{what}: the positions in range span less than 1 m of distance"
        return reg
    reg.intercept, reg.slope, reg.r2 = _line(x_of_r(r[ok]), y[ok])
    return reg


def spatial_decay(distances_m, levels_dba) -> tuple[Regression, float | None, float | None]:
    """Fit Lp,A,S(r) = a + b·lg r over the range; D2,S = −b·lg 2, Lp,A,S,4m = a + b·lg 4.

    Returns the regression, D2,S (dB per distance doubling) and Lp,A,S,4m (dB); None for
    both when the regression cannot be made (its ``reason`` says why).

    Parameters
    ----------
    distances_m : sequence of float
        Distance of each position from the talker, m; positive.
    levels_dba : sequence of float
        A-weighted speech level at each position, dB(A); NaN where missing.

    Returns
    -------
    regression : Regression
    d2s_db : float or None
    lp_a_s_4m_db : float or None

    Raises
    ------
    InputError
        When a distance is not a positive number.

    References
    ----------
    ISO 3382-3:2022, Acoustics — Measurement of room acoustic parameters — Part 3:
    Open plan offices, clause 6 (spatial decay rate of A-weighted speech level).

    Examples
    --------
    Levels falling 6 dB per doubling of distance, 51 dB at 4 m:

    >>> reg, d2s, l4 = spatial_decay([2.0, 4.0, 8.0, 16.0], [57.0, 51.0, 45.0, 39.0])
    >>> round(float(d2s), 6), round(float(l4), 6)
    (6.0, 51.0)
    """
    r = np.asarray(distances_m, dtype=np.float64)
    _check_distances(r)
    y = np.asarray(levels_dba, dtype=np.float64)
    reg = _regression(np.log10, r, y, "speech level")
    if reg.slope is None or reg.intercept is None:
        return reg, None, None
    return reg, -reg.slope * np.log10(2.0), reg.intercept + reg.slope * np.log10(4.0)


def sti_distances(distances_m, sti_values) -> tuple[Regression, float | None, float | None]:
    """Fit STI(r) = a + b·r over the range; rD where it is 0.50, rP where it is 0.20.

    Returns the regression, rD and rP (m); None where the line does not fall (b ≥ 0) or
    cannot be made.

    Parameters
    ----------
    distances_m : sequence of float
        Distance of each position from the talker, m; positive.
    sti_values : sequence of float or None
        STI at each position; None where not evaluable.

    Returns
    -------
    regression : Regression
    r_d_m : float or None
        Distraction distance, m (may be ≤ 0 or outside the positions: see
        :func:`office_numbers`).
    r_p_m : float or None
        Privacy distance, m.

    Raises
    ------
    InputError
        When a distance is not a positive number.

    References
    ----------
    ISO 3382-3:2022, clause 6 (distraction distance); ISO 3382-3:2012 (privacy distance).

    Examples
    --------
    On the line STI = 0.8 − 0.05·r: 0.50 at (0.8 − 0.5)/0.05 = 6 m, 0.20 at 12 m:

    >>> reg, r_d, r_p = sti_distances([2.0, 4.0, 8.0, 16.0], [0.7, 0.6, 0.4, 0.0])
    >>> round(r_d, 6), round(r_p, 6)
    (6.0, 12.0)
    """
    r = np.asarray(distances_m, dtype=np.float64)
    _check_distances(r)
    y = np.asarray([np.nan if v is None else v for v in sti_values], dtype=np.float64)
    reg = _regression(lambda x: x, r, y, "STI")
    if reg.slope is None or reg.intercept is None:
        return reg, None, None
    if not reg.slope < 0:
        reg.reason = "STI: the fitted STI does not fall with distance; no distances from it"
        return reg, None, None
    return (
        reg,
        (STI_DISTRACTION - reg.intercept) / reg.slope,
        (STI_PRIVACY - reg.intercept) / reg.slope,
    )


def comfort_distance(lp_4m_db: float, d2s_db: float) -> float | None:
    """rC = 4 m · 2^((Lp,A,S,4m − 45 dB) / D2,S): where the fitted speech level falls to
    45 dB(A) (ISO 3382-3:2022). None when the level does not fall (D2,S ≤ 0).

    Parameters
    ----------
    lp_4m_db : float
        Lp,A,S,4m, dB(A).
    d2s_db : float
        D2,S, dB per doubling of distance.

    Returns
    -------
    float or None
        rC, m.

    References
    ----------
    ISO 3382-3:2022, clause 6 (comfort distance).

    Examples
    --------
    51 dB(A) at 4 m falling 6 dB per doubling reaches 45 dB(A) one doubling further:

    >>> comfort_distance(51.0, 6.0)
    8.0
    >>> comfort_distance(51.0, 0.0) is None
    True
    """
    if not d2s_db > 0:
        return None
    return 4.0 * 2.0 ** ((lp_4m_db - COMFORT_LEVEL_DB) / d2s_db)


@dataclass
class OfficeNumbers:
    """The single numbers with their regressions; each value None with a reason, or given
    with the warnings that apply.

    Attributes
    ----------
    d2s_db : float or None
        D2,S, spatial decay rate of A-weighted speech, dB per doubling of distance.
    lp_a_s_4m_db : float or None
        Lp,A,S,4m, A-weighted speech level at 4 m, dB(A).
    r_d_m, r_c_m, r_p_m : float or None
        Distraction, comfort and privacy (2012 edition) distances, m.
    level_fit, sti_fit : Regression
        The speech-level and STI lines.
    warnings : list of str
        Extrapolated distances, scattered regressions.
    reasons : dict
        Key of a value that is None → why.

    References
    ----------
    ISO 3382-3:2022, clause 6 and Annex A; ISO 3382-3:2012 (rP).

    Examples
    --------
    >>> o = office_numbers([2.0, 4.0, 8.0, 16.0], [57.0, 51.0, 45.0, 39.0],
    ...                    [0.7, 0.6, 0.4, 0.0])
    >>> d = o.as_dict()
    >>> d["d2s_db"], d["lp_a_s_4m_db"], d["r_d_m"], d["r_c_m"], d["r_p_m"]
    (6.0, 51.0, 6.0, 8.0, 12.0)
    """

    d2s_db: float | None
    lp_a_s_4m_db: float | None
    r_d_m: float | None
    r_c_m: float | None
    r_p_m: float | None
    level_fit: Regression
    sti_fit: Regression
    warnings: list[str] = field(default_factory=list)
    reasons: dict = field(default_factory=dict)

    def as_dict(self) -> dict:
        """The single numbers (rounded to 0.01), both regressions, warnings, reasons, the
        fit range and the good-office values, as JSON-ready values.

        Returns
        -------
        dict
        """

        def rnd(v, n=2):
            return None if v is None else round(float(v), n)

        return {
            "edition": EDITION,
            "d2s_db": rnd(self.d2s_db),
            "lp_a_s_4m_db": rnd(self.lp_a_s_4m_db),
            "r_d_m": rnd(self.r_d_m),
            "r_c_m": rnd(self.r_c_m),
            "r_p_m": rnd(self.r_p_m),
            "r_p_edition": "ISO 3382-3:2012",
            "fit_range_m": list(FIT_RANGE_M),
            "level_fit": self.level_fit.as_dict(),
            "sti_fit": self.sti_fit.as_dict(),
            "warnings": list(self.warnings),
            "reasons": dict(self.reasons),
            "good_office": dict(GOOD_OFFICE),
        }


def office_numbers(distances_m, levels_dba, sti_values) -> OfficeNumbers:
    """D2,S, Lp,A,S,4m, rD, rC and rP from per-position A-weighted speech levels and STI.

    A distance found outside the measured positions' span is an extrapolation and carries a
    warning; a regression line whose r² is below :data:`MIN_R2` as well.

    Parameters
    ----------
    distances_m : sequence of float
        Distance of each position from the talker, m; positive.
    levels_dba : sequence of float
        A-weighted speech level at each position, dB(A); NaN where missing.
    sti_values : sequence of float or None
        STI at each position; None where not evaluable.

    Returns
    -------
    OfficeNumbers

    Raises
    ------
    InputError
        When a distance is not a positive number.

    References
    ----------
    ISO 3382-3:2022, clause 6 and Annex A.

    Examples
    --------
    Levels 6 dB down per doubling (51 dB(A) at 4 m) and STI = 0.8 − 0.05·r: D2,S = 6 dB,
    rD = 6 m, rC = 4·2^((51 − 45)/6) = 8 m, rP = 12 m, all inside 2–16 m:

    >>> o = office_numbers([2.0, 4.0, 8.0, 16.0], [57.0, 51.0, 45.0, 39.0],
    ...                    [0.7, 0.6, 0.4, 0.0])
    >>> [round(float(v), 6) for v in (o.d2s_db, o.r_d_m, o.r_c_m, o.r_p_m)], o.warnings
    ([6.0, 6.0, 8.0, 12.0], [])

    Three positions in range are too few for a line:

    >>> office_numbers([2.0, 4.0, 8.0], [57.0, 51.0, 45.0], [0.7, 0.6, 0.4]).d2s_db is None
    True
    """
    r = np.asarray(distances_m, dtype=np.float64)
    lf, d2s, l4 = spatial_decay(r, levels_dba)
    sf, rd, rp = sti_distances(r, sti_values)
    rc = None if d2s is None or l4 is None else comfort_distance(l4, d2s)
    warnings: list[str] = []
    reasons: dict = {}
    if rd is not None and rd <= 0:
        reasons["r_d_m"] = "the STI line is below 0.50 at every distance"
        rd = None
    if rp is not None and rp <= 0:
        reasons["r_p_m"] = "the STI line is below 0.20 at every distance"
        rp = None
    for keys, reg in ((("d2s_db", "lp_a_s_4m_db", "r_c_m"), lf), (("r_d_m", "r_p_m"), sf)):
        if reg.reason:
            for k in keys:
                reasons[k] = reg.reason
        elif reg.r2 is not None and reg.r2 < MIN_R2:
            warnings.append(
                f"{'speech level' if reg is lf else 'STI'} regression: r² = {reg.r2:.2f} "
                f"(below {MIN_R2}); the points scatter about the line"
            )
    if rc is None and "r_c_m" not in reasons and d2s is not None:
        reasons["r_c_m"] = "the fitted speech level does not fall with distance (D2,S ≤ 0)"
    for name, v, reg in (("rD", rd, sf), ("rC", rc, lf), ("rP", rp, sf)):
        span = r[np.asarray(reg.used, dtype=bool)]
        if v is None or not span.size:
            continue
        lo, hi = float(span.min()), float(span.max())
        if not lo <= v <= hi:
            warnings.append(
                f"{name} = {v:.1f} m lies outside the positions used ({lo:g}–{hi:g} m): "
                "an extrapolation of the line"
            )
    return OfficeNumbers(d2s, l4, rd, rc, rp, lf, sf, warnings, reasons)


def a_weighted_speech(octaves_db) -> float:
    """A-weighted level of seven octave levels 125 Hz → 8 kHz (IEC 61672-1 weights).

    Parameters
    ----------
    octaves_db : sequence of 7 floats
        Octave levels, dB SPL.

    Returns
    -------
    float
        dB(A); :func:`roomconv.analysis.sti.a_weighted_level`.

    References
    ----------
    IEC 61672-1:2013, Table 3 (A-weighting at the octave centres).

    Examples
    --------
    Levels equal to minus the A-weights sum to 10·lg 7 = 8.451 dB(A):

    >>> round(a_weighted_speech([16.1, 8.6, 3.2, 0.0, -1.2, -1.0, 1.1]), 3)
    8.451
    """
    return a_weighted_level(octaves_db)
