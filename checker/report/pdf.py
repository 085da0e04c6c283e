"""The sign-off report as PDF: the HTML report laid out for print by
WeasyPrint (a well-kept HTML/CSS-to-PDF library from the registry; it needs
Pango, which Debian and most Linux systems have), so a sign-off file can be
attached to a release as it is.

The page is the same document the ``--html`` output writes: the report's
print styles (``@page`` margins, page numbers, page breaks before the
finding cards, no split tables rows or pictures) apply. The report has no
external references, so nothing is fetched while it is laid out; the
fetcher refuses every URL but the ``data:`` ones the report embeds (the
traces image of a large board's overview).
"""

from __future__ import annotations

from ..errors import UsageError

INSTALL_HINT = "pip install 'couplint[pdf]' (WeasyPrint; it needs the Pango library of the system)"


def _embedded_only():
    """A URL fetcher that serves the ``data:`` URLs the report embeds (the
    traces image of a large board's overview) and refuses anything else:
    WeasyPrint's ``URLFetcher`` limited to that scheme where the version
    has it, else a function around its default fetcher (older versions)."""
    import weasyprint
    from weasyprint import urls

    if hasattr(urls, "URLFetcher"):
        return urls.URLFetcher(allowed_protocols={"data"})

    def fetch(url: str, *args, **kwargs):  # pragma: no cover - WeasyPrint before the URLFetcher class
        if url.startswith("data:"):
            return weasyprint.default_url_fetcher(url, *args, **kwargs)
        raise ValueError(f"the sign-off report loads nothing from outside ({url[:60]})")

    return fetch


def html_to_pdf(page: str) -> bytes:
    """PDF bytes of an HTML document. Raises :class:`UsageError` when
    WeasyPrint (or the system library it needs) is not installed."""
    try:
        import weasyprint
    except (ImportError, OSError) as exc:  # OSError: WeasyPrint present, Pango missing
        raise UsageError(f"--pdf needs WeasyPrint, which cannot be loaded here ({exc}); {INSTALL_HINT}") from None
    return weasyprint.HTML(string=page, url_fetcher=_embedded_only()).write_pdf()
