"""The client's public names, and the promise that it stays light."""

from __future__ import annotations

import subprocess
import sys

import boundsvc.client

EXPORTED = {
    "DEFAULT_TIMEOUT",
    "DEFAULT_URL",
    "AsyncBoundsvcClient",
    "BoundRecord",
    "BoundsvcClient",
    "BoundsvcClientError",
    "CertifyEvery",
    "ComponentPoints",
    "FieldEvaluator",
    "MLPFields",
    "Plan",
    "PlanEvaluator",
    "Report",
    "RetryPolicy",
    "ServiceUnavailable",
    "encode_residuals",
    "residuals_from_fields",
}


def test_exported_names_are_pinned() -> None:
    assert set(boundsvc.client.__all__) == EXPORTED
    for name in EXPORTED:
        assert hasattr(boundsvc.client, name)


def test_client_and_cli_import_neither_sympy_scipy_torch_nor_the_server() -> None:
    heavy = [
        "sympy",
        "scipy",
        "torch",
        "fastapi",
        "sqlalchemy",
        "uvicorn",
        "boundsvc.api",
        "boundsvc.families",
        "boundsvc.store",
        "boundsvc.certify",
        "boundsvc.expr",
    ]
    code = (
        "import sys\n"
        "import boundsvc.client, boundsvc.client.adapters, boundsvc.client.training\n"
        "import boundsvc.client.torch\n"  # the module itself; torch is imported on use only
        "import boundsvc.cli.gate, boundsvc.cli.remote\n"
        f"loaded = [m for m in {heavy!r} if m in sys.modules]\n"
        "assert not loaded, loaded\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True, timeout=60)
