"""Closed-form validation cases: every family against exact solutions of the literature.

Each public module of this package holds one family's ``CASES`` (a tuple of
:class:`~validation.closed_form._case.ClosedFormCase`); adding a family is adding a module.
``python -m validation.closed_form`` certifies every case at every perturbation size through the
in-process HTTP service and writes ``docs/theory/validation.md``; the test
``tests/families/test_closed_form_table.py`` runs the same cases and asserts the bound is never
below the true error.
"""

from __future__ import annotations

import importlib
import pkgutil

from validation.closed_form._case import ClosedFormCase
from validation.closed_form._truth import TrueError, true_error

#: catalogue families whose closed-form module is being written by the family's author; the
#: acceptance test reports them as expected failures (visible, never silently passing) and fails
#: once a module gives them cases while they are still listed here
PENDING: dict[str, str] = {}


def family_modules() -> list[str]:
    """The public modules of the package (one per family), sorted by name."""
    return sorted(m.name for m in pkgutil.iter_modules(__path__) if not m.name.startswith("_"))


def all_cases() -> tuple[ClosedFormCase, ...]:
    """Every case of every family module, in module then declaration order."""
    cases: list[ClosedFormCase] = []
    for name in family_modules():
        cases.extend(importlib.import_module(f"{__name__}.{name}").CASES)
    keys = [c.key for c in cases]
    duplicated = {k for k in keys if keys.count(k) > 1}
    if duplicated:
        raise ValueError(f"duplicate case keys: {sorted(duplicated)}")
    return tuple(cases)


__all__ = ["PENDING", "ClosedFormCase", "TrueError", "all_cases", "family_modules", "true_error"]
