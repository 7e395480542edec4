"""The ``export`` command: responses as one SOFA file (AES69-2022)."""

from __future__ import annotations

from pathlib import Path

from ..jobs.export import export_responses
from .common import Command, note, out

__all__ = ["COMMANDS"]


def run_export(a):
    """Run ``roomconv export``: the responses given (or a study file's) written as one SOFA
    file (AES69-2022) through :func:`roomconv.jobs.export.export_responses`, with a note for
    every response padded to the common length and one line naming what was written.

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    res = export_responses(
        a.responses,
        a.output,
        study=a.study,
        title=a.title,
        author=a.author,
        organization=a.organization,
        license=a.license,
        force=a.force,
    )
    for n in res.notes:
        note(f"note: {n}")
    if res.padded:
        note(
            f"note: {len(res.padded)} shorter response(s) padded with zeros at the end to "
            f"{res.samples} samples"
        )
    where = "positions from the study" if res.positions_known else "positions unknown"
    out(
        f"wrote {res.output}: SOFA {res.convention}, {res.measurements} measurement(s) × "
        f"{res.receivers} receiver(s), {res.samples} samples at {res.rate_hz} Hz, {where}",
        a,
    )
    return 0


def configure_export(p):
    """Add the options of ``roomconv export`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument(
        "responses",
        nargs="*",
        type=Path,
        metavar="RESPONSE",
        help="response files (WAV/FLAC/AIFF); with --study, all of its responses when none "
        "is named",
    )
    p.add_argument(
        "--study",
        type=Path,
        default=None,
        metavar="STUDY.toml",
        help="study file: source and receiver positions and ids, the room (a room with "
        "dimensions_m is written as SingleRoomSRIR, else GeneralFIR)",
    )
    p.add_argument("-o", "--output", type=Path, required=True, help="the .sofa file to write")
    p.add_argument("--title", default=None, help="the file's Title (the study's title)")
    p.add_argument("--author", default=None, help="AuthorContact (the study's author)")
    p.add_argument("--organization", default=None, help="Organization")
    p.add_argument(
        "--license",
        default=None,
        help="License (the convention's default: no license, ask the author)",
    )
    p.add_argument("--force", action="store_true", help="replace an existing file")


COMMANDS = [
    Command(
        "export",
        "write responses (and a study's positions) as one SOFA file (AES69)",
        configure_export,
        run_export,
    )
]
