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
    level of the position relative to 1 m in a free field (per octave, dB)."""
    d = np.asarray(level_re_1m_db, dtype=np.float64)
    if d.shape != (7,):
        raise InputError("give seven octave attenuations, 125 Hz to 8 kHz")
    return np.asarray(NORMAL_SPEECH_1M_DB) + d


def level_re_1m_from_strength(g_db) -> np.ndarray:
    """Level relative to the same source at 1 m in a free field, from the strength G
    (relative to 10 m): G − 20 dB, the inverse-square law between 1 m and 10 m
    (ISO 3382-1, A.2)."""
    return np.asarray(g_db, dtype=np.float64) - 20.0


def band_strengths(h: np.ndarray, rate: int, reference) -> tuple[list[float | None], list[str]]:
    """Strength G per octave 125 Hz → 8 kHz from the broadband onset: the single-pass band
    energy with the noise removed and the decay beyond the noise added, over the
    reference's level at 10 m.

    ``reference`` is a :class:`~roomconv.analysis.calibration.StrengthReference`. Returns the
    seven values (None where not evaluable) and the reasons for those.

    References
    ----------
    ISO 3382-1:2009, A.2.2 (sound strength G) — from memory.
    Lundeby, A., Vigran, T. E., Bietz, H., Vorländer, M. (1995). Uncertainties of
    measurements in room acoustics. Acustica 81, 344–355.
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
    """A line fitted over the standard's range; ``used`` marks the positions in it."""

    intercept: float | None = None
    slope: float | None = None
    r2: float | None = None
    used: list[bool] = field(default_factory=list)
    reason: str | None = None

    def as_dict(self) -> dict:
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

    References
    ----------
    ISO 3382-3:2022, Acoustics — Measurement of room acoustic parameters — Part 3:
    Open plan offices, clause 6 (spatial decay rate of A-weighted speech level).
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

    References
    ----------
    ISO 3382-3:2022, clause 6 (distraction distance); ISO 3382-3:2012 (privacy distance).
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
    45 dB(A) (ISO 3382-3:2022). None when the level does not fall (D2,S ≤ 0)."""
    if not d2s_db > 0:
        return None
    return 4.0 * 2.0 ** ((lp_4m_db - COMFORT_LEVEL_DB) / d2s_db)


@dataclass
class OfficeNumbers:
    """The single numbers with their regressions; each value None with a reason, or given
    with the warnings that apply."""

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

    References
    ----------
    ISO 3382-3:2022, clause 6 and Annex A.
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
    """A-weighted level of seven octave levels 125 Hz → 8 kHz (IEC 61672-1 weights)."""
    return a_weighted_level(octaves_db)
