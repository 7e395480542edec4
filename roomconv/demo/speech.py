"""The demo's speech room: the Larkspur Room, a small meeting room of our own invention,
synthesized at two listener seats and rated by the STI (IEC 60268-16, indirect method)."""

from __future__ import annotations

from pathlib import Path

from ..jobs.progress import ProgressCallback, silent

__all__ = ["larkspur_room", "TALKER_M", "SEATS_M", "SPEECH_LEVEL_DBA", "NOISE_DB", "speech_room"]

#: Talker at the head of the table, two seats down it (m; our own scenario).
TALKER_M = (1.5, 2.75, 1.5)
SEATS_M = ((4.0, 2.0, 1.2), (6.5, 3.8, 1.2))
#: The talker's A-weighted speech level at the seats and the room's ventilation noise per
#: octave 125 Hz–8 kHz (dB SPL): invented figures for the demo.
SPEECH_LEVEL_DBA = 58.0
NOISE_DB = (42.0, 38.0, 34.0, 30.0, 26.0, 22.0, 18.0)


def larkspur_room():
    """7.5 × 5.5 × 2.8 m (115 m³): plasterboard walls, one window wall, carpet, a mineral
    tile ceiling."""
    from ..synth.room import RoomModel

    return RoomModel(
        7.5,
        5.5,
        2.8,
        {
            "left": "gypsum-board",
            "right": "glass-window",
            "front": "gypsum-board",
            "back": "gypsum-board",
            "floor": "carpet",
            "ceiling": "acoustic-tile",
        },
    )


def speech_room(
    folder, *, rate_hz: int, seed: int, force: bool = False, settings: dict | None = None,
    progress: ProgressCallback = silent,
) -> dict:  # fmt: skip
    """Synthesize the seats' responses into ``folder`` and write the STI results there
    (``results.json`` and ``report.html``). Returns the average STI entry."""
    from ..jobs.analyze import analyze_study
    from ..jobs.speech import speech_conditions
    from ..jobs.synth import synthesize_room

    folder = Path(folder)
    room = larkspur_room()
    files = []
    for i, seat in enumerate(SEATS_M, 1):
        f = folder / f"seat{i}.wav"
        synthesize_room(
            f,
            room,
            source_m=TALKER_M,
            receiver_m=seat,
            rate_hz=rate_hz,
            seed=seed + i,
            length_s=1.0,
            force=force,
            settings={**(settings or {}), "what": f"Larkspur Room, talker to seat {i}"},
        )
        files.append(f)
        progress("speech room", i / (len(SEATS_M) + 1), None)
    cond = speech_conditions(speech_level_dba=SPEECH_LEVEL_DBA, noise_db=NOISE_DB)
    res = analyze_study(
        files,
        json_path=folder / "results.json",
        report_dir=folder,
        force=force,
        sti=cond,
    )
    progress("speech room", 1.0, None)
    return res.study.document["average"]["sti"]
