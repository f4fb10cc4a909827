"""The web workspace (``fluxledger serve``): pages on the same entries and services as the CLI."""
