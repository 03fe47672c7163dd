"""A valid certificate request (heat equation), built through the API like a client would."""

from __future__ import annotations

import random
from typing import Any

import httpx

HEAT_PROBLEM: dict[str, Any] = {
    "equation": "u_t = k*u_xx",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 0.5],
    "parameters": {"k": 0.4},
}
POINTS = {"t": 8, "x": 8}


def prepare(
    client: httpx.Client | Any,
    headers: dict[str, str] | None = None,
) -> tuple[dict[str, float], dict[str, Any]]:
    """POST the problem and a plan; return ``(regularity, plan)``."""
    problem = client.post("/v1/problems", json={"problem": HEAT_PROBLEM}, headers=headers)
    assert problem.status_code == 200, problem.text
    regularity = {key: 3.0 for key in problem.json()["required_regularity"]}
    plan = client.post(
        "/v1/plans", json={"problem": HEAT_PROBLEM, "points": POINTS}, headers=headers
    )
    assert plan.status_code == 201, plan.text
    return regularity, plan.json()


def certificate_body(
    regularity: dict[str, float],
    plan: dict[str, Any],
    rng: random.Random,
    *,
    model: str = "heat-mlp",
) -> dict[str, Any]:
    """A certificate request with small random residuals (distinct per call)."""
    residuals = {
        c["name"]: [rng.uniform(-1e-3, 1e-3) for _ in range(c["size"])] for c in plan["components"]
    }
    return {
        "problem": HEAT_PROBLEM,
        "regularity": regularity,
        "plan_id": plan["plan_id"],
        "residuals": residuals,
        "model": {"name": model, "version": "1"},
    }


def post_certificate(
    client: httpx.Client | Any, headers: dict[str, str] | None = None, seed: int = 0
) -> dict[str, Any]:
    """Create one certificate and return its document."""
    regularity, plan = prepare(client, headers)
    response = client.post(
        "/v1/certificates",
        json=certificate_body(regularity, plan, random.Random(seed)),
        headers=headers,
    )
    assert response.status_code == 201, response.text
    return dict(response.json())
