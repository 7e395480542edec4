"""The responses a study file names, read and analysed: the analysis document annotated with
the sources, receivers, measurement grade and data-quality files behind each position."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..analysis.study import Study, analyse_arrays
from ..audio import audio_info, read_audio, read_json
from ..errors import InputError
from ..study import StudyFile
from .grade import measurement_grade


@dataclass
class StudyResults:
    """A study file, its analysis and the raw responses (for the energy–time curves).

    Examples
    --------
    See :func:`analyse_study`, which returns one.
    """

    study: StudyFile
    #: The analysis, its document annotated (see :func:`analyse_study`)
    analysis: Study
    #: position label → (response samples, rate)
    irs: dict[str, tuple[np.ndarray, int]] = field(default_factory=dict)
    #: position label → the quality JSON of the measurement, when the study names one
    quality: dict[str, dict] = field(default_factory=dict)


def check_study_inputs(study: StudyFile) -> None:
    """Refuse, before any work, a response file that is missing, unreadable or lacks the
    channel the study names (the message names the study key).

    Examples
    --------
    >>> from pathlib import Path
    >>> from roomconv.study import parse_study, template_text
    >>> study = parse_study(template_text("Hall B"), Path("/no/such/folder/study.toml"))
    >>> check_study_inputs(study)
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: ...S1R1.wav...
    """
    for i, r in enumerate(study.responses, 1):
        key = f"{study.path}: responses[{i}]"
        if not r.file.is_file():
            raise InputError(
                f"{key}.file: {study.display_path(r.file)} not found; check the "
                "path (relative to the study file)"
            )
        try:
            info = audio_info(r.file)
        except InputError as exc:
            raise InputError(f"{key}.file: {exc}") from None
        if r.channel > info.channels:
            raise InputError(
                f"{key}.channel: {r.channel} but {study.display_path(r.file)} has "
                f"{info.channels} channel(s); give a channel from 1 to "
                f"{info.channels}"
            )
        if r.quality_file is not None and not r.quality_file.is_file():
            raise InputError(
                f"{key}.quality_file: {study.display_path(r.quality_file)} not "
                "found; check the path or leave the key out"
            )


def used_combinations(doc: dict) -> list[tuple[str, str]]:
    """Source–receiver combinations that gave a decay time (T20 or T30) in a mid band.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> from roomconv.study import parse_study, template_text
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> for i in (1, 2):
    ...     h = np.random.default_rng(i).standard_normal(t.size) * 10 ** (-3 * t / T)
    ...     soundfile.write(d / f"S1R{i}.wav", 0.5 * h, rate, subtype="DOUBLE")
    >>> study = parse_study(template_text("Hall B"), d / "study.toml")
    >>> from roomconv.report.inputs import analyse_study
    >>> res = analyse_study(study)
    >>> doc = res.analysis.document
    >>> used_combinations(doc)
    [('S1', 'R1'), ('S1', 'R2')]
    >>> tmp.cleanup()
    """
    mids = (500, 1000) if doc["settings"]["bands"] == "octave" else (400, 500, 630, 800, 1000, 1250)
    out = []
    for p in doc["positions"]:
        if any(
            r["band_hz"] in mids and (r.get("t30_s") is not None or r.get("t20_s") is not None)
            for r in p["bands"]
        ):
            out.append((p["source"], p["receiver"]))
    return out


def _study_layout(study: StudyFile):
    """The study's ``[channels] layout`` as the analysis' channel layout (or None)."""
    from ..analysis.layouts import parse_layout

    if study.layout is None:
        return None
    if study.layout == "binaural":
        return parse_layout(binaural=True)
    if study.layout == "stage":
        return parse_layout(stage=True)
    return parse_layout(study.layout)


def analyse_study(
    study: StudyFile,
    *,
    bands: str = "octave",
    filtering: str = "auto",
    calibration=None,
    progress=None,
    sti=None,
) -> StudyResults:
    """Read every response the study names and analyse each as one position.

    The document's positions carry ``position`` (``S1-R1``), ``source``, ``receiver`` and
    the file and channel as the study gives them; the document gains ``study`` (the study
    file's data), ``grade`` and ``quality``.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> from roomconv.study import parse_study, template_text
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> for i in (1, 2):
    ...     h = np.random.default_rng(i).standard_normal(t.size) * 10 ** (-3 * t / T)
    ...     soundfile.write(d / f"S1R{i}.wav", 0.5 * h, rate, subtype="DOUBLE")
    >>> study = parse_study(template_text("Hall B"), d / "study.toml")
    >>> from roomconv.report.inputs import analyse_study
    >>> res = analyse_study(study)
    >>> doc = res.analysis.document
    >>> [p["position"] for p in doc["positions"]], sorted(res.irs)
    (['S1-R1', 'S1-R2'], ['S1-R1', 'S1-R2'])
    >>> tmp.cleanup()
    """
    check_study_inputs(study)
    layout = _study_layout(study)
    items, irs, quality, by_label = [], {}, {}, {}
    for r in study.responses:
        data, rate = read_audio(r.file, what="impulse response")
        h = data[:, r.channel - 1]
        label = r.label if r.label not in by_label else f"{r.label}#{r.channel}"
        by_label[label] = r
        if layout is not None:
            layout.check(r.file, data.shape[1])  # names the file before any analysis
        if layout is not None and layout.kind != "stage":
            # One position's channels together (omni and figure-of-eight, ambisonic or the
            # two ears); the ISO 3382 parameters come from its omni (or left) channel.
            h = data[:, layout.mono_channels(data.shape[1])[0]]
            items.append((label, data, rate))
        else:
            items.append((label, h[:, None], rate))
        irs[label] = (h, rate)
        if r.quality_file is not None:
            quality[label] = read_json(r.quality_file, what="measurement quality file")
    result = analyse_arrays(
        items,
        bands=bands,
        filtering=filtering,
        calibration=calibration,
        progress=progress,
        sti=sti,
        layout=layout,
    )
    doc = result.document
    curves = {}
    for p in doc["positions"]:
        label = p["file"]
        r = by_label[label]
        p.update(
            {
                "position": label,
                "source": r.source,
                "receiver": r.receiver,
                "file": study.display_path(r.file),
                "channel": r.channel,
            }
        )
        # Keyed as everywhere else, by the document's (file, channel).
        curves[(p["file"], p["channel"])] = result.curves[(label, 1)]
    result.curves = curves
    doc["study"] = study.as_dict()
    g = measurement_grade(used_combinations(doc))
    doc["grade"] = {
        "name": g.name,
        "sources": g.sources,
        "receivers": g.receivers,
        "combinations": g.combinations,
        "next": g.next_name,
        "needed_for_next": list(g.needed),
        "basis": "ISO 3382-2:2008, Table 1 (numbers from memory)",
    }
    doc["quality"] = {k: _quality_summary(v) for k, v in quality.items()}
    return StudyResults(study, result, irs, quality)


def _quality_summary(q: dict) -> dict:
    rec, ir = q.get("recording", {}), q.get("ir", {})
    rep = q.get("repeats") or {}
    return {
        "peak_dbfs": max(rec.get("peak_dbfs") or [float("nan")]),
        "clipped_samples": int(sum(rec.get("clipped_samples") or [0])),
        "inr_db": min(ir.get("inr_db") or [float("nan")]),
        "repeats": rep.get("count"),
        "repeat_mismatch_db": rep.get("repeat_mismatch_db"),
        "latency_samples": q.get("reference_latency_samples"),
        "warnings": list(q.get("warnings", [])),
        "distortion": _distortion_summary(q),
    }


def _distortion_summary(q: dict) -> dict | None:
    """The harmonic levels of the position's most distorted channel (highest total, or the
    first when no channel has an order above the noise); None without harmonic figures."""
    chans = (q.get("distortion") or {}).get("channels") or []
    if not chans:
        return None
    return max(chans, key=lambda c: -1e9 if c.get("total_db") is None else c["total_db"])
