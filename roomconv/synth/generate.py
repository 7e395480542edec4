"""A synthetic room response: image sources for the early part, a diffuse tail after the
mixing time, one channel per receiver."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .air import speed_of_sound
from .image_source import image_sources, render_images
from .materials import OCTAVES
from .room import RoomModel, eyring, max_reverberation, sabine
from .tail import band_noise, diffuse_tail, fit_decay_nodes

__all__ = ["Receivers", "SynthResult", "synthesize", "mixing_time", "fill_bands", "MIN_DISTANCE_M"]

#: Mean power of a cardioid ½ + ½·cos θ in a diffuse field relative to an omni:
#: ∫(½ + ½cos θ)² dΩ / 4π = 1/3 (closed form).
CARDIOID_DIFFUSE_POWER = 1.0 / 3.0
#: Default length beyond the longest decay: 1.2·T is 72 dB of decay (our choice, below any
#: practical noise floor), plus the direct sound's travel time and 0.1 s.
LENGTH_DECAYS = 1.2
LENGTH_MARGIN_S = 0.1
#: Closest source–receiver distance accepted, m (common practice: nearer, the point-source
#: 1/r law and the loudspeaker's size no longer go together, and 1/r grows without bound).
MIN_DISTANCE_M = 0.1
#: The tail never starts before the direct sound plus this, s (our choice: a few ms, past
#: the direct sound's own interpolation kernel of SINC_HALF samples at any common rate).
TAIL_AFTER_DIRECT_S = 0.003
#: Rooms where the sqrt(V) ms rule of thumb is not used (our choice): below this volume, m³,
#: or with the longest side this many times the shortest.
SMALL_ROOM_M3 = 50.0
FLAT_RATIO = 5.0
#: Below this fraction of the asked octave reading, a band is reported as not reached.
READING_REPORT = 0.02


@dataclass
class Receivers:
    """Receiver arrangement: 'mono', 'spaced' (spacing m) or 'coincident' (angle degrees).

    Examples
    --------
    >>> Receivers.parse("coincident:90")
    Receivers(kind='coincident', value=90.0)
    >>> Receivers.parse("spaced:0.6").channels
    2
    """

    kind: str = "mono"
    value: float = 0.0

    @classmethod
    def parse(cls, text: str | None) -> Receivers:
        """Read ``mono``, ``spaced:METRES`` or ``coincident:DEGREES`` (None means mono)."""
        if text in (None, "", "mono"):
            return cls()
        kind, _, val = text.partition(":")
        if kind not in ("spaced", "coincident"):
            raise InputError(
                f"receiver arrangement '{text}' not understood: use mono, "
                "spaced:METRES or coincident:DEGREES"
            )
        try:
            v = float(val)
        except ValueError:
            raise InputError(f"'{text}': the value after ':' must be a number") from None
        if kind == "spaced" and v <= 0 or kind == "coincident" and not 0 <= v <= 180:
            raise InputError(f"'{text}': spacing must be positive, angle within 0-180 degrees")
        return cls(kind, v)

    @property
    def channels(self) -> int:
        """1 for mono, 2 for either pair."""
        return 1 if self.kind == "mono" else 2


@dataclass
class SynthResult:
    """What :func:`synthesize` returns.

    Attributes
    ----------
    ir : ndarray, shape (samples, channels)
    rate : int
        Hz.
    sabine, eyring : dict
        Predicted reverberation time per band, {band_hz: s}.
    used_rt : dict
        Reverberation time per band given to the tail, s.
    mixing_time_s : float
        Where the tail is centred, s.
    image_count : int
        Images rendered (largest over the channels).
    notes : list of str
    rt_origin : dict
        Where each band of ``used_rt`` comes from: 'given', 'interpolated', 'held' (beyond
        the given range), 'eyring' or 'sabine'.
    expected_reading : dict
        The octave-band T30 the tail's decay curve is expected to give, s; equal to
        ``used_rt`` within FIT_TOLERANCE except in bands named in ``notes``.
    tail_start_s : float
        Where the cross-fade into the tail begins, s after emission.

    Examples
    --------
    >>> from roomconv.synth.room import RoomModel
    >>> room = RoomModel(5.0, 4.0, 3.0, {w: "plaster" for w in
    ...                  ("left", "right", "front", "back", "floor", "ceiling")})
    >>> res = synthesize(room, (1, 1, 1), (4, 3, 1.5), rate=8000, length_s=0.5, seed=1)
    >>> res.ir.shape, res.rate
    ((4000, 1), 8000)
    """

    ir: np.ndarray  #: (samples, channels)
    rate: int
    sabine: dict
    eyring: dict
    used_rt: dict  #: reverberation time per band given to the tail
    mixing_time_s: float
    image_count: int
    notes: list = field(default_factory=list)
    rt_origin: dict = field(default_factory=dict)
    expected_reading: dict = field(default_factory=dict)
    tail_start_s: float = 0.0


def _check_point(room: RoomModel, p, what: str) -> np.ndarray:
    a = np.asarray(p, dtype=float)
    if a.shape != (3,) or not np.all(np.isfinite(a)):
        raise InputError(f"{what} must be three numbers X,Y,Z in metres")
    if not room.contains(a):
        raise InputError(
            f"{what} {tuple(float(x) for x in a)} is outside the room "
            f"(0..{room.length:g}, 0..{room.width:g}, 0..{room.height:g} m)"
        )
    return a


def mixing_time(room: RoomModel) -> tuple[float, str | None]:
    """Mixing time, s, and a note when the usual rule of thumb does not apply.

    sqrt(V) ms (V in m³) is the common rule of thumb. In very small rooms (under 50 m³) or
    very flat ones (longest side over 5 × the shortest) reflections thicken at a pace set by
    the mean free path 4V/S rather than the volume; there the predictor 20·V/S + 12 ms is
    used instead.

    Parameters
    ----------
    room : RoomModel

    Returns
    -------
    seconds : float
    note : str or None
        Why the rule of thumb was replaced, or None.

    Examples
    --------
    >>> from .room import RoomModel
    >>> round(mixing_time(RoomModel(20, 10, 5))[0] * 1000, 1)
    31.6
    >>> t, note = mixing_time(RoomModel(4, 3, 2.5))
    >>> round(t * 1000, 1), note is not None
    (22.2, True)

    References
    ----------
    Lindau, A., Kosanke, L., Weinzierl, S. (2012). Perceptual evaluation of model- and
    signal-based predictors of the mixing time in binaural room impulse responses. J. Audio
    Eng. Soc. 60(11), 887–898 (the 20·V/S + 12 ms predictor; from memory).
    """
    V, S = room.volume, room.total_area
    dims = room.dims
    rule = np.sqrt(V) / 1000.0
    small, flat = V < SMALL_ROOM_M3, dims.max() > FLAT_RATIO * dims.min()
    if not (small or flat):
        return float(rule), None
    used = (20.0 * V / S + 12.0) / 1000.0
    why = (
        f"the room is very small ({V:.0f} m³)"
        if small
        else f"the room is very flat (sides {dims.min():g} to {dims.max():g} m)"
    )
    return float(used), (
        f"{why}: the sqrt(V) rule for the mixing time ({1000 * rule:.0f} ms) does not "
        f"apply; used 20·V/S + 12 ms = {1000 * used:.0f} ms (mean-free-path predictor)"
    )


#: Longest response made without an explicit length, s: enough for any hall's decay; a
#: longer one is only made on request (common practice).
DEFAULT_LENGTH_CAP_S = 30.0


def synthesize(
    room: RoomModel,
    source,
    receiver,
    *,
    rate: int = 48000,
    receivers: Receivers | None = None,
    rt: dict | None = None,
    prediction: str = "eyring",
    seed: int = 0,
    length_s: float | None = None,
    air: bool = True,
) -> SynthResult:
    """Synthesize a room impulse response.

    Sample 0 is the moment of emission; the direct sound arrives at distance / c. Early
    reflections come from image sources (exact arrival times, per-band wall absorption, air
    absorption); around the mixing time (:func:`mixing_time`), and never before the direct
    sound plus a few ms, a noise tail takes over whose decay time is a smooth function of
    frequency, fitted so that octave-band filters read the predicted (or given)
    reverberation time.

    Parameters
    ----------
    room : RoomModel
    source, receiver : sequence of 3 floats
        Positions in metres.
    rate : int
    receivers : Receivers
        Mono, spaced pair (along the room's length axis) or coincident cardioids facing the
        source at ±angle/2.
    rt : dict, optional
        Reverberation time per octave band for the tail, overriding the prediction. Bands
        not given are interpolated between the given ones (log T against log f) and held at
        the end values beyond them (:func:`fill_bands`).
    prediction : 'eyring' or 'sabine'
        Which formula sets the tail's decay when ``rt`` does not.
    seed : int
        Makes the tail reproducible.
    length_s : float, optional
        Length of the response, s (default: 1.2 × the longest T plus the direct path).
    air : bool
        Air absorption (ISO 9613-1) on the image sources and as the limit on ``rt``.

    Returns
    -------
    SynthResult

    Examples
    --------
    >>> from .room import RoomModel
    >>> res = synthesize(RoomModel(6, 5, 3), (1, 1, 1.5), (4, 3, 1.2), length_s=0.3)
    >>> res.ir.shape
    (14400, 1)
    >>> r = float(np.linalg.norm(np.subtract((1, 1, 1.5), (4, 3, 1.2))))
    >>> int(np.argmax(np.abs(res.ir[:, 0]))) == round(r / speed_of_sound(20) * 48000)
    True

    References
    ----------
    Allen, J. B., Berkley, D. A. (1979), J. Acoust. Soc. Am. 65, 943–950 (image sources).
    Kuttruff, H. Room Acoustics (5th ed., 2009), ch. 4–5 (diffuse tail).
    """
    receivers = receivers or Receivers()
    src, rcv, distance = _check_positions(room, source, receiver, rate)
    sab, eyr = sabine(room, air=air), eyring(room, air=air)
    used, origin = _tail_reverberation(
        room, eyr if prediction == "eyring" else sab, rt, air, prediction
    )
    c = speed_of_sound(room.temperature_c)
    t_mix, mix_note = mixing_time(room)
    direct_s = distance / c
    fade_start, fade_s = _crossfade_span(t_mix, direct_s)
    length_s, cut_note = _response_length(length_s, used, direct_s)
    n = int(round(length_s * rate))
    if n < 16:
        raise InputError("the requested length is too short")
    notes = _timing_notes(mix_note, cut_note, t_mix, direct_s, fade_start, fade_s)
    # The tail is read from the middle of the cross-fade on (images before it).
    nodes, reading = fit_decay_nodes(used, rate, start_s=fade_start + fade_s / 2)
    notes += _unreached_notes(used, reading)
    chans, count = _render_channels(
        room, src, rcv, receivers, used, nodes, rate, n, c, fade_start, fade_s, air, seed
    )
    if receivers.kind == "spaced":
        notes.append("spaced pair: each channel has its own tail noise (decorrelated)")
    return SynthResult(
        np.stack(chans, axis=1),
        rate,
        sab,
        eyr,
        used,
        float(t_mix),
        count,
        notes,
        origin,
        reading,
        float(fade_start),
    )


def _check_positions(
    room: RoomModel, source, receiver, rate: int
) -> tuple[np.ndarray, np.ndarray, float]:
    """Source and receiver inside the room and far enough apart, at a usable rate."""
    if rate < 8000:
        raise InputError(f"sample rate {rate} Hz is too low (at least 8000 Hz)")
    src = _check_point(room, source, "source")
    rcv = _check_point(room, receiver, "receiver")
    distance = float(np.linalg.norm(src - rcv))
    if distance < MIN_DISTANCE_M:
        raise InputError(
            f"source and receiver are {distance:.3f} m apart: closer than "
            f"{MIN_DISTANCE_M:g} m the direct sound's 1/r level has no meaning; move "
            "the source and the receiver apart"
        )
    return src, rcv, distance


def _crossfade_span(t_mix: float, direct_s: float) -> tuple[float, float]:
    """Start and length (s) of the cross-fade from image sources to tail."""
    # The crossfade from images to tail spans half the mixing time (our choice).
    fade_s = 0.5 * t_mix
    fade_start = max(t_mix - fade_s / 2, direct_s + TAIL_AFTER_DIRECT_S)
    return fade_start, fade_s


def _response_length(length_s: float | None, used: dict, direct_s: float):
    """The length asked for, or one long enough for the slowest band's decay (capped)."""
    if length_s is not None:
        return length_s, None
    natural = LENGTH_DECAYS * max(used.values()) + direct_s + LENGTH_MARGIN_S
    if natural > DEFAULT_LENGTH_CAP_S:
        return DEFAULT_LENGTH_CAP_S, (
            f"the response is cut at {DEFAULT_LENGTH_CAP_S:g} s, before its decay "
            f"ends (it would need {natural:.0f} s; give a length to choose)"
        )
    return natural, None


def _timing_notes(
    mix_note, cut_note, t_mix: float, direct_s: float, fade_start: float, fade_s: float
) -> list:
    """Notes on the mixing time, a cut length and a cross-fade moved by a late direct sound."""
    notes = [mix_note] if mix_note else []
    if cut_note:
        notes.append(cut_note)
    if fade_start > t_mix - fade_s / 2 + 1e-12:
        notes.append(
            f"the direct sound arrives at {1000 * direct_s:.1f} ms, too late for the usual "
            f"cross-fade around the mixing time {1000 * t_mix:.0f} ms: the tail fades in "
            f"from {1000 * fade_start:.1f} ms instead"
        )
    return notes


def _render_channels(
    room: RoomModel,
    src: np.ndarray,
    rcv: np.ndarray,
    receivers: Receivers,
    used: dict,
    nodes,
    rate: int,
    n: int,
    c: float,
    fade_start: float,
    fade_s: float,
    air: bool,
    seed: int,
) -> tuple[list, int]:
    """Per channel, image sources cross-faded into the diffuse tail; and the most images."""
    w_early, w_late = _early_late_weights(n, rate, fade_start, fade_s)
    noises = _tail_noises(rate, n, receivers, np.random.default_rng(seed))
    chans = []
    count = 0
    for noise, (pos, axis) in zip(
        noises, _receiver_positions(room, rcv, src, receivers), strict=True
    ):
        imgs = image_sources(room, src, pos, max_distance=c * (fade_start + fade_s))
        count = max(count, imgs.positions.shape[0])
        directivity, tail_gain = _cardioid(imgs, pos, axis)
        early = render_images(
            imgs,
            rate,
            n,
            temperature_c=room.temperature_c,
            humidity_pct=room.humidity_pct,
            air=air,
            directivity=directivity,
        )
        late = diffuse_tail(used, room.volume, rate, n, c=c, noise=noise, nodes=nodes)
        chans.append(early * w_early + late * (w_late * tail_gain))
    return chans, count


def _unreached_notes(used: dict, reading: dict) -> list:
    """One note per band whose expected octave reading strays from the T asked for, naming
    the neighbour whose slower decay leaks into it (see :mod:`.tail`)."""
    notes = []
    keys = sorted(used)
    for i, b in enumerate(keys):
        if abs(reading[b] / used[b] - 1) <= READING_REPORT:
            continue
        nbrs = [keys[j] for j in (i - 1, i + 1) if 0 <= j < len(keys)]
        slow = max(nbrs, key=lambda n: used[n])
        notes.append(
            f"{b} Hz: analyze will read T30 ≈ {reading[b]:.2f} s here, not the "
            f"{used[b]:.2f} s asked: the {slow} Hz band's slower decay ({used[slow]:.2f} s) "
            "passes the octave filter's skirt and dominates its −5…−35 dB range; no decay "
            f"curve that keeps {slow} Hz at its value avoids it (a real room would read the "
            "same)"
        )
    return notes


def fill_bands(given: dict, bands=OCTAVES) -> tuple[dict, dict]:
    """Complete a partial per-band table: log T interpolated linearly in log f between the
    given bands, held at the end values beyond them.

    Parameters
    ----------
    given : dict
        {band Hz: T s}, at least one band.
    bands : sequence of float
        The bands to fill.

    Returns
    -------
    values : dict
        {band: T s} for every band.
    origin : dict
        {band: 'given' | 'interpolated' | 'held'}.

    Examples
    --------
    >>> v, o = fill_bands({250: 1.0, 1000: 4.0})
    >>> round(v[500], 2), o[500], v[63], o[63], v[8000], o[8000]
    (2.0, 'interpolated', 1.0, 'held', 4.0, 'held')
    """
    keys = sorted(given)
    lo, hi = keys[0], keys[-1]
    x, y = np.log(keys), np.log([given[k] for k in keys])
    values, origin = {}, {}
    for b in bands:
        if b in given:
            values[b], origin[b] = float(given[b]), "given"
        else:
            values[b] = float(np.exp(np.interp(np.log(b), x, y)))
            origin[b] = "interpolated" if lo < b < hi else "held"
    return values, origin


def _tail_reverberation(
    room: RoomModel, predicted: dict, rt: dict | None, air: bool, prediction: str = "eyring"
) -> tuple[dict, dict]:
    """The decay time per band the tail gets, and where each comes from: the prediction,
    or ``rt`` (completed by :func:`fill_bands`) where the air's own absorption allows it."""
    used = dict(predicted)
    origin = {b: prediction for b in used}
    checked = {}
    for band, T in (rt or {}).items():
        b = float(band)
        if b not in OCTAVES:
            raise InputError(f"no octave band at {b:g} Hz (use {', '.join(map(str, OCTAVES))})")
        tmax = max_reverberation(room, b) if air else np.inf
        if not (0 < T < tmax):
            raise InputError(
                f"a reverberation time of {T:g} s at {b:g} Hz is impossible in this "
                f"room: it must be positive and below {tmax:.1f} s, the limit set "
                "by air absorption alone"
            )
        checked[int(b)] = float(T)
    if checked:
        used, origin = fill_bands(checked)
        for b in used:
            tmax = max_reverberation(room, b) if air else np.inf
            if used[b] >= tmax:
                raise InputError(
                    f"the tail's {b} Hz band, {origin[b]} from the given bands, would be "
                    f"{used[b]:.2f} s, beyond the {tmax:.1f} s the air alone allows there; "
                    f"give a value for {b} Hz"
                )
    if any(not np.isfinite(v) or v <= 0 for v in used.values()):
        raise InputError(
            "the room absorbs everything in some band (α = 1 everywhere): "
            "no reverberation to synthesize"
        )
    return used, origin


def _early_late_weights(n: int, rate: int, start_s: float, fade_s: float):
    """Crossfade weights from the image sources to the tail, from ``start_s`` over
    ``fade_s``."""
    t = np.arange(n) / rate
    u = np.clip((t - start_s) / fade_s, 0, 1)
    # Equal-power (cos/sin) rather than the raised-cosine step: images and tail are
    # uncorrelated, so their powers, not their amplitudes, must sum to one.
    return np.cos(0.5 * np.pi * u), np.sin(0.5 * np.pi * u)


def _tail_noises(rate: int, n: int, receivers: Receivers, rng: np.random.Generator) -> list:
    """One band noise per channel; a coincident pair's two are correlated as cardioids in a
    diffuse field are."""
    noises = [band_noise(rate, n, rng) for _ in range(receivers.channels)]
    if receivers.kind == "coincident":
        # Diffuse-field correlation of two cardioids at angle φ: (3 + cos φ)/4 (closed form
        # of ∫(½+½cosθ1)(½+½cosθ2)dΩ/4π normalized by its value at φ = 0).
        rho = (3 + np.cos(np.radians(receivers.value))) / 4
        noises[1] = rho * noises[0] + np.sqrt(1 - rho**2) * noises[1]
    return noises


def _cardioid(imgs, pos: np.ndarray, axis: np.ndarray | None):
    """Per-image gain of a cardioid facing ``axis`` and its diffuse-field amplitude gain; an
    omni (``axis`` None) has neither."""
    if axis is None:
        return None, 1.0
    vec = imgs.positions - pos
    cos_t = vec @ axis / np.maximum(np.linalg.norm(vec, axis=1), 1e-9)
    return 0.5 + 0.5 * cos_t, float(np.sqrt(CARDIOID_DIFFUSE_POWER))


def _receiver_positions(room, rcv, src, receivers):
    """Each channel's capsule position and, for a cardioid, the axis it faces (else None)."""
    if receivers.kind == "mono":
        return [(rcv, None)]
    if receivers.kind == "spaced":
        off = np.array([receivers.value / 2, 0, 0])
        out = [(rcv - off, None), (rcv + off, None)]
        for p, _ in out:
            _check_point(room, p, "spaced receiver")
        return out
    to_src = src - rcv
    az = np.arctan2(to_src[1], to_src[0])
    half = np.radians(receivers.value) / 2
    # Left channel turned anticlockwise (seen from above), right clockwise.
    return [
        (rcv, np.array([np.cos(az + half), np.sin(az + half), 0.0])),
        (rcv, np.array([np.cos(az - half), np.sin(az - half), 0.0])),
    ]
