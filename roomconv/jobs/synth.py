"""Synthesis and editing jobs: a room from geometry and materials, the materials table, and
an edit of a response; plus the text forms of their values shared by the CLI and the TUI.

Messages name the value, never a command-line option: each front end adds its own name for
the field (see :func:`roomconv.cli.common.budget`).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from .. import validate
from ..audio import check_input_file, read_audio, sidecar_path, write_provenance
from ..errors import InputError
from ..signal import db_to_gain
from .guard import guarded

if TYPE_CHECKING:
    from ..synth.generate import SynthResult
    from ..synth.room import RoomModel

__all__ = [
    "ROOM_SIDE_MAX_M",
    "DECAY_SCALE_MIN",
    "DECAY_SCALE_MAX",
    "PAIR_SPACING_MAX_M",
    "parse_triple",
    "room_size",
    "position",
    "parse_band_values",
    "parse_materials",
    "parse_patch",
    "parse_absorber",
    "build_room",
    "default_positions",
    "receivers_of",
    "check_length",
    "check_decay_scale",
    "synthesize_room",
    "SynthJobResult",
    "materials_table",
    "edit_response",
    "EditResult",
    "measured_decay_times",
    "pair_responses",
]

#: Largest room side accepted, m: beyond any enclosed hall (common practice), and the image
#: source and tail sizes stay within memory.
ROOM_SIDE_MAX_M = 1000.0
#: Smallest room side accepted, m: below this an enclosure is a box, not a room, and its
#: diffuse tail (a statistical model of many reflections) has no meaning (common practice).
ROOM_SIDE_MIN_M = 0.5
#: Decay-time factors accepted by the decay scaling: beyond these the exponential reshaping
#: either leaves only the direct sound or grows the tail without bound (common practice).
DECAY_SCALE_MIN, DECAY_SCALE_MAX = 0.05, 20.0
#: Widest spaced pair accepted, m (common practice: spaced pairs are well under this).
PAIR_SPACING_MAX_M = 100.0
#: Synthesis holds one noise signal per octave band (8) plus a few working copies for each
#: receiver channel at once: the memory budget counts this many channels per receiver.
SYNTH_WORKING_CHANNELS = 12


# --- text forms ----------------------------------------------------------------------------
def parse_triple(text: str, what: str, sep: str = ",") -> tuple[float, float, float]:
    """Three finite numbers separated by ``sep`` (``","`` or ``"x"``).

    Examples
    --------
    >>> parse_triple("12x8x3.5", "room size", sep="x")
    (12.0, 8.0, 3.5)
    """
    parts = text.lower().replace("x", sep).split(sep) if sep == "x" else text.split(sep)
    try:
        vals = tuple(float(p) for p in parts)
    except ValueError:
        vals = ()
    if len(vals) != 3:
        joiner = "x" if sep == "x" else ","
        raise InputError(f"{what} '{text}' must be three numbers like 12{joiner}8{joiner}3.5")
    for v in vals:
        validate.finite(v, f"{what} '{text}':")
    return vals[0], vals[1], vals[2]


def room_size(text: str) -> tuple[float, float, float]:
    """``"12x8x3.5"`` → three finite sides in m, each from :data:`ROOM_SIDE_MIN_M` to
    :data:`ROOM_SIDE_MAX_M`.

    Examples
    --------
    >>> room_size("12x8x3.5")
    (12.0, 8.0, 3.5)
    """
    vals = parse_triple(text, "room size", sep="x")
    for v in vals:
        if v <= 0:
            raise InputError(f"room dimensions must be positive (got '{text}')")
        validate.in_range(v, "room side", ROOM_SIDE_MIN_M, ROOM_SIDE_MAX_M, unit="m")
    return vals


def position(text: str) -> tuple[float, float, float]:
    """``"3,2,1.5"`` → a position in m.

    Examples
    --------
    >>> position("3,2,1.5")
    (3.0, 2.0, 1.5)
    """
    return parse_triple(text, "position")


def parse_band_values(text: str | None, what: str, hi: float | None = None) -> dict[int, float]:
    """'500:1.8,1000:1.6' → {500: 1.8, 1000: 1.6} over the octave bands of the materials
    table (:func:`roomconv.validate.parse_band_values`).

    Examples
    --------
    >>> parse_band_values("500:1.8,1000:1.6", "reverberation time")
    {500: 1.8, 1000: 1.6}
    """
    from ..synth.materials import OCTAVES

    return validate.parse_band_values(text, what, OCTAVES, hi)


def parse_materials(text: str | None) -> dict[str, str]:
    """'floor=carpet,walls=plaster' (walls = the four walls, all = every surface).

    Examples
    --------
    >>> parse_materials("floor=carpet,walls=plaster")["back"]
    'plaster'
    """
    from ..synth.room import SURFACES

    out: dict[str, str] = {}
    if text is None:
        return out
    if not str(text).strip():
        raise InputError(
            "materials are empty: give SURFACE=MATERIAL items (e.g. floor=carpet,walls=plaster)"
        )
    for item in text.split(","):
        surf, _, mat = item.partition("=")
        surf, mat = surf.strip(), mat.strip()
        if not mat:
            raise InputError(f"materials item '{item}' must look like SURFACE=MATERIAL")
        targets = {"walls": ["left", "right", "front", "back"], "all": list(SURFACES)}.get(
            surf, [surf]
        )
        for s in targets:
            if s not in SURFACES:
                raise InputError(f"unknown surface '{s}' (use {', '.join(SURFACES)}, walls or all)")
            out[s] = mat
    return out


def parse_patch(item: str):
    """``SURFACE:MATERIAL:AREA_M2`` → a :class:`~roomconv.synth.room.Patch`.

    Examples
    --------
    >>> parse_patch("floor:seats-upholstered-empty:40")
    Patch(surface='floor', material='seats-upholstered-empty', area_m2=40.0)
    """
    from ..synth.room import Patch

    parts = item.split(":")
    if len(parts) != 3:
        raise InputError(f"patch '{item}' must look like SURFACE:MATERIAL:AREA_M2")
    return Patch(parts[0], parts[1], validate.positive(parts[2], "patch area", unit="m²"))


def parse_absorber(item: str):
    """``MATERIAL:AREA_M2`` → an :class:`~roomconv.synth.room.Absorber`.

    Examples
    --------
    >>> parse_absorber("wood-panel:12")
    Absorber(material='wood-panel', area_m2=12.0)
    """
    from ..synth.room import Absorber

    mat, _, area = item.rpartition(":")
    if not mat:
        raise InputError(f"absorber '{item}' must look like MATERIAL:AREA_M2")
    return Absorber(mat, validate.positive(area, "absorber area", 1e6, unit="m²"))


def build_room(
    size_m,
    *,
    materials: dict[str, str] | None = None,
    patches=(),
    absorbers=(),
    temperature_c: float = 20.0,
    humidity_pct: float = 50.0,
    materials_file=None,
):
    """A :class:`~roomconv.synth.room.RoomModel` from plain values; ``materials_file`` adds
    materials (JSON or TOML), refused before opening when it is a folder, pipe or device.

    Examples
    --------
    >>> room = build_room((12.0, 8.0, 3.5), materials={"floor": "carpet"})
    >>> room.surfaces["floor"], room.surfaces["ceiling"]
    ('carpet', 'plaster')
    """
    from ..synth.materials import load_materials
    from ..synth.room import RoomModel

    L, W, H = size_m
    extra = (
        load_materials(check_input_file(materials_file, "materials file")) if materials_file else {}
    )
    return RoomModel(
        L,
        W,
        H,
        dict(materials or {}),
        tuple(patches),
        tuple(absorbers),
        temperature_c=temperature_c,
        humidity_pct=humidity_pct,
        extra_materials=extra,
    )


def default_positions(room) -> tuple[tuple[float, float, float], tuple[float, float, float]]:
    """A source a quarter in and a receiver three quarters in, at standing and seated
    heights (at most half the room's height), m.

    Examples
    --------
    >>> src, rcv = default_positions(build_room((12.0, 8.0, 3.5)))
    >>> src[0], rcv[0], rcv[2]
    (3.0, 9.0, 1.2)
    """
    L, W, H = room.length, room.width, room.height
    return (L / 4, W / 3, min(1.5, H / 2)), (3 * L / 4, 2 * W / 3, min(1.2, H / 2))


def _refuse_non_finite(ir, path) -> None:
    if not np.all(np.isfinite(ir)):
        raise InputError(
            f"{path}: the result holds NaN or infinite samples (the settings "
            "push it beyond what numbers can hold); nothing written"
        )


# --- synthesize ----------------------------------------------------------------------------
def receivers_of(stereo: str | None):
    """``None``, ``"spaced:M"`` or ``"coincident:DEG"`` → the receiver layout, a spaced
    pair no wider than :data:`PAIR_SPACING_MAX_M`.

    Examples
    --------
    >>> receivers_of(None).kind, receivers_of("spaced:0.4").value
    ('mono', 0.4)
    """
    from ..synth.generate import Receivers

    receivers = Receivers.parse(stereo)
    if receivers.kind == "spaced":
        validate.in_range(receivers.value, "pair spacing", 0.0, PAIR_SPACING_MAX_M, unit="m")
    return receivers


def check_length(length_s: float | None, rate_hz: int, receivers) -> None:
    """Refuse a response length whose working buffers would not fit in memory.

    Examples
    --------
    >>> check_length(2.0, 48000, receivers_of(None))  # fits: nothing happens
    >>> check_length(1e6, 48000, receivers_of(None))
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: this response length would need ... of memory ...
    """
    if length_s is not None:
        validate.seconds_budget(
            length_s,
            rate_hz,
            "this response length",
            channels=SYNTH_WORKING_CHANNELS * receivers.channels,
        )


def check_decay_scale(factors: dict[int, float] | None) -> None:
    """Each decay-time factor within :data:`DECAY_SCALE_MIN` … :data:`DECAY_SCALE_MAX`.

    Examples
    --------
    >>> check_decay_scale({500: 1.2})
    >>> check_decay_scale({500: 100})
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: factor 100 at 500 Hz is out of range (accepted: 0.05 to 20)
    """
    for b, f in (factors or {}).items():
        if not DECAY_SCALE_MIN <= f <= DECAY_SCALE_MAX:
            raise InputError(
                f"factor {f:g} at {b} Hz is out of range (accepted: "
                f"{DECAY_SCALE_MIN:g} to {DECAY_SCALE_MAX:g})"
            )


@dataclass
class SynthJobResult:
    """The response written and the synthesis' own figures.

    Examples
    --------
    See :func:`synthesize_room`, which returns one.
    """

    output: Path
    room: RoomModel
    source_m: tuple
    receiver_m: tuple
    result: SynthResult
    ir: np.ndarray


def synthesize_room(
    output,
    room,
    *,
    source_m=None,
    receiver_m=None,
    rate_hz: int = 48000,
    stereo: str | None = None,
    rt60_s: dict | None = None,
    prediction: str = "eyring",
    seed: int = 0,
    length_s: float | None = None,
    peak_dbfs: float | None = None,
    materials_file=None,
    force: bool = False,
    settings: dict | None = None,
) -> SynthJobResult:
    """Synthesize a response of ``room`` and write it with its provenance sidecar.

    Parameters
    ----------
    output : path-like
    room : RoomModel
    source_m, receiver_m : tuple of 3 float, optional
        Positions in m (default :func:`default_positions`).
    rate_hz : int
    stereo : str, optional
        ``"spaced:M"`` or ``"coincident:DEG"``; None for one receiver.
    rt60_s : dict, optional
        Reverberation time of the tail per octave band, s (overrides the prediction; bands
        left out are interpolated between the given ones and held flat beyond them).
    prediction : {"eyring", "sabine"}
    length_s : float, optional
    peak_dbfs : float, optional
        Normalize the peak to this level.
    materials_file : path-like, optional
        The extra materials file the room was built with (an input no output may replace).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> room = build_room((6.0, 5.0, 3.0), materials=parse_materials("all=carpet"))
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     res = synthesize_room(pathlib.Path(tmp) / "room.wav", room, rate_hz=8000,
    ...                           length_s=0.5, seed=1)
    ...     sorted(p.name for p in pathlib.Path(tmp).iterdir())
    ['room.provenance.json', 'room.wav']
    >>> res.ir.shape, res.receiver_m[2]
    ((4000, 1), 1.2)
    """
    from ..synth.generate import synthesize

    receivers = receivers_of(stereo)
    check_length(length_s, rate_hz, receivers)
    src, rcv = default_positions(room)
    src, rcv = tuple(source_m or src), tuple(receiver_m or rcv)
    with guarded([materials_file], force=force) as g:
        g.file(output)
        g.file(sidecar_path(output, "provenance"))
        res = synthesize(
            room,
            src,
            rcv,
            rate=rate_hz,
            receivers=receivers,
            rt=rt60_s or {},
            prediction=prediction,
            seed=seed,
            length_s=length_s,
        )
        ir = res.ir
        if peak_dbfs is not None:
            if not np.any(ir):
                raise InputError(
                    "the synthesized response is silent; its peak cannot be normalized"
                )
            ir = ir * (db_to_gain(peak_dbfs) / np.max(np.abs(ir)))
        _refuse_non_finite(ir, output)
        g.write_audio(output, ir, rate_hz)
        record = {
            "room_m": [room.length, room.width, room.height],
            "surfaces": room.surfaces,
            "patches": [p.__dict__ for p in room.patches],
            "source_m": list(src),
            "receiver_m": list(rcv),
            "stereo": stereo,
            "rt60_s": rt60_s or None,
            "seed": seed,
            "rate_hz": rate_hz,
            "prediction": prediction,
            "predicted_sabine_s": res.sabine,
            "predicted_eyring_s": res.eyring,
            "tail_rt_s": res.used_rt,
            "tail_rt_origin": res.rt_origin,
            "expected_octave_reading_s": res.expected_reading,
            "notes": res.notes,
            "mixing_time_s": res.mixing_time_s,
            "tail_start_s": res.tail_start_s,
            **(settings or {}),
        }
        write_provenance(output, [], record, guard=g)
    return SynthJobResult(Path(output), room, src, rcv, res, ir)


def materials_table(*, materials_file=None, json_path=None, force: bool = False) -> dict:
    """The materials and their octave-band absorption coefficients, the file's added; written
    as JSON to ``json_path`` when given. Returns {name: Material}.

    Examples
    --------
    >>> table = materials_table()
    >>> "plaster" in table, len(table["plaster"].alpha)
    (True, 8)
    """
    from ..synth.materials import MATERIALS, OCTAVES, load_materials

    table = dict(MATERIALS)
    with guarded([materials_file], force=force) as g:
        if json_path is not None:
            g.file(json_path)
        if materials_file:
            table.update(load_materials(check_input_file(materials_file, "materials file")))
        if json_path is not None:
            g.write_json(
                json_path,
                {
                    k: {
                        "alpha": list(m.alpha),
                        "bands_hz": list(OCTAVES),
                        "source": m.source,
                        "note": m.note,
                    }
                    for k, m in table.items()
                },
            )
    return table


# --- edit ----------------------------------------------------------------------------------
def measured_decay_times(ir: np.ndarray, rate: int) -> list[dict[int, float]]:
    """Per channel, the octave-band decay time in s read from the response by the ISO 3382
    analysis (T30, else T20, else EDT; a band that has none takes the wideband T30 or T20).

    Examples
    --------
    An exponential decay of T = 0.5 s reads 0.5 s in every octave:

    >>> import numpy as np
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> times = measured_decay_times(h[:, None], rate)[0]
    >>> sorted({round(v, 1) for v in times.values()})
    [0.5]
    """
    from ..analysis.parameters import room_parameters
    from ..synth.materials import OCTAVES

    out = []
    x = ir if ir.ndim == 2 else ir[:, None]
    for ch in range(x.shape[1]):
        res, wide, _ = room_parameters(x[:, ch], rate, low=63, high=8000)
        by_band = {
            int(r.band_hz): (r.t30_s or r.t20_s or r.edt_s) for r in res if r.band_hz is not None
        }
        times = {}
        for b in OCTAVES:
            T = by_band.get(b) or wide.t30_s or wide.t20_s
            if T is None:
                raise InputError(f"the decay time at {b} Hz cannot be read from the response")
            times[b] = T
        out.append(times)
    return out


@dataclass
class EditResult:
    """What :func:`edit_response` wrote.

    Attributes
    ----------
    output : Path
        The edited response.
    rate_hz : int
        Its sample rate, Hz.
    steps : list of str
        The edits applied, in order, in words (for the provenance sidecar).

    Examples
    --------
    See :func:`edit_response`, which returns one.
    """

    output: Path
    rate_hz: int
    steps: list[str] = field(default_factory=list)


def edit_response(
    source,
    output,
    *,
    trim_db: float | None = None,
    decay_scale: dict[int, float] | None = None,
    early_late_db: float | None = None,
    reverse: bool = False,
    fade_in_s: float = 0.0,
    fade_out_s: float = 0.0,
    rate_hz: int | None = None,
    peak_dbfs: float | None = None,
    force: bool = False,
) -> EditResult:
    """Edit ``source`` into ``output`` in a fixed order: trim, decay scaling, early/late
    balance, reverse, fades, resampling, peak normalization. ``source`` is never modified.

    ``decay_scale`` is {octave band Hz: new T / old T}, each within
    :data:`DECAY_SCALE_MIN` … :data:`DECAY_SCALE_MAX`.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> rate = 8000
    >>> h = np.random.default_rng(0).standard_normal(rate) * 10 ** (-3 * np.arange(rate) / 4000)
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     d = pathlib.Path(tmp)
    ...     soundfile.write(d / "ir.wav", h, rate)
    ...     res = edit_response(d / "ir.wav", d / "short.wav", fade_out_s=0.01)
    ...     sorted(p.name for p in d.iterdir())
    ['ir.wav', 'short.provenance.json', 'short.wav']
    >>> res.steps
    ['faded in 0 s / out 0.01 s']
    """
    from ..synth import edit

    check_decay_scale(decay_scale)
    with guarded([source], force=force) as g:
        g.file(output)
        g.file(sidecar_path(output, "provenance"))
        ir, rate = read_audio(source, what="impulse response")
        steps = []
        if trim_db is not None:
            ir, cut0, cut1 = edit.trim(ir, rate, threshold_db=trim_db)
            steps.append(f"trimmed {cut0} samples at the start and {cut1} at the end")
        if decay_scale:
            ir = edit.scale_decay(
                ir, rate, decay_scale, decay_times_s=measured_decay_times(ir, rate)
            )
            steps.append(
                "decay times scaled by "
                + ", ".join(f"{f:g} at {b} Hz" for b, f in sorted(decay_scale.items()))
            )
        if early_late_db is not None:
            ir = edit.early_late_balance(ir, rate, early_late_db)
            steps.append(f"late part changed by {early_late_db:+g} dB")
        if reverse:
            ir = edit.reverse(ir)
            steps.append("reversed")
        if fade_in_s or fade_out_s:
            ir = edit.fade(ir, rate, fade_in_s=fade_in_s, fade_out_s=fade_out_s)
            steps.append(f"faded in {fade_in_s:g} s / out {fade_out_s:g} s")
        if rate_hz is not None and rate_hz != rate:
            ir = edit.resample(ir, rate, rate_hz)
            steps.append(f"resampled {rate} → {rate_hz} Hz")
            rate = rate_hz
        if peak_dbfs is not None:
            ir = edit.normalize(ir, peak_dbfs=peak_dbfs)
            steps.append(f"peak normalized to {peak_dbfs:g} dBFS")
        if not steps:
            raise InputError("no edit asked for")
        _refuse_non_finite(ir, output)
        g.write_audio(output, ir, rate)
        write_provenance(output, [source], {"steps": steps}, guard=g)
    return EditResult(Path(output), rate, steps)


def pair_responses(
    left, right, output, *, force: bool = False, settings: dict | None = None
) -> Path:
    """Write the first channels of two responses as one two-channel response (left, right),
    with its provenance sidecar; the two must share a sample rate.

    Examples
    --------
    >>> import numpy as np
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> import tempfile, pathlib, soundfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     d = pathlib.Path(tmp)
    ...     soundfile.write(d / "l.wav", h, rate)
    ...     soundfile.write(d / "r.wav", h[::-1], rate)
    ...     soundfile.info(pair_responses(d / "l.wav", d / "r.wav", d / "lr.wav")).channels
    2
    """
    a, rate_a = read_audio(left, what="left response")
    b, rate_b = read_audio(right, what="right response")
    if rate_a != rate_b:
        raise InputError(
            f"{right}: is at {rate_b} Hz but {left} at {rate_a} Hz; give "
            "responses at one sample rate"
        )
    n = max(a.shape[0], b.shape[0])
    pair = np.zeros((n, 2))
    pair[: a.shape[0], 0], pair[: b.shape[0], 1] = a[:, 0], b[:, 0]
    with guarded([left, right], force=force) as g:
        g.file(output)
        g.file(sidecar_path(output, "provenance"))
        g.write_audio(output, pair, rate_a)
        write_provenance(output, [left, right], settings or {}, guard=g)
    return Path(output)
