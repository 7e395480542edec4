"""The ``synth``, ``materials`` and ``edit`` commands."""

from __future__ import annotations

from pathlib import Path

from .. import validate
from ..errors import InputError
from ..jobs import synth as jobs
from .common import Command, budget, opt, out
from .display import print_table

__all__ = ["COMMANDS", "show_prediction"]


def _room_from_args(a):
    patches = tuple(budget(f"--patch '{item}'", jobs.parse_patch, item) for item in a.patch or [])
    absorbers = tuple(
        budget(f"--absorber '{item}'", jobs.parse_absorber, item) for item in a.absorber or []
    )
    return jobs.build_room(
        a.room,
        materials=budget("--materials", jobs.parse_materials, a.materials),
        patches=patches,
        absorbers=absorbers,
        temperature_c=a.temperature,
        humidity_pct=a.humidity,
        materials_file=a.materials_file,
    )


def show_prediction(result, a) -> None:
    """Sabine and Eyring reverberation times per octave band; for a synthesized response also
    the tail's T actually used, where it comes from, and what an octave filter is expected to
    read from it."""
    from ..synth.materials import OCTAVES

    if getattr(a, "quiet", False):
        return
    used = result.used_rt
    origin = getattr(result, "rt_origin", {}) or {}
    reading = getattr(result, "expected_reading", {}) or {}
    headers = ["band Hz", "Sabine s", "Eyring s"]
    if used:
        headers += ["tail s", "from", "T30 analyze reads s"]
    rows = []
    for b in OCTAVES:
        row = [str(b), f"{result.sabine[b]:.2f}", f"{result.eyring[b]:.2f}"]
        if used:
            row += [f"{used[b]:.2f}", origin.get(b, "")]
            if b in reading:
                # The notes explain a band whose expected reading strays from the tail's T.
                off = abs(reading[b] / used[b] - 1) > 0.02
                row.append(f"{reading[b]:.2f}" + ("  (≠ tail: see note)" if off else ""))
            else:
                row.append("")
        rows.append(row)
    right = [0, 1, 2] + ([3, 5] if used else [])
    print_table(headers, rows, right=right)


def run_synth(a):
    """Run ``roomconv synth``: synthesize a room's impulse response
    (:func:`roomconv.jobs.synth.synthesize_room`).

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    receivers = budget("--stereo", jobs.receivers_of, a.stereo)
    budget("--length", jobs.check_length, a.length, a.rate, receivers)
    rt = budget("--rt60", jobs.parse_band_values, a.rt60, "reverberation time")
    room = _room_from_args(a)
    try:
        res = jobs.synthesize_room(
            a.output,
            room,
            source_m=a.source,
            receiver_m=a.receiver,
            rate_hz=a.rate,
            stereo=a.stereo,
            rt60_s=rt,
            prediction=a.prediction,
            seed=a.seed,
            length_s=a.length,
            peak_dbfs=a.peak,
            materials_file=a.materials_file,
            force=a.force,
            settings={"room": list(a.room), "rt60": a.rt60, "rate": a.rate},
        )
    except InputError as exc:
        # The library names values; this front end adds the option that set them.
        text = str(exc)
        if "silent; its peak" in text:
            raise InputError(f"--peak: {exc}") from None
        if "the source and the receiver apart" in text:
            raise InputError(f"--source/--receiver: {exc}") from None
        if "from the given bands" in text:
            raise InputError(f"--rt60: {exc}") from None
        raise
    out(
        f"room {room.length:g} x {room.width:g} x {room.height:g} m, V = {room.volume:.0f} m³, "
        f"S = {room.total_area:.0f} m²",
        a,
    )
    show_prediction(res.result, a)
    ir = res.ir
    out(
        f"{res.result.image_count} image sources up to the tail (mixing time "
        f"{1000 * res.result.mixing_time_s:.0f} ms, cross-fade from "
        f"{1000 * res.result.tail_start_s:.1f} ms); wrote {a.output} ({ir.shape[1]} "
        f"channel(s), {ir.shape[0] / a.rate:.2f} s)",
        a,
    )
    for n in res.result.notes:
        out(f"note: {n}", a)
    return 0


def _room_options(p):
    p.add_argument(
        "--room",
        type=opt(jobs.room_size),
        required=True,
        metavar="LxWxH",
        help=f"room size in metres, each side above 0 and at most {jobs.ROOM_SIDE_MAX_M:g}",
    )
    p.add_argument(
        "--materials",
        default=None,
        metavar="SURFACE=MATERIAL,...",
        help="surfaces: left right front back floor ceiling (or walls, all); default plaster",
    )
    p.add_argument(
        "--patch",
        action="append",
        metavar="SURFACE:MATERIAL:AREA",
        help="cover part of a surface with another material (repeatable)",
    )
    p.add_argument(
        "--absorber",
        action="append",
        metavar="MATERIAL:AREA",
        help="free-standing absorption added to the room (repeatable)",
    )
    p.add_argument(
        "--materials-file", type=Path, default=None, help="extra materials in JSON or TOML"
    )
    p.add_argument(
        "--temperature",
        type=opt(validate.in_range, "air temperature", -20.0, 50.0, unit="°C"),
        default=20.0,
        help="air temperature, -20 to 50 °C (20)",
    )
    p.add_argument(
        "--humidity",
        type=opt(validate.in_range, "relative humidity", 0.0, 100.0, unit="%", lo_open=True),
        default=50.0,
        help="relative humidity, above 0 to 100 %% (50)",
    )


def configure_synth(p):
    """Add the options of ``roomconv synth`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument("output", type=Path, help="IR WAV to write")
    _room_options(p)
    p.add_argument(
        "--rt60",
        default=None,
        metavar="BAND:SECONDS,...",
        help="reverberation time of the tail per octave band (overrides the "
        "prediction; bands left out are interpolated between the given ones "
        "and held flat beyond them)",
    )
    p.add_argument(
        "--source",
        type=opt(jobs.position),
        default=None,
        metavar="X,Y,Z",
        help="source position, m",
    )
    p.add_argument(
        "--receiver",
        type=opt(jobs.position),
        default=None,
        metavar="X,Y,Z",
        help="receiver position, m",
    )
    p.add_argument(
        "--stereo",
        default=None,
        metavar="spaced:M|coincident:DEG",
        help="a stereo pair instead of one receiver",
    )
    p.add_argument(
        "--rate",
        type=opt(validate.sample_rate),
        default=48000,
        help=f"sample rate, {validate.RATE_MIN}-{validate.RATE_MAX} Hz (48000)",
    )
    p.add_argument(
        "--seed",
        type=opt(validate.count, "noise seed", 0, 2**32 - 1),
        default=0,
        help="seed for the tail noise (0)",
    )
    p.add_argument(
        "--length",
        type=opt(validate.positive, "response length", unit="s"),
        default=None,
        help="IR length, s (auto; within a 2 GiB memory budget)",
    )
    p.add_argument(
        "--prediction",
        choices=("eyring", "sabine"),
        default="eyring",
        help="formula for the tail's decay (eyring)",
    )
    p.add_argument(
        "--peak",
        type=opt(validate.in_range, "peak level", -100.0, 0.0, unit="dBFS"),
        default=None,
        metavar="DBFS",
        help="normalize the peak to this level, -100 to 0",
    )
    p.add_argument("--force", action="store_true", help="replace an existing output")


def run_materials(a):
    """Run ``roomconv materials``: the materials table with its absorption coefficients per octave
    (:func:`roomconv.jobs.synth.materials_table`).

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    from ..synth.materials import OCTAVES

    table = jobs.materials_table(materials_file=a.materials_file, json_path=a.json, force=a.force)
    if not a.quiet:
        rows = [
            [name, *(f"{v:.2f}" for v in m.alpha), m.source] for name, m in sorted(table.items())
        ]
        print_table(
            ["material", *(str(b) for b in OCTAVES), "source"],
            rows,
            right=range(1, len(OCTAVES) + 1),
        )
    out("63 Hz and 8 kHz values of handbook rows are extrapolated from 125 Hz / 4 kHz.", a)
    return 0


def configure_materials(p):
    """Add the options of ``roomconv materials`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument("--materials-file", type=Path, default=None, help="add materials from a file")
    p.add_argument("--json", type=Path, default=None, help="also write the table as JSON")
    p.add_argument("--force", action="store_true", help="replace an existing JSON output")


def run_edit(a):
    """Run ``roomconv edit``: trim, fade, rescale the decay or normalize a response into a
    new file (:func:`roomconv.jobs.synth.edit_response`).

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    scales = (
        budget(
            "--decay-scale",
            jobs.parse_band_values,
            a.decay_scale,
            "decay-time factor",
            hi=jobs.DECAY_SCALE_MAX,
        )
        if a.decay_scale
        else None
    )
    budget("--decay-scale", jobs.check_decay_scale, scales)
    if not (
        a.trim_db is not None
        or scales
        or a.early_late is not None
        or a.reverse
        or a.fade_in
        or a.fade_out
        or a.rate is not None
        or a.normalize is not None
    ):
        raise InputError("no edit asked for (see roomconv edit --help)")
    res = jobs.edit_response(
        a.input,
        a.output,
        trim_db=a.trim_db,
        decay_scale=scales,
        early_late_db=a.early_late,
        reverse=a.reverse,
        fade_in_s=a.fade_in,
        fade_out_s=a.fade_out,
        rate_hz=a.rate,
        peak_dbfs=a.normalize,
        force=a.force,
    )
    for s in res.steps:
        out(s, a)
    out(f"wrote {a.output}", a)
    return 0


def configure_edit(p):
    """Add the options of ``roomconv edit`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument("input", type=Path, help="IR to edit (never modified)")
    p.add_argument("-o", "--output", type=Path, required=True, help="edited IR to write")
    p.add_argument(
        "--trim-db",
        type=opt(validate.in_range, "trim threshold", -300.0, 0.0, unit="dB re peak", hi_open=True),
        default=None,
        metavar="DB",
        help="cut what lies below DB re peak at both ends (negative, e.g. -60)",
    )
    p.add_argument(
        "--fade-in",
        type=opt(validate.non_negative, "fade-in", 3600.0, unit="s"),
        default=0.0,
        metavar="S",
        help="fade-in, s",
    )
    p.add_argument(
        "--fade-out",
        type=opt(validate.non_negative, "fade-out", 3600.0, unit="s"),
        default=0.0,
        metavar="S",
        help="fade-out, s",
    )
    p.add_argument(
        "--normalize",
        type=opt(validate.in_range, "peak level", -100.0, 0.0, unit="dBFS"),
        default=None,
        metavar="DBFS",
        help="peak level after editing, -100 to 0",
    )
    p.add_argument("--reverse", action="store_true", help="reverse in time")
    p.add_argument(
        "--decay-scale",
        default=None,
        metavar="X|BAND:X,...",
        help="multiply decay times (all bands, or per octave band), "
        f"{jobs.DECAY_SCALE_MIN:g} to {jobs.DECAY_SCALE_MAX:g}",
    )
    p.add_argument(
        "--early-late",
        type=opt(validate.in_range, "late-part level change", -60.0, 60.0, unit="dB"),
        default=None,
        metavar="DB",
        help="change the level of the late part (after 80 ms) by DB, -60 to +60",
    )
    p.add_argument(
        "--rate",
        type=opt(validate.sample_rate),
        default=None,
        help=f"resample to this rate, {validate.RATE_MIN}-{validate.RATE_MAX} Hz",
    )
    p.add_argument("--force", action="store_true", help="replace an existing output")


COMMANDS = [
    Command(
        "synth",
        "synthesize a room impulse response from geometry and materials",
        configure_synth,
        run_synth,
    ),
    Command(
        "materials",
        "list the materials and their absorption coefficients",
        configure_materials,
        run_materials,
    ),
    Command(
        "edit",
        "trim, fade, normalize, reverse, re-time or resample an impulse response",
        configure_edit,
        run_edit,
    ),
]
