"""Lateral energy: the early lateral energy fractions J_LF and J_LFC and the late lateral sound
level L_J from an omnidirectional and a figure-of-eight channel, per octave band with a
verdict each; and the figure-of-eight taken from a first-order ambisonic response.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .bands import Band, bands_for_rate
from .decay import onset_index
from .parameters import (
    CAUTION,
    DIRECT_SOUND_S,
    NOISE_SIGMA_CAUTION_JND,
    NOISE_SIGMA_NULL_JND,
    NOT_EVALUABLE,
)
from .windowed import (
    JudgedRow,
    band_average,
    band_signal,
    check_same_shape,
    flag_early_start,
    judge_filter,
    judge_sigma,
    judge_statistics,
)

__all__ = [
    "KEYS",
    "JND",
    "REPORTED_BANDS",
    "AmbisonicSplit",
    "lateral_fractions",
    "lateral_single_numbers",
    "fig8_from_ambisonic",
    "wideband_fractions",
]

KEYS = ("jlf", "jlfc", "lj_db")
#: Just-noticeable differences: J_LF 0.05 (ISO 3382-1:2009, Table A.1 — from memory); J_LFC
#: is taken the same (from memory); the standard gives none for L_J (from memory), so 1 dB,
#: the JND of the strength G it is calibrated like, is used (common practice).
JND = {"jlf": 0.05, "jlfc": 0.05, "lj_db": 1.0}
#: Octaves the values are given in (ISO 3382-1 reports 125 Hz–4 kHz — from memory); below
#: 125 Hz the 5 ms limit is a fraction of one period.
REPORTED_BANDS = (125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0)
#: Octaves averaged into the single numbers (ISO 3382-1:2009, Annex A: 125 Hz–1 kHz — from
#: memory).
AVERAGED = (125.0, 1000.0)
#: Largest departure of the late figure-of-eight/omni energy ratio from 1/3 before the gain
#: match is questioned, dB (common practice).
GAIN_TOLERANCE_DB = 1.5
#: Half-width of the window around the direct sound's peak the figure-of-eight's leak is read
#: in, s.
LEAK_WINDOW_S = 0.0005
EARLY = (0.0, 0.080)
LATERAL = (0.005, 0.080)
LATE = 0.080
#: The late diffuse field of an ACN/SN3D first-order response has (X² + Y² + Z²)/W² near 1
#: (each first-order SN3D component carries a third of W's energy in an isotropic field:
#: Zotter, F., Frank, M. (2019), Ambisonics, Springer, ch. 4 — from memory); N3D gives 3,
#: the older W-at-−3 dB convention 2. Outside this range the ordering or normalization is
#: probably not ACN/SN3D.
SN3D_DIFFUSE_RATIO = (0.5, 1.6)
#: A direct sound whose horizontal intensity direction is weaker than this fraction of its
#: energy gives no clear source direction for the lateral axis (common practice).
MIN_DIRECTION_STRENGTH = 0.5


@dataclass
class AmbisonicSplit:
    """Omni and lateral figure-of-eight derived from a first-order ambisonic response.

    Attributes
    ----------
    omni : ndarray, 1-D
        The W channel.
    fig8 : ndarray, 1-D
        The horizontal figure-of-eight at 90° to the source, Y·cos φ − X·sin φ.
    source_azimuth_deg : float
        φ, the direct sound's horizontal direction, degrees (counter-clockwise from +X).
    cautions : list of (str, str)
        (code, text) of each doubt about the direction or the normalization.

    Examples
    --------
    Source straight ahead (+X), one reflection of amplitude 0.5 from the left (+Y) 20 ms
    later: SN3D gives Y = p·sin 90° there, so the lateral channel carries the reflection's
    full amplitude and nothing of the direct sound.

    >>> rate = 8000
    >>> w = np.zeros(800); w[10], w[170] = 1.0, 0.5
    >>> y = np.zeros(800); y[170] = 0.5
    >>> split = fig8_from_ambisonic(np.stack([w, y, 0 * w, w - y], axis=1), rate)
    >>> split.source_azimuth_deg, float(split.fig8[10]), float(split.fig8[170])
    (0.0, 0.0, 0.5)
    """

    omni: np.ndarray
    fig8: np.ndarray
    source_azimuth_deg: float
    cautions: list[tuple[str, str]] = field(default_factory=list)


def fig8_from_ambisonic(acn: np.ndarray, rate: int) -> AmbisonicSplit:
    """Omni (W) and the horizontal figure-of-eight at 90° to the source from a first-order
    response in ACN channel order (W, Y, Z, X) with SN3D normalization.

    The source azimuth is the direction of the direct sound's horizontal intensity,
    φ = atan2(Σ W·Y, Σ W·X) over its first ``DIRECT_SOUND_S`` from the onset; the lateral
    figure-of-eight is Y·cos φ − X·sin φ. With SN3D a plane wave of pressure p from azimuth θ
    gives W = p and X = p·cos θ, Y = p·sin θ (elevation 0), so this channel is p·sin(θ − φ):
    a figure-of-eight with the omni's gain on its axis, its null towards the source, as
    J_LF and L_J ask.

    Parameters
    ----------
    acn : ndarray, shape (samples, 4)
        W, Y, Z, X.
    rate : int

    Returns
    -------
    AmbisonicSplit

    References
    ----------
    Nachbar, C., Zotter, F., Deleflie, E., Sontacchi, A. (2011). AmbiX — a suggested
    ambisonics format. Proc. Ambisonics Symposium, Lexington (ACN order, SN3D).
    ISO 3382-1:2009, Annex A (figure-of-eight with its null towards the source — from memory).

    Examples
    --------
    >>> rate = 8000
    >>> s = np.zeros(800); s[10] = 1.0
    >>> th = np.radians(30)  # source 30° to the left of the +X axis
    >>> acn = np.stack([s, s * np.sin(th), 0 * s, s * np.cos(th)], axis=1)
    >>> split = fig8_from_ambisonic(acn, rate)
    >>> round(split.source_azimuth_deg, 1), float(np.max(np.abs(split.fig8))) < 1e-12
    (30.0, True)
    """
    acn = np.asarray(acn, dtype=np.float64)
    if acn.ndim != 2 or acn.shape[1] != 4:
        raise InputError(
            "a first-order ambisonic response has 4 channels (ACN order W, Y, Z, X, SN3D); "
            f"got {acn.shape[1] if acn.ndim == 2 else 1}"
        )
    w, y, z, x = (acn[:, i] for i in range(4))
    check_same_shape({"W": w, "Y": y, "Z": z, "X": x})
    if not np.any(w):
        raise InputError(
            "the W (omnidirectional) channel is silent; is the order ACN (W, Y, Z, X)?"
        )
    if not (np.any(y) or np.any(x)):
        raise InputError(
            "the Y and X (horizontal figure-of-eight) channels are silent (all zeros); "
            "is the order ACN (W, Y, Z, X) and were they recorded?"
        )
    onset = onset_index(w)
    d = slice(onset, onset + max(1, int(round(DIRECT_SOUND_S * rate))))
    iy, ix, ew = float(np.dot(w[d], y[d])), float(np.dot(w[d], x[d])), float(np.dot(w[d], w[d]))
    phi = float(np.arctan2(iy, ix))
    fig8 = y * np.cos(phi) - x * np.sin(phi)
    cautions: list[tuple[str, str]] = []
    strength = np.hypot(iy, ix) / ew if ew > 0 else 0.0
    if strength < MIN_DIRECTION_STRENGTH:
        cautions.append(
            (
                "ambisonic_direction_unclear",
                f"the direct sound's horizontal direction is weak ({strength:.2f} of its "
                f"energy, below {MIN_DIRECTION_STRENGTH:g}): the lateral axis may not be at "
                "90° to the source",
            )
        )
    late = slice(onset + int(0.08 * rate), onset + int(0.2 * rate))
    ew_late = float(np.sum(np.square(w[late])))
    if ew_late > 0:
        ratio = (
            float(np.sum(np.square(x[late]) + np.square(y[late]) + np.square(z[late]))) / ew_late
        )
        lo, hi = SN3D_DIFFUSE_RATIO
        if not lo <= ratio <= hi:
            cautions.append(
                (
                    "ambisonic_normalization",
                    f"the late field's (X²+Y²+Z²)/W² is {ratio:.2f}; ACN/SN3D gives about 1 in "
                    "a diffuse field (N3D about 3): check the channel order and normalization",
                )
            )
    return AmbisonicSplit(w.copy(), fig8, float(np.degrees(phi)), cautions)


def _products(om, f8, window) -> float:
    """Σ|p_L·p| over a window of the two band signals (same time zero)."""
    i0, i1 = f8.index(window[0]), min(f8.index(window[1]), f8.x.size)
    return float(np.sum(np.abs(f8.x[i0:i1] * om.x[i0:i1]))) if i1 > i0 else 0.0


def _early(om, f8) -> dict:
    """J_LF, J_LFC (noise removed) and what judges them."""
    e_f, n_f, s_f = f8.energy(*LATERAL)
    e_o, n_o, s_o = om.energy(*EARLY)
    prod = _products(om, f8, LATERAL)
    den = e_o - n_o
    out: dict = {"jlf": None, "jlfc": None}
    if den <= 0:
        return out
    num = max(e_f - n_f, 0.0)
    out["jlf"] = num / den
    out["jlf_sigma"] = float(
        np.hypot(f8.noise_sigma(num, s_f) / den, num * om.noise_sigma(den, s_o) / den**2)
    )
    out["jlfc"] = prod / den
    # |(s_L + n_L)(s + n)| differs from |s_L·s| by at most |s_L·n| + |n_L·s| + |n_L·n|; by
    # Cauchy–Schwarz their sums are bounded by the window energies (noise not removed from
    # J_LFC: the noise's share of a product of magnitudes has no simple expectation).
    e_o_lat = om.energy(*LATERAL)[0]
    bound = (
        np.sqrt(max(e_f, 0.0) * om.noise * s_f)
        + np.sqrt(f8.noise * s_f * max(e_o_lat, 0.0))
        + s_f * np.sqrt(f8.noise * om.noise)
    )
    out["jlfc_bound"] = float(bound / den)
    out["e_lateral_omni"] = e_o_lat - om.noise * s_f
    out["e_early_omni"] = den
    return out


def _one_band(
    omni, fig8, rate, band: Band, onset: int, reference_db, reference_missing, leak: float
) -> JudgedRow:
    label = f"{band.label} Hz"
    row = JudgedRow(band.nominal)
    if band.nominal not in REPORTED_BANDS:
        row.flag(
            KEYS,
            NOT_EVALUABLE,
            "lateral_band_outside",
            f"{label}: J_LF, J_LFC and L_J are given in the octaves 125 Hz–4 kHz only",
        )
        return row.finish(KEYS)
    om = band_signal(omni, rate, band, onset)
    f8 = band_signal(fig8, rate, band, onset)
    early = _early(om, f8)
    if early["jlf"] is None:
        row.flag(
            ("jlf", "jlfc"),
            NOT_EVALUABLE,
            "lateral_no_energy",
            f"{label}: J_LF and J_LFC not evaluated: no omni energy above the noise in 0–80 ms",
        )
    else:
        row.values["jlf"] = early["jlf"]
        row.values["jlfc"] = early["jlfc"]
        judge_sigma(row, "jlf", "J_LF", early["jlf_sigma"], JND["jlf"], "", label)
        judge_sigma(row, "jlfc", "J_LFC", early["jlfc_bound"], JND["jlfc"], "", label)
        # A figure-of-eight that does not null the direct sound also passes reflections from
        # the source's side: with an amplitude leak ε, at most ε² (J_LF) and ε (J_LFC) of the
        # omni's 5–80 ms energy share.
        share = max(early["e_lateral_omni"], 0.0) / early["e_early_omni"]
        for key, name, bias in (
            ("jlf", "J_LF", leak**2 * share),
            ("jlfc", "J_LFC", leak * share),
        ):
            if bias > NOISE_SIGMA_NULL_JND * JND[key]:
                row.flag(
                    (key,),
                    NOT_EVALUABLE,
                    "fig8_not_nulled",
                    f"{label}: {name} not evaluated: the figure-of-eight channel's direct sound "
                    f"is only {-20 * np.log10(max(leak, 1e-12)):.0f} dB below the omni's, which "
                    f"can add up to {bias:.2g} (is its null towards the source, and the channel "
                    "order right?)",
                )
            elif bias > NOISE_SIGMA_CAUTION_JND * JND[key]:
                row.flag(
                    (key,),
                    CAUTION,
                    "fig8_not_nulled",
                    f"{label}: {name}: the figure-of-eight channel's direct sound is only "
                    f"{-20 * np.log10(max(leak, 1e-12)):.0f} dB below the omni's, which can "
                    f"add up to {bias:.2g}, more than half its JND of {JND[key]:g}",
                )
        # The figure-of-eight's 5–80 ms energy is reflected sound: random in a diffuse
        # field. Its relative spread carries into J_LF, and about the same into J_LFC.
        rel = f8.random_sigma(*LATERAL)
        for key, name in (("jlf", "J_LF"), ("jlfc", "J_LFC")):
            v = row.values.get(key)
            if v is not None:
                judge_statistics(row, key, name, v * rel, JND[key], "", label)
        ends = []
        for f in ("forward", "reverse"):
            o1, f1 = (
                band_signal(omni, rate, band, onset, filtering=f),
                band_signal(fig8, rate, band, onset, filtering=f),
            )
            ends.append(_early(o1, f1))
        for key, name in (("jlf", "J_LF"), ("jlfc", "J_LFC")):
            judge_filter(row, key, name, ends[0][key], ends[1][key], JND[key], "", label)

    if reference_db is None:
        row.flag(
            ("lj_db",),
            NOT_EVALUABLE,
            "lj_no_calibration",
            f"{label}: L_J not evaluated: "
            + (reference_missing or "it needs a strength calibration (as G does)"),
        )
    elif not f8.late_known:
        row.flag(
            ("lj_db",),
            NOT_EVALUABLE,
            "late_energy_unknown",
            f"{label}: L_J not evaluated: the figure-of-eight response ends only "
            f"{f8.inr_db:.0f} dB below its peak and no noise floor could be separated",
        )
    else:
        e, n, s = f8.energy(LATE, None)
        late = e - n
        if late <= 0:
            row.flag(
                ("lj_db",),
                NOT_EVALUABLE,
                "lj_no_energy",
                f"{label}: L_J not evaluated: no lateral energy above the noise after 80 ms",
            )
        else:
            row.values["lj_db"] = float(10 * np.log10(late / rate)) - float(reference_db)
            sigma = 10 / np.log(10) * f8.noise_sigma(late, s) / late
            judge_sigma(row, "lj_db", "L_J", sigma, JND["lj_db"], " dB", label)
            spread = 10 / np.log(10) * f8.random_sigma(LATE, None)
            judge_statistics(row, "lj_db", "L_J", spread, JND["lj_db"], " dB", label)
    return row.finish(KEYS)


def lateral_fractions(
    omni: np.ndarray,
    fig8: np.ndarray,
    rate: int,
    *,
    bands: list[Band] | None = None,
    onset: int | None = None,
    strength_reference=None,
    band_set: str = "octave",
) -> list[JudgedRow]:
    """J_LF, J_LFC and L_J per octave band, each with its verdict.

    J_LF = ∫₅⁸⁰ p_L² dt / ∫₀⁸⁰ p² dt, J_LFC = ∫₅⁸⁰ |p_L·p| dt / ∫₀⁸⁰ p² dt (times in ms from the
    direct sound), L_J = 10·lg(∫₈₀^∞ p_L² dt / ∫ p₁₀² dt), p the omni's and p_L the lateral
    figure-of-eight's pressure (its null towards the source, its on-axis gain the omni's), p₁₀
    the source's at 10 m in a free field.

    Parameters
    ----------
    omni, fig8 : ndarray, 1-D, same length
        The two channels, recorded together.
    rate : int
    bands : list of Band, optional
        Default: every octave band the rate holds (values in 125 Hz–4 kHz, null elsewhere).
    onset : int, optional
        Time zero (default: the omni's broadband direct sound).
    strength_reference : StrengthReference, optional
        As for G (:mod:`roomconv.analysis.calibration`); without it L_J is null.
    band_set : str
        The band set the reference is looked up in.

    Returns
    -------
    list of JudgedRow
        Keys ``jlf``, ``jlfc``, ``lj_db``.

    Notes
    -----
    Time zero is the omni's onset (the figure-of-eight nulls the direct sound). The leak of
    the direct sound into the figure-of-eight, ε = sqrt(E_fig8/E_omni) over ±0.5 ms around
    the broadband direct sound's peak, bounds the error it can cause: reflections from the
    source's side reach the lateral channel with at most ε of their amplitude, adding up to
    ε² (J_LF) and ε (J_LFC) of the early share. A bound over half a JND is a caution, over
    three JNDs no value: for J_LF that is a direct sound less than about 16 dB below the
    omni's when the early energy is mostly reflected, and for J_LFC about 32 dB.

    References
    ----------
    Barron, M., Marshall, A. H. (1981). Spatial impression due to early lateral reflections in
    concert halls. J. Sound Vib. 77, 211–232.
    Kleiner, M. (1989). A new way of measuring the lateral energy fraction. Applied
    Acoustics 27, 321–327 (J_LFC — from memory).
    Bradley, J. S., Soulodre, G. A. (1995). Objective measures of listener envelopment.
    J. Acoust. Soc. Am. 98, 2590–2597 (late lateral level).
    ISO 3382-1:2009, Annex A (J_LF, J_LFC, L_J — from memory).

    Examples
    --------
    >>> rate, a, th = 16000, 0.5, np.radians(60)
    >>> p = np.zeros(rate // 2); pl = np.zeros(rate // 2)
    >>> p[100] = 1.0; p[100 + 320] = a; pl[100 + 320] = a * np.cos(th)  # reflection at 20 ms
    >>> jlf, jlfc = wideband_fractions(p, pl, rate)
    >>> round(jlf, 4), round(jlfc, 4)  # a²cos²θ/(1+a²), a²|cos θ|/(1+a²)
    (0.05, 0.1)
    >>> rows = lateral_fractions(p, pl, rate)
    >>> [round(r.values["jlf"], 2) for r in rows if r.band_hz in (500.0, 1000.0)]
    [0.05, 0.05]
    """
    omni = np.asarray(omni, dtype=np.float64)
    fig8 = np.asarray(fig8, dtype=np.float64)
    check_same_shape({"omni": omni, "figure-of-eight": fig8})
    if not np.any(omni):
        raise InputError("the omni channel is silent")
    # A figure-of-eight in a room always receives reflections: an all-zero channel is a
    # missing or mis-ordered channel, and would read as J_LF = 0 (no lateral sound at all).
    if not np.any(fig8):
        raise InputError(
            "the figure-of-eight channel is silent (all zeros); check the channel order "
            "and that this channel was recorded"
        )
    if bands is None:
        bands, _ = bands_for_rate("octave", rate)
    if onset is None:
        onset = onset_index(omni)
    # The direct sound's peak ±0.5 ms: short enough to leave out the first reflections (a
    # path 17 cm longer) and the diffuse field, long enough for a microphone's own spread.
    first = omni[onset : onset + max(1, int(round(DIRECT_SOUND_S * rate)))]
    peak = onset + int(np.argmax(np.abs(first)))
    half = max(1, int(round(LEAK_WINDOW_S * rate)))
    d = slice(max(0, peak - half), peak + half + 1)
    e_om = float(np.sum(np.square(omni[d])))
    leak = float(np.sqrt(np.sum(np.square(fig8[d])) / e_om)) if e_om > 0 else 1.0
    gain_note = _gain_check(omni, fig8, onset, rate)
    rows = []
    for b in bands:
        ref, missing = (None, None)
        if strength_reference is not None:
            ref, missing = strength_reference.lookup(b, rate, band_set=band_set)
        row = _one_band(omni, fig8, rate, b, onset, ref, missing, leak)
        given = [k for k in KEYS if row.values.get(k) is not None]
        if gain_note and given:
            row.flag(given, CAUTION, "fig8_gain_unmatched", gain_note)
        rows.append(row)
    flag_early_start(rows, ("jlf", "jlfc"), onset, rate)
    return rows


def _gain_check(omni: np.ndarray, fig8: np.ndarray, onset: int, rate: int) -> str | None:
    """A warning when the late field says the figure-of-eight's gain is not the omni's.

    In a diffuse field an ideal figure-of-eight picks up the mean of cos² over the sphere,
    1/3 of the omni's energy (closed form). J_LF and L_J scale with the gain ratio: 1 dB
    moves J_LF by 26 %. A late 80–200 ms ratio more than ``GAIN_TOLERANCE_DB`` from 1/3 is
    flagged (the tolerance allows for a hall's late field that is not quite isotropic:
    common practice)."""
    late = slice(onset + int(0.08 * rate), onset + int(0.2 * rate))
    e_o = float(np.sum(np.square(omni[late])))
    e_f = float(np.sum(np.square(fig8[late])))
    if e_o <= 0 or e_f <= 0:
        return None
    off = 10 * np.log10(3 * e_f / e_o)
    if abs(off) <= GAIN_TOLERANCE_DB:
        return None
    return (
        f"the late field gives the figure-of-eight {off:+.1f} dB against the omni's gain "
        "(an ideal one picks up a third of a diffuse field's energy): check that its on-axis "
        "gain matches the omni's"
    )


def wideband_fractions(omni: np.ndarray, fig8: np.ndarray, rate: int) -> tuple[float, float]:
    """Unfiltered J_LF and J_LFC (no noise removed): the closed-form check's quantity.

    J_LF = Σ₅⁸⁰ p_L² / Σ₀⁸⁰ p², J_LFC = Σ₅⁸⁰ |p_L·p| / Σ₀⁸⁰ p² over the whole band, times in
    ms from the omni's onset.

    Parameters
    ----------
    omni, fig8 : ndarray, 1-D, same length
        The two channels, recorded together.
    rate : int
        Sample rate, Hz.

    Returns
    -------
    jlf, jlfc : float

    References
    ----------
    Barron, M., Marshall, A. H. (1981). J. Sound Vib. 77, 211–232 (lateral fraction).
    Kleiner, M. (1989). Applied Acoustics 27, 321–327 (J_LFC — from memory).
    ISO 3382-1:2009, Annex A (from memory).

    Examples
    --------
    Direct sound and one reflection of amplitude a = 0.5 from the lateral axis (θ = 0):
    J_LF = a²cos²θ/(1 + a²) = 0.25/1.25 = 0.2 and J_LFC = a²|cos θ|/(1 + a²) = 0.2 (closed
    form). The same reflection 3 ms after the direct sound is before the 5 ms limit: 0.

    >>> p, pl = np.zeros(4000), np.zeros(4000)
    >>> p[50], p[50 + 160], pl[50 + 160] = 1.0, 0.5, 0.5  # 20 ms at 8 kHz
    >>> [round(v, 12) for v in wideband_fractions(p, pl, 8000)]
    [0.2, 0.2]
    >>> p, pl = np.zeros(4000), np.zeros(4000)
    >>> p[50], p[50 + 24], pl[50 + 24] = 1.0, 0.5, 0.5  # 3 ms
    >>> wideband_fractions(p, pl, 8000)
    (0.0, 0.0)
    """
    omni = np.asarray(omni, dtype=np.float64)
    fig8 = np.asarray(fig8, dtype=np.float64)
    check_same_shape({"omni": omni, "figure-of-eight": fig8})
    onset = onset_index(omni)
    i5, i80 = onset + int(round(0.005 * rate)), onset + int(round(0.080 * rate))
    den = float(np.sum(np.square(omni[onset:i80])))
    return (
        float(np.sum(np.square(fig8[i5:i80]))) / den,
        float(np.sum(np.abs(fig8[i5:i80] * omni[i5:i80]))) / den,
    )


def lateral_single_numbers(rows: list[JudgedRow]) -> dict:
    """J_LF, J_LFC and L_J averaged over the octaves 125 Hz–1 kHz, with verdicts and the
    reason for a null.

    Parameters
    ----------
    rows : list of JudgedRow
        The octave rows of :func:`lateral_fractions`.

    Returns
    -------
    dict
        ``values`` (``jlf_avg``, ``jlfc_avg``, ``lj_avg_db``; None when a band has no value),
        ``verdicts`` (the worst of the bands') and ``reasons``.

    References
    ----------
    ISO 3382-1:2009, Annex A (averages over 125 Hz–1 kHz — from memory).

    Examples
    --------
    >>> rows = [JudgedRow(f, values={"jlf": v, "jlfc": 2 * v}).finish(KEYS)
    ...         for f, v in ((125.0, 0.1), (250.0, 0.2), (500.0, 0.3), (1000.0, 0.4))]
    >>> out = lateral_single_numbers(rows)
    >>> {k: None if v is None else round(v, 12) for k, v in out["values"].items()}
    {'jlf_avg': 0.25, 'jlfc_avg': 0.5, 'lj_avg_db': None}
    >>> out["verdicts"]["jlf_avg"], out["verdicts"]["lj_avg_db"]
    ('ok', 'not evaluable')
    """
    out: dict = {"values": {}, "verdicts": {}, "reasons": {}}
    for key, name in (("jlf", "jlf_avg"), ("jlfc", "jlfc_avg"), ("lj_db", "lj_avg_db")):
        v, verdict, why = band_average(rows, key, *AVERAGED)
        out["values"][name] = v
        out["verdicts"][name] = verdict
        if why:
            out["reasons"][name] = why
    return out
