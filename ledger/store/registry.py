"""Every table module, loaded on demand.

The logbook's own tables are in ledger/store/tables.py, which every command imports; the
skid tables (ledger/store/equipment.py) join ``tables.RECORDS`` when their module is imported,
so a command that never touches a skid does not pay for defining them. Whatever must see
every table (the audit check, migrations, a list of entities) calls :func:`load_all` first.
"""

from __future__ import annotations


def load_all() -> None:
    """Import every table module, so SQLModel.metadata and tables.RECORDS hold them all."""
    import ledger.store.equipment
    import ledger.store.tables  # noqa: F401
