"""The client report from a study file: one HTML source (cover, summary, ISO 3382-2 grade,
method, results, data quality, limits) and the PDF printed from it."""

from __future__ import annotations

from pathlib import Path

from .document import report_html, single_number_rows
from .grade import measurement_grade
from .inputs import StudyResults, analyse_study

__all__ = [
    "StudyResults",
    "analyse_study",
    "measurement_grade",
    "report_html",
    "single_number_rows",
    "write_report",
]


def write_report(
    res: StudyResults, folder, *, force: bool = False, inputs=(), guard=None
) -> list[Path]:
    """Write ``folder/report.html`` and ``folder/report.pdf`` from one page.

    Both outputs are planned before either is written (through ``guard``, the command's
    :class:`~roomconv.audio.WriteGuard`, or one made here from ``inputs`` and ``force``), so
    a refusal leaves nothing half done; the HTML is written only after the PDF has been
    printed from it.

    Examples
    --------
    Not run here (laying out the PDF takes several seconds); ``tests/report/`` runs it. A
    typical call, with ``res`` from :func:`roomconv.report.inputs.analyse_study`::

        write_report(res, "report/")    # [report/report.html, report/report.pdf]
    """
    from ..audio import WriteGuard
    from .pdf import html_to_pdf

    own = guard is None
    if own:
        guard = WriteGuard(inputs, force=force)
    try:
        folder = guard.folder(folder)
        html_path, pdf_path = folder / "report.html", folder / "report.pdf"
        for p in (html_path, pdf_path):
            if not guard.planned(p):
                guard.file(p)
        page = report_html(res)
        pdf = html_to_pdf(page)
        with guard.target(pdf_path) as tmp:
            tmp.write_bytes(pdf)
        guard.write_text(html_path, page)
    except BaseException:
        if own:
            guard.rollback()
        raise
    finally:
        if own:
            guard.close()
    return [html_path, pdf_path]
