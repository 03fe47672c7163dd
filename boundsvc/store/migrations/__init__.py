"""Alembic migration environment of the boundsvc store (see ``docs/store.md``)."""
