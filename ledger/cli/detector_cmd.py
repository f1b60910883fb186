"""`refledger detector`: map channels to systems, import readings, review them as evidence."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ledger.cli import context

app = typer.Typer(no_args_is_help=True, help="Fixed gas-detector channels and their readings.")

ChannelRef = Annotated[str, typer.Argument(metavar="SITE/CHANNEL", help="The channel, as SITE/CHANNEL.")]


@app.command("add")
def add(
    ref: ChannelRef,
    system: Annotated[str, typer.Option("--system", help="The system it watches, as SITE/TAG.")],
    levels: Annotated[
        str | None, typer.Option("--levels", help="Ascending alarm levels in ppm (default 25,100,400).")
    ] = None,
    night: Annotated[str | None, typer.Option("--night", help="Site-local night window (default 22:00-06:00).")] = None,
) -> None:
    """Map a detector channel to the system it watches, with its alarm levels.

    Example: refledger detector add DE-LEJ/CR-DAIRY --system DE-LEJ/CU-DAIRY --levels 25,100,400
    """
    from ledger.inputs import parse_system_ref
    from ledger.services.detectors import add_channel

    site_code, code = parse_system_ref(ref, field="SITE/CHANNEL")
    sys_site, sys_tag = parse_system_ref(system, field="--system")
    channel = add_channel(
        context.open_db(),
        site_code=site_code,
        code=code,
        system_site=sys_site,
        system_tag=sys_tag,
        levels=levels,
        night=night,
    )
    typer.echo(
        f"detector {site_code}/{code} watches {site_code}/{channel.system_tag}; levels "
        f"{', '.join(f'{v:g}' for v in channel.levels_ppm)} ppm; night {channel.night_start}-{channel.night_end}"
    )


@app.command("list")
def list_(
    site: Annotated[str | None, typer.Option("--site", help="Only this site.")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """List detector channels and the systems they watch.

    Example: refledger detector list --site DE-LEJ
    """
    from ledger.cli.render import print_json, table
    from ledger.services.detectors import list_channels

    rows = [
        {
            "site": c.site_code,
            "channel": c.code,
            "system": c.system_tag,
            "levels_ppm": list(c.levels_ppm),
            "night": f"{c.night_start}-{c.night_end}",
        }
        for c in list_channels(context.open_db(), site_code=site)
    ]
    if json_out:
        print_json(rows)
        return
    table(
        ["site", "channel", "system", "levels ppm", "night"],
        [
            [r["site"], r["channel"], r["system"], ", ".join(f"{v:g}" for v in r["levels_ppm"]), r["night"]]
            for r in rows
        ],
    )


@app.command("import")
def import_(
    file: Annotated[
        Path, typer.Argument(help="CSV or Parquet; long (time, channel, ppm) or wide (time + a column per channel).")
    ],
    site: Annotated[str, typer.Option("--site", help="The site the readings come from.")],
    tz: Annotated[
        str | None, typer.Option("--tz", help="Zone of times without an offset (default: the site's).")
    ] = None,
) -> None:
    """Import detector readings into the readings store beside the database.

    Example: refledger detector import readings-2026-11.csv --site DE-LEJ --tz Europe/Berlin
    """
    from ledger.services.detectors import import_readings

    loc = context.location()
    result = import_readings(context.open_db(), loc.readings_root, file, site_code=site, tz=tz)
    s = result["summary"]
    typer.echo(
        f"{s.readings_written} readings added for {', '.join(s.channels)} ({s.form} form; "
        f"{s.duplicates_dropped} duplicates dropped, {s.already_stored} already stored; "
        f"naive times read as {result['timezone']})"
    )
    if result["unmapped"]:
        typer.echo(
            f"note: not mapped to a system yet: {', '.join(result['unmapped'])} "
            "(refledger detector add SITE/CHANNEL --system SITE/TAG)",
            err=True,
        )


@app.command("review")
def review(
    ref: ChannelRef,
    start: Annotated[str | None, typer.Option("--from", help="First day (site-local), YYYY-MM-DD.")] = None,
    end: Annotated[str | None, typer.Option("--to", help="Last day (site-local), YYYY-MM-DD.")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
    pdf: Annotated[Path | None, typer.Option("--pdf", help="Write the review as a PDF.", metavar="FILE")] = None,
) -> None:
    """Measure a channel's readings: episodes per level, night share, cycle, trend, returns after repairs.

    Example: refledger detector review DE-LEJ/CR-DAIRY --from 2026-10-01 --to 2026-11-30 --pdf dairy.pdf
    """
    from ledger.cli.outputs import output_file, writing
    from ledger.cli.render import LOCAL_RULES_NOTE, print_json, table
    from ledger.inputs import parse_evaluation_day, parse_system_ref
    from ledger.services.detectors import review as run_review

    site_code, code = parse_system_ref(ref, field="SITE/CHANNEL")
    day_from = parse_evaluation_day(start, field="--from") if start else None
    day_to = parse_evaluation_day(end, field="--to") if end else None
    if day_from and day_to and day_to < day_from:
        raise typer.BadParameter("is before --from", param_hint="--to")
    output_file(pdf, "--pdf")
    loc = context.location()
    result = run_review(
        context.open_db(), loc.readings_root, site_code=site_code, code=code, start=day_from, end=day_to
    )
    data = result.review.to_json()
    if pdf is not None:
        from ledger.exports.detector_pdf import write_channel_review

        with writing(pdf, "--pdf"):
            write_channel_review(pdf, result)
        typer.echo(f"wrote {pdf}", err=json_out)
    if json_out:
        print_json(data)
        return
    typer.echo(
        f"{site_code}/{code} watching {result.channel.system_tag} ({result.refrigerant}): "
        f"{data['window']['from']} to {data['window']['to']}"
    )
    share = data["night_share"]
    typer.echo(
        f"  night share of excess: {'n/a' if share is None else f'{share:.0%}'}; "
        f"cycle: {data['cycle_hours'] or 'none'} h (strength {data['cycle_strength'] or '-'}; "
        f"matches defrost: {data['cycle_matches_defrost']}); trend of daily peaks: "
        f"{data['trend_ppm_per_day'] if data['trend_ppm_per_day'] is not None else 'n/a'} ppm/day"
    )
    for a in data["after_repair"]:
        typer.echo(f"  after repair {a['repair_on']}: " + (a["finding"] or "no return above level 1"))
    for r in data["related_channels"]:
        typer.echo(f"  moves with {r['channel']} (r = {r['correlation']:.2f})")
    table(
        ["level", "start", "end", "peak ppm"],
        [[e["level"], e["start"], e["end"], e["peak_ppm"]] for e in data["episodes"] if e["level"] >= 2][:30],
        title="Episodes above level 2 (first 30)",
    )
    typer.echo("Detectors used as safety devices fall under their own standards and local codes. " + LOCAL_RULES_NOTE)
