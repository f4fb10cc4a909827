"""Hostile input (parsers, identifiers, secrets): a LedgerError, never a traceback."""
