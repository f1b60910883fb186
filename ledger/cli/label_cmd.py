"""`refledger label SITE`: a PDF sheet of QR codes, one per system, that open its page."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ledger.cli import context


def register(app: typer.Typer) -> None:
    """Add the `label` command to the application."""
    app.command("label")(label)


def label(
    site: Annotated[str, typer.Argument(metavar="SITE", help="The site whose systems get labels.")],
    pdf: Annotated[Path, typer.Option("--pdf", help="Write the label sheet to FILE.", metavar="FILE")],
    base_url: Annotated[
        str, typer.Option("--base-url", help="Address of the web app as technicians reach it.")
    ] = "http://127.0.0.1:8000",
) -> None:
    """Print-ready labels: each system's code (SITE/TAG) and a QR code opening its web page.

    Example: refledger label DE-LEJ --pdf lej-labels.pdf --base-url https://ledger.example.net
    """
    from ledger.exports.labels import write_label_sheet
    from ledger.services.queries import label_rows

    rows = label_rows(context.open_db(), site_code=site, base_url=base_url)
    write_label_sheet(pdf, rows, title=f"System labels, site {site}")
    typer.echo(f"wrote {pdf}: {len(rows)} labels")
