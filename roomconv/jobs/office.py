"""The open-plan office job (ISO 3382-3): a study file's line of positions → per-position
speech level and STI, the single numbers, JSON and an HTML page."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .. import __version__
from ..errors import InputError
from ..study import StudyFile, load_study
from .guard import guarded
from .progress import ProgressCallback, silent

__all__ = ["office_study", "office_document", "OfficeResult", "response_distances"]


@dataclass
class OfficeResult:
    """The office document and the files written."""

    document: dict
    written: list[Path] = field(default_factory=list)


def response_distances(st: StudyFile) -> list[float]:
    """Each response's source distance: its ``distance_m``, else the plan distance between
    its source's and receiver's ``xy_m``."""
    src = {p.id: p for p in st.sources}
    rec = {p.id: p for p in st.receivers}
    out = []
    for i, r in enumerate(st.responses, 1):
        if r.distance_m is not None:
            out.append(r.distance_m)
            continue
        s, c = src.get(r.source), rec.get(r.receiver)
        if s is None or c is None or None in (s.x_m, s.y_m, c.x_m, c.y_m):
            raise InputError(
                f"{st.path}: responses[{i}].distance_m: is missing and the plan positions "
                f"of {r.source} and {r.receiver} are not both given; add distance_m or xy_m"
            )
        d = math.hypot(c.x_m - s.x_m, c.y_m - s.y_m)  # type: ignore[operator]
        if not d > 0:
            raise InputError(
                f"{st.path}: responses[{i}]: source and receiver share one plan position; "
                "give distance_m"
            )
        # The same range a written distance_m must keep: a plan distance outside it is a
        # typo in xy_m, not an office.
        if not 0.1 <= d <= 1000.0:
            raise InputError(
                f"{st.path}: responses[{i}]: the plan distance {d:g} m from {r.source} to "
                f"{r.receiver} is outside 0.1…1000 m; correct xy_m or give distance_m"
            )
        out.append(d)
    return out


def _position(h: np.ndarray, rate: int, cal, noise, voice: str) -> dict:
    """Speech levels (from G and the normal-effort spectrum) and the STI of one response."""
    from ..analysis.office import NORMAL_SPEECH_1M_DB, band_strengths, level_re_1m_from_strength
    from ..analysis.sti import EDITION, a_weighted_level, sti_of_response

    g, why = band_strengths(h, rate, cal)
    entry: dict = {"g_db": [None if v is None else round(v, 2) for v in g]}
    if why:
        reason = "no strength G in " + "; ".join(why)
        entry.update(speech_octaves_db=None, speech_level_a_db=None, level_reason=reason)
        entry["sti"] = {"value": None, "mti": [None] * 7, "band": None, "method": EDITION,
                        "warnings": [reason], "reason": reason}  # fmt: skip
        return entry
    speech = np.asarray(NORMAL_SPEECH_1M_DB) + level_re_1m_from_strength(g)
    entry["speech_octaves_db"] = [round(float(x), 2) for x in speech]
    entry["speech_level_a_db"] = round(a_weighted_level(speech), 2)
    entry["level_reason"] = None
    entry["sti"] = sti_of_response(h, rate, speech_db=speech, noise_db=noise, voice=voice).as_dict()
    return entry


def _check_office(st: StudyFile, voice: str) -> None:
    if st.office is None or st.office.calibration is None:
        raise InputError(
            f"{st.path}: office.calibration: is missing; the speech levels need a strength "
            "reference from 'roomconv calibrate' (see 'roomconv study init')"
        )
    if voice not in ("male", "female"):
        raise InputError(f"voice {voice!r} is not one of male, female")


def office_document(
    st: StudyFile, *, voice: str = "male", progress: ProgressCallback = silent
) -> dict:
    """The office evaluation of a loaded study file as a JSON-ready document (reads the
    responses and the strength reference; writes nothing).

    Raises
    ------
    InputError
        No ``[office]`` calibration, a response without a distance, an unreadable file.
    """
    from ..analysis.calibration import parse_strength_reference
    from ..analysis.office import office_numbers
    from ..analysis.sti import CAUTIONS
    from ..audio import read_audio

    _check_office(st, voice)
    assert st.office is not None and st.office.calibration is not None  # checked above
    distances = response_distances(st)
    cal = parse_strength_reference(str(st.office.calibration))
    noise = st.office.background_noise_db
    positions = []
    for i, (r, d) in enumerate(zip(st.responses, distances, strict=True)):
        progress("office", i / len(st.responses), None)
        data, rate = read_audio(r.file, what="impulse response")
        if r.channel > data.shape[1]:
            raise InputError(f"{r.file}: has no channel {r.channel} (responses[{i + 1}].channel)")
        entry: dict = {
            "file": st.display_path(r.file),
            "channel": r.channel,
            "source": r.source,
            "receiver": r.receiver,
            "distance_m": round(d, 3),
        }
        try:
            entry.update(_position(data[:, r.channel - 1], rate, cal, noise, voice))
        except InputError as exc:
            raise InputError(f"{r.file}: {exc}") from None
        positions.append(entry)
    progress("office", 1.0, None)
    numbers = office_numbers(
        [p["distance_m"] for p in positions],
        [np.nan if p["speech_level_a_db"] is None else p["speech_level_a_db"] for p in positions],
        [p["sti"]["value"] for p in positions],
    )
    notes = []
    if noise is None:
        notes.append(
            "no background noise given (office.background_noise_db): the STI values "
            "assume a silent office and are higher than with the noise ISO 3382-3 "
            "asks to be measured"
        )
    summary = numbers.as_dict()
    summary["warnings"] += notes
    return {
        "title": st.title,
        "room": st.room.name,
        "positions": positions,
        "office": summary,
        "settings": _settings(noise, voice),
        "notes": notes,
        "cautions": list(CAUTIONS),
        "roomconv_version": __version__,
    }


def office_study(
    study_path,
    *,
    json_path=None,
    report_dir=None,
    voice: str = "male",
    force: bool = False,
    progress: ProgressCallback = silent,
) -> OfficeResult:
    """Evaluate a study file's responses as an open-plan office line (ISO 3382-3).

    Parameters
    ----------
    study_path : path-like
        A study file with an ``[office]`` table (strength reference, background noise) and
        a distance for every response.
    json_path : path-like, optional
    report_dir : path-like, optional
        Folder for ``office.html`` (level and STI against distance, the single numbers).
    voice : {"male", "female"}
        Band weighting of the STI.
    force : bool
        Replace existing outputs (never an input).
    """
    st = load_study(study_path)
    _check_office(st, voice)
    response_distances(st)  # refuse a missing distance before any output is planned
    inputs = [st.path, st.office.calibration] + [r.file for r in st.responses]  # type: ignore[union-attr]
    with guarded(inputs, force=force) as g:
        page = g.folder(report_dir) / "office.html" if report_dir is not None else None
        for p in (json_path, page):
            if p is not None:
                g.file(p)
        doc = office_document(st, voice=voice, progress=progress)
        written = []
        if json_path is not None:
            written.append(g.write_json(json_path, doc))
        if page is not None:
            from ..report.office import office_html

            written.append(g.write_text(page, office_html(doc)))
    return OfficeResult(doc, written)


def _settings(noise, voice: str) -> dict:
    from ..analysis import office as O
    from ..analysis.sti import EDITION, MIN_INR_DB, a_weighted_level

    return {
        "edition": O.EDITION,
        "sti_edition": EDITION,
        "voice": voice,
        "speech_1m_octaves_db": list(O.NORMAL_SPEECH_1M_DB),
        "speech_1m_source": "ISO 3382-3 normal-effort speech, free field at 1 m (from memory)",
        "speech_level_from": "strength G per octave (roomconv calibrate) minus 20 dB: the "
        "level relative to the same source at 1 m in a free field",
        "background_noise_octaves_db": None if noise is None else list(noise),
        "background_noise_a_db": None if noise is None else round(a_weighted_level(noise), 2),
        "fit_range_m": list(O.FIT_RANGE_M),
        "fit_range_source": "ISO 3382-3 (from memory)",
        "min_positions": O.MIN_POSITIONS,
        "sti_distraction": O.STI_DISTRACTION,
        "sti_privacy": O.STI_PRIVACY,
        "comfort_level_db": O.COMFORT_LEVEL_DB,
        "min_inr_db": MIN_INR_DB,
        "min_r2": O.MIN_R2,
    }
