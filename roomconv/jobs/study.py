"""Study-file jobs: write a template or a session's study file, check one, and analyse the
responses a study file names into the client report (HTML and PDF)."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from ..errors import InputError
from ..study import StudyFile, load_study
from .guard import guarded
from .progress import ProgressCallback, silent

if TYPE_CHECKING:
    from ..report import StudyResults

__all__ = [
    "init_study",
    "save_session_study",
    "save_workbench_session",
    "write_study_file",
    "check_study",
    "StudyCheck",
    "report_study",
    "StudyReportResult",
]


def _refuse_non_toml(path: Path) -> None:
    if path.suffix.lower() != ".toml":
        raise InputError(f"{path}: a study file ends in .toml; choose a name such as study.toml")


def init_study(path, *, title: str = "Acoustic measurements", force: bool = False) -> Path:
    """Write a commented study-file template to ``path`` (never over a file without
    ``force``).

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> init_study(d / "study.toml").name
    'study.toml'
    >>> init_study(d / "study.toml")
    Traceback (most recent call last):
    ...
    roomconv.errors.OutputExistsError: ...
    >>> tmp.cleanup()
    """
    from ..study import template_text

    path = Path(path)
    _refuse_non_toml(path)
    with guarded(force=force) as g:
        g.file(path)
        return g.write_text(path, template_text(title))


def save_session_study(
    path, positions, *, title: str = "Workbench session", force: bool = False
) -> Path:
    """Write a study file for responses measured in one session.

    Parameters
    ----------
    path : path-like
        The study file; its folder is created when missing.
    positions : sequence of (name, file, quality file or None)
        Each becomes a receiver of source S1; paths are written relative to the study file.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> soundfile.write(d / "pos1.wav", 0.5 * h, rate, subtype="DOUBLE")
    >>> path = save_session_study(d / "session.toml", [("R1", d / "pos1.wav", None)])
    >>> [(r.source, r.receiver) for r in check_study(path).study.responses]
    [('S1', 'R1')]
    >>> tmp.cleanup()
    """
    from ..study import session_study_text

    path = Path(path)
    _refuse_non_toml(path)
    files = [p[1] for p in positions] + [p[2] for p in positions if p[2] is not None]
    with guarded(files, force=force) as g:
        folder = g.make_folder(g.folder(path.parent if str(path.parent) else Path(".")))
        g.file(path)
        return g.write_text(path, session_study_text(title, positions, folder))


def save_workbench_session(
    path,
    positions,
    *,
    title: str = "Workbench session",
    notes: str = "",
    room: dict | None = None,
    sweep: dict | None = None,
    workbench: dict | None = None,
    force: bool = False,
) -> Path:
    """Write a whole workbench session as a study file (see
    :func:`roomconv.study.workbench_session_text`); it is checked to load back before
    anything is written, and an existing file is replaced only with ``force``.

    Parameters
    ----------
    path : path-like
        The study file; its folder is created when missing.
    positions : sequence of (name, file, quality file or None)
        At least one.
    notes, room, sweep, workbench
        As :func:`roomconv.study.workbench_session_text` takes them.
    """
    from ..study import parse_study, workbench_session_text

    path = Path(path)
    _refuse_non_toml(path)
    if not positions:
        raise InputError(f"{path}: a session needs at least one measured position to be saved")
    files = [p[1] for p in positions] + [p[2] for p in positions if p[2] is not None]
    with guarded(files, force=force) as g:
        folder = g.folder(path.parent if str(path.parent) else Path("."))
        g.file(path)
        text = workbench_session_text(
            title, positions, folder, notes=notes, room=room, sweep=sweep, workbench=workbench
        )
        parse_study(text, path)
        g.make_folder(folder)
        return g.write_text(path, text)


@dataclass
class StudyCheck:
    """A study file as loaded, and the response files it names that do not exist.

    Examples
    --------
    See :func:`check_study`, which returns one.
    """

    study: StudyFile
    missing: list[str] = field(default_factory=list)


def check_study(path) -> StudyCheck:
    """Load and validate a study file and look for the responses it names.

    Examples
    --------
    The template names two responses that do not exist yet:

    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> check_study(init_study(d / "study.toml")).missing
    ['S1R1.wav', 'S1R2.wav']
    >>> tmp.cleanup()
    """
    s = load_study(path)
    return StudyCheck(s, [s.display_path(r.file) for r in s.responses if not r.file.is_file()])


@dataclass
class StudyReportResult:
    """The study's results (:class:`roomconv.report.StudyResults`) and the files written.

    Examples
    --------
    See :func:`report_study`, which returns one.
    """

    results: StudyResults
    written: list[Path] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    @property
    def document(self) -> dict:
        """The analysis' JSON document (the same layout ``analyze --json`` writes)."""
        return self.results.analysis.document

    @property
    def errors(self) -> list[str]:
        """The responses that could not be read or analysed, one message each."""
        return self.results.analysis.errors


class _Counter:
    """Adapts the analysis' per-response ``update(n)`` to the progress protocol."""

    def __init__(self, total: int, progress: ProgressCallback):
        self.total, self.done, self.progress = max(total, 1), 0.0, progress

    def update(self, n: float = 1) -> None:
        self.done += n
        self.progress("analyse", min(1.0, self.done / self.total), None)


def _add_office(st: StudyFile, doc: dict) -> None:
    """A study file with an ``[office]`` table gets the office line (ISO 3382-3) in its
    document and report; when it cannot be made the notes say why."""
    if st.office is None:
        return
    from .office import office_document

    try:
        doc["office"] = office_document(st)
    except InputError as exc:
        doc.setdefault("notes", []).append(f"open-plan office evaluation not made: {exc}")


def report_study(
    study_path,
    *,
    bands: str = "octave",
    filtering: str = "auto",
    calibration: str | None = None,
    json_path=None,
    csv_path=None,
    report_dir=None,
    force: bool = False,
    require_pdf: bool = True,
    sofa_file=None,
    progress: ProgressCallback = silent,
    sti=None,
) -> StudyReportResult:
    """Analyse every response a study file names (each one position) and write the files.

    Parameters
    ----------
    study_path : path-like
        The study file (see :func:`init_study`).
    bands : {"octave", "third"}
    filtering : {"auto", "forward", "reverse"}
    calibration : str, optional
        A strength reference file from the calibration job, or one level in dB.
    json_path, csv_path : path-like, optional
    report_dir : path-like, optional
        Folder for ``report.html`` and ``report.pdf`` (both from one page).
    require_pdf : bool
        With no PDF engine installed, refuse before any analysis (True), or write the HTML
        alone and say why in ``notes`` (False).
    sti : SpeechConditions, optional
        Adds the STI per position and averaged (:func:`roomconv.jobs.speech.speech_conditions`).
    force : bool
        Replace existing outputs (never an input).
    sofa_file : path-like, optional
        A SOFA file of the same responses written before (``roomconv export``); the
        report's method section names it.

    Examples
    --------
    Not run here (the PDF takes several seconds); ``tests/test_study_jobs.py`` runs it. A
    typical call::

        res = report_study("study.toml", report_dir="report/", json_path="results.json")
        res.written    # report.html, report.pdf, results.json
    """
    from ..analysis.report import csv_text
    from ..analysis.study import parse_calibration
    from ..report import analyse_study, write_report
    from ..report.pdf import pdf_engine_problem

    st = load_study(study_path)
    inputs = [Path(study_path)] + [r.file for r in st.responses]
    with guarded(inputs, force=force) as g:
        # Every output is planned against every input before any analysis.
        if calibration is not None and Path(calibration).is_file():
            g.add_input(calibration)
        for f in () if sti is None else sti.source_files:
            g.add_input(f)
        if st.office is not None and st.office.calibration is not None:
            g.add_input(st.office.calibration)
        for p in (json_path, csv_path):
            if p is not None:
                g.file(p)
        problem = pdf_engine_problem() if report_dir is not None else None
        if problem is not None and require_pdf:
            raise InputError(f"report folder {report_dir}: cannot write the PDF: {problem}")
        if report_dir is not None:
            folder = g.folder(report_dir)
            for name in ("report.html",) + (("report.pdf",) if problem is None else ()):
                g.file(folder / name)
        cal = parse_calibration(calibration)
        res = analyse_study(
            st,
            bands=bands,
            filtering=filtering,
            calibration=cal,
            progress=_Counter(len(st.responses), progress),
            sti=sti,
        )
        doc = res.analysis.document
        _add_office(st, doc)
        if sofa_file is not None:
            doc["settings"]["sofa_file"] = st.display_path(Path(sofa_file).absolute())
        written: list[Path] = []
        if json_path is not None:
            written.append(g.write_json(json_path, doc))
        if csv_path is not None:
            written.append(g.write_text(csv_path, csv_text(doc)))
        notes = []
        if report_dir is not None and problem is None:
            written += write_report(res, report_dir, guard=g)
        elif report_dir is not None:
            from ..report import report_html

            g.make_folder(folder)
            written.append(g.write_text(folder / "report.html", report_html(res)))
            notes.append(f"{folder / 'report.pdf'} not written: {problem}")
    return StudyReportResult(res, written, notes)


def write_study_file(path, text: str, *, force: bool = False) -> Path:
    """Write a study file composed by the caller (the demo's scenario); text that would not
    load as a study file is refused before anything is written.

    Examples
    --------
    >>> from roomconv.study import template_text
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> write_study_file(d / "study.toml", template_text("Hall B")).name
    'study.toml'
    >>> write_study_file(d / "bad.toml", "title = [unclosed")
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: ...
    >>> (d / "bad.toml").exists()
    False
    >>> tmp.cleanup()
    """
    from ..study import parse_study

    path = Path(path)
    _refuse_non_toml(path)
    with guarded(force=force) as g:
        g.file(path)
        parse_study(text, path)
        return g.write_text(path, text)
