"""Export job: responses (and, from a study file, their positions and room) as one SOFA file.

With a study file each ``[[responses]]`` entry becomes one measurement of one receiver (its
``channel``), labelled with the study's source and receiver ids; positions come from the
study's plan coordinates and heights (x, y, height above the floor, metres). Without one,
each file is a measurement whose channels are its receivers, and positions are unknown
(see :mod:`roomconv.sofa.write`).
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..audio import read_audio
from ..errors import InputError, describe
from ..sofa import ResponseSet, convention_for, is_sofa, write_sofa
from ..study import StudyFile, load_study
from .guard import guarded
from .progress import ProgressCallback, silent

__all__ = ["ExportResult", "export_responses", "response_set"]


@dataclass
class ExportResult:
    """What :func:`export_responses` wrote: the file, its convention and its size."""

    output: Path
    convention: str
    measurements: int
    receivers: int
    samples: int
    rate_hz: int
    positions_known: bool
    padded: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def _same_file(a: Path, b: Path) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return os.path.realpath(a) == os.path.realpath(b)


def _point_m(point) -> list[float] | None:
    if point is None or None in (point.x_m, point.y_m, point.height_m):
        return None
    return [point.x_m, point.y_m, point.height_m]


def response_set(
    responses: Sequence = (),
    *,
    study: StudyFile | None = None,
    title: str | None = None,
    author: str | None = None,
    organization: str | None = None,
    license: str | None = None,
    progress: ProgressCallback = silent,
) -> tuple[ResponseSet, list[Path], list[str], list[str]]:
    """Read the responses into a :class:`~roomconv.sofa.ResponseSet`.

    Returns
    -------
    rs : ResponseSet
    inputs : list of Path
        Every file read (the study file too).
    padded : list of str
        Responses shorter than the longest, padded with zeros at their end.
    notes : list of str
        What the caller should tell the user (positions left unknown, and why).

    Raises
    ------
    InputError
        A response that cannot be read, is a SOFA file, is not listed in the study, lacks
        the study's channel, or has another sample rate than the first.
    """
    files = [Path(p) for p in responses]
    notes: list[str] = []
    inputs: list[Path] = []
    # (file, 0-based channel or None for all, source label, receiver label)
    items: list[tuple[Path, int | None, str | None, str | None]] = []
    if study is not None:
        inputs.append(study.path)
        chosen = list(study.responses)
        if files:
            chosen = []
            for f in files:
                hit = [r for r in study.responses if _same_file(r.file, f)]
                if not hit:
                    raise InputError(
                        describe(
                            f,
                            f"is not among the [[responses]] of {study.path}",
                            "add it there, or leave the responses out to export all of them",
                        )
                    )
                chosen.extend(r for r in hit if r not in chosen)
        items = [(r.file, r.channel - 1, r.source, r.receiver) for r in chosen]
    else:
        if not files:
            raise InputError("no responses given: name one or more, or give a study file")
        items = [(f, None, None, None) for f in files]

    data: list[np.ndarray] = []
    rate = None
    first = None
    for k, (f, ch, _s, _r) in enumerate(items):
        if is_sofa(f):
            raise InputError(
                describe(f, "is a SOFA file already", "export WAV, FLAC or AIFF responses")
            )
        x, fs = read_audio(f, what="impulse response")
        if f not in inputs:
            inputs.append(f)
        if rate is None:
            rate, first = fs, f
        elif fs != rate:
            raise InputError(
                describe(
                    f,
                    f"is at {fs} Hz, {first} at {rate} Hz: a SOFA file holds one sample rate",
                    "resample the responses to one rate first",
                )
            )
        if ch is not None:
            if ch >= x.shape[1]:
                raise InputError(
                    describe(
                        f,
                        f"has {x.shape[1]} channel(s); the study file asks for channel {ch + 1}",
                        "correct the channel in the study file",
                    )
                )
            x = x[:, ch : ch + 1]
        data.append(x)
        progress("read", (k + 1) / len(items), None)
    assert rate is not None
    widths = {x.shape[1] for x in data}
    if len(widths) > 1:
        raise InputError(
            "the responses have different channel counts ("
            + ", ".join(f"{f.name}: {x.shape[1]}" for (f, *_), x in zip(items, data, strict=True))
            + "); a SOFA file has one count of receivers: give a study file that names a "
            "channel per response, or export them separately"
        )
    n = max(x.shape[0] for x in data)
    padded = [str(f) for (f, *_), x in zip(items, data, strict=True) if x.shape[0] < n]
    ir = np.zeros((len(data), data[0].shape[1], n))
    for m, x in enumerate(data):
        ir[m, :, : x.shape[0]] = x.T

    rs = ResponseSet(ir=ir, rate_hz=int(rate))
    if padded:
        rs.lengths = np.array([x.shape[0] for x in data], dtype=np.int64)
    if study is not None:
        src = {p.id: p for p in study.sources}
        rcv = {p.id: p for p in study.receivers}
        rs.source_labels = tuple(str(s) for _f, _c, s, _r in items)
        rs.listener_labels = tuple(str(r) for _f, _c, _s, r in items)
        spos = [_point_m(src.get(s)) for s in rs.source_labels]
        lpos = [_point_m(rcv.get(r)) for r in rs.listener_labels]
        missing = sorted(
            {lab for lab, q in zip(rs.source_labels, spos, strict=True) if q is None}
            | {lab for lab, q in zip(rs.listener_labels, lpos, strict=True) if q is None}
        )
        if missing:
            notes.append(
                "positions written as unknown: no xy_m and height_m in the study file for "
                + ", ".join(missing)
            )
        else:
            rs.source_m = np.array(spos, dtype=float)
            rs.listener_m = np.array(lpos, dtype=float)
        room = study.room
        rs.room_dimensions_m = room.dimensions_m
        rs.room_name, rs.room_use = room.name, room.use
        rs.room_volume_m3 = room.volume
        rs.temperature_c = room.temperature_c
        rs.title = study.title
        rs.author = study.author
        rs.database = study.project_number or study.title
        rs.comment = f"Exported from the study file {study.path.name}." + (
            f" {study.notes}" if study.notes else ""
        )
        if room.dimensions_m is None and not missing:
            notes.append(
                "the room's dimensions are not in the study file: written as GeneralFIR "
                "(SingleRoomSRIR needs a rectangular room's dimensions_m)"
            )
    for name, value in (
        ("title", title),
        ("author", author),
        ("organization", organization),
        ("license", license),
    ):
        if value is not None:
            setattr(rs, name, value)
    return rs, inputs, padded, notes


def export_responses(
    responses: Sequence,
    output,
    *,
    study=None,
    title: str | None = None,
    author: str | None = None,
    organization: str | None = None,
    license: str | None = None,
    force: bool = False,
    progress: ProgressCallback = silent,
) -> ExportResult:
    """Write responses as one SOFA file (AES69-2022).

    Parameters
    ----------
    responses : sequence of path-like
        Response files (WAV, FLAC, AIFF). With ``study`` they must be among its
        ``[[responses]]``; empty takes all of them.
    output : path-like
        The ``.sofa`` file to write; never an input, never over a file without ``force``.
    study : path-like, optional
        A study file: positions, ids and the room.
    title, author, organization, license : str, optional
        The file's Title, AuthorContact, Organization and License (from the study where it
        has them; the convention's default license otherwise).
    force : bool
    progress : callable

    Returns
    -------
    ExportResult
    """
    output = Path(output)
    if not is_sofa(output):
        raise InputError(
            describe(output, "a SOFA file ends in .sofa", "choose a name such as set.sofa")
        )
    st = load_study(study) if study is not None else None
    given = [Path(p) for p in responses]
    planned = [*given, *([st.path] if st is not None else [])]
    if st is not None:
        planned += [r.file for r in st.responses if r.file.exists()]
    with guarded(planned, force=force) as g:
        # The output is checked against every input before any response is read.
        g.file(output)
        rs, _inputs, padded, notes = response_set(
            given,
            study=st,
            title=title,
            author=author,
            organization=organization,
            license=license,
            progress=progress,
        )
        write_sofa(output, rs, guard=g)
        progress("write", 1.0, None)
    return ExportResult(
        output=output,
        convention=convention_for(rs),
        measurements=rs.measurements,
        receivers=rs.receivers,
        samples=rs.samples,
        rate_hz=rs.rate_hz,
        positions_known=rs.listener_m is not None,
        padded=padded,
        notes=notes,
    )
