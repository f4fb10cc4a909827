"""Application services: each one validates, computes, decides, persists and audits in one
transaction, and raises a LedgerError on bad input (DEVELOPERS.md)."""
