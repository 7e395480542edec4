"""The write guard as every job uses it: planned outputs, rollback of a failed job."""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path

from ..audio import WriteGuard

__all__ = ["guarded", "make_folders", "write_document"]


@contextmanager
def guarded(inputs: Iterable = (), *, force: bool = False) -> Iterator[WriteGuard]:
    """A :class:`~roomconv.audio.WriteGuard` for one job.

    A job that fails removes the files it created (files replaced with ``force`` stay, as
    complete files); an interrupt keeps finished outputs and leaves the removal of unfinished
    temporary files to the front end's interrupt handling, as the README promises.
    """
    g = WriteGuard(inputs, force=force)
    try:
        yield g
    except Exception:
        g.rollback()
        raise
    finally:
        g.close()


def make_folders(*paths) -> list[Path]:
    """Create output folders, each inside an existing folder or one created just before it.

    They stay after this call; a command that fails, or ends with them still empty, has them
    removed by the front end's end of run (:func:`roomconv.audio.end_run`).
    """
    g = WriteGuard(force=True)
    return [g.make_folder(g.folder(p)) for p in paths]


def write_document(path, obj, *, force: bool = False) -> Path:
    """Write one JSON document through its own guard."""
    with guarded(force=force) as g:
        g.file(path)
        return g.write_json(path, obj)
