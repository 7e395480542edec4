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

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     out = pathlib.Path(tmp) / "out.txt"
    ...     try:
    ...         with guarded() as g:
    ...             _ = g.write_text(g.file(out), "the first of two outputs")
    ...             raise RuntimeError("the job failed before the second")
    ...     except RuntimeError:
    ...         pass
    ...     out.exists()    # what the failed job created is gone
    False
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

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     d = pathlib.Path(tmp)
    ...     [p.name for p in make_folders(d / "renders", d / "renders" / "wet")]
    ['renders', 'wet']
    """
    g = WriteGuard(force=True)
    return [g.make_folder(g.folder(p)) for p in paths]


def write_document(path, obj, *, force: bool = False) -> Path:
    """Write one JSON document through its own guard.

    Examples
    --------
    >>> import tempfile, pathlib, json
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     p = write_document(pathlib.Path(tmp) / "doc.json", {"t30_s": 1.2})
    ...     json.loads(p.read_text())
    {'t30_s': 1.2}
    """
    with guarded(force=force) as g:
        g.file(path)
        return g.write_json(path, obj)
