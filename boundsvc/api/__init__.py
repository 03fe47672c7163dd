"""The HTTP layer: app factory, routes, error mapping."""

from boundsvc.api.app import build_app

__all__ = ["build_app"]
