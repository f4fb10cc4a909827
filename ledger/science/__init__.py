"""Pure computations in SI units (floats or numpy arrays in, out).

No I/O, no database, no pint, no pandas: every function here is a plain formula with its
published source in the docstring. Invalid inputs raise :class:`ledger.errors.DomainError`
naming the parameter.
"""
