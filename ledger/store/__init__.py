"""Persistence: SQLModel tables, engine and sessions, schema revisions, the audit trail."""
