"""Request-scoped collaborators: settings, store, caller identity."""

from __future__ import annotations

from dataclasses import dataclass
from typing import cast

from fastapi import Request

from boundsvc.settings import Settings
from boundsvc.store import Store

OPEN_PROJECT = "default"


@dataclass(frozen=True)
class Caller:
    """Who is calling: the project whose certificates they see, and their scopes."""

    project: str | None
    scopes: frozenset[str]
    key_id: str | None = None

    @property
    def write_project(self) -> str:
        return self.project or OPEN_PROJECT


def get_store(request: Request) -> Store:
    return cast(Store, request.app.state.store)


def get_settings_dep(request: Request) -> Settings:
    return cast(Settings, request.app.state.settings)


def get_caller(request: Request) -> Caller:
    caller = getattr(request.state, "caller", None)
    if caller is None:
        return Caller(project=None, scopes=frozenset({"read", "write"}))
    return cast(Caller, caller)
