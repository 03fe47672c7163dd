"""Problem ids are content addresses that stay stable across releases; fields are used.

A certificate's provenance and the store key problems by ``problem_sha256``; if adding an
optional field to the problem schema changed the id of every existing problem, re-posting
the same problem after an upgrade would no longer find what was stored for it.
"""

from __future__ import annotations

import pytest

from api_schemas import ProblemSpec
from boundsvc.errors import ProblemInvalid
from boundsvc.families import classify, problem_sha256

BURGERS = {
    "equation": "u_t + u*u_x = nu*u_xx",
    "space": {"x": [0.0, 2.0]},
    "time": [0.0, 1.0],
    "parameters": {"nu": 0.05},
    "boundary": "dirichlet",
    "initial_value": "sin(pi*x)",
    "boundary_value": "0",
}
# The id this problem had before `initial_velocity` (wave family) was added to the schema,
# computed with the release of that time (commit f7e491b).
BURGERS_ID_BEFORE_WAVE = "ac43e4f148fa238e11236286be214104f4b0f8f1f82566b92e271117a13360c3"


def test_unset_later_fields_keep_the_old_id() -> None:
    assert problem_sha256(ProblemSpec.model_validate(BURGERS)) == BURGERS_ID_BEFORE_WAVE


def test_a_set_later_field_changes_the_id() -> None:
    wave = {
        "equation": "u_tt = 4*u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.0],
        "boundary": "dirichlet",
    }
    plain = problem_sha256(ProblemSpec.model_validate(wave))
    moving = problem_sha256(ProblemSpec.model_validate({**wave, "initial_velocity": "sin(x)"}))
    assert plain != moving


def test_initial_velocity_on_a_first_order_problem_is_refused() -> None:
    heat = {
        "equation": "u_t = 0.1*u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.0],
        "boundary": "dirichlet",
        "initial_velocity": "0",
    }
    with pytest.raises(ProblemInvalid) as info:
        classify(ProblemSpec.model_validate(heat))
    assert info.value.field == "problem.initial_velocity"
    assert info.value.code == "problem_invalid"
    wave = {**heat, "equation": "u_tt = 0.1*u_xx"}
    assert classify(ProblemSpec.model_validate(wave)).family.id == "wave"
