"""The ``synth``, ``rooms`` and ``edit`` commands."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .audio import WriteGuard, check_input_file, read_audio, sidecar_path, write_provenance
from .cli import _out, command
from .errors import InputError


def parse_triple(text: str, what: str, sep: str = ",") -> tuple[float, float, float]:
    parts = text.lower().replace("x", sep).split(sep) if sep == "x" else text.split(sep)
    try:
        vals = tuple(float(p) for p in parts)
    except ValueError:
        vals = ()
    if len(vals) != 3:
        joiner = "x" if sep == "x" else ","
        raise InputError(f"{what} '{text}' must be three numbers like 12{joiner}8{joiner}3.5")
    return vals


def parse_band_values(text: str | None, what: str) -> dict[int, float]:
    """'500:1.8,1000:1.6' → {500: 1.8, 1000: 1.6}; a bare number applies to every band."""
    from .synth.materials import OCTAVES
    if not text:
        return {}
    try:
        return {b: float(text) for b in OCTAVES}
    except ValueError:
        pass
    out = {}
    for item in text.split(","):
        band, _, val = item.partition(":")
        try:
            out[int(float(band))] = float(val)
        except ValueError:
            raise InputError(f"{what} item '{item}' must look like BAND:VALUE "
                             "(e.g. 500:1.8)") from None
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
        try:
            area = float(parts[2])
        except ValueError:
            raise InputError(f"--patch '{item}': area must be a number of m²") from None
        if area <= 0:
            raise InputError(f"--patch '{item}': area must be positive")
        out.append(Patch(parts[0], parts[1], area))
    return tuple(out)


def parse_absorbers(items) -> tuple:
    from .synth.room import Absorber
    out = []
    for item in items or []:
        mat, _, area = item.rpartition(":")
        try:
            out.append(Absorber(mat, float(area)))
        except ValueError:
            raise InputError(f"--absorber '{item}' must look like MATERIAL:AREA_M2") from None
    return tuple(out)


def room_from_args(a):
    from .synth.materials import load_materials
    from .synth.room import RoomModel
    L, W, H = parse_triple(a.room, "--room", sep="x")
    # Refuse a folder, pipe or device before the loader opens it (a pipe would block).
    extra = (load_materials(check_input_file(a.materials_file, "materials file"))
             if a.materials_file else {})
    return RoomModel(L, W, H, parse_materials(a.materials), parse_patches(a.patch),
                     parse_absorbers(a.absorber), temperature_c=a.temperature,
                     humidity_pct=a.humidity, extra_materials=extra)


def prediction_table(result_or_room) -> str:
    from .synth.materials import OCTAVES
    from .synth.room import eyring, sabine
    if hasattr(result_or_room, "sabine"):
        sab, eyr = result_or_room.sabine, result_or_room.eyring
        used = result_or_room.used_rt
    else:
        sab, eyr, used = sabine(result_or_room), eyring(result_or_room), None
    lines = ["band Hz   Sabine s   Eyring s" + ("   tail s" if used else "")]
    for b in OCTAVES:
        row = f"{b:>7}   {sab[b]:8.2f}   {eyr[b]:8.2f}"
        if used:
            row += f"   {used[b]:6.2f}"
        lines.append(row)
    return "\n".join(lines)


@command("synth", "synthesize a room impulse response from geometry and materials")
def cmd_synth(a):
    from .synth.generate import Receivers, synthesize
    guard = WriteGuard([a.materials_file], force=a.force)
    guard.file(a.output)
    guard.file(sidecar_path(a.output, "provenance"))
    room = room_from_args(a)
    L, W, H = room.length, room.width, room.height
    src = parse_triple(a.source, "--source") if a.source else (L / 4, W / 3, min(1.5, H / 2))
    rcv = parse_triple(a.receiver, "--receiver") if a.receiver else (
        3 * L / 4, 2 * W / 3, min(1.2, H / 2))
    res = synthesize(room, src, rcv, rate=a.rate, receivers=Receivers.parse(a.stereo),
                     rt=parse_band_values(a.rt60, "--rt60"), prediction=a.prediction,
                     seed=a.seed, length_s=a.length)
    ir = res.ir
    if a.peak is not None:
        ir = ir * (10 ** (a.peak / 20) / np.max(np.abs(ir)))
    guard.write_audio(a.output, ir, a.rate)
    settings = {"room": [L, W, H], "surfaces": room.surfaces,
                "patches": [p.__dict__ for p in room.patches], "source": list(src),
                "receiver": list(rcv), "stereo": a.stereo, "rt60": a.rt60, "seed": a.seed,
                "rate": a.rate, "prediction": a.prediction,
                "predicted_sabine_s": res.sabine, "predicted_eyring_s": res.eyring,
                "tail_rt_s": res.used_rt, "mixing_time_s": res.mixing_time_s}
    write_provenance(a.output, [], settings, guard=guard)
    _out(f"room {L:g} x {W:g} x {H:g} m, V = {room.volume:.0f} m³, S = {room.total_area:.0f} m²",
         a)
    _out(prediction_table(res), a)
    _out(f"{res.image_count} image sources up to the mixing time {1000 * res.mixing_time_s:.0f} ms; "
         f"wrote {a.output} ({ir.shape[1]} channel(s), {ir.shape[0] / a.rate:.2f} s)", a)
    for n in res.notes:
        _out(f"note: {n}", a)
    return 0


def _room_options(p):
    p.add_argument("--room", required=True, metavar="LxWxH", help="room size in metres")
    p.add_argument("--materials", default=None, metavar="SURFACE=MATERIAL,...",
                   help="surfaces: left right front back floor ceiling (or walls, all); "
                        "default plaster")
    p.add_argument("--patch", action="append", metavar="SURFACE:MATERIAL:AREA",
                   help="cover part of a surface with another material (repeatable)")
    p.add_argument("--absorber", action="append", metavar="MATERIAL:AREA",
                   help="free-standing absorption added to the room (repeatable)")
    p.add_argument("--materials-file", type=Path, default=None,
                   help="extra materials in JSON or TOML")
    p.add_argument("--temperature", type=float, default=20.0, help="air temperature, °C (20)")
    p.add_argument("--humidity", type=float, default=50.0, help="relative humidity, %% (50)")


def _cfg_synth(p):
    p.add_argument("output", type=Path, help="IR WAV to write")
    _room_options(p)
    p.add_argument("--rt60", default=None, metavar="BAND:SECONDS,...",
                   help="reverberation time of the tail per octave band (overrides prediction)")
    p.add_argument("--source", default=None, metavar="X,Y,Z", help="source position, m")
    p.add_argument("--receiver", default=None, metavar="X,Y,Z", help="receiver position, m")
    p.add_argument("--stereo", default=None, metavar="spaced:M|coincident:DEG",
                   help="a stereo pair instead of one receiver")
    p.add_argument("--rate", type=int, default=48000, help="sample rate (48000)")
    p.add_argument("--seed", type=int, default=0, help="seed for the tail noise (0)")
    p.add_argument("--length", type=float, default=None, help="IR length, s (auto)")
    p.add_argument("--prediction", choices=("eyring", "sabine"), default="eyring",
                   help="formula for the tail's decay (eyring)")
    p.add_argument("--peak", type=float, default=None, metavar="DBFS",
                   help="normalize the peak to this level")
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
    guard = WriteGuard([a.input], force=a.force)
    guard.file(a.output)
    guard.file(sidecar_path(a.output, "provenance"))
    ir, rate = read_audio(a.input, what="impulse response")
    steps = []
    if a.trim_db is not None:
        ir, cut0, cut1 = edit.trim(ir, rate, threshold_db=a.trim_db)
        steps.append(f"trimmed {cut0} samples at the start and {cut1} at the end")
    if a.decay_scale is not None:
        ir = edit.scale_decay(ir, rate, parse_band_values(a.decay_scale, "--decay-scale"))
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
    guard.write_audio(a.output, ir, rate)
    write_provenance(a.output, [a.input], {"steps": steps}, guard=guard)
    for s in steps:
        _out(s, a)
    _out(f"wrote {a.output}", a)
    return 0


def _cfg_edit(p):
    p.add_argument("input", type=Path, help="IR to edit (never modified)")
    p.add_argument("-o", "--output", type=Path, required=True, help="edited IR to write")
    p.add_argument("--trim-db", type=float, default=None, metavar="DB",
                   help="cut what lies below DB re peak at both ends (e.g. -60)")
    p.add_argument("--fade-in", type=float, default=0.0, metavar="S", help="fade-in, s")
    p.add_argument("--fade-out", type=float, default=0.0, metavar="S", help="fade-out, s")
    p.add_argument("--normalize", type=float, default=None, metavar="DBFS",
                   help="peak level after editing")
    p.add_argument("--reverse", action="store_true", help="reverse in time")
    p.add_argument("--decay-scale", default=None, metavar="X|BAND:X,...",
                   help="multiply decay times (all bands, or per octave band)")
    p.add_argument("--early-late", type=float, default=None, metavar="DB",
                   help="change the level of the late part (after 80 ms) by DB")
    p.add_argument("--rate", type=int, default=None, help="resample to this rate")
    p.add_argument("--force", action="store_true", help="replace an existing output")


cmd_edit.configure = _cfg_edit
