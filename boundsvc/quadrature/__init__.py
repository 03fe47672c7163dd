"""Quadrature plans and integrals of residual samples."""

from boundsvc.quadrature._gauss import gauss_legendre
from boundsvc.quadrature._integrals import (
    face_slice_integrals,
    slice_integrals,
    squared_values,
    total_integral,
)
from boundsvc.quadrature._plan import (
    DEFAULT_POINTS,
    Component,
    Face,
    Plan,
    PlanError,
    TimeGrid,
    build_gauss_plan,
    plan_id_for,
)

__all__ = [
    "DEFAULT_POINTS",
    "Component",
    "Face",
    "Plan",
    "PlanError",
    "TimeGrid",
    "build_gauss_plan",
    "face_slice_integrals",
    "gauss_legendre",
    "plan_id_for",
    "slice_integrals",
    "squared_values",
    "total_integral",
]
