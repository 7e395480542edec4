"""The client report from a study file: one HTML source (cover, summary, ISO 3382-2 grade,
method, results, data quality, limits) and the PDF printed from it."""

from __future__ import annotations

from pathlib import Path

from .document import report_html, single_number_rows
from .grade import measurement_grade
from .inputs import StudyResults, analyse_study

__all__ = ["StudyResults", "analyse_study", "measurement_grade", "report_html",
           "single_number_rows", "write_report"]


def write_report(res: StudyResults, folder, *, force: bool = False, inputs=()) -> list[Path]:
    """Write ``folder/report.html`` and ``folder/report.pdf`` from one page.

    Both outputs are checked before either is written, so a refusal leaves nothing half
    done; the HTML is written only after the PDF has been printed from it.
    """
    from ..audio import atomic_path, check_output, write_text
    from .pdf import html_to_pdf
    folder = Path(folder)
    html_path, pdf_path = folder / "report.html", folder / "report.pdf"
    for p in (html_path, pdf_path):
        check_output(p, force=force, inputs=inputs)
    page = report_html(res)
    pdf = html_to_pdf(page)
    with atomic_path(pdf_path, force=force, inputs=inputs) as tmp:
        tmp.write_bytes(pdf)
    write_text(html_path, page, force=force, inputs=inputs)
    return [html_path, pdf_path]
