"""`refledger site`: add and list sites."""

from __future__ import annotations

from typing import Annotated

import typer

from ledger.cli import context

app = typer.Typer(no_args_is_help=True, help="Sites: places that hold systems.")


@app.command("add")
def add(
    code: Annotated[str, typer.Argument(help="Short site code, unique in the ledger.")],
    name: Annotated[str, typer.Option("--name", help="Site name.")],
    country: Annotated[str, typer.Option("--country", help="ISO 3166-1 alpha-2 code, e.g. DE, GB, US.")],
    subdivision: Annotated[str | None, typer.Option("--subdivision", help="ISO 3166-2 code, e.g. US-CA.")] = None,
    regime: Annotated[
        list[str] | None,
        typer.Option("--regime", help="Regime code (repeatable); default from country/subdivision."),
    ] = None,
    timezone: Annotated[str | None, typer.Option("--timezone", help="IANA zone; default from country.")] = None,
    leak_rate_method: Annotated[
        str | None,
        typer.Option("--leak-rate-method", help="US sites: annualizing (default) or rolling."),
    ] = None,
    unit: Annotated[str | None, typer.Option("--unit", help="Display unit: kg or lb.")] = None,
) -> None:
    """Add a site; the regimes that apply default from its country.

    Example: refledger site add DE-HAM --name "Hamburg store" --country DE
    """
    from ledger.inputs import parse_code
    from ledger.services.recording import add_site

    site = add_site(
        context.open_db(),
        code=parse_code(code, field="CODE"),
        name=name,
        country=country,
        subdivision=subdivision,
        timezone=timezone,
        regimes=tuple(regime or ()),
        leak_rate_method=leak_rate_method,
        mass_unit=unit,
    )
    regimes = ", ".join(site.regimes) or "none (no covered regime)"
    typer.echo(f"site {site.code} added ({site.country}, {site.timezone}); regimes: {regimes}")


@app.command("list")
def list_(
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """List the sites.

    Example: refledger site list --json
    """
    from ledger.cli.render import print_json, table
    from ledger.services.queries import sites

    rows = sites(context.open_db())
    if json_out:
        print_json(rows)
        return
    table(
        ["code", "name", "country", "subdivision", "timezone", "regimes", "systems"],
        [
            [r["code"], r["name"], r["country"], r["subdivision"], r["timezone"], ", ".join(r["regimes"]), r["systems"]]
            for r in rows
        ],
    )
