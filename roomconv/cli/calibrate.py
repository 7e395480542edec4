"""The ``calibrate`` command: a strength reference for G from responses of the source.

Either one free-field response at a known distance, or several responses in a reverberation
room of known volume and reverberation time; the job writes the JSON file that the strength
option of ``analyze`` reads.
"""

from __future__ import annotations

import math
from pathlib import Path

from ..analysis.report import band_label
from ..errors import InputError
from ..jobs import calibrate as jobs
from .common import Command, note, out
from .display import print_table

__all__ = ["COMMANDS", "show_reference"]


def _positive(option: str, text: str, unit: str, example: str) -> float:
    try:
        v = float(text)
    except (TypeError, ValueError):
        raise InputError(
            f"{option} {text!r}: not a number; give it in {unit} (e.g. {option} {example})"
        ) from None
    if not (math.isfinite(v) and v > 0):
        raise InputError(
            f"{option} {text}: must be a finite number of {unit} above 0 (e.g. {option} {example})"
        )
    return v


def _reverberation(text: str) -> dict[float, float]:
    """``--room-reverberation 125=5.2,250=4.9,...``: band centre (Hz) = T (s)."""
    out_ = {}
    for part in str(text).split(","):
        band, sep, value = part.partition("=")
        try:
            f, t = float(band), float(value)
        except ValueError:
            f = t = float("nan")
        if not sep or not (math.isfinite(f) and math.isfinite(t) and f > 0 and t > 0):
            raise InputError(
                f"--room-reverberation: {part.strip()!r} is not BAND=SECONDS with "
                "both above 0 (e.g. --room-reverberation 125=5.2,250=4.9)"
            )
        out_[f] = t
    return out_


def _channel(text: str | None) -> int | None:
    if text is None:
        return None
    try:
        return int(text)
    except ValueError:
        raise InputError(f"--channel {text!r}: not a whole number; channels count from 1") from None


def run_calibrate(a):
    """Run ``roomconv calibrate``: a strength reference for G from free-field responses of the
    source (or a reverberation-room measurement) through :mod:`roomconv.jobs.calibrate`.

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    room = [
        o
        for o in ("room_volume", "room_reverberation", "room_surface")
        if getattr(a, o) is not None
    ]
    if (a.distance is None) == (not room):
        raise InputError(
            "calibrate: give either --distance (free-field reference) or "
            "--room-volume with --room-reverberation (reverberation room), not "
            "both and not neither"
        )
    channel = _channel(a.channel)
    try:
        if a.distance is not None:
            distance = _positive("--distance", a.distance, "metres", "10")
            if len(a.reference) != 1:
                raise InputError(
                    f"--distance: the free-field method takes one response (got {len(a.reference)})"
                )
            res = jobs.calibrate_free_field(
                a.reference[0],
                a.output,
                distance_m=distance,
                channel=channel,
                bands=a.bands,
                force=a.force,
            )
        else:
            if a.room_volume is None or a.room_reverberation is None:
                raise InputError(
                    "the reverberation-room method needs both --room-volume and "
                    "--room-reverberation"
                )
            volume = _positive("--room-volume", a.room_volume, "m³", "200")
            surface = (
                None
                if a.room_surface is None
                else _positive("--room-surface", a.room_surface, "m²", "210")
            )
            res = jobs.calibrate_reverberation_room(
                a.reference,
                a.output,
                volume_m3=volume,
                reverberation_s=_reverberation(a.room_reverberation),
                surface_m2=surface,
                channel=channel,
                bands=a.bands,
                force=a.force,
            )
    except InputError as exc:
        text = str(exc)
        if "choose the microphone's channel" in text or "has no channel" in text:
            name = "--channel" if a.channel is None else f"--channel {a.channel}"
            raise InputError(f"{name}: {text}") from None
        raise
    show_reference(res.reference, a)
    for n in res.notes:
        note(n)
    out(f"wrote {a.output}", a)
    return 0


def show_reference(ref, a) -> None:
    """The reference as a table: band, level at 10 m, random error from the noise."""
    if getattr(a, "quiet", False):
        return
    rows = []
    for nominal in sorted(ref.bands_db):
        sig = ref.uncertainty_db.get(nominal)
        rows.append(
            [
                band_label(nominal),
                f"{ref.bands_db[nominal]:.2f}",
                "-" if sig is None else f"{sig:.2f}",
            ]
        )
    if ref.wideband_db is not None:
        sig = ref.uncertainty_db.get(None)
        rows.append(["wideband", f"{ref.wideband_db:.2f}", "-" if sig is None else f"{sig:.2f}"])
    print_table(
        ["band Hz", "L_ref dB (∫p² dt at 10 m, FS²·s)", "± dB (1σ)"],
        rows,
        title=f"strength reference ({ref.method}; {ref.rate_hz} Hz)",
        right=(1, 2),
    )


def configure_calibrate(p):
    """Add the options of ``roomconv calibrate`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument(
        "reference",
        type=Path,
        nargs="+",
        metavar="REF.wav",
        help="impulse response of the source in a free field (one), or in a "
        "reverberation room (one per position)",
    )
    p.add_argument(
        "--distance",
        default=None,
        metavar="M",
        help="free field: source-microphone distance of REF.wav in metres",
    )
    p.add_argument(
        "-o",
        "--output",
        type=Path,
        required=True,
        metavar="OUT.json",
        help="the strength reference to write",
    )
    p.add_argument(
        "--bands",
        choices=("octave", "third"),
        default="octave",
        help="band set of the per-band values (octave)",
    )
    p.add_argument(
        "--channel",
        default=None,
        metavar="N",
        help="channel of REF.wav to use, counting from 1 (needed for several)",
    )
    p.add_argument("--force", action="store_true", help="replace an existing output")
    g = p.add_argument_group("reverberation room (instead of --distance)")
    g.add_argument("--room-volume", default=None, metavar="M3", help="room volume in m³")
    g.add_argument(
        "--room-reverberation",
        default=None,
        metavar="BAND=T,...",
        help="the room's reverberation time per band, e.g. 125=5.2,250=4.9,...",
    )
    g.add_argument(
        "--room-surface",
        default=None,
        metavar="M2",
        help="room surface in m²; adds the Waterhouse correction",
    )


COMMANDS = [
    Command(
        "calibrate",
        "strength reference for G from responses of the source",
        configure_calibrate,
        run_calibrate,
    )
]
