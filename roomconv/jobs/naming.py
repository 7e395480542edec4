"""Every name a job gives a file it writes, in one place."""

from __future__ import annotations

from pathlib import Path

__all__ = [
    "render_output_name",
    "position_output",
    "harmonic_output",
    "study_outputs",
    "unused_name",
]


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


def unused_name(path, companions=lambda p: (), *, limit: int = 999) -> Path:
    """``path`` itself when neither it nor any of its companion files exists, else the first
    ``<stem>-2<suffix>``, ``<stem>-3<suffix>`` … that is free: what a front end offers instead
    of replacing a file. ``companions(candidate)`` gives the other files written with it
    (sidecars); every one must be free too. The write guard still refuses a name taken
    between this check and the write.

    Examples
    --------
    >>> import tempfile
    >>> d = Path(tempfile.mkdtemp())
    >>> _ = (d / "room.wav").write_bytes(b"")
    >>> unused_name(d / "room.wav").name, unused_name(d / "new.wav").name
    ('room-2.wav', 'new.wav')
    """
    path = Path(path)

    def free(p: Path) -> bool:
        return not any(q.exists() or q.is_symlink() for q in (p, *companions(p)))

    if free(path):
        return path
    for k in range(2, limit + 1):
        candidate = path.with_name(f"{path.stem}-{k}{path.suffix}")
        if free(candidate):
            return candidate
    from ..errors import OutputExistsError

    raise OutputExistsError(
        f"{path}: every name up to {path.stem}-{limit}{path.suffix} is taken; choose another name"
    )
