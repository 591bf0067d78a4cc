"""Exceptions of the API stage: requests that cannot be served and delivery that failed."""

from __future__ import annotations

from tecfleet.ingest.errors import TecfleetError

__all__ = ["CursorError", "WebhookError"]


class WebhookError(TecfleetError):
    """A webhook cannot be registered or delivered (bad URL, refused address, HTTP failure)."""


class CursorError(TecfleetError, ValueError):
    """A page cursor that this service did not hand out, or that no longer decodes."""
