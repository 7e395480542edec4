"""ISO 3382 parameters of one impulse response, per band and wideband, each with its validity.

:func:`room_parameters` returns :class:`BandResult` rows. Every value is right within the
ISO 3382-1 just-noticeable difference as far as this module can tell, or carries a
``caution`` verdict with a warning code and text, or is ``None`` ("not evaluable") with the
reason.

How the band filter is kept out of the results (the default, ``filtering="auto"``):

- decay times use the band signal filtered backwards in time, which puts the filter's own
  ringing before the onset instead of into the decay (Jacobsen & Rindel 1987);
- energy ratios and centre time use zero-phase filtering (forwards and backwards), which
  delays no energy across the 50/80 ms limits;
- the strength G uses the single-pass band energy, which is the same either way round and
  matches the calibration (:mod:`roomconv.analysis.calibration`);
- time zero is the broadband response's direct sound for every band.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from scipy.signal import sosfilt

from ..errors import InputError
from ..signal import energy_envelope
from .bands import Band, band_sos, bands_for_rate, filter_band
from .decay import (
    Truncation,
    available_range_db,
    fit_decay,
    lundeby_truncation,
    onset_index,
    schroeder_integral,
)

__all__ = [
    "RANGES",
    "METRICS",
    "JND",
    "BandResult",
    "analyse_response",
    "room_parameters",
    "check_impulse_response",
    "OK",
    "CAUTION",
    "NOT_EVALUABLE",
    "FILTERINGS",
]

OK, CAUTION, NOT_EVALUABLE = "ok", "caution", "not evaluable"
_LN10 = float(np.log(10.0))
_RANK = {OK: 0, CAUTION: 1, NOT_EVALUABLE: 2}
FILTERINGS = ("auto", "forward", "reverse")

#: Evaluation ranges, dB below the start of the decay (ISO 3382-1:2009, 5.3.3 / A.2.1).
RANGES = {"edt": (0.0, -10.0), "t20": (-5.0, -25.0), "t30": (-5.0, -35.0)}
#: The noise must lie this far below the lower end of each range (ISO 3382-1:2009, 5.3.3:
#: "at least 10 dB" — from memory). Below it, down to the range's end plus
#: ``RANGE_MARGIN_CAUTION_DB``, a value is given with a caution; below that, not at all.
RANGE_MARGIN_DB = 10.0
RANGE_MARGIN_CAUTION_DB = 5.0
#: B·T below 16 and a forward band filter's own decay lengthens T (Jacobsen, F. (1987), A note
#: on acoustic decay measurements, J. Sound Vib. 115, 163–170 — from memory); filtering
#: backwards in time lowers the limit to about 4 (Jacobsen, F., Rindel, J. H. (1987), Time
#: reversed decay measurements, J. Sound Vib. 117, 187–190 — from memory).
MIN_BT = 16.0
MIN_BT_REVERSED = 4.0
#: ISO 3382-2:2008, Annex B: ξ above 10 ‰ or a curvature C above 10 % mark a decay that is not
#: a straight line, so one T does not describe it (from memory).
XI_LIMIT_PERMILLE = 10.0
CURVATURE_LIMIT_PCT = 10.0
#: Just-noticeable differences (ISO 3382-1:2009, Table A.1 — from memory): ("relative", 5 %)
#: or ("absolute", value in the parameter's unit).
JND = {
    "edt_s": ("relative", 0.05),
    "t20_s": ("relative", 0.05),
    "t30_s": ("relative", 0.05),
    "c80_db": ("absolute", 1.0),
    "c50_db": ("absolute", 1.0),
    "d50": ("absolute", 0.05),
    "ts_ms": ("absolute", 10.0),
    "g_db": ("absolute", 1.0),
}
#: A response that ends less than this below its peak, with no noise floor found in it, gives
#: no energy ratios: its late energy is indistinguishable from noise or a cut (common practice;
#: the ratios need the decay well below the early energy).
MIN_END_DROP_DB = 20.0
#: A noise correction that moves an energy ratio by more than half its JND is flagged.
NOISE_BIAS_FRACTION_OF_JND = 0.5

DECAY_METRICS = ("edt_s", "t20_s", "t30_s")
RATIO_METRICS = ("c50_db", "c80_db", "d50", "ts_ms")
METRICS = (
    "edt_s",
    "t20_s",
    "t30_s",
    "c50_db",
    "c80_db",
    "d50",
    "ts_ms",
    "inr_db",
    "xi_permille",
    "curvature_pct",
)
#: Values that get a verdict of their own.
JUDGED = DECAY_METRICS + RATIO_METRICS + ("g_db",)


@dataclass
class BandResult:
    """Parameters of one band (``band_hz`` None for wideband). Keys follow the JSON layout.

    Examples
    --------
    >>> r = BandResult(1000.0, t30_s=1.2)
    >>> r.flag(("t30_s",), CAUTION, "t30_noise_margin", "1k: the noise is close")
    >>> r.finish(with_g=False)
    >>> r.verdict, r.as_dict()["verdicts"]["t30_s"], r.as_dict()["warning_codes"]
    ('caution', 'caution', ['t30_noise_margin'])
    """

    band_hz: float | None
    edt_s: float | None = None
    t20_s: float | None = None
    t30_s: float | None = None
    c50_db: float | None = None
    c80_db: float | None = None
    d50: float | None = None
    ts_ms: float | None = None
    inr_db: float | None = None
    xi_permille: float | None = None
    #: "t30" or "t20": the evaluation range whose line fit ``xi_permille`` belongs to.
    xi_range: str | None = None
    curvature_pct: float | None = None
    g_db: float | None = None
    warnings: list[str] = field(default_factory=list)
    #: Machine-readable codes of the warnings (``"t30_noise_margin"``, ``"low_bt"``, …).
    warning_codes: list[str] = field(default_factory=list)
    #: Verdict per judged value: "ok", "caution" or "not evaluable".
    value_verdicts: dict[str, str] = field(default_factory=dict)
    #: The warning codes behind each value's verdict.
    value_codes: dict[str, list[str]] = field(default_factory=dict)
    #: Not part of the JSON: the decay curve (dB) from the onset, and the truncation time.
    curve_db: np.ndarray | None = field(default=None, repr=False)
    truncation_s: float | None = None
    noise_db: float | None = None

    @property
    def verdict(self) -> str:
        """The band's verdict: the worst of its values' verdicts that have a value, else
        "not evaluable" when nothing could be evaluated."""
        given = [v for k, v in self.value_verdicts.items() if getattr(self, k) is not None]
        if not given:
            return NOT_EVALUABLE
        return max(given, key=_RANK.__getitem__)

    def flag(self, metrics, level: str, code: str, text: str) -> None:
        """Record a warning against ``metrics``; ``level`` NOT_EVALUABLE also clears them."""
        for m in metrics:
            if level == NOT_EVALUABLE:
                setattr(self, m, None)
            if _RANK[level] > _RANK[self.value_verdicts.get(m, OK)]:
                self.value_verdicts[m] = level
            codes = self.value_codes.setdefault(m, [])
            if code not in codes:
                codes.append(code)
        if code not in self.warning_codes:
            self.warning_codes.append(code)
        self.warnings.append(text)

    def finish(self, with_g: bool) -> None:
        """Every judged value that exists and has no verdict yet is "ok"; missing ones are
        "not evaluable"."""
        for m in JUDGED:
            if m == "g_db" and not with_g:
                self.value_verdicts.pop(m, None)
                continue
            if getattr(self, m) is None:
                self.value_verdicts[m] = NOT_EVALUABLE
            else:
                self.value_verdicts.setdefault(m, OK)

    def as_dict(self, with_g: bool = False) -> dict:
        """The band's entry in the JSON document (keys of :data:`METRICS`, verdicts, warnings).

        Parameters
        ----------
        with_g : bool
            Include strength G (only when a strength reference was given).

        Returns
        -------
        dict
            JSON-ready; the decay curve and other plotting data are left out.
        """
        d: dict = {"band_hz": self.band_hz}
        for k in METRICS:
            d[k] = getattr(self, k)
        d["xi_range"] = self.xi_range
        if with_g:
            d["g_db"] = self.g_db
        d["verdict"] = self.verdict
        d["verdicts"] = {k: v for k, v in self.value_verdicts.items() if with_g or k != "g_db"}
        d["warning_codes"] = list(self.warning_codes)
        d["warning_codes_by_value"] = {
            k: list(v) for k, v in self.value_codes.items() if v and (with_g or k != "g_db")
        }
        d["warnings"] = list(self.warnings)
        return d


def _label(band: Band | None) -> str:
    return f"{band.label} Hz" if band else "wideband"


def _lead(band: Band | None, rate: int) -> int:
    """Samples of zero padding put before the response for band filtering: three over the
    bandwidth, which holds the energy a band filter spreads before the direct sound
    (a band-pass's impulse response holds nearly all its energy within 1/B of its peak —
    common practice)."""
    return 0 if band is None else int(np.ceil(3.0 * rate / band.bandwidth))


def _band_signals(h: np.ndarray, rate: int, band: Band | None, filtering: str):
    """(decay signal, energy-ratio signal, lead) for one band.

    Both signals start ``lead`` samples before ``h`` does, so that the energy a filter run
    backwards (or both ways) moves before a direct sound near the start of ``h`` is kept.
    """
    h = np.asarray(h, dtype=np.float64)
    if band is None:
        return h, h, 0
    lead = _lead(band, rate)
    hp = np.concatenate([np.zeros(lead), h])
    if filtering == "forward":
        x = filter_band(hp, rate, band)
        return x, x, lead
    decay = filter_band(hp, rate, band, reverse=True)
    if filtering == "reverse":
        return decay, decay, lead
    return decay, zero_phase_band(hp, rate, band), lead


def zero_phase_band(h: np.ndarray, rate: int, band: Band) -> np.ndarray:
    """The band filter run forwards, then backwards: zero phase, |H|² magnitude.

    Both passes start from rest on zero padding long enough for the band filter's ringing
    (ten over the bandwidth) to die away, so a response that starts or ends in noise gives
    no start-up transient (``scipy.signal.sosfiltfilt``'s short odd padding and step initial
    state add one, many times the noise, to the first ~100 ms of a narrow low band).

    Examples
    --------
    An impulse at sample 20 comes back centred on sample 20 (no delay, unlike one pass):

    >>> from roomconv.analysis.bands import all_bands
    >>> h = np.zeros(64)
    >>> h[20] = 1.0
    >>> int(np.argmax(np.abs(zero_phase_band(h, 16000, all_bands("octave")[5]))))
    20
    """
    pad = int(np.ceil(10.0 * rate / band.bandwidth))
    sos = band_sos(band, rate)
    x = np.concatenate([np.zeros(pad), np.asarray(h, dtype=np.float64), np.zeros(pad)])
    y = sosfilt(sos, x)
    y = sosfilt(sos, y[::-1])[::-1]
    return y[pad : pad + len(h)]


def analyse_response(
    h: np.ndarray,
    rate: int,
    *,
    band: Band | None = None,
    onset: int | None = None,
    filtering: str = "auto",
    strength_reference_db: float | None = None,
    strength_missing: str | None = None,
    label: str | None = None,
) -> BandResult:
    """All parameters of one response in one band (``band=None``: wideband, unfiltered).

    Parameters
    ----------
    h : ndarray, 1-D
        The whole impulse response (not cut at its onset).
    rate : int
        Sample rate, Hz.
    band : Band, optional
        Filter into this band first.
    onset : int, optional
        Sample of the broadband direct sound (default: found in ``h``, which is right only
        for the unfiltered response).
    filtering : {"auto", "forward", "reverse"}
        "auto" (default): backwards in time for decay times, zero-phase for energy ratios.
        The others use one filtering for everything, for comparison with other methods.
    strength_reference_db : float, optional
        L_ref = 10·lg(∫p₁₀² dt) of the same source at 10 m in a free field for this band
        (full-scale²·s, the units of ``h``); enables the strength G.
    strength_missing : str, optional
        When a calibration was given but has no value for this band: why (G becomes
        "not evaluable" with this reason).
    label : str, optional
        Name of the band in messages.

    Returns
    -------
    BandResult

    References
    ----------
    ISO 3382-1:2009, Acoustics — Measurement of room acoustic parameters — Part 1:
    Performance spaces, clause 5 and Annex A (EDT, T, C50, C80, D50, Ts, G).
    ISO 3382-2:2008, Annex B (non-linearity ξ and curvature C).
    Lundeby, A. et al. (1995), Acustica 81, 344–355 (truncation and compensation).
    Jacobsen, F., Rindel, J. H. (1987). Time reversed decay measurements. J. Sound Vib. 117,
    187–190.

    Examples
    --------
    >>> rate, T = 8000, 1.0
    >>> t = np.arange(3 * rate) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> r = analyse_response(h, rate)
    >>> round(r.t30_s, 1), r.value_verdicts["t30_s"]
    (1.0, 'ok')
    """
    if filtering not in FILTERINGS:
        raise InputError(
            f"unknown band filtering '{filtering}' (use one of {', '.join(FILTERINGS)})"
        )
    label = label or _label(band)
    h = np.asarray(h, dtype=np.float64)
    res = BandResult(band_hz=band.nominal if band else None)
    with_g = strength_reference_db is not None or strength_missing is not None
    if onset is None:
        onset = onset_index(h)
    xd, xr, lead = _band_signals(h, rate, band, filtering)
    onset += lead  # the band signals start ``lead`` samples before h
    if not np.any(xd[onset:]):
        res.flag(JUDGED, NOT_EVALUABLE, "no_energy", f"{label}: no energy in this band")
        res.finish(with_g)
        return res
    x = xd[onset:]
    min_len = int(0.1 * rate)
    if band is not None:
        # At least ten periods of the band's lower edge, and 100 ms.
        min_len = max(min_len, int(10 * rate / band.lower))
    if x.size < min_len:
        res.flag(
            JUDGED,
            NOT_EVALUABLE,
            "too_short",
            f"{label}: the response is too short after its onset ({x.size / rate:.3f} s; "
            f"this band needs {min_len / rate:.3f} s)",
        )
        res.finish(with_g)
        return res

    bw = band.bandwidth if band else rate / 2.0
    tr = lundeby_truncation(
        x,
        rate,
        interval_s=max(0.01, 1.5 / bw),
        min_interval_s=max(0.001, 1.0 / bw),
        bandwidth_hz=bw,
    )
    res.inr_db = _finite(tr.inr_db)
    res.truncation_s = tr.index / rate
    if tr.noise_limited and tr.noise_energy > 0:
        res.noise_db = float(10 * np.log10(tr.noise_energy / np.max(np.square(x))))
    if not tr.converged:
        res.flag(
            JUDGED,
            CAUTION,
            "truncation_unsettled",
            f"{label}: the noise-floor search did not settle ({tr.reason or 'no reason'});"
            " values that depend on the late decay may be off",
        )

    pre_energy = 0.0
    if band is not None and filtering != "forward":
        pre_energy = _direct_energy_before_onset(h, onset - lead, lead, band, rate)
    _decay_times(res, x, rate, tr, band, filtering, label, pre_energy)
    # The early window reaches back over the direct sound's spread only: most of a band
    # filter's impulse-response energy lies within 1/B of its peak (common practice), and
    # more would add only noise.
    spread = 0 if band is None else min(lead, int(np.ceil(1.5 * rate / band.bandwidth)))
    others: tuple[np.ndarray, ...] = ()
    if band is not None and filtering == "auto":
        hp = np.concatenate([np.zeros(lead), h])
        others = (filter_band(hp, rate, band), xd)
    _energy_ratios(res, xr, rate, onset, tr, band, label, spread, others)
    if strength_reference_db is not None:
        _strength(res, xd, rate, onset, tr, band, strength_reference_db, lead)
    elif strength_missing is not None:
        res.flag(
            ("g_db",),
            NOT_EVALUABLE,
            "g_no_reference",
            f"{label}: G not evaluated: {strength_missing}",
        )
    res.finish(with_g)
    return res


#: The direct sound: the first 2.5 ms from the onset (common practice for a loudspeaker's
#: impulse and the first reflections that arrive with it).
DIRECT_SOUND_S = 0.0025


def _direct_energy_before_onset(
    h: np.ndarray, onset: int, lead: int, band: Band, rate: int
) -> float:
    """The band energy of the direct sound that a filter run backwards puts before the onset.

    The direct sound (``DIRECT_SOUND_S`` of the broadband response from its onset) is filtered
    alone, backwards, and its energy before the onset summed: a forward filter would have put
    that energy at the start of the decay curve. The decay's own backwards ringing is not
    counted, so a response with no direct sound keeps its curve from 0 dB.
    """
    w = max(1, int(round(DIRECT_SOUND_S * rate)))
    snippet = np.zeros(lead + w)
    part = np.asarray(h[onset : onset + w], dtype=np.float64)
    snippet[lead : lead + part.size] = part
    y = filter_band(snippet, rate, band, reverse=True)
    return float(np.sum(np.square(y[:lead])))


def _decay_times(
    res: BandResult,
    x: np.ndarray,
    rate: int,
    tr: Truncation,
    band: Band | None,
    filtering: str,
    label: str,
    pre_energy: float = 0.0,
) -> None:
    """EDT, T20, T30 from the compensated Schroeder curve; ξ and curvature; validity.

    ``pre_energy`` (the direct sound's band energy a backwards filter put before the onset)
    counts in the total the curve is normalized to, so the curve starts below 0 dB by the
    share of the direct sound, as with a forward filter a few samples later.
    """
    sch = schroeder_integral(
        x,
        truncation=tr.index,
        compensation=tr.compensation,
        noise_energy=tr.noise_energy if tr.noise_limited else 0.0,
    )
    with np.errstate(divide="ignore"):
        curve = 10 * np.log10(np.maximum(sch, 1e-300) / (sch[0] + pre_energy))
    res.curve_db = curve
    reach = available_range_db(curve)
    limit = "the noise" if tr.noise_limited else "the end of the response"
    fits = {}
    for key, (hi, lo) in RANGES.items():
        metric = f"{key}_s"
        need = -lo + RANGE_MARGIN_DB
        if reach < -lo + RANGE_MARGIN_CAUTION_DB:
            res.flag(
                (metric,),
                NOT_EVALUABLE,
                f"{key}_range_not_reached",
                f"{label}: {key.upper()} not evaluated: the decay covers {reach:.0f} dB "
                f"before {limit}; its range needs {need:.0f} dB (ISO 3382-1)",
            )
            continue
        f = fit_decay(curve, rate, hi, lo)
        if f is None:
            res.flag(
                (metric,),
                NOT_EVALUABLE,
                f"{key}_range_not_reached",
                f"{label}: {key.upper()} not evaluated: the decay does not reach "
                f"{lo:.0f} dB before {limit}",
            )
            continue
        fits[key] = f
        setattr(res, metric, f.reverberation_s)
        if reach < need:
            res.flag(
                (metric,),
                CAUTION,
                f"{key}_noise_margin",
                f"{label}: {key.upper()}: {limit} lies only {reach + lo:.0f} dB below the "
                f"end of its range, not the {RANGE_MARGIN_DB:.0f} dB ISO 3382-1 asks",
            )

    _decay_noise_uncertainty(res, x, rate, tr, band, sch, curve, fits, label)

    # ISO 3382-2 B.2/B.3: ξ from the line fit of the longest range evaluated; C from T30/T20.
    main_key = "t30" if "t30" in fits else ("t20" if "t20" in fits else None)
    if main_key is not None:
        res.xi_permille = 1000.0 * (1.0 - fits[main_key].r ** 2)
        res.xi_range = main_key
    if "t30" in fits and "t20" in fits:
        res.curvature_pct = 100.0 * (fits["t30"].reverberation_s / fits["t20"].reverberation_s - 1)
    curved = []
    xi, xi_range = res.xi_permille, res.xi_range
    if xi is not None and xi_range is not None and xi > XI_LIMIT_PERMILLE:
        curved.append(f"ξ {xi:.0f} ‰ over the {xi_range.upper()} range")
    if res.curvature_pct is not None and abs(res.curvature_pct) > CURVATURE_LIMIT_PCT:
        curved.append(f"curvature {res.curvature_pct:+.0f} %")
    if curved:
        res.flag(
            ("t20_s", "t30_s"),
            CAUTION,
            "curved_decay",
            f"{label}: the decay is not a straight line ({', '.join(curved)}; ISO 3382-2 "
            f"Annex B limits {XI_LIMIT_PERMILLE:.0f} ‰ and {CURVATURE_LIMIT_PCT:.0f} %): "
            "one decay time does not describe it",
        )

    _statistical_uncertainty(res, band, rate, label)

    t_any = res.t30_s or res.t20_s or res.edt_s
    if band is not None and t_any is not None:
        bt = band.bandwidth * t_any
        limit_bt = MIN_BT if filtering == "forward" else MIN_BT_REVERSED
        if bt < limit_bt:
            res.flag(
                DECAY_METRICS,
                CAUTION,
                "low_bt",
                f"{label}: B·T = {bt:.1f} is below {limit_bt:.0f}: the band filter's own "
                "decay may lengthen the decay times",
            )
        elif bt < MIN_BT and res.edt_s is not None:
            # Backwards filtering keeps T20/T30 down to B·T = 4, but EDT's first 10 dB still
            # hold the filter's treatment of the onset (what counts as direct sound).
            res.flag(
                ("edt_s",),
                CAUTION,
                "low_bt",
                f"{label}: B·T = {bt:.1f} is below {MIN_BT:.0f}: EDT's first 10 dB depend "
                "on how the band filter treats the onset",
            )


#: ISO 3382-2:2008, A.2 (from memory): σ(T) = k·T·sqrt((1 + c/n)/(N·B·T)) for N positions and
#: n decays averaged at each; the integrated impulse response counts as n = 10. EDT has no
#: constant in the standard: 1.97 extends the T20/T30 pair (0.88 for 20 dB, 0.55 for 30 dB,
#: about range^−1.16) to its 10 dB range (common practice estimate).
STATISTICAL_CONSTANTS = {"edt_s": (1.97, 2.28), "t20_s": (0.88, 1.90), "t30_s": (0.55, 1.52)}
DECAYS_PER_POSITION_IR = 10
STATISTICAL = "statistical_uncertainty"


def decay_time_sigma(
    metric: str,
    t_s: float,
    bandwidth_hz: float,
    positions: int = 1,
    decays_per_position: int = DECAYS_PER_POSITION_IR,
) -> float:
    """Relative standard uncertainty of a decay time from the randomness of the diffuse
    decay itself (ISO 3382-2:2008, A.2 — from memory; EDT extended, see
    ``STATISTICAL_CONSTANTS``).

    Examples
    --------
    >>> round(decay_time_sigma("t30_s", 1.0, 100.0, positions=4), 4)
    0.0295
    """
    k, c = STATISTICAL_CONSTANTS[metric]
    return float(k * np.sqrt((1 + c / decays_per_position) / (positions * bandwidth_hz * t_s)))


def _statistical_uncertainty(res: BandResult, band: Band | None, rate: int, label: str) -> None:
    """Caution on decay times whose single-position statistical uncertainty exceeds half the
    JND: one position's value may differ from the room's by more than a listener notices.
    A spatial average over enough positions clears it (see ``spatial_average``)."""
    bw = band.bandwidth if band is not None else rate / 2.0
    for m in DECAY_METRICS:
        v = getattr(res, m)
        if v is None:
            continue
        sigma = decay_time_sigma(m, v, bw)
        if sigma > NOISE_SIGMA_CAUTION_JND * JND[m][1]:
            res.flag(
                (m,),
                CAUTION,
                STATISTICAL,
                f"{label}: {m[:-2].upper()} at one position is uncertain by ±"
                f"{100 * sigma:.0f} % (ISO 3382-2 for B·T = {bw * v:.0f}), more than half "
                "its JND; average several positions",
            )


#: A value whose noise-induced standard uncertainty exceeds this fraction of its JND gets a
#: caution; over ``NOISE_SIGMA_NULL_JND`` JNDs it is not given at all (common practice: a
#: 95 % interval about the size of the JND, and a value that could be off by several JNDs
#: says nothing).
NOISE_SIGMA_CAUTION_JND = 0.5
NOISE_SIGMA_NULL_JND = 3.0


def _dof_samples(band: Band | None, rate: int) -> float:
    """Samples per independent energy value of a signal of the band's width (rate/B)."""
    bw = band.bandwidth if band is not None else rate / 2.0
    return max(1.0, rate / bw)


def noise_energy_variance(
    signal: np.ndarray | float,
    samples: np.ndarray | float,
    noise: float,
    per_dof: float,
    noise_dof: float,
) -> np.ndarray:
    """Variance of a noise-corrected energy sum over a window, from the noise alone.

    A window of ``samples`` holds the signal energy ``signal`` (noise removed) and the
    background noise of mean square ``noise``. Squaring s + n gives s² + 2sn + n²: the cross
    term has variance 4·s²·ν per independent value and the noise term 2ν² (Gaussian noise);
    a band of width B gives one independent value per ``per_dof`` = rate/B samples. The noise
    level itself is read from ``noise_dof`` independent values, so subtracting it leaves a
    relative error of 1/sqrt(noise_dof) on ν·samples.

    References
    ----------
    Bendat, J. S., Piersol, A. G. (2010). Random Data, 4th ed., Wiley: variance of mean-square
    estimates of band-limited Gaussian signals, 1/(B·T) (from memory).

    Examples
    --------
    With no signal, the sum of squares of 100 independent unit-variance Gaussian values is a
    chi-square variable with 100 degrees of freedom: variance 2·100 = 200 (a noise level known
    exactly, ``noise_dof`` huge, adds nothing):

    >>> round(float(noise_energy_variance(0.0, 100, 1.0, 1.0, 1e15)), 6)
    200.0
    """
    signal = np.maximum(np.asarray(signal, dtype=np.float64), 0.0)
    samples = np.asarray(samples, dtype=np.float64)
    random = per_dof * (4.0 * noise * signal + 2.0 * noise**2 * samples)
    level = (noise * samples) ** 2 / max(noise_dof, 1.0)
    return random + level


def _decay_noise_uncertainty(
    res: BandResult,
    x: np.ndarray,
    rate: int,
    tr: Truncation,
    band: Band | None,
    sch: np.ndarray,
    curve: np.ndarray,
    fits: dict,
    label: str,
) -> None:
    """Flag decay times the background noise makes uncertain beyond their JND.

    The level error of the Schroeder curve at each end of a range, δL = 4.34·σ_E/E, moves
    the fitted decay time by about sqrt(δL₁² + δL₂²)/(range in dB), relative.
    """
    nu, start = _noise_bound(x, tr)
    if nu <= 0:
        return
    per_dof = _dof_samples(band, rate)
    noise_dof = (x.size - start) / per_dof
    remaining = tr.index - np.arange(tr.index)
    var = noise_energy_variance(sch - tr.compensation, remaining, nu, per_dof, noise_dof)
    d_level = 10 / np.log(10) * np.sqrt(var) / sch
    for key in fits:
        hi, lo = RANGES[key]
        i_hi = int(np.flatnonzero(curve <= hi)[0])
        below = np.flatnonzero(curve <= lo)
        i_lo = int(below[0]) if below.size else curve.size - 1
        sigma = float(np.hypot(d_level[i_hi], d_level[i_lo])) / (hi - lo)
        _judge_sigma(
            res, f"{key}_s", key.upper(), sigma, JND[f"{key}_s"][1], "%", label, relative=True
        )


def _noise_bound(x: np.ndarray, tr: Truncation) -> tuple[float, int]:
    """The noise level and where it was read; with no floor found, the mean square of the
    last 10 % is an upper bound of any noise (the decay may still be falling there)."""
    if tr.noise_limited:
        return tr.noise_energy, tr.noise_start
    start = int(0.9 * x.size)
    return float(np.mean(np.square(x[start:]))) if x.size > start else 0.0, start


def _judge_sigma(
    res: BandResult,
    metric: str,
    name: str,
    sigma: float,
    jnd: float,
    unit: str,
    label: str,
    *,
    relative: bool = False,
) -> None:
    if not np.isfinite(sigma) or sigma <= NOISE_SIGMA_CAUTION_JND * jnd:
        return
    shown = f"±{100 * sigma:.0f} %" if relative else f"±{sigma:.2g}{unit}"
    jnd_shown = f"{100 * jnd:.0f} %" if relative else f"{jnd:g}{unit}"
    if sigma > NOISE_SIGMA_NULL_JND * jnd:
        res.flag(
            (metric,),
            NOT_EVALUABLE,
            f"{metric.split('_')[0]}_noise_uncertain",
            f"{label}: {name} not evaluated: the background noise makes it uncertain by "
            f"{shown} (one standard deviation), over {NOISE_SIGMA_NULL_JND:g} times its "
            f"JND of {jnd_shown}",
        )
    else:
        res.flag(
            (metric,),
            CAUTION,
            f"{metric.split('_')[0]}_noise_uncertain",
            f"{label}: {name}: the background noise makes it uncertain by {shown} (one "
            f"standard deviation), more than half its JND of {jnd_shown}",
        )


@dataclass(frozen=True)
class _EnergyVariance:
    """Where the uncertainty of C50, C80, D50 and Ts comes from: the variance of each energy
    sum the ratios are made of.

    ``s`` holds the per-sample energies the sums add up (non-negative). ``window(sl)`` is the
    variance of ``s[sl].sum()``, ``moment()`` that of Σ t·s (t in s from the onset), and
    ``tail`` that of the compensation standing for the decay past the truncation point.
    """

    s: np.ndarray
    window: Callable[[slice], float]
    moment: Callable[[], float]
    tail: float = 0.0


def _noise_variance(
    e: np.ndarray, t: np.ndarray, noise: float, per_dof: float, noise_dof: float
) -> _EnergyVariance:
    """Variance source: the background noise of mean square ``noise`` alone, over energies
    ``e`` from which it is subtracted (:func:`noise_energy_variance`)."""
    s = np.maximum(e - noise, 0.0)

    def window(sl: slice) -> float:
        return float(noise_energy_variance(s[sl].sum(), s[sl].size, noise, per_dof, noise_dof))

    def moment() -> float:
        v_m = per_dof * float(np.sum(t**2 * (4 * noise * s + 2 * noise**2)))
        return v_m + (noise * float(np.sum(t))) ** 2 / max(noise_dof, 1.0)

    return _EnergyVariance(s, window, moment)


def _diffuse_decay_variance(
    e: np.ndarray,
    t: np.ndarray,
    pre: int,
    rate: int,
    comp: float,
    k: float,
    band: Band | None,
) -> _EnergyVariance:
    """Variance source: the randomness of a diffuse decay at one position.

    A diffuse decay is a random signal: a band of width B carries about B independent energy
    values per second, so an energy sum over a window, Σ e(t), varies by
    (rate/B)·Σ ē(t)² (ē the smoothed energy; Gaussian band-limited noise, Bendat & Piersol
    2010 — from memory). One position's value can differ from the room's by that much, as
    its decay times do (ISO 3382-2 A.2). The direct sound is deterministic: over it the
    smoothed energy is capped at the diffuse level that follows it.
    """
    per_dof = _dof_samples(band, rate)
    L = max(1, int(round(per_dof)))
    s = np.maximum(e, 0.0)
    if L > 1:
        c = np.cumsum(np.concatenate([[0.0], s]))
        lo = np.clip(np.arange(s.size) - L // 2, 0, s.size)
        hi = np.clip(lo + L, 0, s.size)
        smooth = (c[hi] - c[lo]) / np.maximum(hi - lo, 1)
    else:
        smooth = s
    # The direct sound is not random: cap the smoothed energy over it (2.5 ms and the band
    # filter's spread) at the diffuse level just after it, continued back at the decay rate.
    bw = band.bandwidth if band is not None else rate / 2.0
    w_end = pre + int(round((DIRECT_SOUND_S + 1.0 / bw) * rate))
    if 0 < w_end < smooth.size - L:
        after = float(np.mean(smooth[w_end : w_end + L]))
        back = (w_end - np.arange(w_end)) / rate
        cap = after * np.exp(min(k, 1e4) * back) if k > 0 else np.full(w_end, after)
        smooth = smooth.copy()
        smooth[:w_end] = np.minimum(smooth[:w_end], cap)
    k_n = k / rate if k > 0 else 0.0  # per sample
    e_c = float(smooth[-1]) if smooth.size else 0.0
    comp_var = per_dof * e_c**2 / (2 * k_n) if k_n > 0 and comp > 0 else 0.0

    def window(sl: slice) -> float:
        return per_dof * float(np.sum(np.square(smooth[sl])))

    def moment() -> float:
        return per_dof * float(np.sum(np.square(t * smooth)))

    return _EnergyVariance(s, window, moment, comp_var)


def _ratio_sigmas(
    source: _EnergyVariance,
    t: np.ndarray,
    pre: int,
    rate: int,
    comp: float,
    *,
    ts_ms: float | None = None,
    skip: frozenset[str] = frozenset(),
) -> dict[str, float]:
    """Standard uncertainties of C50, C80 (dB), D50 and Ts (ms) from the variances of their
    energy sums, by first-order propagation.

    With early energy E₁ and late energy E₂ (plus the compensation ``comp``) and variances
    v₁, v₂: σ_C = 4.34·sqrt(v₁/E₁² + v₂/E₂²), σ_D = D(1−D)·sqrt(v₁/E₁² + v₂/E₂²) and
    σ_Ts = Ts·sqrt(v_m/M² + v_tot/E²) with M = Σ t·e. ``ts_ms`` is the Ts to scale (default
    1000·M/E); metrics in ``skip`` are left out. Returns the sigmas in the order C50, D50,
    C80, Ts (those that exist).

    References
    ----------
    JCGM 100:2008 (GUM), 5.1.2: the law of propagation of uncertainty (first order).
    """
    s = source.s
    total = float(s.sum()) + comp
    if total <= 0:
        return {}
    k10 = 10 / np.log(10)
    out: dict[str, float] = {}
    for ms, cname, dname in ((50, "c50_db", "d50"), (80, "c80_db", None)):
        n = pre + int(round(ms / 1000 * rate))
        early, late = float(s[:n].sum()), float(s[n:].sum()) + comp
        if early <= 0 or late <= 0 or cname in skip:
            continue
        rel = np.sqrt(
            source.window(slice(0, n)) / early**2
            + (source.window(slice(n, None)) + source.tail) / late**2
        )
        out[cname] = float(k10 * rel)
        if dname and dname not in skip:
            d = early / total
            out[dname] = float(d * (1 - d) * rel)
    if "ts_ms" not in skip:
        moment = float(np.sum(t * s))
        if moment > 0:
            ts = ts_ms if ts_ms is not None else 1000 * moment / total
            v_t = source.window(slice(None)) + source.tail
            out["ts_ms"] = float(ts * np.sqrt(source.moment() / moment**2 + v_t / total**2))
    return out


_RATIO_NAMES = {"c50_db": "C50", "c80_db": "C80", "d50": "D50", "ts_ms": "Ts"}
_RATIO_UNITS = {"c50_db": " dB", "c80_db": " dB", "d50": "", "ts_ms": " ms"}


def _ratio_noise_uncertainty(
    res: BandResult,
    e: np.ndarray,
    t: np.ndarray,
    pre: int,
    rate: int,
    noise: float,
    comp: float,
    band: Band | None,
    noise_dof: float,
    label: str,
) -> None:
    """Flag C50, C80, D50 and Ts the background noise makes uncertain beyond half a JND."""
    source = _noise_variance(e, t, noise, _dof_samples(band, rate), noise_dof)
    for m, sigma in _ratio_sigmas(source, t, pre, rate, comp).items():
        _judge_sigma(res, m, _RATIO_NAMES[m], sigma, JND[m][1], _RATIO_UNITS[m], label)


def _energy_ratios(
    res: BandResult,
    xr: np.ndarray,
    rate: int,
    onset: int,
    tr: Truncation,
    band: Band | None,
    label: str,
    pre: int = 0,
    others=(),
) -> None:
    """C50, C80, D50 and Ts from the broadband onset, noise subtracted, the late decay
    beyond the truncation point added (Lundeby's compensation), and their noise bias.

    ``others``: the same band filtered forwards and backwards (causal and anti-causal
    smearing); where they bracket the zero-phase value by more than half a JND, the value
    depends on the band filter's time response and is flagged.

    References
    ----------
    ISO 3382-1:2009, A.2.3 (C50/C80), A.2.4 (D50), A.2.5 (Ts).
    """
    start = onset - pre
    stop = onset + tr.index
    e = np.square(xr[start:stop])
    if not tr.noise_limited and np.isfinite(tr.inr_db) and tr.inr_db < MIN_END_DROP_DB:
        # No noise floor was found, yet the response ends barely below its peak: its end is
        # noise or a cut, and the late energy cannot be told from it.
        res.flag(
            RATIO_METRICS,
            NOT_EVALUABLE,
            "late_energy_unknown",
            f"{label}: the response ends only {tr.inr_db:.0f} dB below its peak and no "
            "noise floor could be separated: C50, C80, D50 and Ts not evaluated",
        )
        return
    if tr.index < int(round(0.08 * rate)):
        res.flag(
            RATIO_METRICS,
            NOT_EVALUABLE,
            "short_for_clarity",
            f"{label}: the decay meets the noise less than 80 ms after the onset: "
            "C50, C80, D50 and Ts not evaluated",
        )
        return
    noise = 0.0
    comp = 0.0
    noise_dof = 1.0
    k = -tr.slope_db_s * np.log(10) / 10 if np.isfinite(tr.slope_db_s) else 0.0
    if tr.noise_limited:
        tail = np.square(xr[onset + tr.noise_start :])
        noise = float(np.mean(tail)) if tail.size else 0.0
        noise_dof = tail.size / _dof_samples(band, rate)
        comp = noise * rate / k if k > 0 else 0.0
    else:
        if tr.compensation > 0 and k > 0:
            # No floor: continue the late decay of this signal from its last stretch.
            comp = _end_energy(xr[onset:stop]) / k * rate
        bound, nstart = _noise_bound(xr[onset:], tr)
        if bound > 0:  # judge the uncertainty against the most noise there could be
            _ratio_noise_uncertainty(
                res,
                e,
                (np.arange(e.size) - pre) / rate,
                pre,
                rate,
                bound,
                comp,
                band,
                (xr.size - onset - nstart) / _dof_samples(band, rate),
                label,
            )
    t = (np.arange(e.size) - pre) / rate
    corrected = _ratios(e - noise, t, comp, k, tr.index / rate, pre, rate)
    raw = _ratios(e, t, comp, k, tr.index / rate, pre, rate)
    if corrected is None:
        res.flag(
            RATIO_METRICS,
            NOT_EVALUABLE,
            "clarity_undefined",
            f"{label}: no energy left after 50 ms once the noise is removed: C50, C80, "
            "D50 and Ts are not defined",
        )
        return
    for m, v in corrected.items():
        setattr(res, m, v)
    if noise > 0:
        _ratio_noise_uncertainty(res, e, t, pre, rate, noise, comp, band, noise_dof, label)
    if band is not None and others:
        _filter_sensitivity(res, corrected, others, rate, onset, tr, pre, k, label)
    # The randomness of the diffuse decay: one position's value against the room's.
    missing = frozenset(m for m in RATIO_METRICS if getattr(res, m) is None)
    source = _diffuse_decay_variance(e - noise, t, pre, rate, comp, k, band)
    sigmas = _ratio_sigmas(source, t, pre, rate, comp, ts_ms=res.ts_ms, skip=missing)
    for m, sigma in sigmas.items():
        _judge_statistics(res, m, _RATIO_NAMES[m], sigma, _RATIO_UNITS[m], label)
    if raw is None:
        return
    for m, v in corrected.items():
        if v is None or raw[m] is None:
            continue
        jnd = JND[m][1]
        bias = abs(raw[m] - v)
        if bias > NOISE_BIAS_FRACTION_OF_JND * jnd:
            name = {"c50_db": "C50", "c80_db": "C80", "d50": "D50", "ts_ms": "Ts"}[m]
            unit = {"c50_db": " dB", "c80_db": " dB", "d50": "", "ts_ms": " ms"}[m]
            res.flag(
                (m,),
                CAUTION,
                f"{m.split('_')[0]}_noise_bias",
                f"{label}: {name}: the background noise moves it by {bias:.2g}{unit} "
                f"(more than half its JND of {jnd:g}{unit}); it was corrected, but the "
                "correction is only as good as the noise estimate",
            )


def _judge_statistics(
    res: BandResult, metric: str, name: str, sigma: float, unit: str, label: str
) -> None:
    jnd = JND[metric][1]
    if np.isfinite(sigma) and sigma > NOISE_SIGMA_CAUTION_JND * jnd:
        res.flag(
            (metric,),
            CAUTION,
            STATISTICAL,
            f"{label}: {name} at one position is uncertain by ±{sigma:.2g}{unit} (the "
            f"randomness of a diffuse decay in this band), more than half its JND of "
            f"{jnd:g}{unit}; average several positions",
        )


def _filter_sensitivity(
    res: BandResult,
    value: dict,
    others,
    rate: int,
    onset: int,
    tr: Truncation,
    pre: int,
    k: float,
    label: str,
) -> None:
    """Flag energy ratios that the band filter's own time response moves by more than half
    a JND. A forward filter delays the band's energy and a backwards one advances it by
    the filter's group delay, so their difference is about twice the shift a filter's
    group delay alone makes; a zero-phase filter has none, and what is left of the filter's
    shape is its symmetric spread, taken as a quarter of that difference (checked on the
    accuracy grid, ``make accuracy``: common practice, like the B·T rule for decay
    times)."""
    ends = []
    for x in others:
        e = np.square(x[onset - pre : onset + tr.index])
        noise = 0.0
        if tr.noise_limited:
            tail = np.square(x[onset + tr.noise_start :])
            noise = float(np.mean(tail)) if tail.size else 0.0
        comp = noise * rate / k if (tr.noise_limited and k > 0) else 0.0
        t = (np.arange(e.size) - pre) / rate
        r = _ratios(e - noise, t, comp, k, tr.index / rate, pre, rate)
        if r is None:
            return
        ends.append(r)
    names = {
        "c50_db": ("C50", " dB"),
        "c80_db": ("C80", " dB"),
        "d50": ("D50", ""),
        "ts_ms": ("Ts", " ms"),
    }
    for m in value:
        spread = abs(ends[0][m] - ends[1][m]) / 4
        jnd = JND[m][1]
        if spread > NOISE_SIGMA_CAUTION_JND * jnd:
            name, unit = names[m]
            res.flag(
                (m,),
                CAUTION,
                f"{m.split('_')[0]}_filter_sensitive",
                f"{label}: {name}: the band filter's own time response can move it by "
                f"±{spread:.2g}{unit} (its bandwidth is narrow for the 50/80 ms limits), "
                f"more than half its JND of {jnd:g}{unit}",
            )


def _end_energy(x: np.ndarray) -> float:
    """Energy per sample of the late line at the end of ``x`` (mean of its last 5 %)."""
    n = max(1, x.size // 20)
    return float(np.mean(np.square(x[-n:])))


def _ratios(
    e: np.ndarray, t: np.ndarray, comp: float, k: float, t_c: float, pre: int, rate: int
) -> dict | None:
    """C50, C80, D50, Ts from per-sample energies ``e`` at times ``t`` (s, 0 at the onset);
    ``comp`` energy of an exponential tail of rate ``k`` starting at ``t_c``."""
    n50 = pre + int(round(0.05 * rate))
    n80 = pre + int(round(0.08 * rate))
    early50, early80 = float(e[:n50].sum()), float(e[:n80].sum())
    total = float(e.sum()) + comp
    late50, late80 = total - early50, total - early80
    if total <= 0 or early50 <= 0 or late50 <= 1e-12 * total or late80 <= 1e-12 * total:
        return None
    moment = float(np.sum(t * e))
    if comp > 0 and k > 0:
        moment += comp * (t_c + 1.0 / k)  # ∫ t·e(t_c)·exp(−k(t−t_c)) dt over [t_c, ∞)
    return {
        "c50_db": float(10 * np.log10(early50 / late50)),
        "c80_db": float(10 * np.log10(early80 / late80)),
        "d50": early50 / total,
        "ts_ms": 1000.0 * moment / total,
    }


def _strength(
    res: BandResult,
    xd: np.ndarray,
    rate: int,
    onset: int,
    tr: Truncation,
    band: Band | None,
    reference_db: float,
    pre: int = 0,
) -> None:
    """G = 10·lg(∫p² dt) − L_ref, the band energy from the single-pass filter (any direction
    gives the same total), noise removed and the late decay added.

    References
    ----------
    ISO 3382-1:2009, A.2.2 (sound strength G) — from memory.
    """
    e = np.square(xd[onset - pre : onset + tr.index])
    noise = tr.noise_energy if tr.noise_limited else 0.0
    total = float(e.sum()) - noise * e.size + tr.compensation
    if total <= 0:
        res.flag(
            ("g_db",),
            NOT_EVALUABLE,
            "g_no_energy",
            f"{_label(band)}: G not evaluated: no energy above the noise",
        )
        return
    res.g_db = float(10 * np.log10(total / rate)) - reference_db


def _finite(v):
    return float(v) if v is not None and np.isfinite(v) else None


#: An impulse response falls from its peak like a decay: the upper hull of its energy
#: envelope (the loudest level still to come) takes about as long to fall its second third
#: of the way to the floor as its first. A sustained signal (a sweep recording, music) holds
#: its level for seconds, then falls at the room's rate: the first third takes far longer.
#: A ratio over 4, over at least 50 ms, is not a decay (common practice); nor is a signal
#: that never falls 10 dB below its peak.
SUSTAIN_RATIO = 4.0
SUSTAIN_MIN_S = 0.05
MIN_FALL_DB = 10.0


def check_impulse_response(h: np.ndarray, rate: int) -> None:
    """Refuse a signal that is not an impulse response (a sweep recording, music, noise).

    Raises
    ------
    InputError
        With what was seen and what to do.

    Examples
    --------
    >>> rate = 8000
    >>> t = np.arange(rate) / rate
    >>> check_impulse_response(np.random.default_rng(0).standard_normal(rate) * 10 ** (-6 * t),
    ...                        rate)  # a decay: accepted
    >>> check_impulse_response(np.sin(2 * np.pi * 440 * t), rate)
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: this does not look like an impulse response: its level never
    falls 10 dB below its peak (a recording, music or noise?); extract the impulse response
    from the recording first
    """
    env, m = energy_envelope(np.asarray(h, dtype=np.float64), rate, 0.01)
    if env.size < 4:
        return
    peak_i = int(np.argmax(env))
    env_db = 10 * np.log10(np.maximum(env[peak_i:], 1e-300) / env[peak_i])
    hull = np.maximum.accumulate(env_db[::-1])[::-1]
    floor = float(np.mean(env_db[-max(1, env_db.size // 20) :]))
    fall = -floor
    if fall < MIN_FALL_DB:
        raise InputError(
            "this does not look like an impulse response: its level never falls "
            f"{MIN_FALL_DB:.0f} dB below its peak (a recording, music or noise?); "
            "extract the impulse response from the recording first"
        )
    below_a = np.flatnonzero(hull < -fall / 3)
    below_b = np.flatnonzero(hull < -2 * fall / 3)
    t_a = int(below_a[0]) if below_a.size else env_db.size
    t_b = int(below_b[0]) if below_b.size else env_db.size
    held_s = t_a * m / rate
    if held_s > SUSTAIN_MIN_S and t_a > SUSTAIN_RATIO * max(1, t_b - t_a):
        raise InputError(
            f"this does not look like an impulse response: it stays within "
            f"{fall / 3:.0f} dB of its peak for {held_s:.2f} s, then falls in "
            f"{(t_b - t_a) * m / rate:.2f} s (a sweep recording, music or noise?); "
            "extract the impulse response from the recording first"
        )


def room_parameters(
    h: np.ndarray,
    rate: int,
    *,
    bands: str = "octave",
    filtering: str = "auto",
    strength_reference=None,
    low: float | None = None,
    high: float | None = None,
) -> tuple[list[BandResult], BandResult, list[str]]:
    """Per-band and wideband parameters of a 1-D response.

    Parameters
    ----------
    h : ndarray, 1-D
        The impulse response.
    rate : int
        Sample rate, Hz.
    bands : {"octave", "third"}
        Band set (IEC 61260-1).
    filtering : {"auto", "forward", "reverse"}
        See :func:`analyse_response`.
    strength_reference : StrengthReference, optional
        Enables G per band where it has a value (:mod:`roomconv.analysis.calibration`).
    low, high : float, optional
        Nominal band centres (Hz) to keep.

    Returns
    -------
    band_results, wideband_result, notes

    Raises
    ------
    InputError
        For a response with NaN, silence, or a signal that is not an impulse response.

    Examples
    --------
    >>> rate, T = 16000, 0.8
    >>> t = np.arange(3 * rate) / rate
    >>> h = np.random.default_rng(2).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> res, wide, notes = room_parameters(h, rate, low=500, high=2000)
    >>> [r.band_hz for r in res], round(wide.t30_s, 1)
    ([500.0, 1000.0, 2000.0], 0.8)
    """
    h = np.asarray(h, dtype=np.float64)
    if h.ndim != 1:
        raise ValueError("room_parameters takes one channel")
    if not np.all(np.isfinite(h)):
        raise InputError("the response holds NaN or infinite samples")
    if not np.any(h):
        raise InputError("the response is silent (all zeros)")
    band_list, notes = bands_for_rate(bands, rate, low=low, high=high)
    check_impulse_response(h, rate)
    onset = onset_index(h)

    def ref(band):
        if strength_reference is None:
            return None, None
        # The Band carries its set: an octave reference must not serve third-octaves.
        return strength_reference.lookup(band, rate, band_set=bands)

    results = []
    for b in band_list:
        level, why = ref(b)
        results.append(
            analyse_response(
                h,
                rate,
                band=b,
                onset=onset,
                filtering=filtering,
                strength_reference_db=level,
                strength_missing=why,
            )
        )
    level, why = ref(None)
    wide = analyse_response(
        h, rate, onset=onset, filtering=filtering, strength_reference_db=level, strength_missing=why
    )
    return results, wide, notes
