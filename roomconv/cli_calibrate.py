"""The ``calibrate`` command: a strength reference for G from a free-field response of the source.

Reads the response, builds the per-band reference (:mod:`roomconv.analysis.calibration`),
prints it and writes the JSON file that the strength option of ``analyze`` reads.
"""

from __future__ import annotations

import math
from pathlib import Path

from .cli import _note, _out, command
from .errors import InputError


def _distance(text: str) -> float:
    try:
        d = float(text)
    except (TypeError, ValueError):
        raise InputError(f"--distance {text!r}: not a number; give the source-microphone "
                         "distance in metres (e.g. --distance 10)") from None
    if not (math.isfinite(d) and d > 0):
        raise InputError(f"--distance {text}: must be a finite distance in metres above 0 "
                         "(e.g. --distance 10)")
    return d


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


@command("calibrate", "strength reference for G from a free-field response of the source")
def cmd_calibrate(a):
    from .analysis.calibration import NEAR_FIELD_M, reference_from_response, reference_to_dict
    from .audio import check_output, read_audio, write_json
    distance = _distance(a.distance)
    check_output(a.output, force=a.force, inputs=[a.reference])
    data, rate = read_audio(a.reference, what="reference response")
    ch = _channel(a.channel, data.shape[1], a.reference)
    if distance < NEAR_FIELD_M:
        _note(f"--distance {distance:g}: this close the source may not act as a point source; "
              "the scaling to 10 m by the inverse-square law assumes it does")
    try:
        ref = reference_from_response(data[:, ch], rate, distance_m=distance, bands=a.bands)
    except InputError as exc:
        raise InputError(f"{a.reference}: {exc}") from None
    _out(format_reference(ref), a)
    for n in ref.notes:
        _note(n)
    write_json(a.output, reference_to_dict(ref), force=a.force, inputs=[a.reference])
    _out(f"wrote {a.output}", a)
    return 0


def format_reference(ref) -> str:
    """The reference as a small table: band, level at 10 m, random error from the noise."""
    lines = [f"strength reference ({ref.method}; {ref.rate_hz} Hz)",
             "  band Hz   L_ref dB (∫p² dt at 10 m, FS²·s)   ± noise dB (1σ)"]

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
    p.add_argument("reference", type=Path, metavar="REF.wav",
                   help="impulse response of the source measured in a free field")
    p.add_argument("--distance", required=True, metavar="M",
                   help="source-microphone distance of REF.wav in metres")
    p.add_argument("-o", "--output", type=Path, required=True, metavar="OUT.json",
                   help="the strength reference to write")
    p.add_argument("--bands", choices=("octave", "third"), default="octave",
                   help="band set of the per-band values (octave)")
    p.add_argument("--channel", default=None, metavar="N",
                   help="channel of REF.wav to use, counting from 1 (needed for several)")
    p.add_argument("--force", action="store_true", help="replace an existing output")


cmd_calibrate.configure = _cfg
