"""Shared test set-up. In CI, hypothesis runs derandomized so a run is repeatable."""

from __future__ import annotations

import os

from hypothesis import settings

settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True)
settings.register_profile("dev", deadline=None, print_blob=True)
settings.register_profile("stress", max_examples=2000, deadline=None, print_blob=True)
settings.load_profile(
    os.environ.get("FLUXLEDGER_HYPOTHESIS_PROFILE") or ("ci" if os.environ.get("CI") else "dev")
)
