"""`refledger report`: a system's logbook and the annual loss summary, as PDF, xlsx or JSON."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ledger.cli import context
from ledger.cli.render import EXIT_FINDINGS

app = typer.Typer(
    no_args_is_help=True,
    help="Reports: system logbooks and the annual refrigerant loss summary.",
)


@app.command("logbook")
def logbook(
    ref: Annotated[
        str | None, typer.Argument(metavar="SITE/TAG", help="The system, as SITE/TAG.")
    ] = None,
    site: Annotated[
        str | None,
        typer.Option("--site", help="Every system of this site, one PDF and one xlsx each (with --out)."),
    ] = None,
    out: Annotated[
        Path | None, typer.Option("--out", help="Folder for --site logbooks.", metavar="DIR")
    ] = None,
    from_on: Annotated[
        str | None, typer.Option("--from", help="First day shown, YYYY-MM-DD (default: the first event).")
    ] = None,
    to_on: Annotated[
        str | None, typer.Option("--to", help="Last day shown, YYYY-MM-DD (default: today at the site).")
    ] = None,
    pdf: Annotated[Path | None, typer.Option("--pdf", help="Write a PDF to FILE.", metavar="FILE")] = None,
    xlsx: Annotated[
        Path | None, typer.Option("--xlsx", help="Write a spreadsheet to FILE.", metavar="FILE")
    ] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print the logbook as JSON.")] = False,
    allow_broken: Annotated[
        bool, typer.Option("--allow-broken", help="Write the report even when its chains do not verify "
                                                  "(marked NOT VERIFIED; the exit code is still 1).")
    ] = False,
) -> None:
    """A system's logbook: header, every event (voided ones marked), obligations, chain head.

    The chains are recomputed first: a break prints NOT VERIFIED and exits 1 without writing
    (with --allow-broken the report is written, marked, and the exit code is still 1).

    Example: refledger report logbook DE-HAM/LT-RACK --from 2025-01-01 --pdf lt-rack.pdf
    """
    from ledger.cli.outputs import output_file, output_folder, writing
    from ledger.cli.render import print_json
    from ledger.errors import InputError, LedgerError
    from ledger.inputs import parse_evaluation_day, parse_system_ref
    from ledger.services import reporting

    first = parse_evaluation_day(from_on, field="--from") if from_on else None
    last = parse_evaluation_day(to_on, field="--to") if to_on else None
    if (ref is None) == (site is None):
        raise LedgerError("SITE/TAG: give either SITE/TAG or --site CODE (not both)")
    output_folder(out, "--out")
    output_file(pdf, "--pdf")
    output_file(xlsx, "--xlsx")
    db = context.open_db()
    if site is not None:
        if out is None:
            raise LedgerError("--out: is needed with --site (the folder for the logbooks)")
        if pdf or xlsx:
            raise InputError("--pdf/--xlsx", str(pdf or xlsx), "names one system's file; with "
                             "--site use --out DIR")
        from ledger.exports.pdf import write_logbook_pdf
        from ledger.exports.xlsx import write_logbook_xlsx
        from ledger.services.samples import file_stem

        books = reporting.site_logbooks(db, site_code=site, from_on=first, to_on=last)
        broken = _gate([b["integrity"] for b in books], allow_broken)
        if json_out:
            print_json(books)
        for book in books:
            stem = file_stem("logbook", book["site"]["code"], book["system"]["tag"])
            for path, writer in ((out / f"{stem}.pdf", write_logbook_pdf), (out / f"{stem}.xlsx", write_logbook_xlsx)):
                with writing(path, "--out"):
                    writer(path, book)
                typer.echo(f"wrote {path}", err=json_out)
        if not books:
            typer.echo(f"site {site} has no systems", err=True)
        _finish(broken)
        return
    if not (pdf or xlsx or json_out):
        raise LedgerError("--pdf/--xlsx/--json: choose an output (--pdf FILE, --xlsx FILE or --json)")
    assert ref is not None
    site_code, tag = parse_system_ref(ref)
    book = reporting.logbook(db, site_code=site_code, tag=tag, from_on=first, to_on=last)
    broken = _gate([book["integrity"]], allow_broken)
    if pdf:
        from ledger.exports.pdf import write_logbook_pdf

        with writing(pdf, "--pdf"):
            write_logbook_pdf(pdf, book)
        typer.echo(f"wrote {pdf}", err=json_out)
    if xlsx:
        from ledger.exports.xlsx import write_logbook_xlsx

        with writing(xlsx, "--xlsx"):
            write_logbook_xlsx(xlsx, book)
        typer.echo(f"wrote {xlsx}", err=json_out)
    if json_out:
        print_json(book)
    else:
        typer.echo(f"chain head {book['chain_head'] or '-'}")
        _echo_integrity(book["integrity"])
    _finish(broken)


def _gate(checks: list[dict], allow_broken: bool) -> bool:
    """Print NOT VERIFIED lines for every check that failed; refuse (exit 1) unless allowed.

    Returns:
        Whether any check failed (the report is then written marked, and the run exits 1).
    """
    broken = [p for c in checks for p in c["problems"]]
    for p in dict.fromkeys(broken):
        typer.echo(f"NOT VERIFIED: {p}", err=True)
    if broken and not allow_broken:
        typer.echo("report not written: its chains do not verify (--allow-broken writes it marked)", err=True)
        raise typer.Exit(code=EXIT_FINDINGS)
    return bool(broken)


def _finish(broken: bool) -> None:
    if broken:
        raise typer.Exit(code=EXIT_FINDINGS)


def _echo_integrity(check: dict) -> None:
    from ledger.exports.common import report_lines

    for line in report_lines(check):
        if not line.startswith("NOT VERIFIED"):
            typer.echo(line)


@app.command("annual")
def annual(
    year: Annotated[int, typer.Option("--year", help="The calendar year, e.g. 2025.")],
    site: Annotated[str | None, typer.Option("--site", help="Only this site.")] = None,
    basis: Annotated[
        str | None,
        typer.Option("--basis", help="GWP basis: eu, ar4, ar5 or ar6 (default: the sites' regime "
                     "basis, or eu for a mixed estate)."),
    ] = None,
    xlsx: Annotated[
        Path | None, typer.Option("--xlsx", help="Write a spreadsheet to FILE.", metavar="FILE")
    ] = None,
    pdf: Annotated[Path | None, typer.Option("--pdf", help="Write a PDF to FILE.", metavar="FILE")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print the summary as JSON.")] = False,
    recompute: Annotated[
        bool, typer.Option("--recompute", help="Ignore kept results: run the rules over every record.")
    ] = False,
    allow_broken: Annotated[
        bool, typer.Option("--allow-broken", help="Write the report even when its chains do not verify "
                                                  "(marked NOT VERIFIED; the exit code is still 1).")
    ] = False,
) -> None:
    """Annual loss summary: kg added and recovered, leak rates, t CO2e, scope 1 estimates.

    The chains are recomputed first, as for the logbook (NOT VERIFIED, exit 1, --allow-broken).

    Example: refledger report annual --year 2025 --basis ar5 --xlsx losses-2025.xlsx
    """
    from ledger.cli.outputs import output_file, writing
    from ledger.cli.render import print_json
    from ledger.services.reporting import annual_summary

    output_file(xlsx, "--xlsx")
    output_file(pdf, "--pdf")
    summary = annual_summary(context.open_db(), year=year, site_code=site, basis=basis, recompute=recompute)
    broken = _gate([summary["integrity"]], allow_broken)
    if xlsx:
        from ledger.exports.xlsx import write_annual_xlsx

        with writing(xlsx, "--xlsx"):
            write_annual_xlsx(xlsx, summary)
        typer.echo(f"wrote {xlsx}", err=json_out)
    if pdf:
        from ledger.exports.pdf import write_annual_pdf

        with writing(pdf, "--pdf"):
            write_annual_pdf(pdf, summary)
        typer.echo(f"wrote {pdf}", err=json_out)
    if json_out:
        print_json(summary)
    elif not (xlsx or pdf):
        _print_annual(summary)
    _finish(broken)


def _print_annual(summary: dict) -> None:
    from ledger.cli.render import table
    from ledger.exports.common import CAUTION, KG, PERCENT, TONNES, fmt, share_text

    e = summary["estate"]
    typer.echo(
        f"Annual loss summary {summary['year']} ({summary['site_filter'] or 'whole estate'}), "
        f"GWP basis {summary['basis']}: {fmt(e['added_kg'], KG)} kg added, "
        f"{fmt(e['co2e_t'], TONNES)} t CO2e, {e['chronic']} chronic leakers, "
        f"{e['overdue']} obligations overdue"
    )
    table(
        ["site", "systems", "added kg", "recovered kg", "net loss kg", "leak rate %", "t CO2e",
         f"{share_text(summary['chronic_percent'])}+", "overdue"],
        [[s["site"], s["systems"], fmt(s["added_kg"], KG), fmt(s["recovered_kg"], KG),
          fmt(s["net_loss_kg"], KG), fmt(s["leak_rate_percent"], PERCENT), fmt(s["co2e_t"], TONNES),
          s["chronic"], s["overdue"]] for s in summary["sites"]]
        + [["estate", e["systems"], fmt(e["added_kg"], KG), fmt(e["recovered_kg"], KG),
            fmt(e["net_loss_kg"], KG), fmt(e["leak_rate_percent"], PERCENT), fmt(e["co2e_t"], TONNES),
            e["chronic"], e["overdue"]]],
    )
    table(
        ["scope 1 method", "emissions kg", "t CO2e", "formula"],
        [[m["label"], fmt(m["emissions_kg"], KG), fmt(m["co2e_t"], TONNES), m["formula"]]
         for m in summary["scope1"]],
    )
    typer.echo(f"chain digest {summary['chain']['digest']} ({summary['chain']['systems']} systems)")
    _echo_integrity(summary["integrity"])
    rec = summary["scope1_recommended"]
    typer.echo(f"scope 1, recommended method: {rec['method']} ({rec['why']})")
    for flag in dict.fromkeys(f for m in summary["scope1"] for f in m["flags"]):
        typer.echo(f"scope 1, flagged: {flag}")
    if e["prohibited_top_ups"]:
        typer.echo(f"{e['prohibited_top_ups']} top-up(s) a servicing prohibition forbade, "
                   f"{fmt(e['prohibited_top_up_kg'], KG)} kg:")
        for t in summary["prohibited_top_ups"]:
            typer.echo(f"  {t['system']}: {t['warning']}")
    typer.echo(CAUTION)


@app.command("filed")
def filed(
    site: Annotated[str, typer.Argument(metavar="SITE", help="The site the report is for.")],
    regime: Annotated[str, typer.Option("--regime", help="Regime code, e.g. us-ca.")],
    year: Annotated[int, typer.Option("--year", help="The calendar year the report covers.")],
    on: Annotated[str, typer.Option("--on", help="Day it was filed, YYYY-MM-DD.")],
    system: Annotated[str | None, typer.Option("--system", help="TAG, for a report about one system.")] = None,
    reference: Annotated[str, typer.Option("--reference", help="Receipt or submission number.")] = "",
    by: Annotated[str | None, typer.Option("--by", help="Who is recording this.")] = None,
) -> None:
    """Record that a report was filed with an authority; it meets the matching report duty.

    Example: refledger report filed CA-SAC --regime us-ca --year 2026 --on 2027-02-20 --reference RMP-88412
    """
    from ledger.inputs import parse_day
    from ledger.services.recording import record_filing

    record_filing(context.open_db(), site_code=site, regime=regime, period_year=year,
                  filed_on=parse_day(on), tag=system, reference=reference, recorded_by=by)
    typer.echo(f"filing recorded: {site} {regime} report for {year}, filed {on}")
