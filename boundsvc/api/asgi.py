"""ASGI entry point for ``uvicorn --factory boundsvc.api.asgi:create_app`` (one per worker)."""

from __future__ import annotations

from fastapi import FastAPI

from boundsvc.api.app import build_app


def create_app() -> FastAPI:
    """Build the app from the environment's settings."""
    return build_app()
