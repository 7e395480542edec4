"""The reference side of the strength G: the energy a source gives at 10 m in a free field.

:class:`StrengthReference` holds L_ref = 10·lg(∫p₁₀² dt / (1 FS²·s)) per band; it is built from
a free-field measurement of the source (:func:`reference_from_response`), read from the JSON
file ``roomconv calibrate`` writes, or given as one number for the wideband G only.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy import fft as sfft
from scipy.ndimage import uniform_filter1d

from ..errors import InputError, describe
from .bands import NOMINAL_OCTAVE, NOMINAL_THIRD, Band, bands_for_rate, filter_band

KIND = "roomconv strength reference"
VERSION = 1
QUANTITY = "10 lg(∫p² dt / (1 FS²·s)) at 10 m free field"
REFERENCE_DISTANCE_M = 10.0
BAND_SETS = {"octave": NOMINAL_OCTAVE, "third": NOMINAL_THIRD}

#: A band's direct sound must stand this far above its noise floor (smoothed energy, dB). Our
#: choice: with an exponential ring-out, the energy cut off where the decay meets the noise is
#: then about 1 % of the total or less (0.04 dB), well inside the 1 dB JND of G
#: (ISO 3382-1:2009, Table A.1 — from memory).
MIN_BAND_INR_DB = 20.0
#: Share of the wideband direct-sound energy that must arrive within 50 ms of the peak for the
#: response to count as a pulse (our choice: a loudspeaker's free-field response puts nearly
#: all of it there, a sweep recording or music a few per cent).
PULSE_SHARE = 0.5
#: Largest random error a band value may carry from the noise, as three standard deviations
#: in dB: half the 1 dB JND of G (ISO 3382-1:2009, Table A.1 — from memory). Three rather
#: than two because the estimate below reads up to about 20 % low in the lowest bands, where
#: the noise tail holds few independent samples (seen in our own simulations).
MAX_NOISE_ERROR_DB = 0.5
PULSE_WINDOW_S = (0.005, 0.050)
#: Below this distance the source is unlikely to act as a point source, so scaling by the
#: inverse-square law to 10 m is doubtful (common practice).
NEAR_FIELD_M = 2.0
#: 10·lg(1600π): a source's free-field energy at 10 m, ρc·E/(4π·10²), over its diffuse-field
#: energy 4ρc·E/A with A in m² (Vigran 2008, eq. 4.48; ρc cancels).
DIFFUSE_TO_10M_DB = 10.0 * math.log10(1600.0 * math.pi)
#: Fewest positions for a reverberation-room reference (common practice: the diffuse field
#: varies from point to point, and the spread is what tells how well the mean is known).
MIN_ROOM_POSITIONS = 3


@dataclass(frozen=True)
class StrengthReference:
    """L_ref = 10·lg(∫p₁₀² dt / (1 unit²·s)): the energy the same source gives at 10 m in a
    free field, per band.

    Attributes
    ----------
    wideband_db : float or None
        L_ref of the unfiltered response, dB re 1 FS²·s.
    bands_db : dict
        Nominal band centre (Hz) → L_ref, dB.
    band_set : {"octave", "third"} or None
        The band set of ``bands_db``; None for a wideband-only reference.
    rate_hz : int or None
        Rate the reference was measured at (None for a bare number).
    method : str
        How the values were obtained, in words.
    notes : tuple of str
        Why bands are missing (not stored in the JSON file).
    uncertainty_db : dict
        Band (or None for wideband) → one standard deviation, dB, of the random error the
        measured noise puts on the value (not stored in the JSON file).

    Notes
    -----
    G = 10·lg(∫p² dt) − L_ref, with ∫p² dt = Σx²/rate over the band-filtered room response.
    Because both sides are energies per unit time, neither depends on the sample rate.

    References
    ----------
    ISO 3382-1:2009, Acoustics — Measurement of room acoustic parameters — Part 1: Performance
    spaces, Annex A (sound strength G; reference at 10 m in a free field) — from memory.

    Examples
    --------
    >>> ref = StrengthReference(-40.0, {1000.0: -55.0}, "octave", 48000, "example")
    >>> ref.lookup(1000.0, 44100, band_set="octave")
    (-55.0, None)
    """

    wideband_db: float | None
    bands_db: dict = field(hash=False)
    band_set: str | None
    rate_hz: int | None
    method: str
    notes: tuple = field(default=(), compare=False)
    uncertainty_db: dict = field(default_factory=dict, compare=False, hash=False)

    def lookup(
        self, band_hz, rate_hz: int, *, band_set: str | None = None
    ) -> tuple[float | None, str | None]:
        """The reference level for one band of a response at ``rate_hz``.

        Parameters
        ----------
        band_hz : float, Band or None
            Nominal band centre; None for the wideband G. A :class:`~roomconv.analysis.bands.Band`
            also tells the band set.
        rate_hz : int
            Sample rate of the room response.
        band_set : {"octave", "third"}, optional
            Band set of the analysis. Pass it (or a ``Band``): octave centres are also
            third-octave centres, and an octave value applied to a third-octave band would be
            about 4.8 dB off without any other sign.

        Returns
        -------
        (float, None) or (None, str)
            The level, or None and the reason in words.

        Notes
        -----
        Band values are energies per unit time within a band, so they hold at any sample rate
        whose Nyquist frequency lies above the band. The wideband value covers everything up
        to the reference's Nyquist frequency; a response at another rate covers a different
        bandwidth, so the wideband value is refused there (we do not guess how much of the
        room response lies above the reference's Nyquist frequency). A bare number (no rate)
        is taken as the user's wideband figure at any rate.
        """
        if isinstance(band_hz, Band):
            band_set = band_set or ("octave" if band_hz.fraction == 1 else "third")
            band_hz = band_hz.nominal
        if band_hz is None:
            if self.wideband_db is None:
                return None, (
                    "wideband G not evaluated: the strength reference has no wideband value"
                )
            if self.rate_hz is not None and int(rate_hz) != int(self.rate_hz):
                return None, (
                    f"wideband G not evaluated: the strength reference was measured at "
                    f"{self.rate_hz} Hz and the response is at {rate_hz} Hz, so their "
                    "wideband energies span different bandwidths (use the per-band "
                    f"G, or measure the reference at {rate_hz} Hz)"
                )
            return float(self.wideband_db), None
        label = _label(float(band_hz))
        if not self.bands_db:
            return None, (
                f"{label} Hz: G not evaluated: a single broadband calibration number "
                "applies only to the wideband G (make a per-band reference with "
                "roomconv calibrate)"
            )
        if band_set is not None and self.band_set is not None and band_set != self.band_set:
            return None, (
                f"{label} Hz: G not evaluated: the strength reference holds "
                f"{_set_name(self.band_set)} values and the analysis uses "
                f"{_set_name(band_set)} (make the reference in the same "
                f"{_set_name(band_set)} set)"
            )
        for nominal, value in self.bands_db.items():
            if math.isclose(float(nominal), float(band_hz), rel_tol=1e-6):
                return float(value), None
        held = sorted(float(k) for k in self.bands_db)
        return None, (
            f"{label} Hz: G not evaluated: the strength reference has no value for "
            f"this band (it holds {_label(held[0])}-{_label(held[-1])} Hz)"
        )


#: Plausible levels of 10·lg(∫p₁₀² dt / FS²·s): a full-scale unit impulse at 8 kHz is
#: −39 dB; any real source and interface lies far inside ±200 dB (common practice bound that
#: keeps out values that are not levels at all).
LEVEL_MIN_DB, LEVEL_MAX_DB = -200.0, 200.0
#: Free-field reference distances beyond this are not free-field measurements (common practice).
MAX_DISTANCE_M = 100.0


def reference_from_response(
    h: np.ndarray, rate: int, *, distance_m: float, bands: str = "octave"
) -> StrengthReference:
    """Strength reference from a free-field impulse response of the source.

    The direct sound of each band is integrated with its noise subtracted, over the span where
    the band's smoothed energy stands above its noise floor (so the band filter's ringing is
    included however clean the response is), and scaled from ``distance_m`` to 10 m by the
    inverse-square law: L₁₀ = L_d + 20·lg(d / 10 m).

    Parameters
    ----------
    h : ndarray, shape (samples,)
        The source's impulse response measured at ``distance_m`` in a free field (an anechoic
        room, or with reflections gated out): full-scale units, as extracted.
    rate : int
        Sample rate, Hz.
    distance_m : float
        Source–microphone distance, m; finite and positive.
    bands : {"octave", "third"}
        Band set of the per-band values.

    Returns
    -------
    StrengthReference
        Bands whose direct sound does not stand 20 dB above the noise, or whose value the noise
        would leave uncertain by more than half the JND of G, are left out with the reason in
        ``notes``; ``uncertainty_db`` holds the random error of the others.

    Raises
    ------
    InputError
        When the distance or rate is unusable, or the response is not pulse-like (a sweep
        recording, music, noise) or is too noisy.

    Notes
    -----
    Everything above the noise after the direct sound counts as direct sound, so the response
    must be free of reflections (an anechoic room, or gated before the first reflection with
    the low bands' ringing in mind). Steps for each band (and for the unfiltered response):

    1. filter the response into the band (:func:`~roomconv.analysis.bands.filter_band`,
       forward; the total energy is the same either way);
    2. noise power: the mean square of the last 10 % of the response;
    3. smoothed energy: a moving mean over max(1 ms, 1/B);
    4. span: from the last point before the peak to the first point after it where the
       smoothed energy is at most twice the noise power (the direct sound no longer above the
       noise), and never later than the broadband onset at its start (first sample within
       20 dB of the peak, ISO 3382-1:2009 A.3.2 — from memory);
    5. ∫p² dt = (Σx² − span·noise) / rate over the span;
    6. its random error: the noise adds a cross term 2·Σ s·n whose variance is
       Σₘ r_s(m)·r_n(m) (autocorrelations of the direct sound and of the tail's noise), plus
       the error of the subtracted noise estimate. A band whose three-standard-deviation
       error exceeds 0.5 dB (half the JND of G) is left out.

    References
    ----------
    ISO 3382-1:2009, Annex A (strength G, free-field reference at 10 m; onset at 20 dB below
    the peak) — from memory.
    Lundeby, A., Vigran, T. E., Bietz, H., Vorländer, M. (1995). Uncertainties of measurements
    in room acoustics. Acustica 81, 344–355 (noise from the tail, decay until it meets the
    noise).

    Examples
    --------
    A unit impulse at 10 m carries ∫p² dt = 1/rate FS²·s. Half the amplitude at 5 m carries
    0.25/rate, and the inverse-square law moves it to 10 m by 20·lg(5/10) dB:

    >>> rate = 48000
    >>> h = np.zeros(rate // 2)
    >>> h[100] = 1.0
    >>> round(reference_from_response(h, rate, distance_m=10.0).wideband_db, 2)
    -46.81
    >>> round(float(10 * np.log10(1 / rate)), 2)
    -46.81
    >>> h[100] = 0.5
    >>> ref = reference_from_response(h, rate, distance_m=5.0)
    >>> round(ref.wideband_db, 2), round(float(10 * np.log10(0.25 / rate) + 20 * np.log10(0.5)), 2)
    (-58.85, -58.85)
    """
    x = np.asarray(h, dtype=np.float64)
    if x.ndim == 2 and x.shape[1] == 1:
        x = x[:, 0]
    if x.ndim != 1:
        raise InputError("the strength reference needs a single channel")
    if not (isinstance(rate, (int, np.integer)) and rate > 0):
        raise InputError(f"sample rate {rate!r} is not a positive whole number of Hz")
    if not (np.isfinite(distance_m) and 0 < distance_m <= MAX_DISTANCE_M):
        raise InputError(
            f"distance {distance_m!r} m is not a distance above 0 m and at most "
            f"{MAX_DISTANCE_M:g} m (a free-field reference is measured at a few "
            "metres)"
        )
    if bands not in BAND_SETS:
        raise InputError(f"unknown band set '{bands}' (use octave or third)")
    if not np.all(np.isfinite(x)):
        raise InputError("the reference response holds NaN or infinite samples")
    if not np.any(x):
        raise InputError("the reference response is silent")
    rate = int(rate)
    onset = _onset(x)
    _check_pulse(x, rate, onset)
    scale_db = 20.0 * math.log10(distance_m / REFERENCE_DISTANCE_M)

    wide, why, sigma = _direct_energy(x, rate, onset, bandwidth=None)
    if wide is None:
        raise InputError(f"the reference response is not usable: {why}")
    uncertainty: dict[float | None, float | None] = {None: sigma}
    band_list, notes = bands_for_rate(bands, rate)
    values = {}
    notes = list(notes)
    for b in band_list:
        e, why, sigma = _direct_energy(filter_band(x, rate, b), rate, onset, bandwidth=b.bandwidth)
        if e is None:
            notes.append(f"{b.label} Hz band left out: {why}")
            continue
        values[float(b.nominal)] = 10.0 * math.log10(e) + scale_db
        uncertainty[float(b.nominal)] = sigma
    d_txt = f"{distance_m:g} m"
    method = (
        f"free-field reference at {d_txt}"
        if distance_m == REFERENCE_DISTANCE_M
        else f"free-field reference at {d_txt}, scaled to 10 m by the inverse-square law"
    )
    return StrengthReference(
        wideband_db=10.0 * math.log10(wide) + scale_db,
        bands_db=values,
        band_set=bands,
        rate_hz=rate,
        method=method,
        notes=tuple(notes),
        uncertainty_db=uncertainty,
    )


def reverberation_room_reference(
    responses,
    rate: int,
    *,
    volume_m3: float,
    reverberation_s: dict,
    surface_m2: float | None = None,
    bands: str = "octave",
    speed_of_sound: float = 343.0,
) -> StrengthReference:
    """Strength reference from impulse responses of the source in a reverberation room.

    In a diffuse field the energy of an impulse E is ∫p² dt = 4ρc·E/A, while the same source
    in a free field at 10 m gives ρc·E/(4π·10²); hence, per band,
    L₁₀ = L_rev + 10·lg(A / 1 m²) − 10·lg(1600π) [+ 10·lg(1 + S·c/(8·V·f))], with the
    equivalent absorption area A = 55.26·V/(c·T) (Sabine) and L_rev the level of the
    energy averaged over the positions.

    Parameters
    ----------
    responses : sequence of ndarray
        Impulse responses (1-D, full-scale units) of the source at several positions in the
        diffuse field (beyond the room's hall radius, away from the walls).
    rate : int
        Sample rate of all responses, Hz.
    volume_m3 : float
        Room volume, m³.
    reverberation_s : dict
        Nominal band centre (Hz) → reverberation time T of the room, s (T30, measured).
    surface_m2 : float, optional
        Room surface; when given, the Waterhouse correction 10·lg(1 + S·c/(8·V·f)) for the
        energy held near the boundaries is added (f: exact mid-band frequency).
    bands : {"octave", "third"}
        Band set.
    speed_of_sound : float
        c, m/s.

    Returns
    -------
    StrengthReference
        No wideband value (T and A vary across the band); bands without T, too noisy, or
        whose position-to-position spread leaves the mean uncertain by more than half the JND
        of G (three standard errors above 0.5 dB) are left out with the reason in ``notes``.

    Notes
    -----
    Each response's band energy is integrated with its noise (mean square of the last 10 %)
    subtracted until the smoothed energy meets the noise, and the exponential tail cut off
    there is added back from T: e(t_c)·T/(6·ln 10).

    References
    ----------
    Vigran, T. E. (2008). Building Acoustics. Taylor & Francis, eq. 4.48 (direct and diffuse
    field of a source in a room) and A = 55.26·V/(c·T) (Sabine).
    ISO 3382-1:2009, Annex A (strength G against the free field at 10 m) and ISO 3741
    (sound power in reverberation rooms, Waterhouse correction) — from memory.
    Lundeby, A., Vigran, T. E., Bietz, H., Vorländer, M. (1995). Uncertainties of measurements
    in room acoustics. Acustica 81, 344–355 (noise from the tail; compensation of the energy
    cut off).

    Examples
    --------
    Three positions of a diffuse decay (T = 1 s) in 200 m³; the 1 kHz value follows
    L₁₀ = L_rev + 10·lg A − 10·lg(1600π) with A = 55.26·V/(c·T):

    >>> rate, T = 48000, 1.0
    >>> rng = np.random.default_rng(0)
    >>> t = np.arange(int(1.5 * rate)) / rate
    >>> rs = [0.01 * rng.standard_normal(t.size) * 10 ** (-3 * t / T) for _ in range(3)]
    >>> ref = reverberation_room_reference(rs, rate, volume_m3=200.0,
    ...                                    reverberation_s={1000: T})
    >>> from roomconv.analysis.bands import filter_band, all_bands
    >>> e = np.mean([np.sum(filter_band(r, rate, all_bands()[5]) ** 2) / rate for r in rs])
    >>> A = 55.26 * 200 / (343 * T)
    >>> round(ref.bands_db[1000.0], 1), round(float(10 * np.log10(e * A / (1600 * np.pi))), 1)
    (-88.6, -88.6)
    """
    items = [np.asarray(h, dtype=np.float64).reshape(-1) for h in responses]
    if not items:
        raise InputError("the reverberation-room method needs at least one response")
    if len(items) < MIN_ROOM_POSITIONS:
        raise InputError(
            f"the reverberation-room method needs responses at {MIN_ROOM_POSITIONS}"
            f" positions or more (got {len(items)}): the diffuse field varies from "
            "point to point"
        )
    if not (isinstance(rate, (int, np.integer)) and rate > 0):
        raise InputError(f"sample rate {rate!r} is not a positive whole number of Hz")
    for name, v, lo, hi in (
        ("room volume", volume_m3, 1.0, 1e6),
        ("speed of sound", speed_of_sound, 250.0, 450.0),
    ):
        if not (_is_number(v) and math.isfinite(v) and lo <= v <= hi):
            raise InputError(f"{name} {v!r} is out of range (accepted: {lo:g} to {hi:g})")
    if surface_m2 is not None and not (
        _is_number(surface_m2) and math.isfinite(surface_m2) and 1.0 <= surface_m2 <= 1e6
    ):
        raise InputError(f"room surface {surface_m2!r} m² is out of range (accepted: 1 to 1e6 m²)")
    if bands not in BAND_SETS:
        raise InputError(f"unknown band set '{bands}' (use octave or third)")
    for i, h in enumerate(items):
        if not np.all(np.isfinite(h)) or not np.any(h):
            raise InputError(f"response {i + 1} is silent or holds NaN or infinite samples")
    rate = int(rate)
    t_by_band = {float(k): v for k, v in reverberation_s.items()}
    band_list, notes = bands_for_rate(bands, rate)
    notes = list(notes)
    values, uncertainty = {}, {}
    for b in band_list:
        t = t_by_band.get(float(b.nominal))
        if t is None:
            notes.append(f"{b.label} Hz band left out: no reverberation time given for it")
            continue
        if not (_is_number(t) and math.isfinite(t) and 0.05 <= t <= 60.0):
            raise InputError(
                f"reverberation time {t!r} s for the {b.label} Hz band is out of "
                "range (accepted: 0.05 to 60 s)"
            )
        levels, why = [], None
        for h in items:
            e, why = _diffuse_energy(filter_band(h, rate, b), rate, b.bandwidth, float(t))
            if e is None:
                break
            levels.append(10.0 * math.log10(e))
        if why is not None:
            notes.append(f"{b.label} Hz band left out: {why}")
            continue
        mean_db = 10.0 * math.log10(np.mean(10.0 ** (np.asarray(levels) / 10.0)))
        sem = float(np.std(levels, ddof=1) / math.sqrt(len(levels)))
        if 3.0 * sem > MAX_NOISE_ERROR_DB:
            notes.append(
                f"{b.label} Hz band left out: the positions spread by "
                f"{np.std(levels, ddof=1):.1f} dB, leaving the mean uncertain by "
                f"±{3 * sem:.1f} dB (three standard errors; at most "
                f"{MAX_NOISE_ERROR_DB:g} dB allowed); measure at more positions"
            )
            continue
        area = 24.0 * math.log(10.0) * volume_m3 / (speed_of_sound * t)  # 55.26·V/(c·T)
        level = mean_db + 10.0 * math.log10(area) - DIFFUSE_TO_10M_DB
        if surface_m2 is not None:
            level += 10.0 * math.log10(
                1.0 + surface_m2 * speed_of_sound / (8.0 * volume_m3 * b.exact)
            )
        values[float(b.nominal)] = level
        uncertainty[float(b.nominal)] = sem
    if surface_m2 is None:
        notes.append("Waterhouse correction not applied (give the room surface to add it)")
    method = (
        f"reverberation room of {volume_m3:g} m³, {len(items)} positions, "
        f"A = 55.26·V/(c·T) per band"
        + (f", Waterhouse correction for {surface_m2:g} m²" if surface_m2 else "")
    )
    if not values:
        raise InputError(
            "the reverberation-room method gave no band value: " + "; ".join(notes)
            if notes
            else "no band could be evaluated"
        )
    return StrengthReference(
        wideband_db=None,
        bands_db=values,
        band_set=bands,
        rate_hz=rate,
        method=method,
        notes=tuple(notes),
        uncertainty_db=uncertainty,
    )


def reference_to_dict(ref: StrengthReference) -> dict:
    """The JSON layout of a strength reference (version 1).

    Examples
    --------
    >>> d = reference_to_dict(parse_strength_reference("-40"))
    >>> d["wideband_db"], d["bands_db"], d["rate_hz"]
    (-40.0, {}, None)
    """
    return {
        "kind": KIND,
        "version": VERSION,
        "quantity": QUANTITY,
        "rate_hz": ref.rate_hz,
        "band_set": ref.band_set,
        "method": ref.method,
        "wideband_db": ref.wideband_db,
        "bands_db": {_label_key(k): float(v) for k, v in sorted(ref.bands_db.items())},
    }


def reference_from_dict(d, *, source: str) -> StrengthReference:
    """Validate a parsed strength-reference file; :class:`InputError` names ``source`` and the
    field.

    Examples
    --------
    >>> ref = parse_strength_reference("-40")
    >>> reference_from_dict(reference_to_dict(ref), source="ref.json") == ref
    True
    >>> reference_from_dict({"kind": "other"}, source="ref.json")
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: ref.json: field 'kind' is 'other', ...
    """

    def bad(problem, hint="re-create it with roomconv calibrate"):
        return InputError(describe(source, problem, hint))

    if not isinstance(d, dict):
        raise bad(
            f"holds a JSON {type(d).__name__ if d is not None else 'null'}, not a strength "
            "reference object"
        )
    if "kind" not in d:
        if d and all(_is_number(v) for v in d.values()):
            raise bad(
                "is a calibration file from an earlier version of roomconv (band → dB "
                "of a per-sample sum); it cannot be converted without the sample rate",
                "re-create it from the reference response with roomconv calibrate",
            )
        raise bad("is not a strength reference (no 'kind' field)")
    if d["kind"] != KIND:
        raise bad(f"field 'kind' is {d['kind']!r}, expected {KIND!r}")
    version = d.get("version")
    if not (isinstance(version, int) and not isinstance(version, bool)):
        raise bad(f"field 'version' is {version!r}, expected the whole number {VERSION}")
    if version != VERSION:
        raise bad(
            f"field 'version' is {version}; this roomconv reads version {VERSION}",
            "update roomconv or re-create the file",
        )
    band_set = d.get("band_set", ...)
    if band_set is ...:
        raise bad("field 'band_set' is missing (octave, third or null)")
    if band_set is not None and band_set not in BAND_SETS:
        raise bad(f"field 'band_set' is {band_set!r}, expected octave, third or null")
    rate = d.get("rate_hz", ...)
    if rate is ...:
        raise bad("field 'rate_hz' is missing")
    if rate is not None and not (isinstance(rate, int) and not isinstance(rate, bool) and rate > 0):
        raise bad(f"field 'rate_hz' is {rate!r}, expected a positive whole number of Hz or null")
    method = d.get("method")
    if not isinstance(method, str) or not method.strip():
        raise bad("field 'method' is missing or not text")
    if "wideband_db" not in d:
        raise bad("field 'wideband_db' is missing (a number or null)")
    wide = d["wideband_db"]
    if wide is not None:
        wide = _finite(wide, "wideband_db", bad)
    raw = d.get("bands_db", ...)
    if raw is ...:
        raise bad("field 'bands_db' is missing (an object, possibly empty)")
    if not isinstance(raw, dict):
        raise bad(f"field 'bands_db' is a {type(raw).__name__}, expected an object band → dB")
    if raw and band_set is None:
        raise bad("field 'bands_db' holds bands but 'band_set' is null")
    values = {}
    for key, v in raw.items():
        try:
            nominal = float(key)
        except (TypeError, ValueError):
            raise bad(
                f"field 'bands_db' has the key {key!r}, which is not a band centre in Hz"
            ) from None
        if not any(math.isclose(nominal, n, rel_tol=1e-6) for n in BAND_SETS[band_set]):
            raise bad(
                f"field 'bands_db' has {key!r} Hz, which is not a nominal "
                f"{_set_name(band_set)} centre"
            )
        values[nominal] = _finite(v, f"bands_db.{key}", bad)
    if wide is None and not values:
        raise bad("holds no value at all (wideband_db is null and bands_db is empty)")
    return StrengthReference(
        wideband_db=wide, bands_db=values, band_set=band_set, rate_hz=rate, method=method
    )


def parse_strength_reference(text: str) -> StrengthReference:
    """The value of a strength-reference option: a number or a JSON file.

    A number is L_ref for the wideband G only, dB of ∫p² dt in FS²·s at 10 m in a free field;
    anything else is read as the path of a file written by ``roomconv calibrate``.

    Examples
    --------
    >>> ref = parse_strength_reference("-40")
    >>> ref.lookup(None, 48000)
    (-40.0, None)
    """
    s = str(text).strip()
    try:
        value = float(s)
    except ValueError:
        value = None
    if value is not None:
        if not (math.isfinite(value) and LEVEL_MIN_DB <= value <= LEVEL_MAX_DB):
            raise InputError(
                f"strength reference {text!r} is not a finite level between "
                f"{LEVEL_MIN_DB:g} and {LEVEL_MAX_DB:g} dB: give dB of ∫p² dt at "
                "10 m, or the JSON file from roomconv calibrate"
            )
        return StrengthReference(
            wideband_db=value,
            bands_db={},
            band_set=None,
            rate_hz=None,
            method="a single wideband level given as a number",
        )
    p = Path(s)
    if not p.exists():
        raise InputError(
            describe(
                p,
                "strength reference file not found",
                "give a level in dB or the JSON file from roomconv calibrate",
            )
        )
    if p.is_dir():
        raise InputError(
            describe(
                p,
                "is a folder, not a strength reference file",
                "give the JSON file from roomconv calibrate",
            )
        )
    from ..audio import check_input_file

    p = check_input_file(p, "strength reference file")  # a pipe or device would block
    try:
        d = json.loads(p.read_text(encoding="utf-8"))
    except RecursionError:
        raise InputError(
            describe(
                p,
                "is nested too deeply to be a strength reference",
                "re-create it with roomconv calibrate",
            )
        ) from None
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(
            describe(p, f"is not valid JSON: {exc}", "re-create it with roomconv calibrate")
        ) from None
    except OSError as exc:
        raise InputError(describe(p, f"cannot be read: {exc.strerror or exc}")) from None
    return reference_from_dict(d, source=str(p))


# --- helpers --------------------------------------------------------------------------------
def _onset(x: np.ndarray) -> int:
    """First sample within 20 dB of the peak (ISO 3382-1:2009, A.3.2 — from memory)."""
    e = np.square(x)
    return int(np.flatnonzero(e >= 0.01 * e.max())[0])


def _tail_noise(e: np.ndarray) -> float:
    return float(np.mean(e[-max(1, int(round(0.1 * e.size))) :]))


def _check_pulse(x: np.ndarray, rate: int, onset: int) -> None:
    """Refuse what is not an impulse response: the direct sound must be short."""
    hint = (
        "a strength reference is an impulse response: extract it from the sweep "
        "recording first with roomconv extract"
    )
    e = np.square(x)
    noise = _tail_noise(e)
    w = max(1, int(round(0.001 * rate)))
    env = uniform_filter1d(e, w, mode="constant")
    if noise > 0 and env.max() < 10 ** (MIN_BAND_INR_DB / 10) * noise:
        raise InputError(
            f"the reference response's peak stands only "
            f"{10 * math.log10(env.max() / noise):.0f} dB above the mean of its "
            f"last 10 % (at least {MIN_BAND_INR_DB:.0f} dB needed): it is too noisy "
            f"for a reference, or not an impulse response ({hint})"
        )
    total, _, _ = _direct_energy(
        x, rate, onset, bandwidth=None, per_unit_time=False, max_error_db=None
    )
    pk = int(np.argmax(e))
    a = max(0, pk - int(PULSE_WINDOW_S[0] * rate))
    b = min(e.size, pk + int(PULSE_WINDOW_S[1] * rate))
    near = float(np.sum(e[a:b]) - noise * (b - a))
    if total is None or near < PULSE_SHARE * total:
        share = 0.0 if not total else max(0.0, near / total)
        raise InputError(
            f"the reference response is not pulse-like: only {100 * share:.0f} % "
            "of its energy lies within 50 ms of its peak, as in a sweep recording, "
            f"music or noise ({hint})"
        )


def _direct_energy(
    x: np.ndarray,
    rate: int,
    onset: int,
    *,
    bandwidth: float | None,
    per_unit_time: bool = True,
    max_error_db: float | None = MAX_NOISE_ERROR_DB,
) -> tuple[float | None, str | None, float | None]:
    """Noise-subtracted energy of the direct sound, the reason if there is none, and its
    random error (one standard deviation, dB); see :func:`reference_from_response`."""
    e = np.square(x)
    n = e.size
    w = max(1, int(round(rate * max(0.001, 1.0 / bandwidth if bandwidth else 0.0))))
    tail = max(1, int(round(0.1 * n)))
    if n - tail < onset + 4 * w:
        return (
            None,
            (
                f"the response is too short after the direct sound ({(n - onset) / rate:.2f}"
                " s) for the band filter to ring out and leave a noise-only tail; record "
                "a longer response"
            ),
            None,
        )
    noise = _tail_noise(e)
    env = uniform_filter1d(e, w, mode="constant")
    k_pk = int(np.argmax(env))
    peak = float(env[k_pk])
    if peak <= 0:
        return None, "no energy in this band", None
    if noise > 0 and peak < 10 ** (MIN_BAND_INR_DB / 10) * noise:
        return (
            None,
            (
                f"its direct sound is only {10 * math.log10(peak / noise):.0f} dB above the "
                f"noise (at least {MIN_BAND_INR_DB:.0f} dB needed)"
            ),
            None,
        )
    # Below 10⁻¹² of the peak the remaining energy is negligible even where there is no noise.
    thr = max(2.0 * noise, 1e-12 * peak)
    after = np.flatnonzero(env[k_pk:] <= thr)
    if after.size == 0:
        return (
            None,
            (
                "its energy does not fall to the noise floor before the end of the "
                "response; record a longer response"
            ),
            None,
        )
    end = min(n, k_pk + int(after[0]) + w // 2 + 1)
    before = np.flatnonzero(env[: k_pk + 1] <= thr)
    start = max(0, int(before[-1]) - w // 2) if before.size else 0
    start = min(start, onset)
    energy = float(np.sum(e[start:end])) - noise * (end - start)
    if not energy > 0:
        return None, "no energy left once the noise is subtracted", None
    sigma_rel = _noise_error(x[start:end], x[n - tail :], w, noise * (end - start)) / energy
    sigma_db = 10.0 * math.log10(1.0 + sigma_rel) if sigma_rel > 0 else 0.0
    if max_error_db is not None and 3.0 * sigma_db > max_error_db:
        return (
            None,
            (
                f"the noise leaves it uncertain by ±{3 * sigma_db:.1f} dB (three standard "
                f"deviations; at most {max_error_db:g} dB allowed); measure with more "
                "level or less noise"
            ),
            None,
        )
    return (energy / rate if per_unit_time else energy), None, sigma_db


def _diffuse_energy(
    x: np.ndarray, rate: int, bandwidth: float, t60: float
) -> tuple[float | None, str | None]:
    """∫p² dt of a reverberant band response: noise subtracted up to where the smoothed energy
    meets the noise, plus the exponential tail beyond, from T (Lundeby et al. 1995)."""
    e = np.square(x)
    n = e.size
    w = max(1, int(round(rate * max(0.01, 1.0 / bandwidth))))
    noise = _tail_noise(e)
    env = uniform_filter1d(e, w, mode="constant")
    k_pk = int(np.argmax(env))
    peak = float(env[k_pk])
    if peak <= 0:
        return None, "no energy in this band"
    if noise > 0 and peak < 10 ** (MIN_BAND_INR_DB / 10) * noise:
        return None, (
            f"a response stands only {10 * math.log10(peak / noise):.0f} dB above its "
            f"noise (at least {MIN_BAND_INR_DB:.0f} dB needed)"
        )
    after = np.flatnonzero(env[k_pk:] <= max(2.0 * noise, 1e-12 * peak))
    if after.size == 0 or k_pk + int(after[0]) >= n - int(round(0.1 * n)):
        return None, (
            "a response does not decay into its noise before its last 10 %; record longer responses"
        )
    end = k_pk + int(after[0])
    energy = float(np.sum(e[:end])) - noise * end
    # e(t) ∝ exp(−6·ln10·t/T): the energy beyond t_c is e(t_c)·T/(6·ln 10) per unit time.
    energy += max(float(env[end]) - noise, 0.0) * t60 * rate / (6.0 * math.log(10.0))
    if not energy > 0:
        return None, "no energy left once the noise is subtracted"
    return energy / rate, None


def _noise_error(seg: np.ndarray, tail: np.ndarray, w: int, subtracted: float) -> float:
    """Standard deviation (energy units) that the noise puts on a noise-subtracted energy.

    Cross term: var(2·Σ s·n) = 4·Σₘ r_s(m)·r_n(m), with r_s the deterministic autocorrelation
    of the segment and r_n the noise's autocorrelation estimated from the tail over lags up to
    4 smoothing lengths (band-limited noise decorrelates over about 1/B). Subtraction: the
    tail's mean square is known to about 1/√(tail / w) of itself.
    """
    if not np.any(tail):
        return 0.0
    lags = int(min(4 * w, tail.size // 2, seg.size - 1))
    nf = sfft.next_fast_len(2 * seg.size)
    r_s = sfft.irfft(np.abs(sfft.rfft(seg, nf)) ** 2, nf)[: lags + 1]
    nt = sfft.next_fast_len(2 * tail.size)
    r_n = sfft.irfft(np.abs(sfft.rfft(tail, nt)) ** 2, nt)[: lags + 1]
    r_n /= tail.size - np.arange(lags + 1)
    var_cross = 4.0 * (r_s[0] * r_n[0] + 2.0 * float(np.sum(r_s[1:] * r_n[1:])))
    var_sub = (subtracted * math.sqrt(w / tail.size)) ** 2
    return math.sqrt(max(var_cross, 0.0) + var_sub)


def _finite(v, name, bad) -> float:
    if not _is_number(v):
        raise bad(f"field '{name}' is {v!r}, expected a number (dB)")
    f = float(v)
    if not math.isfinite(f):
        raise bad(f"field '{name}' is not finite")
    if not LEVEL_MIN_DB <= f <= LEVEL_MAX_DB:
        raise bad(
            f"field '{name}' is {f:g} dB, not a level between {LEVEL_MIN_DB:g} and "
            f"{LEVEL_MAX_DB:g} dB"
        )
    return f


def _is_number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _label(f: float) -> str:
    return f"{f / 1000:g}k" if f >= 1000 else f"{f:g}"


def _label_key(f: float) -> str:
    return f"{float(f):g}"


def _set_name(band_set: str) -> str:
    return "octave-band" if band_set == "octave" else "third-octave-band"
