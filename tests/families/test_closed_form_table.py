"""Issue 3 acceptance: every family against closed-form solutions of the literature.

The cases live in ``validation/closed_form/`` (one module per family; each case names its
published source, shown in every assertion message). For each case and each perturbation size
the surrogate ``u_exact + eps * phi`` is certified through the HTTP contract on the in-process
app, and the bound must lie above the true error (fine Gauss-Legendre rule) in space-time, at
the final time and at every time of the profile (steady: L2 in space). The generated table
``docs/theory/validation.md`` must list exactly the registry's cases.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from pathlib import Path

import pytest

from boundsvc.families import CATALOGUE
from validation.closed_form import PENDING, ClosedFormCase, all_cases
from validation.closed_form._checks import exact_residual_max, regularity_violations
from validation.closed_form._report import listed_cases
from validation.closed_form._runner import ROUNDING, CaseResult, in_process_service, run_case
from validation.service import RawApi

CASES = all_cases()
DOC = Path(__file__).resolve().parents[2] / "docs" / "theory" / "validation.md"


@pytest.fixture(scope="module")
def api() -> Iterator[RawApi]:
    with in_process_service() as service:
        yield service


@pytest.mark.parametrize("case", CASES, ids=[c.key for c in CASES])
def test_case_data_matches_its_closed_form(case: ClosedFormCase) -> None:
    """The hypotheses the certificates rest on: the exact solution solves the equation, and
    every regularity value dominates the closed form's sampled value (model values: phi's)."""
    assert exact_residual_max(case) <= 1e-9, case.source
    assert regularity_violations(case) == [], case.source
    assert case.source and case.title


@pytest.mark.parametrize(
    ("case", "eps"),
    [(c, e) for c in CASES for e in c.epsilons],
    ids=[f"{c.key}-eps{e:g}" for c in CASES for e in c.epsilons],
)
def test_bound_is_never_below_the_true_error(api: RawApi, case: ClosedFormCase, eps: float) -> None:
    result: CaseResult = run_case(api, case, eps)
    cert = result.certificate
    where = f"{case.key} (source: {case.source}), eps={eps:g}"
    assert cert["family"] == case.family, where
    assert result.status == case.expected_status, (where, cert["warnings"])
    assert result.violations() == [], where
    if case.expected_status == "valid":
        for name, bound, truth in result.pairs():
            assert bound is not None and math.isfinite(bound), (where, name)
            assert truth > 0, (where, name)  # a zero truth would make the check empty
    if case.time is not None:
        assert len(result.profile) >= 2, where
        # at t0 the bound is the norm of the initial residual (the error itself) by the plan's
        # coarse quadrature and its error allowance: sharp to well within 1 %
        t0, b0, e0 = result.profile[0]
        assert t0 == pytest.approx(case.time[0]) and b0 is not None, where
        assert e0 * (1 - ROUNDING) <= b0, where
        if case.sharp_initial:
            assert b0 <= 1.01 * e0, where


@pytest.mark.parametrize("family", [f.id for f in CATALOGUE])
def test_every_family_has_three_solutions_at_three_sizes(family: str) -> None:
    """The acceptance rule of issue 3, for every family of the catalogue: >= 3 closed-form
    solutions with distinct sources, each at >= 3 perturbation sizes."""
    cases = [c for c in CASES if c.family == family]
    if family in PENDING:
        assert not cases, f"{family} has cases now: remove it from PENDING"
        pytest.xfail(PENDING[family])
    assert len({c.key for c in cases}) >= 3, f"{family}: add a validation/closed_form module"
    assert len({c.source for c in cases}) >= 3, family
    assert all(len(set(c.epsilons)) >= 3 for c in cases), family


def test_registry_families_are_catalogued() -> None:
    assert {c.family for c in CASES} <= {f.id for f in CATALOGUE}
    assert set(PENDING) <= {f.id for f in CATALOGUE}


def test_generated_document_lists_exactly_the_registry() -> None:
    """docs/theory/validation.md cannot silently go stale: its rows are the registry's
    (case, eps) pairs (the numbers are not compared). Regenerate with
    ``python -m validation.closed_form``."""
    text = DOC.read_text(encoding="utf-8")
    expected = {(c.key, float(e)) for c in CASES for e in c.epsilons}
    assert listed_cases(text) == expected
    for family in {c.family for c in CASES}:
        assert f"## `{family}`" in text
