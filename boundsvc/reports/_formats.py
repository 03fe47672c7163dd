"""Names shared by the report modules that must stay cheap to import (no matplotlib)."""

from __future__ import annotations

from typing import Literal

ImageFormat = Literal["png", "svg"]
MEDIA_TYPES: dict[str, str] = {"png": "image/png", "svg": "image/svg+xml"}
#: The static files of the dashboard and their media types.
STATIC_FILES: dict[str, str] = {"boundsvc.css": "text/css", "dashboard.js": "text/javascript"}
