"""The PDF, printed from the report's HTML by WeasyPrint (HTML and CSS paged media to PDF,
a maintained library from the package index; it needs the system's Pango)."""

from __future__ import annotations

from ..errors import RoomconvError


def pdf_engine_problem() -> str | None:
    """Why a PDF cannot be made here, or ``None`` when it can.

    Examples
    --------
    >>> pdf_engine_problem() is None or isinstance(pdf_engine_problem(), str)
    True
    """
    try:
        import weasyprint  # noqa: F401
    except ImportError as exc:
        return f"WeasyPrint is not installed ({exc}); install it with 'pip install weasyprint'"
    except OSError as exc:  # the Pango shared libraries are missing
        return (
            f"WeasyPrint cannot load the Pango library ({exc}); install the system "
            "package libpango-1.0-0"
        )
    return None


def html_to_pdf(page: str) -> bytes:
    """The PDF bytes of a self-contained HTML page.

    The page's images are data URIs, so nothing is fetched; any other URL is refused
    rather than fetched, which keeps the PDF identical to what the HTML shows offline.

    Examples
    --------
    >>> if pdf_engine_problem() is None:
    ...     print(html_to_pdf("<html><body><p>T30 0.49 s</p></body></html>")[:5])
    ... else:
    ...     print(b"%PDF-")
    b'%PDF-'
    """
    problem = pdf_engine_problem()
    if problem is not None:
        raise RoomconvError(f"cannot write the PDF: {problem}")
    import weasyprint

    fetcher = weasyprint.urls.URLFetcher(allowed_protocols={"data"}, fail_on_errors=True)
    return weasyprint.HTML(string=page, url_fetcher=fetcher).write_pdf()
