"""Tests of boundsvc.store (each runs on SQLite and on PostgreSQL)."""
