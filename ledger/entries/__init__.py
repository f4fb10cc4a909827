"""The entry layer: one validated entry per thing a user records or computes.

Front ends (the CLI, the web) hand an entry the fields as text, keyed by the option's name
without dashes; the entry parses quantities through ledger.units, checks which fields go
together, and returns SI values or raises an InputError naming the field. It imports no
front end.
"""
