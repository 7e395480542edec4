"""Speech transmission index from an impulse response (IEC 60268-16, indirect method).

Modulation transfer by Schroeder's formula per octave band, the noise factor, the auditory
masking and reception threshold of the 2011 edition (revision 4), TI, MTI and the STI with
its redundancy correction; the STIPA subset and the qualification band letter.

Edition: IEC 60268-16:2011 (edition 4). The constants marked "from memory" below were
recalled, not read from the standard at the time of writing; check them against it before
a value goes into a compliance document.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from ..errors import InputError
from .bands import Band, all_bands
from .decay import lundeby_truncation, onset_index
from .parameters import zero_phase_band

__all__ = [
    "OCTAVES_HZ",
    "MODULATION_HZ",
    "STIPA_HZ",
    "EDITION",
    "CAUTIONS",
    "DEFAULT_SPEECH_LEVEL_DBA",
    "StiResult",
    "exponential_mtf",
    "modulation_transfer",
    "noise_factor",
    "speech_spectrum",
    "a_weighted_level",
    "masking_factors",
    "transmission_index",
    "sti_from_mti",
    "speech_transmission_index",
    "qualification_band",
    "sti_of_response",
    "SpeechConditions",
    "sti_entry",
    "average_sti",
    "octave_levels",
]

EDITION = "IEC 60268-16:2011 (edition 4), indirect method"

#: Octave bands of the index, Hz.
OCTAVES_HZ = (125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0)
#: 14 modulation frequencies, 0.63–12.5 Hz in third-octave steps (IEC 60268-16).
MODULATION_HZ = (0.63, 0.8, 1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0, 10.0, 12.5)
#: STIPA: two modulation frequencies per octave, 125 Hz → 8 kHz (IEC 60268-16:2011,
#: Annex B) — from memory.
STIPA_HZ = (
    (1.6, 8.0),
    (1.0, 5.0),
    (0.63, 3.15),
    (2.0, 10.0),
    (1.25, 6.25),
    (0.8, 4.0),
    (2.5, 12.5),
)

#: Weighting factors α (7) and redundancy factors β (6), 125 Hz → 8 kHz
#: (IEC 60268-16:2011, Table A.1 — from memory). Σα − Σβ = 1 for both voices.
ALPHA = {
    "male": (0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173),
    # The female set has no 125 Hz band.
    "female": (0.0, 0.117, 0.223, 0.216, 0.328, 0.250, 0.194),
}
BETA = {
    "male": (0.085, 0.078, 0.065, 0.011, 0.047, 0.095),
    "female": (0.0, 0.099, 0.066, 0.062, 0.025, 0.076),
}

#: Male speech spectrum, octave levels relative to the A-weighted speech level, dB
#: (IEC 60268-16:2011, Table A.2 — from memory). Its A-weighted sum is +0.05 dB.
MALE_SPECTRUM_DB = (2.9, 2.9, -0.8, -6.8, -12.8, -18.8, -24.8)
#: A-weighting at the octave centres 125 Hz → 8 kHz (IEC 61672-1:2013, Table 3).
A_WEIGHTING_DB = (-16.1, -8.6, -3.2, 0.0, 1.2, 1.0, -1.1)
#: Absolute speech reception threshold per octave, dB SPL (IEC 60268-16:2011, Table A.3 —
#: from memory).
RECEPTION_THRESHOLD_DB = (46.0, 27.0, 12.0, 6.5, 7.5, 8.0, 12.0)
#: The A-weighted speech level assumed when none is given: normal vocal effort at the
#: listener (IEC 60268-16:2011 uses 60 dB(A) as its reference level — from memory).
DEFAULT_SPEECH_LEVEL_DBA = 60.0
#: Effective signal-to-noise ratios are clipped to ±15 dB (IEC 60268-16).
SNR_CLIP_DB = 15.0

#: Qualification bands, lower limits (IEC 60268-16:2011, Annex F, Table F.1).
QUALIFICATION_BANDS = (
    ("A+", 0.76),
    ("A", 0.72),
    ("B", 0.68),
    ("C", 0.64),
    ("D", 0.60),
    ("E", 0.56),
    ("F", 0.52),
    ("G", 0.48),
    ("H", 0.44),
    ("I", 0.40),
    ("J", 0.36),
    ("U", -np.inf),
)
#: Just-noticeable difference of the STI (Galbrun & Kitapci 2014, Applied Acoustics).
JND = 0.03

#: The response's own noise floor acts as noise on the modulation transfer. Below this INR
#: (band peak over noise) the decay is seen over too short a range for the truncated and
#: tail-compensated estimate to be within a JND (our limit, checked against the closed form
#: in tests/analysis/test_sti.py: at 20 dB it moves the STI by less than half a JND); 25 dB
#: and above gives no flag.
MIN_INR_DB = 20.0
CAUTION_INR_DB = 25.0
#: A response cut inside its decay (no noise floor) has no tail to compensate: 30 dB of
#: decay left out moves the STI by about half a JND at T = 2 s (checked in the tests), so
#: below 35 dB it carries a warning.
CUT_CAUTION_DB = 35.0

CAUTIONS = (
    "Compliance decisions for voice alarm and life-safety systems follow the applicable "
    "codes and a licensed professional's judgement; these values do not replace them.",
    "STI computed from an impulse response (indirect method) can differ from a direct "
    "STIPA measurement with a test signal at talker level: the loudspeaker, the assumed "
    "speech level and the noise given here all enter the result.",
)


@dataclass
class StiResult:
    """One STI value with its parts; ``value`` is None when not evaluable (``reason``).

    Attributes
    ----------
    value : float or None
        The speech transmission index, 0…1; None when it cannot be given honestly.
    mti : list of float or None
        Modulation transmission index per octave 125 Hz → 8 kHz (None entries with
        ``value`` None).
    band : str or None
        Qualification band letter (IEC 60268-16:2011, Annex F) of ``value``.
    method : str
        Edition, modulation frequencies, weighting and levels used, in words.
    warnings : list of str
        Conditions that make the value less certain, each in one sentence.
    reason : str or None
        Why ``value`` is None.
    mtf : ndarray or None
        Modulation transfer per octave and modulation frequency after noise, masking and
        threshold, shape (7, 14) or (7, 2) for STIPA.

    References
    ----------
    IEC 60268-16:2011, Sound system equipment — Part 16: Objective rating of speech
    intelligibility by speech transmission index, Annex A and Annex F.

    Examples
    --------
    >>> r = StiResult(0.5, [0.5] * 7, qualification_band(0.5), "by hand")
    >>> r.as_dict()["value"], r.as_dict()["band"]
    (0.5, 'G')
    """

    value: float | None
    mti: list[float | None]
    band: str | None
    method: str
    warnings: list[str] = field(default_factory=list)
    reason: str | None = None
    mtf: np.ndarray | None = None  #: (7, n_mod) modulation transfer after noise and masking

    def as_dict(self) -> dict:
        """The result as JSON-ready values (rounded to 4 decimals), without ``mtf``.

        Returns
        -------
        dict
            Keys ``value``, ``mti``, ``band``, ``method``, ``warnings``, ``reason``.
        """
        return {
            "value": None if self.value is None else round(float(self.value), 4),
            "mti": [None if v is None else round(float(v), 4) for v in self.mti],
            "band": self.band,
            "method": self.method,
            "warnings": list(self.warnings),
            "reason": self.reason,
        }


# --- modulation transfer ------------------------------------------------------------------
def exponential_mtf(freqs_hz, t_s: float) -> np.ndarray:
    """Modulation transfer of a pure exponential energy decay, reverberation time ``t_s``.

    m(F) = 1 / √(1 + (2πF T / 13.8155)²), where 13.8155 = 6 ln 10.

    Parameters
    ----------
    freqs_hz : float or sequence of float
        Modulation frequencies F, Hz.
    t_s : float
        Reverberation time T, s (60 dB of decay).

    Returns
    -------
    ndarray
        m(F), 0…1, one per modulation frequency.

    References
    ----------
    Houtgast, T., Steeneken, H. J. M., Plomp, R. (1980). Predicting speech intelligibility
    in rooms from the modulation transfer function. Acustica 46, 60–72.
    Schroeder, M. R. (1981). Modulation transfer functions: definition and measurement.
    Acustica 49, 179–182.

    Examples
    --------
    At F = 0 nothing is lost; where 2πFT = 6 ln 10 the closed form gives 1/√2:

    >>> np.round(exponential_mtf([0.0, 6 * np.log(10) / (2 * np.pi)], 1.0), 4)
    array([1.    , 0.7071])
    """
    f = np.asarray(freqs_hz, dtype=np.float64)
    return 1.0 / np.sqrt(1.0 + (2 * np.pi * f * t_s / (6 * np.log(10))) ** 2)


def modulation_transfer(energy: np.ndarray, rate: int, freqs_hz) -> np.ndarray:
    """Schroeder's formula on a squared response: m(F) = |∫h² e^(−j2πFt) dt| / ∫h² dt.

    Parameters
    ----------
    energy : ndarray, 1-D
        The squared (band) response h²(t), from its onset; non-negative.
    rate : int
        Sample rate, Hz.
    freqs_hz : sequence of float
        Modulation frequencies, Hz.

    Returns
    -------
    ndarray
        m(F), 0…1, one per modulation frequency.

    Raises
    ------
    InputError
        When ``energy`` sums to zero.

    References
    ----------
    Schroeder, M. R. (1981). Modulation transfer functions: definition and measurement.
    Acustica 49, 179–182.

    Examples
    --------
    Two equal pulses Δ = 0.1 s apart: m(F) = |1 + e^(−j2πFΔ)| / 2 = |cos(πFΔ)|, so 1 at
    0 Hz, cos(π/4) at 2.5 Hz and 0 at 5 Hz:

    >>> e = np.zeros(1000)
    >>> e[[0, 800]] = 1.0  # 800 samples at 8 kHz = 0.1 s
    >>> np.round(modulation_transfer(e, 8000, [0.0, 2.5, 5.0]), 4)
    array([1.    , 0.7071, 0.    ])
    """
    e = np.asarray(energy, dtype=np.float64)
    total = e.sum()
    if not total > 0:
        raise InputError("the band response holds no energy")
    return np.abs(_energy_transform(e, rate, freqs_hz)) / total


#: The energy is summed over blocks this long before the transform: at 12.5 Hz a 0.5 ms
#: block changes |m| by a factor 1 − (2πFΔ)²/24 ≈ 1 − 7e-5 (a block's phase spread).
_BLOCK_S = 0.0005


def _energy_transform(e: np.ndarray, rate: int, freqs_hz) -> np.ndarray:
    """∫e(t) e^(−j2πFt) dt / dt for each F, on 0.5 ms block sums at the blocks' centres."""
    n = max(1, int(rate * _BLOCK_S))
    m = e.size // n
    blocks = e[: m * n].reshape(m, n).sum(axis=1)
    t = (np.arange(m) * n + (n - 1) / 2) / rate
    if e.size > m * n:
        blocks = np.append(blocks, e[m * n :].sum())
        t = np.append(t, (m * n + (e.size - m * n - 1) / 2) / rate)
    f = np.asarray(freqs_hz, dtype=np.float64)
    return np.exp(-2j * np.pi * np.outer(f, t)) @ blocks


def noise_factor(snr_db) -> np.ndarray:
    """Modulation reduction by stationary noise: 1 / (1 + 10^(−SNR/10)).

    Parameters
    ----------
    snr_db : float or array
        Speech-to-noise ratio per octave, dB.

    Returns
    -------
    ndarray
        The factor the modulation transfer is multiplied by, 0…1.

    References
    ----------
    IEC 60268-16:2011, Annex A (modulation reduction by background noise).
    Houtgast, T., Steeneken, H. J. M., Plomp, R. (1980). Predicting speech intelligibility
    in rooms from the modulation transfer function. Acustica 46, 60–72.

    Examples
    --------
    Equal speech and noise halve the modulation; at 10 dB it is 1 / (1 + 0.1) = 10/11:

    >>> noise_factor([0.0, 10.0])
    array([0.5       , 0.90909091])
    """
    return 1.0 / (1.0 + 10.0 ** (-np.asarray(snr_db, dtype=np.float64) / 10.0))


# --- levels, masking, threshold -----------------------------------------------------------
def speech_spectrum(level_dba: float) -> np.ndarray:
    """Octave levels (125 Hz → 8 kHz) of male speech at the A-weighted level ``level_dba``.

    Parameters
    ----------
    level_dba : float
        A-weighted speech level, dB(A).

    Returns
    -------
    ndarray, shape (7,)
        Octave levels, dB SPL: ``level_dba`` plus the standard's relative spectrum.

    References
    ----------
    IEC 60268-16:2011, Table A.2 (relative octave levels of the test signal) — from memory.

    Examples
    --------
    The relative spectrum (2.9, 2.9, −0.8, −6.8, −12.8, −18.8, −24.8 dB) shifted to 60 dB(A):

    >>> speech_spectrum(60.0)
    array([62.9, 62.9, 59.2, 53.2, 47.2, 41.2, 35.2])
    """
    return float(level_dba) + np.asarray(MALE_SPECTRUM_DB)


def a_weighted_level(octave_db) -> float:
    """A-weighted sum of seven octave levels 125 Hz → 8 kHz.

    Parameters
    ----------
    octave_db : sequence of 7 floats
        Octave levels 125 Hz → 8 kHz, dB.

    Returns
    -------
    float
        10·lg Σ 10^((L_k + A_k)/10), dB(A).

    References
    ----------
    IEC 61672-1:2013, Electroacoustics — Sound level meters — Part 1: Specifications,
    Table 3 (A-weighting at the octave centres).

    Examples
    --------
    Levels equal to minus the A-weights put every octave at 0 dB(A), so the sum is
    10·lg 7 = 8.451 dB(A):

    >>> round(a_weighted_level([16.1, 8.6, 3.2, 0.0, -1.2, -1.0, 1.1]), 3)
    8.451
    """
    x = np.asarray(octave_db, dtype=np.float64) + np.asarray(A_WEIGHTING_DB)
    return float(10 * np.log10(np.sum(10 ** (x / 10))))


def _masking_slope_db(level_db: np.ndarray) -> np.ndarray:
    """Level-dependent upward spread of masking from the band below (IEC 60268-16:2011,
    Table A.4 — from memory)."""
    L = np.asarray(level_db, dtype=np.float64)
    return np.select(
        [L < 63, L < 67, L < 100],
        [0.5 * L - 65.0, 1.8 * L - 146.9, 0.5 * L - 59.8],
        default=-10.0,
    )


def masking_factors(total_db, *, threshold: bool = True) -> np.ndarray:
    """I_k / (I_k + I_am,k + I_rt,k) per octave: the modulation left by auditory masking
    from the band below and the absolute reception threshold.

    Parameters
    ----------
    total_db : sequence of 7 floats
        Octave levels of speech plus noise at the listener, dB SPL.
    threshold : bool
        Include the reception threshold.

    Returns
    -------
    ndarray, shape (7,)
        The factor per octave the modulation transfer is multiplied by, 0…1.

    References
    ----------
    IEC 60268-16:2011, A.2.3–A.2.4 (auditory masking, absolute reception threshold) —
    from memory.

    Examples
    --------
    Nothing masks the 125 Hz band; at 60 dB the masking slope of this module's table is
    0.5·60 − 65 = −35 dB, so every higher band keeps 1 / (1 + 10^(−3.5)) = 0.999684:

    >>> np.round(masking_factors([60.0] * 7, threshold=False), 6)
    array([1.      , 0.999684, 0.999684, 0.999684, 0.999684, 0.999684,
           0.999684])
    """
    L = np.asarray(total_db, dtype=np.float64)
    i = 10 ** (L / 10)
    am = np.zeros(7)
    am[1:] = i[:-1] * 10 ** (_masking_slope_db(L[:-1]) / 10)
    rt = 10 ** (np.asarray(RECEPTION_THRESHOLD_DB) / 10) if threshold else np.zeros(7)
    return i / (i + am + rt)


# --- the index ----------------------------------------------------------------------------
def transmission_index(m) -> np.ndarray:
    """TI = (SNR_eff + 15) / 30 with SNR_eff = 10 lg(m / (1 − m)) clipped to ±15 dB.

    Parameters
    ----------
    m : float or array
        Modulation transfer values, 0…1.

    Returns
    -------
    ndarray
        Transmission index per value, 0…1.

    References
    ----------
    IEC 60268-16:2011, Annex A (effective signal-to-noise ratio, transmission index).

    Examples
    --------
    m = 0.5 is SNR_eff = 0 dB (TI 0.5); m = 10/11 is 10 dB (TI 25/30); m = 0.99 is 20 dB,
    clipped to 15 dB (TI 1):

    >>> np.round(transmission_index([0.5, 10 / 11, 0.99]), 4)
    array([0.5   , 0.8333, 1.    ])
    """
    m = np.clip(np.asarray(m, dtype=np.float64), 1e-12, 1 - 1e-12)
    snr = np.clip(10 * np.log10(m / (1 - m)), -SNR_CLIP_DB, SNR_CLIP_DB)
    return (snr + SNR_CLIP_DB) / (2 * SNR_CLIP_DB)


def sti_from_mti(mti, voice: str = "male") -> float:
    """STI = Σ α_k MTI_k − Σ β_k √(MTI_k · MTI_k+1) (IEC 60268-16:2011, A.2.6).

    Parameters
    ----------
    mti : sequence of 7 floats
        Modulation transmission index per octave 125 Hz → 8 kHz, 0…1.
    voice : {"male", "female"}
        Which weighting factors α and redundancy factors β to use.

    Returns
    -------
    float
        The speech transmission index (not clipped to 0…1).

    Raises
    ------
    InputError
        For an unknown ``voice``.

    References
    ----------
    IEC 60268-16:2011, A.2.6 and Table A.1 (weighting and redundancy factors) — factors
    from memory.

    Examples
    --------
    Σα − Σβ = 1 for both voices, so an equal MTI in every octave is the STI itself:

    >>> round(sti_from_mti([0.5] * 7), 6), round(sti_from_mti([0.5] * 7, "female"), 6)
    (0.5, 0.5)
    """
    if voice not in ALPHA:
        raise InputError(f"voice {voice!r} is not one of male, female")
    m = np.asarray(mti, dtype=np.float64)
    a, b = np.asarray(ALPHA[voice]), np.asarray(BETA[voice])
    return float(np.dot(a, m) - np.dot(b, np.sqrt(m[:-1] * m[1:])))


def qualification_band(sti: float | None) -> str | None:
    """The letter of IEC 60268-16:2011 Annex F (Table F.1) for an STI value.

    Parameters
    ----------
    sti : float or None
        Speech transmission index.

    Returns
    -------
    str or None
        "A+", "A" … "J", or "U" below the lowest band; None for None.

    References
    ----------
    IEC 60268-16:2011, Annex F, Table F.1 (qualification bands).

    Examples
    --------
    0.50 lies in G (0.48 up to 0.52); 0.80 is above the A+ limit 0.76:

    >>> qualification_band(0.50), qualification_band(0.80), qualification_band(None)
    ('G', 'A+', None)
    """
    if sti is None:
        return None
    for letter, low in QUALIFICATION_BANDS:
        if sti >= low:
            return letter
    return "U"


def _method(voice: str, stipa: bool, speech_db, noise_db, masking: bool) -> str:
    what = "STIPA modulation frequencies" if stipa else "14 modulation frequencies"
    parts = [EDITION, what, f"{voice} weighting"]
    if masking:
        parts.append("auditory masking and reception threshold")
    if speech_db is not None:
        parts.append(f"speech {a_weighted_level(speech_db):.1f} dB(A)")
    parts.append("no background noise" if noise_db is None else "with background noise")
    return "; ".join(parts)


def speech_transmission_index(
    mtf,
    *,
    speech_db=None,
    noise_db=None,
    voice: str = "male",
    stipa: bool = False,
    masking: bool = True,
) -> StiResult:
    """STI from the room's modulation transfer, speech and noise levels per octave.

    Parameters
    ----------
    mtf : array, shape (7, 14) or (7, 2) with ``stipa``
        Modulation transfer of the room alone per octave (125 Hz → 8 kHz) and modulation
        frequency.
    speech_db : sequence of 7 floats, optional
        Speech octave levels at the listener, dB SPL; default male speech at
        :data:`DEFAULT_SPEECH_LEVEL_DBA`.
    noise_db : sequence of 7 floats, optional
        Background noise octave levels, dB SPL; None for no noise.
    voice : {"male", "female"}
    stipa : bool
        ``mtf`` holds the two STIPA frequencies per band.
    masking : bool
        Apply auditory masking and the reception threshold (the standard's procedure);
        False only for comparison with the plain noise-free formula.

    Returns
    -------
    StiResult
        The value clipped to 0…1, MTI per octave, band letter, method and warnings.

    Raises
    ------
    InputError
        When ``mtf``, ``speech_db`` or ``noise_db`` has the wrong shape or non-finite
        values, or ``voice`` is unknown.

    References
    ----------
    IEC 60268-16:2011, Sound system equipment — Part 16: Objective rating of speech
    intelligibility by speech transmission index, Annex A (indirect method, masking,
    threshold, weighting) — constants from memory as marked in this module.

    Examples
    --------
    A room that keeps all modulation, with noise as loud as the speech in every octave:
    m = 1 · 1/(1 + 10⁰) = 0.5, so SNR_eff = 0 dB, TI = MTI = 0.5 and (Σα − Σβ = 1) STI 0.5:

    >>> r = speech_transmission_index(
    ...     np.ones((7, 14)), noise_db=speech_spectrum(60.0), masking=False
    ... )
    >>> round(r.value, 6), r.band
    (0.5, 'G')
    """
    m = np.asarray(mtf, dtype=np.float64)
    n_mod = 2 if stipa else len(MODULATION_HZ)
    if m.shape != (7, n_mod):
        raise InputError(f"modulation transfer must have shape (7, {n_mod}), not {m.shape}")
    speech = speech_spectrum(DEFAULT_SPEECH_LEVEL_DBA) if speech_db is None else speech_db
    speech = np.asarray(speech, dtype=np.float64)
    if speech.shape != (7,) or not np.all(np.isfinite(speech)):
        raise InputError("speech levels: give seven finite octave levels, 125 Hz to 8 kHz")
    total = 10 ** (speech / 10)
    if noise_db is not None:
        noise = np.asarray(noise_db, dtype=np.float64)
        if noise.shape != (7,) or not np.all(np.isfinite(noise)):
            raise InputError("noise levels: give seven finite octave levels, 125 Hz to 8 kHz")
        m = m * noise_factor(speech - noise)[:, None]
        total = total + 10 ** (noise / 10)
    if masking:
        m = m * masking_factors(10 * np.log10(total))[:, None]
    ti = transmission_index(m)
    mti = ti.mean(axis=1)
    value = min(1.0, max(0.0, sti_from_mti(mti, voice)))
    warnings = []
    if voice == "female":
        warnings.append(
            "female weighting; speech levels follow the male spectrum of the 2011 edition "
            "(no female spectrum here)"
        )
    return StiResult(
        value=value,
        mti=[float(x) for x in mti],
        band=qualification_band(value),
        method=_method(voice, stipa, speech if speech_db is not None else None, noise_db, masking),
        warnings=warnings,
        mtf=m,
    )


# --- from a response ----------------------------------------------------------------------
def _octaves() -> list[Band]:
    return [b for b in all_bands("octave") if b.nominal in OCTAVES_HZ]


@lru_cache(maxsize=64)
def _filter_mtf(band: Band, rate: int, freqs: tuple[float, ...]) -> np.ndarray:
    """Modulation transfer of the zero-phase band filter's own energy response.

    For a noise-like room response the band's energy envelope is the room's convolved with
    the filter's, so the filter multiplies the room's m(F) by this; dividing by it keeps the
    filter's ringing (tens of ms at 125 Hz) out of the result (Schroeder 1981).
    """
    pad = int(np.ceil(20.0 * rate / band.bandwidth))
    x = np.zeros(2 * pad + 1)
    x[pad] = 1.0
    y = zero_phase_band(x, rate, band)
    return modulation_transfer(y**2, rate, freqs)


def _band_mtf(x: np.ndarray, rate: int, band: Band, freqs) -> tuple[np.ndarray, float, bool]:
    """Room modulation transfer of one band from its onset: truncated where the decay meets
    the noise, the noise subtracted and the decay beyond compensated (Lundeby et al. 1995).

    Returns m(F), the band's INR (dB) and whether a noise floor was reached (if not, the
    INR is how far the response falls before it ends)."""
    tr = lundeby_truncation(x, rate, bandwidth_hz=band.bandwidth)
    e = np.square(x[: max(tr.index, 1)]) - (tr.noise_energy if tr.noise_limited else 0.0)
    e = np.maximum(e, 0.0)
    total = e.sum()
    f = np.asarray(freqs, dtype=np.float64)
    spec = _energy_transform(e, rate, f)
    if (
        tr.noise_limited
        and tr.compensation > 0
        and np.isfinite(tr.slope_db_s)
        and tr.slope_db_s < 0
    ):
        # The decay beyond the crossing point, continued as an exponential: energy C,
        # density C·k·e^(−k(t−tc)); its transform is C·k·e^(−j2πF tc)/(k + j2πF).
        k = -tr.slope_db_s * np.log(10) / 10
        tc = e.size / rate
        spec = spec + tr.compensation * k * np.exp(-2j * np.pi * f * tc) / (k + 2j * np.pi * f)
        total = total + tr.compensation
    if not total > 0:
        raise InputError(f"{band.label} Hz band holds no energy")
    m = np.abs(spec) / total
    m = np.minimum(m / _filter_mtf(band, rate, tuple(float(x) for x in f)), 1.0)
    return m, float(tr.inr_db), bool(tr.noise_limited)


def sti_of_response(
    h: np.ndarray,
    rate: int,
    *,
    speech_db=None,
    noise_db=None,
    voice: str = "male",
    stipa: bool = False,
) -> StiResult:
    """STI of a 1-D room impulse response (IEC 60268-16:2011, indirect method).

    Each octave 125 Hz → 8 kHz is filtered zero-phase from the broadband onset; its
    modulation transfer comes from Schroeder's formula on the response truncated at the
    Lundeby crossing point with the noise subtracted and the late decay compensated, divided
    by the band filter's own modulation transfer; then noise, masking and threshold as in
    :func:`speech_transmission_index`.

    A band whose INR is below :data:`MIN_INR_DB` makes the value not evaluable (``value``
    None, ``reason`` says why); below :data:`CAUTION_INR_DB` it carries a warning. A rate
    too low for the 8 kHz octave gives no value either.

    Parameters
    ----------
    h : ndarray, shape (samples,)
        The room impulse response, one channel, full-scale units.
    rate : int
        Sample rate, Hz; 32 kHz or more for the 8 kHz octave.
    speech_db, noise_db, voice, stipa
        As in :func:`speech_transmission_index`.

    Returns
    -------
    StiResult
        The value, or None with the reason.

    Raises
    ------
    InputError
        When the response is silent or holds NaN or infinite samples.
    ValueError
        When ``h`` is not one channel.

    References
    ----------
    IEC 60268-16:2011, Annex A.
    Schroeder, M. R. (1981). Modulation transfer functions: definition and measurement.
    Acustica 49, 179–182.
    Lundeby, A., Vigran, T. E., Bietz, H., Vorländer, M. (1995). Uncertainties of
    measurements in room acoustics. Acustica 81, 344–355.

    Examples
    --------
    A synthetic exponential decay (T = 0.5 s, noise floor 120 dB down) lands within the
    JND 0.03 of the closed form m(F) = 1/√(1 + (2πFT/13.8155)²) in every octave:

    >>> rate, T = 32000, 0.5
    >>> t = np.arange(rate) / rate
    >>> rng = np.random.default_rng(1)
    >>> h = rng.standard_normal(rate) * 10 ** (-3 * t / T) + 1e-6 * rng.standard_normal(rate)
    >>> closed = speech_transmission_index(np.tile(exponential_mtf(MODULATION_HZ, T), (7, 1)))
    >>> abs(sti_of_response(h, rate).value - closed.value) < JND
    True

    At 16 kHz the 8 kHz octave does not fit, so there is no value, only the reason:

    >>> r = sti_of_response(np.r_[1.0, np.zeros(99)], 16000)
    >>> r.value is None, r.reason.startswith("the 8 kHz octave does not fit")
    (True, True)
    """
    h = np.asarray(h, dtype=np.float64)
    if h.ndim != 1:
        raise ValueError("sti_of_response takes one channel")
    if not np.all(np.isfinite(h)) or not np.any(h):
        raise InputError("the response is silent or holds NaN/infinite samples")
    method = _method(voice, stipa, speech_db, noise_db, True)
    bands = _octaves()
    if bands[-1].upper >= 0.9 * rate / 2:
        reason = (
            f"the 8 kHz octave does not fit at a sample rate of {rate} Hz; the STI needs "
            "every octave 125 Hz to 8 kHz (use 32 kHz or more)"
        )
        return StiResult(None, [None] * 7, None, method, [reason], reason)
    onset = onset_index(h)
    warnings, low = [], []
    rows = []
    for i, b in enumerate(bands):
        freqs = STIPA_HZ[i] if stipa else MODULATION_HZ
        lead = int(np.ceil(3.0 * rate / b.bandwidth))
        # Start a lead before the onset: the zero-phase filter spreads the direct sound
        # both ways, and all of its energy belongs to the modulation transfer.
        x = zero_phase_band(np.concatenate([np.zeros(lead), h]), rate, b)[onset:]
        m, inr, floor = _band_mtf(x, rate, b, freqs)
        rows.append(m)
        if inr < MIN_INR_DB:
            low.append(f"{b.label} Hz ({inr:.0f} dB)")
        elif not floor and inr < CUT_CAUTION_DB:
            warnings.append(
                f"{b.label} Hz: the response ends only {inr:.0f} dB below its peak, inside "
                "the decay; the missing tail makes the modulation transfer too high"
            )
        elif inr < CAUTION_INR_DB:
            warnings.append(
                f"{b.label} Hz: INR {inr:.0f} dB; the modulation transfer rests on the "
                "tail compensation beyond the noise"
            )
    if low:
        reason = (
            "INR too low for an honest modulation transfer in " + ", ".join(low) + f" (needs "
            f"{MIN_INR_DB:.0f} dB above the noise, or a response that falls that far before "
            "it ends); measure with a longer or louder sweep, or keep more of the response"
        )
        return StiResult(None, [None] * 7, None, method, warnings + [reason], reason)
    res = speech_transmission_index(
        np.array(rows), speech_db=speech_db, noise_db=noise_db, voice=voice, stipa=stipa
    )
    res.warnings = warnings + res.warnings
    return res


# --- conditions, document entries ---------------------------------------------------------
@dataclass(frozen=True)
class SpeechConditions:
    """Talker and listener conditions for the STI of a response.

    ``speech_db`` and ``noise_db`` are octave levels 125 Hz → 8 kHz at the listener (dB SPL);
    ``noise_db`` None means no background noise. ``origin`` says in words where the levels
    came from (for the document's settings).

    Attributes
    ----------
    speech_db : tuple of 7 floats
        Speech octave levels at the listener, dB SPL.
    noise_db : tuple of 7 floats or None
        Background noise octave levels, dB SPL; None for no noise.
    voice : {"male", "female"}
        Band weighting of the STI.
    stipa : bool
        Use the STIPA modulation frequencies.
    origin : str
        Where the levels came from, in words.
    source_files : tuple of str
        Files the levels were read from; no output may replace them.

    References
    ----------
    IEC 60268-16:2011, Table A.2 (male speech spectrum) — from memory.

    Examples
    --------
    >>> c = SpeechConditions.from_level(60.0)
    >>> c.speech_db
    (62.9, 62.9, 59.2, 53.2, 47.2, 41.2, 35.2)
    >>> c.as_dict()["noise_octaves_db"] is None
    True
    """

    speech_db: tuple[float, ...]
    noise_db: tuple[float, ...] | None = None
    voice: str = "male"
    stipa: bool = False
    origin: str = ""
    #: files the levels were read from (a noise recording): no output may replace them
    source_files: tuple[str, ...] = ()

    @classmethod
    def from_level(
        cls,
        level_dba: float = DEFAULT_SPEECH_LEVEL_DBA,
        noise_db=None,
        *,
        voice: str = "male",
        stipa: bool = False,
        origin: str = "",
        source_files: tuple[str, ...] = (),
    ) -> SpeechConditions:
        """Conditions for male-spectrum speech at an A-weighted level.

        Parameters
        ----------
        level_dba : float
            A-weighted speech level at the listener, dB(A), 20…120.
        noise_db : sequence of 7 floats, optional
            Background noise octave levels 125 Hz → 8 kHz, dB SPL (−150…150).
        voice, stipa, origin, source_files
            As the attributes of the same names.

        Returns
        -------
        SpeechConditions

        Raises
        ------
        InputError
            For an unknown voice, a level outside 20…120 dB(A) or unusable noise levels.
        """
        if voice not in ALPHA:
            raise InputError(f"voice {voice!r} is not one of male, female")
        if not np.isfinite(level_dba) or not 20.0 <= level_dba <= 120.0:
            raise InputError(f"speech level {level_dba:g} dB(A) is outside 20…120 dB(A)")
        noise = None
        if noise_db is not None:
            n = np.asarray(noise_db, dtype=np.float64)
            if n.shape != (7,) or not np.all(np.isfinite(n)) or np.any(np.abs(n) > 150):
                raise InputError(
                    "background noise: give seven octave levels 125 Hz to 8 kHz in dB SPL "
                    "(−150…150)"
                )
            noise = tuple(float(x) for x in n)
        speech = tuple(float(x) for x in speech_spectrum(level_dba))
        return cls(speech, noise, voice, stipa, origin, tuple(source_files))

    def as_dict(self) -> dict:
        """The conditions as JSON-ready values for the analysis document's settings.

        Returns
        -------
        dict
            Edition, speech and noise levels (octaves and A-weighted, rounded to 0.01 dB),
            voice, STIPA, origin, the octave centres, the INR limit and where the
            constants come from.
        """
        return {
            "edition": EDITION,
            "speech_level_dba": round(a_weighted_level(self.speech_db), 2),
            "speech_octaves_db": [round(x, 2) for x in self.speech_db],
            "noise_octaves_db": None
            if self.noise_db is None
            else [round(x, 2) for x in self.noise_db],
            "noise_level_dba": None
            if self.noise_db is None
            else round(a_weighted_level(self.noise_db), 2),
            "voice": self.voice,
            "stipa": self.stipa,
            "origin": self.origin,
            "octaves_hz": list(OCTAVES_HZ),
            "min_inr_db": MIN_INR_DB,
            "constants": "α and β weights, masking slopes, reception threshold, male speech "
            "spectrum and STIPA frequencies as in IEC 60268-16:2011, recalled from memory; "
            "qualification bands from its Annex F; JND 0.03 (Galbrun & Kitapci 2014)",
        }


def sti_entry(h: np.ndarray, rate: int, cond: SpeechConditions) -> dict:
    """The ``sti`` object of one position in the analysis document.

    Parameters
    ----------
    h : ndarray, shape (samples,)
        The room impulse response, one channel.
    rate : int
        Sample rate, Hz.
    cond : SpeechConditions
        Speech, noise, voice and STIPA choice.

    Returns
    -------
    dict
        :meth:`StiResult.as_dict` of :func:`sti_of_response`.

    References
    ----------
    IEC 60268-16:2011, Annex A (indirect method).

    Examples
    --------
    >>> e = sti_entry(np.r_[1.0, np.zeros(99)], 16000, SpeechConditions.from_level())
    >>> e["value"], e["band"]
    (None, None)
    """
    return sti_of_response(
        h,
        rate,
        speech_db=cond.speech_db,
        noise_db=cond.noise_db,
        voice=cond.voice,
        stipa=cond.stipa,
    ).as_dict()


def average_sti(entries: list[dict]) -> dict:
    """Mean, spread and minimum of the positions' STI values; null with the reason when no
    position has one. The letter belongs to the mean.

    Parameters
    ----------
    entries : list of dict or None
        The positions' ``sti`` objects (:func:`sti_entry`); those without a value count as
        missing.

    Returns
    -------
    dict
        ``value`` (mean), ``std`` (sample standard deviation, None for one position),
        ``min``, ``n``, ``band``, ``warnings`` and ``reason``.

    References
    ----------
    Galbrun, L., Kitapci, K. (2014), Applied Acoustics: the JND of the STI, 0.03 — from
    memory.

    Examples
    --------
    Mean 0.55 (band F, 0.52 up to 0.56), standard deviation 0.1/√2 = 0.0707, more than
    the JND, so a warning:

    >>> a = average_sti([{"value": 0.5}, {"value": 0.6}])
    >>> a["value"], a["std"], a["min"], a["band"], len(a["warnings"])
    (0.55, 0.0707, 0.5, 'F', 1)
    """
    values = [e["value"] for e in entries if e is not None and e.get("value") is not None]
    missing = len(entries) - len(values)
    warnings = []
    if missing:
        warnings.append(f"{missing} of {len(entries)} positions have no STI value (see each)")
    if not values:
        return {
            "value": None,
            "std": None,
            "min": None,
            "n": 0,
            "band": None,
            "warnings": warnings,
            "reason": "no position has an STI value",
        }
    v = np.asarray(values)
    mean = float(v.mean())
    std = float(v.std(ddof=1)) if v.size > 1 else None
    if std is not None and std > JND:
        warnings.append(
            f"the positions' STI values spread by {std:.3f} (more than the JND {JND}); "
            "the mean hides differences a listener would notice"
        )
    return {
        "value": round(mean, 4),
        "std": None if std is None else round(std, 4),
        "min": round(float(v.min()), 4),
        "n": int(v.size),
        "band": qualification_band(mean),
        "warnings": warnings,
        "reason": None,
    }


def octave_levels(x: np.ndarray, rate: int, full_scale_sine_db: float) -> np.ndarray:
    """Octave levels 125 Hz → 8 kHz of a noise recording, dB SPL.

    ``full_scale_sine_db`` is the sound pressure level a full-scale sine (peak 1.0, 0 dBFS
    in the AES17 sense) represents in the recording's channel.

    Parameters
    ----------
    x : ndarray, shape (samples,)
        The noise recording, one channel, at least 0.5 s, full-scale units.
    rate : int
        Sample rate, Hz; 32 kHz or more.
    full_scale_sine_db : float
        Calibration: dB SPL of a full-scale sine.

    Returns
    -------
    ndarray, shape (7,)
        Octave levels, dB SPL.

    Raises
    ------
    InputError
        For a recording too short, silent in an octave or at too low a rate.

    References
    ----------
    AES17, AES standard method for digital audio engineering — Measurement of digital audio
    equipment (full-scale amplitude, 0 dBFS) — from memory.

    Examples
    --------
    A full-scale 1 kHz sine with the calibration 94 dB reads 94 dB in the 1 kHz octave
    (mean square 1/2 is 0 dB re a full-scale sine):

    >>> rate = 32000
    >>> x = np.sin(2 * np.pi * 1000.0 * np.arange(rate) / rate)
    >>> round(float(octave_levels(x, rate, 94.0)[3]), 2)
    94.0
    """
    x = np.asarray(x, dtype=np.float64)
    if x.ndim != 1 or x.size < rate // 2:
        raise InputError("the noise recording must be one channel of at least 0.5 s")
    out = []
    for b in _octaves():
        if b.upper >= 0.9 * rate / 2:
            raise InputError(
                f"the noise recording's rate {rate} Hz is too low for the 8 kHz octave "
                "(use 32 kHz or more)"
            )
        y = zero_phase_band(x, rate, b)
        # Skip the first and last 0.1 s: the filter's start and end.
        cut = min(rate // 10, y.size // 4)
        ms = float(np.mean(y[cut : y.size - cut] ** 2))
        if not ms > 0:
            raise InputError(f"the noise recording is silent in the {b.label} Hz octave")
        out.append(10 * np.log10(ms / 0.5) + full_scale_sine_db)
    return np.asarray(out)
