"""The ``synth``, ``rooms`` and ``edit`` commands."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from . import validate
from .audio import WriteGuard, check_input_file, read_audio, sidecar_path, write_provenance
from .cli import _out, budget, command, opt
from .errors import InputError

#: Largest room side accepted, m: beyond any enclosed hall (common practice), and the image
#: source and tail sizes stay within memory.
ROOM_SIDE_MAX_M = 1000.0
#: Decay-time factors accepted by ``edit --decay-scale``: beyond these the exponential
#: reshaping either leaves only the direct sound or grows the tail without bound.
DECAY_SCALE_MIN, DECAY_SCALE_MAX = 0.05, 20.0


def refuse_non_finite(ir, path) -> None:
    """Never write a response holding NaN or ±inf."""
    if not np.all(np.isfinite(ir)):
        raise InputError(f"{path}: the result holds NaN or infinite samples (the settings "
                         "push it beyond what numbers can hold); nothing written")


def parse_triple(text: str, what: str, sep: str = ",") -> tuple[float, float, float]:
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
    return vals


def room_size(text: str) -> tuple[float, float, float]:
    """``"12x8x3.5"`` → three positive finite sides, each at most :data:`ROOM_SIDE_MAX_M`."""
    vals = parse_triple(text, "room size", sep="x")
    for v in vals:
        if v <= 0:
            raise InputError(f"room dimensions must be positive (got '{text}')")
        validate.in_range(v, "room side", 0.0, ROOM_SIDE_MAX_M, unit="m")
    return vals


def position(text: str) -> tuple[float, float, float]:
    return parse_triple(text, "position")


def parse_band_values(text: str | None, what: str, hi: float | None = None) -> dict[int, float]:
    """'500:1.8,1000:1.6' → {500: 1.8, 1000: 1.6}; a bare number applies to every band."""
    from .synth.materials import OCTAVES
    if not text:
        return {}
    try:
        out = {b: float(text) for b in OCTAVES}
    except ValueError:
        out = {}
        for item in text.split(","):
            band, _, val = item.partition(":")
            try:
                out[int(float(band))] = float(val)
            except (ValueError, OverflowError):
                raise InputError(f"{what} item '{item}' must look like BAND:VALUE "
                                 "(e.g. 500:1.8)") from None
    for band, val in out.items():
        if band not in OCTAVES:
            raise InputError(f"{what}: {band} Hz is not an octave band "
                             f"({', '.join(map(str, OCTAVES))})")
        validate.positive(val, f"{what} at {band} Hz", hi)
    return out


def parse_materials(text: str | None) -> dict[str, str]:
    """'floor=carpet,walls=plaster' (walls = the four walls, all = every surface)."""
    from .synth.room import SURFACES
    out: dict[str, str] = {}
    if not text:
        return out
    for item in text.split(","):
        surf, _, mat = item.partition("=")
        surf, mat = surf.strip(), mat.strip()
        if not mat:
            raise InputError(f"--materials item '{item}' must look like SURFACE=MATERIAL")
        targets = {"walls": ["left", "right", "front", "back"], "all": list(SURFACES)}.get(
            surf, [surf])
        for s in targets:
            if s not in SURFACES:
                raise InputError(f"unknown surface '{s}' (use {', '.join(SURFACES)}, walls "
                                 "or all)")
            out[s] = mat
    return out


def parse_patches(items) -> tuple:
    from .synth.room import Patch
    out = []
    for item in items or []:
        parts = item.split(":")
        if len(parts) != 3:
            raise InputError(f"--patch '{item}' must look like SURFACE:MATERIAL:AREA_M2")
        area = budget(f"--patch '{item}'", validate.positive, parts[2], "patch area",
                      unit="m²")
        out.append(Patch(parts[0], parts[1], area))
    return tuple(out)


def parse_absorbers(items) -> tuple:
    from .synth.room import Absorber
    out = []
    for item in items or []:
        mat, _, area = item.rpartition(":")
        if not mat:
            raise InputError(f"--absorber '{item}' must look like MATERIAL:AREA_M2")
        out.append(Absorber(mat, budget(f"--absorber '{item}'", validate.positive, area,
                                        "absorber area", 1e6, unit="m²")))
    return tuple(out)


def room_from_args(a):
    from .synth.materials import load_materials
    from .synth.room import RoomModel
    L, W, H = a.room
    # Refuse a folder, pipe or device before the loader opens it (a pipe would block).
    extra = (load_materials(check_input_file(a.materials_file, "materials file"))
             if a.materials_file else {})
    return RoomModel(L, W, H, parse_materials(a.materials), parse_patches(a.patch),
                     parse_absorbers(a.absorber), temperature_c=a.temperature,
                     humidity_pct=a.humidity, extra_materials=extra)


def prediction_table(result_or_room) -> str:
    """Sabine and Eyring per band; for a synthesized result also the tail's T actually used,
    where it comes from, and what an octave filter is expected to read from it."""
    from .synth.materials import OCTAVES
    from .synth.room import eyring, sabine
    if hasattr(result_or_room, "sabine"):
        sab, eyr = result_or_room.sabine, result_or_room.eyring
        used = result_or_room.used_rt
        origin = getattr(result_or_room, "rt_origin", {}) or {}
        reading = getattr(result_or_room, "expected_reading", {}) or {}
    else:
        sab, eyr, used, origin, reading = sabine(result_or_room), eyring(result_or_room), \
            None, {}, {}
    head = "band Hz   Sabine s   Eyring s"
    if used:
        head += "   tail s  from            octave reading s"
    lines = [head]
    for b in OCTAVES:
        row = f"{b:>7}   {sab[b]:8.2f}   {eyr[b]:8.2f}"
        if used:
            row += f"   {used[b]:6.2f}  {origin.get(b, ''):<14}"
            if b in reading:
                off = abs(reading[b] / used[b] - 1) > 0.02
                row += f"  {reading[b]:6.2f}" + ("  (see note)" if off else "")
        lines.append(row)
    return "\n".join(lines)


@command("synth", "synthesize a room impulse response from geometry and materials")
def cmd_synth(a):
    from .synth.generate import Receivers, synthesize
    receivers = budget("--stereo", Receivers.parse, a.stereo)
    if receivers.kind == "spaced":
        budget("--stereo", validate.in_range, receivers.value, "pair spacing", 0.0, 100.0,
               unit="m")
    rt = parse_band_values(a.rt60, "--rt60")
    if a.length is not None:
        # Synthesis holds one noise signal per octave band (8) plus a few working copies for
        # each receiver channel at once.
        budget("--length", validate.seconds_budget, a.length, a.rate, "this response length",
               channels=12 * receivers.channels)
    guard = WriteGuard([a.materials_file], force=a.force)
    guard.file(a.output)
    guard.file(sidecar_path(a.output, "provenance"))
    room = room_from_args(a)
    L, W, H = room.length, room.width, room.height
    src = a.source if a.source else (L / 4, W / 3, min(1.5, H / 2))
    rcv = a.receiver if a.receiver else (
        3 * L / 4, 2 * W / 3, min(1.2, H / 2))
    res = synthesize(room, src, rcv, rate=a.rate, receivers=receivers,
                     rt=rt, prediction=a.prediction,
                     seed=a.seed, length_s=a.length)
    ir = res.ir
    if a.peak is not None:
        if not np.any(ir):
            raise InputError("--peak: the synthesized response is silent; nothing to "
                             "normalize")
        ir = ir * (10 ** (a.peak / 20) / np.max(np.abs(ir)))
    refuse_non_finite(ir, a.output)
    guard.write_audio(a.output, ir, a.rate)
    settings = {"room": [L, W, H], "surfaces": room.surfaces,
                "patches": [p.__dict__ for p in room.patches], "source": list(src),
                "receiver": list(rcv), "stereo": a.stereo, "rt60": a.rt60, "seed": a.seed,
                "rate": a.rate, "prediction": a.prediction,
                "predicted_sabine_s": res.sabine, "predicted_eyring_s": res.eyring,
                "tail_rt_s": res.used_rt, "tail_rt_origin": res.rt_origin,
                "expected_octave_reading_s": res.expected_reading,
                "mixing_time_s": res.mixing_time_s, "tail_start_s": res.tail_start_s}
    write_provenance(a.output, [], settings, guard=guard)
    _out(f"room {L:g} x {W:g} x {H:g} m, V = {room.volume:.0f} m³, S = {room.total_area:.0f} m²",
         a)
    _out(prediction_table(res), a)
    _out(f"{res.image_count} image sources up to the tail (mixing time "
         f"{1000 * res.mixing_time_s:.0f} ms, cross-fade from {1000 * res.tail_start_s:.1f} ms); "
         f"wrote {a.output} ({ir.shape[1]} channel(s), {ir.shape[0] / a.rate:.2f} s)", a)
    for n in res.notes:
        _out(f"note: {n}", a)
    return 0


def _room_options(p):
    p.add_argument("--room", type=opt(room_size), required=True, metavar="LxWxH",
                   help=f"room size in metres, each side above 0 and at most "
                        f"{ROOM_SIDE_MAX_M:g}")
    p.add_argument("--materials", default=None, metavar="SURFACE=MATERIAL,...",
                   help="surfaces: left right front back floor ceiling (or walls, all); "
                        "default plaster")
    p.add_argument("--patch", action="append", metavar="SURFACE:MATERIAL:AREA",
                   help="cover part of a surface with another material (repeatable)")
    p.add_argument("--absorber", action="append", metavar="MATERIAL:AREA",
                   help="free-standing absorption added to the room (repeatable)")
    p.add_argument("--materials-file", type=Path, default=None,
                   help="extra materials in JSON or TOML")
    p.add_argument("--temperature", type=opt(validate.in_range, "air temperature", -20.0, 50.0,
                                             unit="°C"),
                   default=20.0, help="air temperature, -20 to 50 °C (20)")
    p.add_argument("--humidity", type=opt(validate.in_range, "relative humidity", 0.0, 100.0,
                                          unit="%", lo_open=True),
                   default=50.0, help="relative humidity, above 0 to 100 %% (50)")


def _cfg_synth(p):
    p.add_argument("output", type=Path, help="IR WAV to write")
    _room_options(p)
    p.add_argument("--rt60", default=None, metavar="BAND:SECONDS,...",
                   help="reverberation time of the tail per octave band (overrides the "
                        "prediction; bands left out are interpolated between the given ones "
                        "and held flat beyond them)")
    p.add_argument("--source", type=opt(position), default=None, metavar="X,Y,Z",
                   help="source position, m")
    p.add_argument("--receiver", type=opt(position), default=None, metavar="X,Y,Z",
                   help="receiver position, m")
    p.add_argument("--stereo", default=None, metavar="spaced:M|coincident:DEG",
                   help="a stereo pair instead of one receiver")
    p.add_argument("--rate", type=opt(validate.sample_rate), default=48000,
                   help=f"sample rate, {validate.RATE_MIN}-{validate.RATE_MAX} Hz (48000)")
    p.add_argument("--seed", type=opt(validate.count, "noise seed", 0, 2 ** 32 - 1), default=0,
                   help="seed for the tail noise (0)")
    p.add_argument("--length", type=opt(validate.positive, "response length", unit="s"),
                   default=None, help="IR length, s (auto; within a 2 GiB memory budget)")
    p.add_argument("--prediction", choices=("eyring", "sabine"), default="eyring",
                   help="formula for the tail's decay (eyring)")
    p.add_argument("--peak", type=opt(validate.in_range, "peak level", -100.0, 0.0,
                                      unit="dBFS"),
                   default=None, metavar="DBFS", help="normalize the peak to this level, "
                                                      "-100 to 0")
    p.add_argument("--force", action="store_true", help="replace an existing output")


cmd_synth.configure = _cfg_synth


@command("rooms", "list the materials and their absorption coefficients")
def cmd_rooms(a):
    from .synth.materials import MATERIALS, OCTAVES, load_materials
    table = dict(MATERIALS)
    guard = WriteGuard([a.materials_file], force=a.force)
    if a.json is not None:
        guard.file(a.json)
    if a.materials_file:
        table.update(load_materials(check_input_file(a.materials_file, "materials file")))
    if a.json is not None:
        guard.write_json(a.json, {k: {"alpha": list(m.alpha), "bands_hz": list(OCTAVES),
                                "source": m.source, "note": m.note} for k, m in table.items()})
    head = f"{'material':<28}" + "".join(f"{b:>7}" for b in OCTAVES) + "  source"
    lines = [head, "-" * len(head)]
    for name, m in sorted(table.items()):
        lines.append(f"{name:<28}" + "".join(f"{v:7.2f}" for v in m.alpha) + f"  {m.source}")
    lines.append("63 Hz and 8 kHz values of handbook rows are extrapolated from 125 Hz / 4 kHz.")
    _out("\n".join(lines), a)
    return 0


def _cfg_rooms(p):
    p.add_argument("--materials-file", type=Path, default=None, help="add materials from a file")
    p.add_argument("--json", type=Path, default=None, help="also write the table as JSON")
    p.add_argument("--force", action="store_true", help="replace an existing JSON output")


cmd_rooms.configure = _cfg_rooms


@command("edit", "trim, fade, normalize, reverse, re-time or resample an impulse response")
def cmd_edit(a):
    from .synth import edit
    scales = (parse_band_values(a.decay_scale, "--decay-scale", hi=DECAY_SCALE_MAX)
              if a.decay_scale else None)
    if scales and min(scales.values()) < DECAY_SCALE_MIN:
        raise InputError(f"--decay-scale: factor {min(scales.values()):g} is out of range "
                         f"(accepted: {DECAY_SCALE_MIN:g} to {DECAY_SCALE_MAX:g})")
    guard = WriteGuard([a.input], force=a.force)
    guard.file(a.output)
    guard.file(sidecar_path(a.output, "provenance"))
    ir, rate = read_audio(a.input, what="impulse response")
    steps = []
    if a.trim_db is not None:
        ir, cut0, cut1 = edit.trim(ir, rate, threshold_db=a.trim_db)
        steps.append(f"trimmed {cut0} samples at the start and {cut1} at the end")
    if a.decay_scale is not None:
        ir = edit.scale_decay(ir, rate, scales)
        steps.append(f"decay times scaled by {a.decay_scale}")
    if a.early_late is not None:
        ir = edit.early_late_balance(ir, rate, a.early_late)
        steps.append(f"late part changed by {a.early_late:+g} dB")
    if a.reverse:
        ir = edit.reverse(ir)
        steps.append("reversed")
    if a.fade_in or a.fade_out:
        ir = edit.fade(ir, rate, fade_in_s=a.fade_in, fade_out_s=a.fade_out)
        steps.append(f"faded in {a.fade_in:g} s / out {a.fade_out:g} s")
    if a.rate is not None and a.rate != rate:
        ir = edit.resample(ir, rate, a.rate)
        steps.append(f"resampled {rate} → {a.rate} Hz")
        rate = a.rate
    if a.normalize is not None:
        ir = edit.normalize(ir, peak_dbfs=a.normalize)
        steps.append(f"peak normalized to {a.normalize:g} dBFS")
    if not steps:
        raise InputError("no edit asked for (see roomconv edit --help)")
    refuse_non_finite(ir, a.output)
    guard.write_audio(a.output, ir, rate)
    write_provenance(a.output, [a.input], {"steps": steps}, guard=guard)
    for s in steps:
        _out(s, a)
    _out(f"wrote {a.output}", a)
    return 0


def _cfg_edit(p):
    p.add_argument("input", type=Path, help="IR to edit (never modified)")
    p.add_argument("-o", "--output", type=Path, required=True, help="edited IR to write")
    p.add_argument("--trim-db", type=opt(validate.in_range, "trim threshold", -300.0, 0.0,
                                         unit="dB re peak", hi_open=True),
                   default=None, metavar="DB",
                   help="cut what lies below DB re peak at both ends (negative, e.g. -60)")
    p.add_argument("--fade-in", type=opt(validate.non_negative, "fade-in", 3600.0, unit="s"),
                   default=0.0, metavar="S", help="fade-in, s")
    p.add_argument("--fade-out", type=opt(validate.non_negative, "fade-out", 3600.0, unit="s"),
                   default=0.0, metavar="S", help="fade-out, s")
    p.add_argument("--normalize", type=opt(validate.in_range, "peak level", -100.0, 0.0,
                                           unit="dBFS"),
                   default=None, metavar="DBFS", help="peak level after editing, -100 to 0")
    p.add_argument("--reverse", action="store_true", help="reverse in time")
    p.add_argument("--decay-scale", default=None, metavar="X|BAND:X,...",
                   help="multiply decay times (all bands, or per octave band), "
                        f"{DECAY_SCALE_MIN:g} to {DECAY_SCALE_MAX:g}")
    p.add_argument("--early-late", type=opt(validate.in_range, "late-part level change",
                                            -60.0, 60.0, unit="dB"),
                   default=None, metavar="DB",
                   help="change the level of the late part (after 80 ms) by DB, -60 to +60")
    p.add_argument("--rate", type=opt(validate.sample_rate), default=None,
                   help=f"resample to this rate, {validate.RATE_MIN}-{validate.RATE_MAX} Hz")
    p.add_argument("--force", action="store_true", help="replace an existing output")


cmd_edit.configure = _cfg_edit
