"""`refledger due`, `refledger leak-rate` and `refledger rules`: what the regimes expect."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ledger.cli import context


def register(app: typer.Typer) -> None:
    """Add the obligation commands to the application."""
    app.command("due")(due)
    app.command("leak-rate")(leak_rate)
    app.command("rules")(rules)


def due(
    as_of: Annotated[str | None, typer.Option("--as-of", help="Day to evaluate (default: today, UTC).")] = None,
    within: Annotated[
        int | None,
        typer.Option("--within", help="Only what falls due within DAYS (overdue always shown).", metavar="DAYS"),
    ] = None,
    site: Annotated[str | None, typer.Option("--site", help="Only this site.")] = None,
    overdue: Annotated[bool, typer.Option("--overdue", help="Only overdue obligations.")] = False,
    regime: Annotated[str | None, typer.Option("--regime", help="Only this regime, e.g. eu or us-84c.")] = None,
    kind: Annotated[str | None, typer.Option("--kind", help="Only this kind, e.g. leak-check.")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
    csv_file: Annotated[Path | None, typer.Option("--csv", help="Write CSV to FILE.", metavar="FILE")] = None,
    xlsx_file: Annotated[
        Path | None, typer.Option("--xlsx", help="Write a spreadsheet to FILE.", metavar="FILE")
    ] = None,
    pdf_file: Annotated[Path | None, typer.Option("--pdf", help="Write a PDF to FILE.", metavar="FILE")] = None,
    recompute: Annotated[
        bool, typer.Option("--recompute", help="Ignore kept results: run the rules over every record.")
    ] = False,
) -> None:
    """List open and overdue obligations across the estate, earliest first.

    Example: refledger due --within 30 --site DE-HAM
    """
    from datetime import UTC, datetime

    from ledger.cli.outputs import output_file, writing
    from ledger.cli.render import LOCAL_RULES_NOTE, print_json, table
    from ledger.inputs import parse_evaluation_day
    from ledger.services.obligations import due as compute_due

    if within is not None and within < 0:
        raise typer.BadParameter("must be zero or more days", param_hint="--within")
    day = parse_evaluation_day(as_of, field="--as-of") if as_of else datetime.now(UTC).date()
    for path, option in ((csv_file, "--csv"), (xlsx_file, "--xlsx"), (pdf_file, "--pdf")):
        output_file(path, option)
    listing = compute_due(context.open_db(), as_of=day, within_days=within, site_code=site, overdue_only=overdue,
                          recompute=recompute, regime=regime, kind=kind)
    if csv_file or xlsx_file or pdf_file:
        from ledger.exports import due as due_export

        for path, option, write in (
            (csv_file, "--csv", lambda p: due_export.write_due_csv(p, listing.rows)),
            (xlsx_file, "--xlsx", lambda p: due_export.write_due_xlsx(p, listing.rows, day)),
            (pdf_file, "--pdf", lambda p: due_export.write_due_pdf(p, listing.rows, day)),
        ):
            if path is not None:
                with writing(path, option):
                    write(path)
                typer.echo(f"wrote {path}", err=json_out)
    if json_out:
        print_json(listing.rows)
        return
    if csv_file or xlsx_file or pdf_file:
        return
    if not listing.rows:
        typer.echo(f"nothing open or overdue as of {day}")
    else:
        table(
            ["due", "earliest", "status", "kind", "system", "regime", "basis", "what"],
            [
                [
                    r["due_on"],
                    r["earliest_on"] or "",
                    r["status"],
                    r["kind"],
                    f"{r['site']}/{r['system'] or '(facility)'}",
                    r["regime"],
                    r["basis"],
                    r["detail"]
                    + (
                        f" (earlier periods without a record: {r['earlier_periods_missed']})"
                        if r.get("earlier_periods_missed")
                        else ""
                    ),
                ]
                for r in listing.rows
            ],
            title=f"Due as of {day}",
        )
    typer.echo(LOCAL_RULES_NOTE)


def leak_rate(
    ref: Annotated[str, typer.Argument(metavar="SITE/TAG", help="The system, as SITE/TAG.")],
    method: Annotated[
        str | None, typer.Option("--method", help="annualizing or rolling (default: the site's).")
    ] = None,
    as_of: Annotated[str | None, typer.Option("--as-of", help="Day to evaluate (default: today).")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """US leak rate at every addition, by both methods, against the application's threshold.

    Example: refledger leak-rate US-TX-01/RACK-A --method rolling
    """
    from ledger.cli.render import print_json, table
    from ledger.inputs import parse_evaluation_day, parse_system_ref
    from ledger.services.queries import leak_rate_view

    if method is not None and method not in ("annualizing", "rolling"):
        raise typer.BadParameter("must be annualizing or rolling", param_hint="--method")
    site_code, tag = parse_system_ref(ref)
    day = parse_evaluation_day(as_of, field="--as-of") if as_of else None
    view = leak_rate_view(context.open_db(), site_code=site_code, tag=tag, method=method, as_of=day)
    if json_out:
        print_json(view)
        return
    typer.echo(
        f"{site_code}/{tag}: method {view['method']}, threshold {view['threshold_percent']} % ({view['application']})"
    )
    if not view["rows"]:
        typer.echo("no additions recorded")
        return
    from ledger.cli.views import mass_in, num

    unit = view["unit"]
    table(
        ["added on", unit, "annualizing %", "rolling %", "rate used %", "exceeded", "note"],
        [
            [r["on"], num(mass_in(r["added_kg"], unit)), num(r["annualizing_percent"]), num(r["rolling_percent"]),
             num(r["percent"]), "yes" if r["exceeded"] else "", r["note"]]
            for r in view["rows"]
        ],
    )


def rules(
    regime: Annotated[str | None, typer.Argument(help="A regime code; default: all.")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """Print each rule set's constants with their basis and confidence mark.

    Example: refledger rules eu
    """
    from ledger.cli.render import print_json, table
    from ledger.services.queries import rules_view

    view = rules_view(regime)
    if json_out:
        print_json(view)
        return
    for r in view:
        typer.echo(f"\n{r['code']}: {r['title']} (version {r['version']}, GWP basis {r['gwp_basis']})")
        table(
            ["constant", "value", "unit", "basis", "confidence"],
            [[c["name"], c["value"], c["unit"], c["citation"], c["confidence"]] for c in r["constants"]],
        )
