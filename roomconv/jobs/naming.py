"""Every name a job gives a file it writes, in one place."""

from __future__ import annotations

from pathlib import Path

__all__ = ["render_output_name", "position_output", "harmonic_output", "study_outputs"]


def render_output_name(dry, ir) -> str:
    """The wet file a render of ``dry`` through ``ir`` writes: ``<dry stem>__<ir stem>.wav``.

    Examples
    --------
    >>> render_output_name("takes/vocal.wav", "irs/hall.wav")
    'vocal__hall.wav'
    """
    return f"{Path(dry).stem}__{Path(ir).stem}.wav"


def position_output(folder, name: str) -> tuple[Path, Path]:
    """A measured position's response and its quality report: ``<name>.wav``,
    ``<name>.quality.json`` in ``folder``.

    Examples
    --------
    >>> [p.name for p in position_output("session", "P1")]
    ['P1.wav', 'P1.quality.json']
    """
    folder = Path(folder)
    return folder / f"{name}.wav", folder / f"{name}.quality.json"


def harmonic_output(folder, output, order: int) -> Path:
    """The response of harmonic ``order`` extracted beside ``output``: ``<stem>_h<k>.wav``.

    Examples
    --------
    >>> harmonic_output("h", "hall.wav", 3).as_posix()
    'h/hall_h3.wav'
    """
    return Path(folder) / f"{Path(output).stem}_h{order}.wav"


def study_outputs(folder) -> dict[str, Path]:
    """The files an exported study holds: JSON, CSV and the HTML report.

    Examples
    --------
    >>> sorted(p.name for p in study_outputs("out").values())
    ['report.html', 'results.csv', 'results.json']
    """
    folder = Path(folder)
    return {
        "json": folder / "results.json",
        "csv": folder / "results.csv",
        "report": folder / "report.html",
    }
