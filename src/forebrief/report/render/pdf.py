"""The briefing as PDF with WeasyPrint, offline: no network address is ever fetched."""

from __future__ import annotations

import datetime as dt
import io
from collections.abc import Mapping
from typing import Any

from forebrief.errors import ConfigError

__all__ = ["OfflineFetcher", "render_pdf"]


def _fetcher_class() -> Any:
    try:
        from weasyprint.urls import FatalURLFetchingError, URLFetcher
    except ImportError as exc:  # pragma: no cover - weasyprint is a dependency
        raise ConfigError("WeasyPrint is needed for the PDF; fix: pip install weasyprint") from exc

    class OfflineFetcher(URLFetcher):
        """Loads only data: URIs and local files; refuses every network address."""

        def __init__(self) -> None:
            super().__init__(timeout=5, allowed_protocols={"data", "file"}, fail_on_errors=False)

        def fetch(self, url: str, headers: Any = None) -> Any:
            scheme = url.split(":", 1)[0].lower()
            if scheme not in ("data", "file"):
                raise FatalURLFetchingError(
                    f"refused to fetch {url!r}: the briefing is rendered offline"
                )
            return super().fetch(url, headers)

    return OfflineFetcher


def OfflineFetcher() -> Any:
    return _fetcher_class()()


def render_pdf(
    html: str,
    *,
    pdf_variant: str | None = None,
    attachments: Mapping[str, bytes] | None = None,
    identifier: bytes | None = None,
    created: dt.datetime | None = None,
) -> bytes:
    """Render print HTML to PDF bytes, deterministic for the same input.

    ``pdf_variant="pdf/a-3b"`` gives the archival PDF/A-3b; ``attachments`` (name -> bytes) are
    embedded as associated files with relationship "Data" (ISO 19005-3 allows any format).
    """
    try:
        from weasyprint import HTML, Attachment
    except ImportError as exc:  # pragma: no cover
        raise ConfigError("WeasyPrint is needed for the PDF; fix: pip install weasyprint") from exc
    doc = HTML(string=html, base_url=None, url_fetcher=OfflineFetcher())  # nothing fetched yet
    kwargs: dict[str, Any] = {}
    if pdf_variant:
        kwargs["pdf_variant"] = pdf_variant
    if attachments:
        kwargs["attachments"] = [
            Attachment(
                file_obj=io.BytesIO(data),
                name=name,
                relationship="Data",
                description=f"{name}, as archived in the record",
                created=created,
                modified=created,
            )
            for name, data in attachments.items()
        ]
    if identifier:
        kwargs["pdf_identifier"] = identifier
    from weasyprint.urls import FatalURLFetchingError

    try:
        out = doc.write_pdf(**kwargs)
    except FatalURLFetchingError as exc:  # a BaseException: turn it into our clear error
        raise ConfigError(
            f"the briefing's templates refer to a resource that would be fetched over the "
            f"network ({exc}); fix: embed it (a data: URI) or point to a local file in "
            "[briefing] templates_dir"
        ) from None
    assert out is not None
    return bytes(out)
