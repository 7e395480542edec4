"""Analysis jobs: ISO 3382 parameters of a set of responses, written as JSON, CSV and an
HTML report; and exporting a study already computed."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

from ..analysis.study import Study, analyse_files, parse_calibration
from ..audio import WriteGuard, audio_info
from ..errors import InputError
from .guard import guarded
from .naming import study_outputs
from .progress import ProgressCallback, silent

__all__ = ["analyze_study", "export_study", "write_study", "AnalyzeResult"]


@dataclass
class AnalyzeResult:
    """The study and the files written; ``errors`` name the responses that could not be
    read (the outputs hold the others).

    Examples
    --------
    See :func:`analyze_study`, which returns one.
    """

    study: Study
    written: list[Path] = field(default_factory=list)

    @property
    def errors(self) -> list[str]:
        """The responses that could not be read or analysed, one message each."""
        return self.study.errors


class _Counter:
    """Adapts the analysis' per-channel ``update(n)`` to the progress protocol."""

    def __init__(self, total: int, progress: ProgressCallback):
        self.total, self.done, self.progress = max(total, 1), 0.0, progress

    def update(self, n: float = 1) -> None:
        self.done += n
        self.progress("analyse", min(1.0, self.done / self.total), None)


def _write(
    g: WriteGuard,
    study: Study,
    json_path,
    csv_path,
    report_file,
    report_options: dict | None = None,
) -> list[Path]:
    from ..analysis.report import csv_text, html_report

    written = []
    if json_path is not None:
        written.append(g.write_json(json_path, study.document))
    if csv_path is not None:
        written.append(g.write_text(csv_path, csv_text(study.document)))
    if report_file is not None:
        written.append(g.write_text(report_file, html_report(study, **(report_options or {}))))
    return written


def write_study(
    study: Study,
    *,
    json_path=None,
    csv_path=None,
    report_file=None,
    report_options: dict | None = None,
    provenance: dict | None = None,
    inputs=(),
    force: bool = False,
) -> list[Path]:
    """Write a study computed earlier (and perhaps annotated by the caller).

    Parameters
    ----------
    json_path, csv_path, report_file : path-like, optional
    report_options : dict, optional
        Title, extra sections and series for :func:`roomconv.analysis.report.html_report`.
    provenance : dict, optional
        Settings for a provenance sidecar beside each file written (files sharing a stem
        share one sidecar).
    inputs : sequence of path-like
        Files no output may replace.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> soundfile.write(d / "pos1.wav", 0.5 * h, rate, subtype="DOUBLE")
    >>> study = analyze_study([d / "pos1.wav"]).study
    >>> [p.name for p in write_study(study, csv_path=d / "results.csv")]
    ['results.csv']
    >>> tmp.cleanup()
    """
    from ..audio import sidecar_path, write_provenance

    with guarded(inputs, force=force) as g:
        targets = [p for p in (json_path, csv_path, report_file) if p is not None]
        sides = []
        for p in targets:
            g.file(p)
            side = sidecar_path(p, "provenance")
            if provenance is not None and side not in sides:
                g.file(side)
                sides.append(side)
        written = _write(g, study, json_path, csv_path, report_file, report_options)
        done = set()
        for p in targets:
            side = sidecar_path(p, "provenance")
            if provenance is not None and side not in done:
                written.append(write_provenance(p, [], provenance, guard=g))
                done.add(side)
    return written


def analyze_study(
    irs: Sequence,
    *,
    bands: str = "octave",
    filtering: str = "auto",
    calibration: str | None = None,
    json_path=None,
    csv_path=None,
    report_dir=None,
    force: bool = False,
    progress: ProgressCallback = silent,
    sti=None,
    channels: str | None = None,
    binaural: bool = False,
    stage: bool = False,
) -> AnalyzeResult:
    """Analyse every channel of every response as a position, average, and write the files.

    Parameters
    ----------
    irs : sequence of path-like
        Impulse responses; every channel is its own position.
    bands : {"octave", "third"}
    filtering : {"auto", "forward", "reverse"}
    calibration : str, optional
        A strength reference file from the calibration job, or one level in dB.
    json_path, csv_path : path-like, optional
    report_dir : path-like, optional
        Folder for ``report.html`` (created only when the page is written).
    force : bool
        Replace existing outputs (never an input).
    sti : SpeechConditions, optional
        Adds the STI (IEC 60268-16) per position and averaged; see
        :func:`roomconv.jobs.speech.speech_conditions`.
    channels : {"omni,fig8", "fig8,omni", "acn-sn3d"}, optional
        Each file is one position of two channels (omni and figure-of-eight) or a first-order
        ambisonic response (ACN/SN3D): adds J_LF, J_LFC and L_J.
    binaural : bool
        Each file is one position of two ear channels (left, right): adds IACC.
    stage : bool
        Every channel is a response 1 m from the source on stage: adds ST_early, ST_late.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> soundfile.write(d / "pos1.wav", 0.5 * h, rate, subtype="DOUBLE")
    >>> res = analyze_study([d / "pos1.wav"], json_path=d / "results.json")
    >>> [p.name for p in res.written], res.errors
    (['results.json'], [])
    >>> round(res.study.document["average"]["single_numbers"]["t30_mid_s"], 1)
    0.5
    >>> tmp.cleanup()
    """
    from ..analysis.layouts import parse_layout

    inputs = [Path(p) for p in irs]
    layout = parse_layout(channels, binaural, stage)
    if layout is not None:
        if bands != "octave":
            raise InputError(
                f"the {layout.text} parameters are defined in octave bands (ISO 3382-1); "
                f"use octave bands, not {bands}"
            )
        for ir in inputs:
            try:
                count = audio_info(ir).channels
            except Exception:  # noqa: BLE001 - unreadable files are reported by the analysis
                continue
            layout.check(ir, count)
    with guarded(inputs, force=force) as g:
        # Every output is planned against every input, a calibration file included, before
        # any analysis.
        if calibration is not None and Path(calibration).is_file():
            g.add_input(calibration)
        for f in () if sti is None else sti.source_files:
            g.add_input(f)
        report_file = g.folder(report_dir) / "report.html" if report_dir is not None else None
        for p in (json_path, csv_path, report_file):
            if p is not None:
                g.file(p)
        cal = parse_calibration(calibration)
        total = 0
        for p in inputs:
            try:
                total += audio_info(p).channels
            except Exception:  # noqa: BLE001 - unreadable files are reported by the analysis
                total += 1
        study = analyse_files(
            inputs,
            bands=bands,
            filtering=filtering,
            calibration=cal,
            progress=_Counter(total, progress),
            sti=sti,
            layout=layout,
        )
        # A page of results alone: no playback caution (pages that offer sound add it).
        written = _write(g, study, json_path, csv_path, report_file, {"cautions": False})
    return AnalyzeResult(study, written)


def export_study(study: Study, folder, *, force: bool = False) -> list[Path]:
    """Write a study already computed as ``results.json``, ``results.csv`` and
    ``report.html`` in ``folder`` (created when missing).

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> soundfile.write(d / "pos1.wav", 0.5 * h, rate, subtype="DOUBLE")
    >>> study = analyze_study([d / "pos1.wav"]).study
    >>> [p.name for p in export_study(study, d / "export")]
    ['results.json', 'results.csv', 'report.html']
    >>> tmp.cleanup()
    """
    names = study_outputs(folder)
    with guarded(
        [p["file"] for p in study.document["positions"] if Path(p["file"]).is_file()], force=force
    ) as g:
        g.folder(folder)
        for p in names.values():
            g.file(p)
        return _write(g, study, names["json"], names["csv"], names["report"], {"cautions": False})
