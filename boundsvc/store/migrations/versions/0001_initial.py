"""Initial schema: problems, plans, certificates, archives, idempotency, API keys, studies.

Revision ID: 0001
Revises:
Create Date: 2025-01-01 00:00:00+00:00
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op
from sqlalchemy.dialects import postgresql

revision: str = "0001"
down_revision: str | None = None
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

_JSON = sa.JSON().with_variant(postgresql.JSONB(), "postgresql")


def _ts(name: str, *, nullable: bool = False) -> sa.Column[object]:
    return sa.Column(name, sa.DateTime(timezone=True), nullable=nullable)


def upgrade() -> None:
    """Create every table of the initial schema."""
    op.create_table(
        "problems",
        sa.Column("id", sa.String(128), nullable=False),
        sa.Column("body", _JSON, nullable=False),
        sa.Column("family", sa.String(64), nullable=False),
        _ts("created_at"),
        sa.PrimaryKeyConstraint("id", name="pk_problems"),
    )
    op.create_table(
        "plans",
        sa.Column("id", sa.String(128), nullable=False),
        sa.Column("problem_id", sa.String(128), nullable=True),
        sa.Column("spec", _JSON, nullable=False),
        _ts("created_at"),
        sa.PrimaryKeyConstraint("id", name="pk_plans"),
        sa.ForeignKeyConstraint(
            ["problem_id"], ["problems.id"], name="fk_plans_problem_id_problems"
        ),
    )
    op.create_table(
        "certificates",
        sa.Column("id", sa.String(128), nullable=False),
        sa.Column("project", sa.String(128), nullable=False),
        sa.Column("model_name", sa.String(256), nullable=False),
        sa.Column("model_version", sa.String(128), nullable=True),
        sa.Column("family", sa.String(64), nullable=False),
        sa.Column("status", sa.String(32), nullable=False),
        _ts("created_at"),
        sa.Column("document", sa.LargeBinary(), nullable=False),
        sa.Column("problem_id", sa.String(128), nullable=True),
        sa.Column("plan_id", sa.String(128), nullable=True),
        sa.PrimaryKeyConstraint("id", name="pk_certificates"),
        sa.ForeignKeyConstraint(
            ["problem_id"], ["problems.id"], name="fk_certificates_problem_id_problems"
        ),
        sa.ForeignKeyConstraint(["plan_id"], ["plans.id"], name="fk_certificates_plan_id_plans"),
    )
    op.create_index(
        "ix_certificates_project_created_at_id", "certificates", ["project", "created_at", "id"]
    )
    op.create_index("ix_certificates_created_at_id", "certificates", ["created_at", "id"])
    op.create_index(
        "ix_certificates_model_name_model_version", "certificates", ["model_name", "model_version"]
    )
    op.create_table(
        "residual_archives",
        sa.Column("certificate_id", sa.String(128), nullable=False),
        sa.Column("blob", sa.LargeBinary(), nullable=False),
        sa.Column("codec", sa.String(32), nullable=False),
        sa.Column("sha256", sa.String(64), nullable=False),
        _ts("created_at"),
        sa.PrimaryKeyConstraint("certificate_id", name="pk_residual_archives"),
        sa.ForeignKeyConstraint(
            ["certificate_id"],
            ["certificates.id"],
            name="fk_residual_archives_certificate_id_certificates",
        ),
    )
    op.create_table(
        "idempotency_keys",
        sa.Column("id", sa.Integer(), autoincrement=True, nullable=False),
        sa.Column("project", sa.String(128), nullable=False),
        sa.Column("key", sa.String(256), nullable=False),
        sa.Column("request_sha256", sa.String(64), nullable=False),
        sa.Column("state", sa.String(16), nullable=False),
        sa.Column("response_status", sa.Integer(), nullable=True),
        sa.Column("response_body", sa.LargeBinary(), nullable=True),
        _ts("created_at"),
        _ts("updated_at"),
        sa.PrimaryKeyConstraint("id", name="pk_idempotency_keys"),
        sa.UniqueConstraint("project", "key", name="uq_idempotency_keys_project_key"),
    )
    op.create_table(
        "api_keys",
        sa.Column("id", sa.String(64), nullable=False),
        sa.Column("project", sa.String(128), nullable=False),
        sa.Column("name", sa.String(256), nullable=False),
        sa.Column("scopes", _JSON, nullable=False),
        sa.Column("secret_hash", sa.Text(), nullable=False),
        _ts("created_at"),
        _ts("revoked_at", nullable=True),
        _ts("last_used_at", nullable=True),
        sa.PrimaryKeyConstraint("id", name="pk_api_keys"),
    )
    op.create_index("ix_api_keys_project", "api_keys", ["project"])
    op.create_table(
        "studies",
        sa.Column("id", sa.String(128), nullable=False),
        sa.Column("project", sa.String(128), nullable=False),
        sa.Column("document", _JSON, nullable=False),
        _ts("created_at"),
        sa.PrimaryKeyConstraint("id", name="pk_studies"),
    )
    op.create_index("ix_studies_project_created_at_id", "studies", ["project", "created_at", "id"])


def downgrade() -> None:
    """Drop every table of the initial schema."""
    op.drop_index("ix_studies_project_created_at_id", table_name="studies")
    op.drop_table("studies")
    op.drop_index("ix_api_keys_project", table_name="api_keys")
    op.drop_table("api_keys")
    op.drop_table("idempotency_keys")
    op.drop_table("residual_archives")
    op.drop_index("ix_certificates_model_name_model_version", table_name="certificates")
    op.drop_index("ix_certificates_created_at_id", table_name="certificates")
    op.drop_index("ix_certificates_project_created_at_id", table_name="certificates")
    op.drop_table("certificates")
    op.drop_table("plans")
    op.drop_table("problems")
