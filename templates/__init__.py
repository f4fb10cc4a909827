"""Master-record templates shipped with fluxledger (TOML data with Jinja2 step text)."""
