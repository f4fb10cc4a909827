"""`fluxledger serve`: the web workspace (pages on the same services as these commands)."""

from __future__ import annotations

import os

import typer

from ledger.cli.common import guarded
from ledger.cli.session import DB_OPTION


@guarded
def serve(
    host: str = typer.Option("127.0.0.1", "--host", help="Address to listen on."),
    port: int = typer.Option(8080, "--port", min=1, max=65535, help="TCP port to listen on."),
    workers: int = typer.Option(
        1, "--workers", min=1, max=64, help="Worker processes (PostgreSQL for more than one)."
    ),
    behind_proxy: str = typer.Option(
        "127.0.0.1",
        "--proxy-address",
        help="Address of the site's TLS proxy whose X-Forwarded-Proto/For headers are trusted.",
    ),
    db: str | None = DB_OPTION,
) -> None:
    """Serve the web workspace until stopped (Ctrl-C)."""
    import uvicorn

    from ledger.cli.session import open_ledger

    engine = open_ledger(db)  # refuses a missing or outdated database before listening
    engine.dispose()
    if db is not None:
        os.environ["FLUXLEDGER_DATABASE_URL"] = db
    typer.echo(f"fluxledger workspace on http://{host}:{port}/ (Ctrl-C stops it)")
    uvicorn.run(
        "ledger.web.app:from_environment",
        factory=True,
        host=host,
        port=port,
        workers=workers,
        proxy_headers=True,
        forwarded_allow_ips=behind_proxy,
        log_level="warning",
    )
