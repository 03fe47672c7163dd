"""The fuzz harnesses' seed corpus and every input they found, as regression tests.

``fuzz/corpus/<harness>/`` holds the seeds and the findings of ``make fuzz`` (``regress-*``).
Each file is replayed through the harness's own ``check`` (no exception but our refusals,
within the per-input budget; for the grammar, no string evaluation); the finding that was a
500 is also replayed over HTTP.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from pathlib import Path

import pytest

from boundsvc.api import build_app
from boundsvc.settings import Settings
from boundsvc.store import open_store
from fuzz import fuzz_expr, fuzz_request
from fuzz._common import CORPUS, timed
from tests.expr.test_hostile import no_string_evaluation
from tests.inprocess import InProcessClient

HARNESSES: dict[str, tuple[Callable[[], None], Callable[[bytes], None]]] = {
    # the harness' process-wide tripwires are replaced by the scoped guard of test_hostile
    "expr": (lambda: fuzz_expr.setup(tripwires=False), fuzz_expr.check),
    "request": (fuzz_request.setup, fuzz_request.check),
}
CASES = [
    pytest.param(name, path, id=f"{name}/{path.name}")
    for name in HARNESSES
    for path in sorted((CORPUS / name).iterdir())
]


@pytest.fixture(scope="module")
def ready() -> set[str]:
    return set()


@pytest.mark.parametrize(("name", "path"), CASES)
def test_corpus_input_is_refused_or_accepted_quickly(
    name: str, path: Path, ready: set[str]
) -> None:
    setup, check = HARNESSES[name]
    if name not in ready:
        setup()
        ready.add(name)
    if name == "expr":
        with no_string_evaluation():
            timed(check)(path.read_bytes())
    else:  # numpy reads .npy headers with ast.literal_eval (compile(), evaluates nothing)
        timed(check)(path.read_bytes())


def test_corpus_has_seeds_and_findings() -> None:
    assert len(list((CORPUS / "expr").iterdir())) >= 20
    assert len(NPZ_FINDINGS) >= 5


@pytest.fixture
def client(tmp_path: Path) -> Iterator[InProcessClient]:
    store = open_store(f"sqlite:///{tmp_path / 'corpus.sqlite3'}")
    app = build_app(Settings(database_url="unused", log_level="critical"), store)
    opened = InProcessClient(app, raise_server_exceptions=False)
    yield opened
    opened.close()
    store.dispose()


NPZ_FINDINGS = sorted((CORPUS / "request").glob("regress-npz-*"))


@pytest.mark.parametrize("path", NPZ_FINDINGS, ids=[p.name for p in NPZ_FINDINGS])
def test_damaged_npz_upload_is_422_not_500(client: InProcessClient, path: Path) -> None:
    """Found by fuzz/fuzz_request.py: a CRC error, an unknown compression method, an
    encryption flag, an unsupported zip version and a ``request`` member stored without
    ``.npy`` escaped ``_decode_npz`` (five 500s)."""
    response = client.post(
        "/v1/certificates/upload",
        content=path.read_bytes(),
        headers={"content-type": "application/x-npz"},
    )
    assert response.status_code == 422, response.text
    assert response.json()["code"] in ("residual_encoding", "validation_error")
