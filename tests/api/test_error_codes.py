"""The error code catalogue, its documentation and the codes the source raises agree."""

from __future__ import annotations

import ast
import inspect
import re
from pathlib import Path

import boundsvc.errors
from boundsvc.api.codes import SERVICE_CODES, all_codes

REPO = Path(__file__).resolve().parents[2]
DOC = REPO / "docs" / "errors.md"
_ROW = re.compile(r"^\|\s*`([a-z0-9_]+)`\s*\|\s*(\d{3})\s*\|")

#: Callables whose first positional argument is an error code.
_ERROR_TYPES = {
    name
    for name, obj in inspect.getmembers(boundsvc.errors, inspect.isclass)
    if issubclass(obj, boundsvc.errors.BoundsvcError)
}


def documented() -> dict[str, int]:
    rows = [_ROW.match(line) for line in DOC.read_text(encoding="utf-8").splitlines()]
    found = [(m.group(1), int(m.group(2))) for m in rows if m]
    codes = dict(found)
    assert len(codes) == len(found), "a code is documented twice"
    return codes


def test_the_documentation_lists_exactly_the_catalogue() -> None:
    assert documented() == all_codes()


def _callee(node: ast.Call) -> str | None:
    if isinstance(node.func, ast.Name):
        return node.func.id
    if isinstance(node.func, ast.Attribute):
        return node.func.attr
    return None


def _string(node: ast.expr | None) -> str | None:
    return node.value if isinstance(node, ast.Constant) and isinstance(node.value, str) else None


def raised_codes() -> dict[str, list[str]]:
    """Every literal code passed to an error type, ``problem_response`` or ``send_problem``
    in the service (the client package has its own client-side codes)."""
    found: dict[str, list[str]] = {}
    for path in sorted((REPO / "boundsvc").rglob("*.py")):
        if "client" in path.relative_to(REPO / "boundsvc").parts[:1]:
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):
            if not isinstance(node, ast.Call):
                continue
            name = _callee(node)
            code: str | None = None
            if name in _ERROR_TYPES and name != "ProblemNotCovered" and node.args:
                code = _string(node.args[0])
            elif name == "problem_response" and len(node.args) >= 3:
                code = _string(node.args[2])
            elif name == "send_problem" and len(node.args) >= 5:
                code = _string(node.args[4])
            for kw in node.keywords:
                if kw.arg == "code":
                    code = _string(kw.value) or code
            if code is not None:
                found.setdefault(code, []).append(f"{path.relative_to(REPO)}:{node.lineno}")
    return found


def test_every_code_raised_in_the_source_is_in_the_catalogue() -> None:
    found = raised_codes()
    assert found, "the scan found nothing: it is broken"
    assert {
        "unauthorized",
        "forbidden",
        "rate_limited",
        "idempotency_mismatch",
        "certificate_not_found",
        "body_too_large",
    } <= set(found)
    unknown = {code: where for code, where in found.items() if code not in all_codes()}
    assert unknown == {}


def test_service_codes_have_a_status_and_a_meaning() -> None:
    for code, (status, meaning) in SERVICE_CODES.items():
        assert re.fullmatch(r"[a-z][a-z0-9_]*", code), code
        assert 400 <= status <= 599, code
        assert meaning.strip(), code
