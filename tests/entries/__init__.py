"""Entries: fields as typed in, checked SI values out."""
