"""Opaque keyset-pagination cursors over ``(created_at, id)``.

A cursor is the URL-safe base64 (no padding) of ``"1|<created_at ISO 8601>|<id>"``.  It
carries only a position: filters and project visibility are re-applied on every page, so
a forged cursor can skip rows but never reveal rows the caller may not see.
"""

from __future__ import annotations

import base64
import binascii
from datetime import UTC, datetime

from ._errors import InvalidCursor

__all__ = ["MAX_CURSOR_LENGTH", "decode_cursor", "encode_cursor"]

MAX_CURSOR_LENGTH = 1024
_VERSION = "1"


def encode_cursor(created_at: datetime, row_id: str) -> str:
    """Encode the position just after the row ``(created_at, row_id)``."""
    raw = f"{_VERSION}|{created_at.astimezone(UTC).isoformat()}|{row_id}".encode()
    return base64.urlsafe_b64encode(raw).decode("ascii").rstrip("=")


def decode_cursor(cursor: str) -> tuple[datetime, str]:
    """Decode a cursor made by :func:`encode_cursor`; raise :class:`InvalidCursor`."""
    if not cursor or len(cursor) > MAX_CURSOR_LENGTH:
        raise InvalidCursor("malformed pagination cursor")
    try:
        padded = cursor + "=" * (-len(cursor) % 4)
        raw = base64.urlsafe_b64decode(padded.encode("ascii")).decode("utf-8")
        version, stamp, row_id = raw.split("|", 2)
        created_at = datetime.fromisoformat(stamp)
    except (ValueError, UnicodeError, binascii.Error) as exc:
        raise InvalidCursor("malformed pagination cursor") from exc
    if version != _VERSION or not row_id or created_at.tzinfo is None:
        raise InvalidCursor("malformed pagination cursor")
    return created_at.astimezone(UTC), row_id
