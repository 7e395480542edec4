"""Time-window energies of band-filtered responses, shared by the stage, lateral and
interaural parameters; and the judged row (value, verdict, warning codes) each band gets.

The band signal is the project's zero-phase band filtering (the one C50/C80 use), time zero
is the broadband direct sound (the onset every other parameter uses), and the noise floor,
truncation point and late-decay compensation come from the same Lundeby search.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .bands import Band, filter_band
from .decay import lundeby_truncation
from .parameters import (
    CAUTION,
    MIN_END_DROP_DB,
    NOISE_SIGMA_CAUTION_JND,
    NOISE_SIGMA_NULL_JND,
    NOT_EVALUABLE,
    OK,
    _dof_samples,
    _lead,
    zero_phase_band,
)

__all__ = [
    "STATISTICAL",
    "judge_statistics",
    "BandSignal",
    "JudgedRow",
    "band_signal",
    "band_average",
    "check_same_shape",
    "window_bounds",
    "flag_early_start",
]

_RANK = {OK: 0, CAUTION: 1, NOT_EVALUABLE: 2}
STATISTICAL = "statistical_uncertainty"


@dataclass
class JudgedRow:
    """Values of one band with a verdict each, in the layout of the analysis' band rows.

    Attributes
    ----------
    band_hz : float or None
        Nominal band centre, Hz; None for the broadband row.
    values : dict
        Value by key; None when not evaluable.
    verdicts : dict
        "ok", "caution" or "not evaluable" by key.
    codes : dict
        Warning codes by key.
    warning_codes, warnings : list of str
        Every code and warning text of the row, each once.
    texts : dict
        Warning texts by code.

    Examples
    --------
    >>> row = JudgedRow(500.0, values={"a": 1.0, "b": 2.0})
    >>> row.flag(("a",), CAUTION, "demo_caution", "500 Hz: a is doubtful")
    >>> row.flag(("b",), NOT_EVALUABLE, "demo_null", "500 Hz: b has no value")
    >>> row = row.finish(("a", "b", "c"))
    >>> row.values
    {'a': 1.0, 'b': None, 'c': None}
    >>> row.verdicts
    {'a': 'caution', 'b': 'not evaluable', 'c': 'not evaluable'}
    >>> row.warning_codes
    ['demo_caution', 'demo_null']
    """

    band_hz: float | None
    values: dict[str, float | None] = field(default_factory=dict)
    verdicts: dict[str, str] = field(default_factory=dict)
    codes: dict[str, list[str]] = field(default_factory=dict)
    warning_codes: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    #: Warning texts by code.
    texts: dict[str, list[str]] = field(default_factory=dict)

    def flag(self, keys, level: str, code: str, text: str) -> None:
        """Record a warning against ``keys``; NOT_EVALUABLE also clears their values."""
        for k in keys:
            if level == NOT_EVALUABLE:
                self.values[k] = None
            if _RANK[level] > _RANK[self.verdicts.get(k, OK)]:
                self.verdicts[k] = level
            codes = self.codes.setdefault(k, [])
            if code not in codes:
                codes.append(code)
        if code not in self.warning_codes:
            self.warning_codes.append(code)
        if text not in self.warnings:
            self.warnings.append(text)
            self.texts.setdefault(code, []).append(text)

    def finish(self, keys) -> JudgedRow:
        """Every key gets a verdict: "ok" for a value not flagged, "not evaluable" for none."""
        for k in keys:
            self.values.setdefault(k, None)
            if self.values[k] is None:
                self.verdicts[k] = NOT_EVALUABLE
            else:
                self.verdicts.setdefault(k, OK)
        return self


@dataclass
class BandSignal:
    """One channel in one band, with its time zero, noise floor and usable end.

    ``x`` starts ``zero`` samples before time zero (zeros put in front so that the energy the
    band filter spreads before the direct sound is kept); ``spread`` is how far before time
    zero the early windows reach for it.

    Attributes
    ----------
    x : ndarray
        The band-filtered channel, ``zero`` samples of lead and response.
    zero : int
        Sample of ``x`` at time zero.
    spread : int
        Samples before time zero the windows from 0 reach back.
    rate : int
        Sample rate, Hz.
    band : Band or None
        None: the unfiltered channel.
    noise : float
        Background noise energy per sample (0 when not noise-limited).
    noise_dof : float
        Independent values the noise estimate rests on.
    end : int
        Sample of ``x`` where the decay meets the noise (the truncation point).
    compensation : float
        Energy of the decay continued past ``end``.
    decay_rate : float
        Energy decay rate of the late decay, per sample.
    inr_db : float
        Impulse-to-noise ratio, dB.
    noise_limited : bool
        A noise floor was found.
    late_known : bool
        The energy to the end of the decay is known (noise found, or the response decays far
        enough before it stops).

    References
    ----------
    Lundeby, A. et al. (1995). Uncertainties of measurements in room acoustics. Acustica 81,
    344–355 (noise floor, truncation, compensation).

    Examples
    --------
    Two arrivals, amplitudes 1 and 0.5, 100 ms apart: the energies of the windows before and
    after 50 ms are 1 and 0.5² = 0.25 (closed form); no noise, so none is removed.

    >>> h = np.zeros(4000); h[100], h[900] = 1.0, 0.5
    >>> sig = band_signal(h, 8000, None, 100)
    >>> sig.energy(0.0, 0.05)
    (1.0, 0.0, 400)
    >>> round(sig.energy(0.05, None)[0], 12), sig.index(0.1)
    (0.25, 900)
    """

    x: np.ndarray
    zero: int
    spread: int
    rate: int
    band: Band | None
    noise: float
    noise_dof: float
    end: int
    compensation: float
    decay_rate: float
    inr_db: float
    noise_limited: bool
    late_known: bool

    def index(self, t_s: float) -> int:
        """Sample of ``x`` at ``t_s`` seconds after time zero (0 reaches back by ``spread``)."""
        if t_s <= 0:
            return self.zero - self.spread
        return self.zero + int(round(t_s * self.rate))

    def energy(self, t0_s: float, t1_s: float | None) -> tuple[float, float, int]:
        """(Σx², noise energy in it, samples) over [t0, t1) after time zero.

        ``t1_s`` None: to the truncation point, with the decay's compensation beyond it
        added. A closed window runs through the noise (which is removed by the caller and
        judged by its uncertainty); where the response stops before ``t1_s``, the decay's
        compensation for the missing stretch is added.
        """
        i0 = self.index(t0_s)
        if t1_s is None:
            i1 = self.end
            extra = self.compensation
        else:
            want = self.index(t1_s)
            i1 = min(want, self.x.size)
            extra = self._tail_between(i1, want)
        if i1 <= i0:
            return 0.0, 0.0, 0
        e = float(np.sum(np.square(self.x[i0:i1]))) + extra
        return e, self.noise * (i1 - i0), i1 - i0

    def _tail_between(self, a: int, b: int) -> float:
        """Energy of the late decay, continued past the truncation point, in [a, b)."""
        if self.compensation <= 0 or b <= a:
            return 0.0
        k = self.decay_rate
        ta, tb = max(a - self.end, 0), max(b - self.end, 0)
        return self.compensation * float(np.exp(-k * ta) - np.exp(-k * tb))

    def random_sigma(self, t0_s: float, t1_s: float | None) -> float:
        """Relative standard deviation of a window's energy from the randomness of a diffuse
        field: a band of width B carries one independent energy value per rate/B samples, so
        Σ e varies by (rate/B)·Σ ē² (ē the energy smoothed over rate/B samples; Gaussian
        band-limited noise, Bendat & Piersol 2010 — from memory), as for C80 in
        :mod:`~roomconv.analysis.parameters`. A deterministic arrival (one reflection) is
        counted as random too: the estimate errs on the side of a caution."""
        i0 = self.index(t0_s)
        i1 = self.end if t1_s is None else min(self.index(t1_s), self.x.size)
        if i1 <= i0:
            return 0.0
        per_dof = _dof_samples(self.band, self.rate)
        L = max(1, int(round(per_dof)))
        e = np.maximum(np.square(self.x[i0:i1]) - self.noise, 0.0)
        smooth = np.convolve(e, np.ones(L) / L, mode="same") if L > 1 else e
        total = float(e.sum())
        if total <= 0:
            return 0.0
        return float(np.sqrt(per_dof * np.sum(np.square(smooth))) / total)

    def noise_sigma(self, signal: float, samples: int) -> float:
        """Standard deviation the noise puts on a noise-corrected window energy."""
        from .parameters import noise_energy_variance

        if self.noise <= 0 or samples <= 0:
            return 0.0
        per_dof = _dof_samples(self.band, self.rate)
        return float(
            np.sqrt(noise_energy_variance(signal, samples, self.noise, per_dof, self.noise_dof))
        )


def check_same_shape(channels: dict[str, np.ndarray]) -> None:
    """Refuse channels of different lengths or shapes (they cannot share a time zero).

    Parameters
    ----------
    channels : dict of str to ndarray
        The channels by the name a refusal shows.

    Raises
    ------
    InputError
        A channel is not 1-D, the lengths differ, or a channel holds NaN or infinity.

    Examples
    --------
    >>> check_same_shape({"left": np.zeros(4), "right": np.zeros(4)})  # accepted
    >>> check_same_shape({"left": np.zeros(4), "right": np.zeros(5)})
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: the channels differ in length (left 4 samples, right 5 samples)...
    """
    lengths = {k: np.asarray(v).shape for k, v in channels.items()}
    if any(len(s) != 1 for s in lengths.values()):
        raise InputError("each channel must be a 1-D array of samples")
    if len(set(lengths.values())) != 1:
        shown = ", ".join(f"{k} {s[0]} samples" for k, s in lengths.items())
        raise InputError(
            f"the channels differ in length ({shown}); give channels recorded together, "
            "at one sample rate"
        )
    for k, v in channels.items():
        if not np.all(np.isfinite(v)):
            raise InputError(f"the {k} channel holds NaN or infinite samples")


def band_signal(
    h: np.ndarray,
    rate: int,
    band: Band | None,
    onset: int,
    *,
    filtering: str = "zero",
) -> BandSignal:
    """Band-filter one channel and find its noise floor and usable end.

    Parameters
    ----------
    h : ndarray, 1-D
        The whole channel (not cut at its onset).
    rate : int
    band : Band or None
        None: the unfiltered channel.
    onset : int
        Time zero: the broadband direct sound of the reference channel.
    filtering : {"zero", "forward", "reverse"}
        Zero-phase (the values) or one-way (to see how much the filter's time response moves
        a value across a window limit).

    Returns
    -------
    BandSignal

    References
    ----------
    Lundeby, A. et al. (1995), Acustica 81, 344–355 (noise floor, truncation, compensation).

    Examples
    --------
    A band filter is linear: an arrival of half the amplitude carries a quarter of the energy
    in any band (closed form), here the 1 kHz octave's energies after and before 50 ms.

    >>> from roomconv.analysis.bands import all_bands
    >>> band = [b for b in all_bands("octave") if b.nominal == 1000.0][0]
    >>> h = np.zeros(4000); h[100], h[900] = 1.0, 0.5
    >>> sig = band_signal(h, 8000, band, 100)
    >>> round(sig.energy(0.05, None)[0] / sig.energy(0.0, 0.05)[0], 2)
    0.25
    """
    h = np.asarray(h, dtype=np.float64)
    lead = _lead(band, rate)
    hp = np.concatenate([np.zeros(lead), h])
    if band is None:
        x = hp
    elif filtering == "zero":
        x = zero_phase_band(hp, rate, band)
    else:
        x = filter_band(hp, rate, band, reverse=filtering == "reverse")
    zero = onset + lead
    # The early window reaches back over the direct sound's spread only (1.5/B: most of a
    # band-pass impulse response's energy lies within 1/B of its peak — common practice, as
    # in the energy ratios).
    spread = 0 if band is None else min(lead, int(np.ceil(1.5 * rate / band.bandwidth)))
    bw = band.bandwidth if band is not None else rate / 2.0
    after = x[zero:]
    if not np.any(after):
        return BandSignal(
            x, zero, spread, rate, band, 0.0, 1.0, x.size, 0.0, 0.0, np.inf, False, True
        )
    tr = lundeby_truncation(
        after,
        rate,
        interval_s=max(0.01, 1.5 / bw),
        min_interval_s=max(0.001, 1.0 / bw),
        bandwidth_hz=bw,
    )
    noise = tr.noise_energy if tr.noise_limited else 0.0
    k = -tr.slope_db_s * np.log(10) / 10 / rate if np.isfinite(tr.slope_db_s) else 0.0
    tail = after[tr.noise_start :] if tr.noise_limited else after[:0]
    late_known = tr.noise_limited or not (np.isfinite(tr.inr_db) and tr.inr_db < MIN_END_DROP_DB)
    return BandSignal(
        x=x,
        zero=zero,
        spread=spread,
        rate=rate,
        band=band,
        noise=float(noise),
        noise_dof=max(1.0, tail.size / _dof_samples(band, rate)),
        end=zero + tr.index,
        compensation=float(tr.compensation) if k > 0 else 0.0,
        decay_rate=float(k),
        inr_db=float(tr.inr_db),
        noise_limited=bool(tr.noise_limited),
        late_known=bool(late_known),
    )


def judge_sigma(
    row: JudgedRow, key: str, name: str, sigma: float, jnd: float, unit: str, label: str
) -> None:
    """Caution over half a JND of noise-induced uncertainty; no value over three JNDs
    (the thresholds the other parameters use: common practice).

    Parameters
    ----------
    row : JudgedRow
        Changed in place.
    key, name : str
        The value's key and its name in the warning.
    sigma : float
        Standard deviation the noise leaves on the value, in its unit.
    jnd : float
        The value's just-noticeable difference, in its unit.
    unit, label : str
        Unit text (" dB" or "") and the band label of the warning.

    Examples
    --------
    >>> row = JudgedRow(500.0, values={"st": -12.0})
    >>> judge_sigma(row, "st", "ST", 0.4, 1.0, " dB", "500 Hz")  # ≤ 0.5 JND: nothing
    >>> judge_sigma(row, "st", "ST", 1.0, 1.0, " dB", "500 Hz")
    >>> row.verdicts, row.values
    ({'st': 'caution'}, {'st': -12.0})
    >>> judge_sigma(row, "st", "ST", 3.5, 1.0, " dB", "500 Hz")  # > 3 JND: no value
    >>> row.verdicts, row.values
    ({'st': 'not evaluable'}, {'st': None})
    """
    if not np.isfinite(sigma) or sigma <= NOISE_SIGMA_CAUTION_JND * jnd:
        return
    if sigma > NOISE_SIGMA_NULL_JND * jnd:
        row.flag(
            (key,),
            NOT_EVALUABLE,
            f"{key}_noise_uncertain",
            f"{label}: {name} not evaluated: the background noise makes it uncertain by "
            f"±{sigma:.2g}{unit}, over {NOISE_SIGMA_NULL_JND:g} times its JND of {jnd:g}{unit}",
        )
    else:
        row.flag(
            (key,),
            CAUTION,
            f"{key}_noise_uncertain",
            f"{label}: {name}: the background noise makes it uncertain by ±{sigma:.2g}{unit}, "
            f"more than half its JND of {jnd:g}{unit}",
        )


def judge_statistics(
    row: JudgedRow, key: str, name: str, sigma: float, jnd: float, unit: str, label: str
) -> None:
    """Caution when one position's value is uncertain by more than half its JND from the
    randomness of the diffuse field (never a null: the spatial average reduces it).

    Parameters
    ----------
    row : JudgedRow
        Changed in place.
    key, name : str
        The value's key and its name in the warning.
    sigma : float
        Standard deviation of one position's value, in its unit.
    jnd : float
        The value's just-noticeable difference, in its unit.
    unit, label : str
        Unit text and the band label of the warning.

    References
    ----------
    Bendat, J. S., Piersol, A. G. (2010). Random Data, 4th ed. Wiley (variance of estimates
    from band-limited random data — from memory).

    Examples
    --------
    >>> row = JudgedRow(500.0, values={"jlf": 0.2})
    >>> judge_statistics(row, "jlf", "J_LF", 0.5, 0.05, "", "500 Hz")  # ten JNDs: still a value
    >>> row.values, row.verdicts, row.warning_codes
    ({'jlf': 0.2}, {'jlf': 'caution'}, ['statistical_uncertainty'])
    """
    if row.values.get(key) is None or not np.isfinite(sigma):
        return
    if sigma > NOISE_SIGMA_CAUTION_JND * jnd:
        row.flag(
            (key,),
            CAUTION,
            STATISTICAL,
            f"{label}: {name} at one position is uncertain by ±{sigma:.2g}{unit} (the "
            f"randomness of a diffuse field in this band), more than half its JND of "
            f"{jnd:g}{unit}; average several positions",
        )


def judge_filter(
    row: JudgedRow,
    key: str,
    name: str,
    forward: float | None,
    reverse: float | None,
    jnd: float,
    unit: str,
    label: str,
) -> None:
    """Caution when the band filter's own time response can move a value by more than half
    its JND: a forward and a backwards filter bracket the zero-phase value, and a quarter of
    their difference is taken as the zero-phase filter's remaining spread (the rule the
    energy ratios use).

    Parameters
    ----------
    row : JudgedRow
        Changed in place.
    key, name : str
        The value's key and its name in the warning.
    forward, reverse : float or None
        The value with the one-way filter run forwards and backwards in time.
    jnd : float
        The value's just-noticeable difference, in its unit.
    unit, label : str
        Unit text and the band label of the warning.

    Examples
    --------
    A forward/backward difference of 3 dB gives a spread of 3/4 = 0.75 dB, over half of a
    1 dB JND:

    >>> row = JudgedRow(250.0, values={"st_early_db": -14.0})
    >>> judge_filter(row, "st_early_db", "ST_early", -15.5, -12.5, 1.0, " dB", "250 Hz")
    >>> row.verdicts, row.warning_codes
    ({'st_early_db': 'caution'}, ['st_early_db_filter_sensitive'])
    """
    if forward is None or reverse is None or row.values.get(key) is None:
        return
    spread = abs(forward - reverse) / 4
    if spread > NOISE_SIGMA_CAUTION_JND * jnd:
        row.flag(
            (key,),
            CAUTION,
            f"{key}_filter_sensitive",
            f"{label}: {name}: the band filter's own time response can move it by "
            f"±{spread:.2g}{unit} (its bandwidth is narrow for the window limits), more than "
            f"half its JND of {jnd:g}{unit}",
        )


#: A response whose direct sound comes this close to its first sample may have been cut
#: inside the direct sound (a sinc-like arrival or a loudspeaker's own response spreads
#: energy ahead of the 20 dB onset point): windows from time zero are then flagged (common
#: practice).
MIN_LEAD_S = 0.0005


def flag_early_start(rows: list[JudgedRow], keys, onset: int, rate: int) -> None:
    """Caution on values whose window starts at time zero when the response holds less than
    ``MIN_LEAD_S`` before its direct sound.

    Parameters
    ----------
    rows : list of JudgedRow
        Changed in place.
    keys : iterable of str
        The keys whose windows start at time zero.
    onset : int
        Sample of the direct sound in the response.
    rate : int
        Sample rate, Hz.

    Examples
    --------
    At 8 kHz an onset at sample 2 is 0.25 ms in, less than the 0.5 ms asked for:

    >>> rows = [JudgedRow(500.0, values={"jlf": 0.2, "lj_db": None})]
    >>> flag_early_start(rows, ("jlf", "lj_db"), 2, 8000)
    >>> rows[0].verdicts, rows[0].warning_codes
    ({'jlf': 'caution'}, ['onset_near_start'])
    >>> rows = [JudgedRow(500.0, values={"jlf": 0.2})]
    >>> flag_early_start(rows, ("jlf",), 4, 8000)  # 0.5 ms: enough
    >>> rows[0].verdicts
    {}
    """
    if onset >= MIN_LEAD_S * rate:
        return
    text = (
        f"the response starts only {1000 * onset / rate:.2f} ms before its direct sound: if it "
        "was cut there, part of the direct sound is missing from the windows from time zero"
    )
    for row in rows:
        given = [k for k in keys if row.values.get(k) is not None]
        if given:
            row.flag(given, CAUTION, "onset_near_start", text)


def window_bounds(sig: BandSignal, t1_s: float) -> bool:
    """The response (after time zero) reaches ``t1_s``, or its decay had ended before.

    Parameters
    ----------
    sig : BandSignal
    t1_s : float
        End of a window, s after time zero.

    Returns
    -------
    bool

    Examples
    --------
    >>> h = np.zeros(800); h[0] = 1.0  # 0.1 s at 8 kHz, an impulse: its decay has ended
    >>> window_bounds(band_signal(h, 8000, None, 0), 1.0)
    True
    """
    return sig.x.size - sig.zero >= int(round(t1_s * sig.rate)) or sig.late_known


def band_average(
    rows: list[JudgedRow], key: str, low_hz: float, high_hz: float
) -> tuple[float | None, str, str | None]:
    """Mean of ``key`` over the octaves ``low_hz``..``high_hz`` (every one needed).

    Returns (value, verdict, reason when None). The verdict is the worst of the bands'.

    Parameters
    ----------
    rows : list of JudgedRow
        The octave rows.
    key : str
    low_hz, high_hz : float
        The first and last octave averaged (nominal centres, Hz).

    Returns
    -------
    value : float or None
    verdict : str
    reason : str or None

    Examples
    --------
    >>> rows = [JudgedRow(f, values={"jlf": v}).finish(("jlf",))
    ...         for f, v in ((125.0, 0.1), (250.0, 0.2), (500.0, 0.3), (1000.0, 0.4))]
    >>> v, verdict, why = band_average(rows, "jlf", 125.0, 1000.0)
    >>> round(v, 12), verdict, why  # (0.1 + 0.2 + 0.3 + 0.4) / 4
    (0.25, 'ok', None)
    >>> band_average(rows[1:], "jlf", 125.0, 1000.0)
    (None, 'not evaluable', 'the 125 Hz band(s) were not analysed')
    """
    want = [r for r in rows if r.band_hz is not None and low_hz <= r.band_hz <= high_hz]
    have = {r.band_hz for r in want}
    expected = [f for f in (125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0) if low_hz <= f <= high_hz]
    missing = [f for f in expected if f not in have]
    if missing:
        return (
            None,
            NOT_EVALUABLE,
            f"the {', '.join(f'{f:g} Hz' for f in missing)} band(s) were not analysed",
        )
    vals = [r.values.get(key) for r in want]
    if any(v is None for v in vals):
        gone = [f"{r.band_hz:g} Hz" for r in want if r.values.get(key) is None]
        return None, NOT_EVALUABLE, f"no value in the {', '.join(gone)} band(s)"
    worst = max((r.verdicts.get(key, OK) for r in want), key=_RANK.__getitem__)
    return float(np.mean([float(v) for v in vals if v is not None])), worst, None
