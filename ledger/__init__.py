"""fluxledger: module history, reuse decisions and batch records for hollow-fiber TFF."""

__version__ = "0.2.0"
