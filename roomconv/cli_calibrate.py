"""The ``calibrate`` command: a strength reference for G from responses of the source.

Either one free-field response at a known distance, or several responses in a reverberation
room of known volume and reverberation time. Builds the per-band reference
(:mod:`roomconv.analysis.calibration`), prints it and writes the JSON file that the strength
option of ``analyze`` reads.
"""

from __future__ import annotations

import math
from pathlib import Path

from .cli import _note, _out, command
from .errors import InputError


def _positive(option: str, text: str, unit: str, example: str) -> float:
    try:
        v = float(text)
    except (TypeError, ValueError):
        raise InputError(f"{option} {text!r}: not a number; give it in {unit} "
                         f"(e.g. {option} {example})") from None
    if not (math.isfinite(v) and v > 0):
        raise InputError(f"{option} {text}: must be a finite number of {unit} above 0 "
                         f"(e.g. {option} {example})")
    return v


def _distance(text: str) -> float:
    return _positive("--distance", text, "metres", "10")


def _reverberation(text: str) -> dict[float, float]:
    """``--room-reverberation 125=5.2,250=4.9,...``: band centre (Hz) = T (s)."""
    out = {}
    for part in str(text).split(","):
        band, sep, value = part.partition("=")
        try:
            f, t = float(band), float(value)
        except ValueError:
            f = t = float("nan")
        if not sep or not (math.isfinite(f) and math.isfinite(t) and f > 0 and t > 0):
            raise InputError(f"--room-reverberation: {part.strip()!r} is not BAND=SECONDS with "
                             "both above 0 (e.g. --room-reverberation 125=5.2,250=4.9)")
        out[f] = t
    return out


def _channel(text: str | None, n_channels: int, path: Path) -> int:
    """0-based index from the 1-based ``--channel``; a mono file needs none."""
    if text is None:
        if n_channels == 1:
            return 0
        raise InputError(f"{path}: has {n_channels} channels; choose the microphone with "
                         f"--channel N (1..{n_channels})")
    try:
        c = int(text)
    except ValueError:
        raise InputError(f"--channel {text!r}: not a whole number; channels count from 1"
                         ) from None
    if not 1 <= c <= n_channels:
        raise InputError(f"--channel {c}: {path} has channel(s) 1..{n_channels} "
                         "(channels count from 1)")
    return c - 1


@command("calibrate", "strength reference for G from responses of the source")
def cmd_calibrate(a):
    from .analysis.calibration import reference_to_dict
    from .audio import check_output, write_json
    room = [o for o in ("room_volume", "room_reverberation", "room_surface")
            if getattr(a, o) is not None]
    if (a.distance is None) == (not room):
        raise InputError("calibrate: give either --distance (free-field reference) or "
                         "--room-volume with --room-reverberation (reverberation room), not "
                         "both and not neither")
    check_output(a.output, force=a.force, inputs=a.reference)
    ref = _free_field(a) if a.distance is not None else _reverberation_room(a)
    _out(format_reference(ref), a)
    for n in ref.notes:
        _note(n)
    write_json(a.output, reference_to_dict(ref), force=a.force, inputs=a.reference)
    _out(f"wrote {a.output}", a)
    return 0


def _free_field(a):
    from .analysis.calibration import NEAR_FIELD_M, reference_from_response
    from .audio import read_audio
    distance = _distance(a.distance)
    if len(a.reference) != 1:
        raise InputError(f"--distance: the free-field method takes one response "
                         f"(got {len(a.reference)})")
    path = a.reference[0]
    data, rate = read_audio(path, what="reference response")
    ch = _channel(a.channel, data.shape[1], path)
    if distance < NEAR_FIELD_M:
        _note(f"--distance {distance:g}: this close the source may not act as a point source; "
              "the scaling to 10 m by the inverse-square law assumes it does")
    try:
        return reference_from_response(data[:, ch], rate, distance_m=distance, bands=a.bands)
    except InputError as exc:
        raise InputError(f"{path}: {exc}") from None


def _reverberation_room(a):
    from .analysis.calibration import reverberation_room_reference
    from .audio import read_audio
    if a.room_volume is None or a.room_reverberation is None:
        raise InputError("the reverberation-room method needs both --room-volume and "
                         "--room-reverberation")
    volume = _positive("--room-volume", a.room_volume, "m³", "200")
    surface = (None if a.room_surface is None else
               _positive("--room-surface", a.room_surface, "m²", "210"))
    t = _reverberation(a.room_reverberation)
    responses, rate = [], None
    for path in a.reference:
        data, r = read_audio(path, what="reverberation-room response")
        if rate is not None and r != rate:
            raise InputError(f"{path}: is at {r} Hz but {a.reference[0]} at {rate} Hz; "
                             "give responses at one sample rate")
        rate = r
        responses.append(data[:, _channel(a.channel, data.shape[1], path)])
    return reverberation_room_reference(responses, rate, volume_m3=volume, reverberation_s=t,
                                        surface_m2=surface, bands=a.bands)


def format_reference(ref) -> str:
    """The reference as a small table: band, level at 10 m, random error from the noise."""
    lines = [f"strength reference ({ref.method}; {ref.rate_hz} Hz)",
             "  band Hz   L_ref dB (∫p² dt at 10 m, FS²·s)   ± dB (1σ)"]

    def row(label, value, key):
        sig = ref.uncertainty_db.get(key)
        sig_txt = f"{sig:.2f}" if sig is not None else "-"
        lines.append(f"  {label:>8}  {value:>10.2f}                          {sig_txt:>5}")

    for nominal in sorted(ref.bands_db):
        label = f"{nominal / 1000:g}k" if nominal >= 1000 else f"{nominal:g}"
        row(label, ref.bands_db[nominal], nominal)
    if ref.wideband_db is not None:
        row("wideband", ref.wideband_db, None)
    return "\n".join(lines)


def _cfg(p):
    p.add_argument("reference", type=Path, nargs="+", metavar="REF.wav",
                   help="impulse response of the source in a free field (one), or in a "
                        "reverberation room (one per position)")
    p.add_argument("--distance", default=None, metavar="M",
                   help="free field: source-microphone distance of REF.wav in metres")
    p.add_argument("-o", "--output", type=Path, required=True, metavar="OUT.json",
                   help="the strength reference to write")
    p.add_argument("--bands", choices=("octave", "third"), default="octave",
                   help="band set of the per-band values (octave)")
    p.add_argument("--channel", default=None, metavar="N",
                   help="channel of REF.wav to use, counting from 1 (needed for several)")
    p.add_argument("--force", action="store_true", help="replace an existing output")
    g = p.add_argument_group("reverberation room (instead of --distance)")
    g.add_argument("--room-volume", default=None, metavar="M3", help="room volume in m³")
    g.add_argument("--room-reverberation", default=None, metavar="BAND=T,...",
                   help="the room's reverberation time per band, e.g. 125=5.2,250=4.9,...")
    g.add_argument("--room-surface", default=None, metavar="M2",
                   help="room surface in m²; adds the Waterhouse correction")


cmd_calibrate.configure = _cfg
