"""boundsvc persistence layer: certificates, problems, plans, archives (format in
``_archive.py``), keys, studies.

Open a store with :func:`open_store` (``sqlite:///./boundsvc.sqlite3`` or
``postgresql+psycopg://...``); manage the schema with :func:`upgrade`,
:func:`schema_status`, :func:`current_revision` and :func:`head_revision`.  All errors
derive from :class:`StoreError`.  See ``docs/store.md``.
"""

from ._archive import (
    ARCHIVE_CODEC,
    ArchiveContents,
    decode_residual_archive,
    encode_residual_archive,
)
from ._engine import SQLITE_BUSY_TIMEOUT_MS
from ._errors import (
    ArchiveCorrupt,
    CertificateConflict,
    ContentConflict,
    InvalidCursor,
    SchemaOutOfDate,
    StoreError,
    StoreUnavailable,
    UnknownReference,
)
from ._migrations import (
    SchemaState,
    SchemaStatus,
    current_revision,
    head_revision,
    schema_status,
    upgrade,
    upgrade_command,
)
from ._records import (
    API_SCOPES,
    ApiKeyRecord,
    ApiScope,
    ArchiveInfo,
    CertificateCount,
    CertificatePage,
    CertificateSummary,
    IdempotencyOutcome,
    InProgress,
    Mismatch,
    Replay,
    ResidualArchive,
    Started,
    StoredCertificate,
    StoredPlan,
    StoredProblem,
    StoredStudy,
)
from ._repository import DEFAULT_PAGE_SIZE, MAX_PAGE_SIZE, Store, open_store

__all__ = [
    "API_SCOPES",
    "ARCHIVE_CODEC",
    "DEFAULT_PAGE_SIZE",
    "MAX_PAGE_SIZE",
    "SQLITE_BUSY_TIMEOUT_MS",
    "ApiKeyRecord",
    "ApiScope",
    "ArchiveContents",
    "ArchiveCorrupt",
    "ArchiveInfo",
    "CertificateConflict",
    "CertificateCount",
    "CertificatePage",
    "CertificateSummary",
    "ContentConflict",
    "IdempotencyOutcome",
    "InProgress",
    "InvalidCursor",
    "Mismatch",
    "Replay",
    "ResidualArchive",
    "SchemaOutOfDate",
    "SchemaState",
    "SchemaStatus",
    "Started",
    "Store",
    "StoreError",
    "StoreUnavailable",
    "StoredCertificate",
    "StoredPlan",
    "StoredProblem",
    "StoredStudy",
    "UnknownReference",
    "current_revision",
    "decode_residual_archive",
    "encode_residual_archive",
    "head_revision",
    "open_store",
    "schema_status",
    "upgrade",
    "upgrade_command",
]
