"""Quadrature plans and integrals of residual samples."""

from boundsvc.quadrature._custom import build_custom_plan
from boundsvc.quadrature._gauss import gauss_legendre
from boundsvc.quadrature._grid import simpson_rule, trapezoid_rule
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
from boundsvc.quadrature._sampled import build_sampled_plan
from boundsvc.quadrature._statements import (
    DEFAULT_CONFIDENCE,
    QuadratureLog,
    QuadratureStatement,
    quadrature_log,
)

__all__ = [
    "DEFAULT_CONFIDENCE",
    "DEFAULT_POINTS",
    "Component",
    "Face",
    "Plan",
    "PlanError",
    "QuadratureLog",
    "QuadratureStatement",
    "TimeGrid",
    "build_custom_plan",
    "build_gauss_plan",
    "build_sampled_plan",
    "face_slice_integrals",
    "gauss_legendre",
    "plan_id_for",
    "quadrature_log",
    "simpson_rule",
    "slice_integrals",
    "squared_values",
    "total_integral",
    "trapezoid_rule",
]
