"""``fieldrate report SUBSTANCE -o FILE``: save the HTML report of a substance."""

from __future__ import annotations

import argparse
import datetime as dt
import re
from pathlib import Path

from service.commands.clitools import (
    CommandError,
    add_database_arguments,
    api_key,
    guarded,
    open_database,
)

_EPILOG = """\
examples:
  fieldrate report 1 -o veltrazine.html
  fieldrate report "Veltrazine (invented)" --field-temperature-C 8 --pH 6.5 7.5 8.5
  fieldrate report 1 --as-of 2026-12-02T06:00:00Z -o as-it-was.html
  fieldrate report --csv openapi_examples/runs_template.csv -o template.html
  fieldrate report 1 --url http://127.0.0.1:8000 --api-key frk_...

The report is one self-contained HTML file (no scripts, no external files): open it in a
browser or print it. It states its data version and generation time; the request shown in
it (with as_of) rebuilds the same report from the service.

exit status: 0 report written, 1 no report (the reason is printed on stderr), 2 wrong
command-line arguments.
"""


def _slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9]+", "-", text).strip("-").lower() or "substance"


def _parse_as_of(text: str | None) -> dt.datetime | None:
    if not text:
        return None
    try:
        moment = dt.datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError:
        raise CommandError(f"--as-of {text!r} is not an ISO 8601 time, e.g. "
                           "2026-12-02T06:00:00Z") from None
    if moment.tzinfo is None:
        raise CommandError(f"--as-of {text!r} needs a time zone, e.g. {text}Z for UTC")
    return moment


def _resolve_substance(factory, text: str) -> tuple[int, str]:
    from sqlalchemy import func, select

    from service.models import Substance

    with factory() as session:
        if text.isdigit():
            row = session.get(Substance, int(text))
            if row is None:
                raise CommandError(f"no substance with id {text}")
            return row.id, row.name
        exact = session.scalars(select(Substance).where(Substance.name == text)).all()
        if exact:
            return exact[0].id, exact[0].name
        like = session.scalars(select(Substance).where(
            func.lower(Substance.name).contains(text.lower()))).all()
        if len(like) == 1:
            return like[0].id, like[0].name
        if not like:
            raise CommandError(f"no substance named {text!r}; list them with "
                               "GET /v1/substances or give the id")
        names = ", ".join(f"{s.id}: {s.name}" for s in like[:10])
        raise CommandError(f"{text!r} matches several substances ({names}); give the id")


def _options(args: argparse.Namespace):
    from service.schemas import FitOptions

    return FitOptions(temperature_model=args.temperature_model, pathways=args.pathways)


def _report(args: argparse.Namespace) -> int:
    from kinetics import units
    from service import report

    if args.csv and args.substance:
        raise CommandError("give either a SUBSTANCE (from the database) or --csv FILE, not both")
    if not args.csv and not args.substance:
        raise CommandError("name a SUBSTANCE (id or name) or give --csv FILE")
    if not 0.0 <= args.field_temperature_C <= 100.0:
        raise CommandError(f"--field-temperature-C {args.field_temperature_C:g} is outside "
                           "liquid water (0 to 100 °C)")
    t_K = float(units.celsius_to_kelvin(args.field_temperature_C))
    pH_values = tuple(args.pH) if args.pH else report.DEFAULT_FIELD_PH
    as_of = _parse_as_of(args.as_of)
    if args.csv:
        from service import csv_io

        runs = csv_io.read_runs_csv(args.csv)
        if args.as_of:
            raise CommandError("--as-of applies to the database; a CSV file has one version")
        data = report.gather_from_csv(runs, field_temperature_K=t_K, pH_values=pH_values,
                                      salinity=args.salinity, level=args.level,
                                      options=_options(args), source=str(args.csv))
        html, name = report.render_report(data), data.substance["name"]
    elif args.url:
        from service.client import Client

        with Client(args.url, api_key=api_key(args)) as client:
            if args.substance.isdigit():
                sid = int(args.substance)
                name = client.get_substance(sid).name
            else:
                found = client.find_substance(args.substance)
                if found is None:
                    raise CommandError(f"no substance named {args.substance!r} at {args.url}")
                sid, name = found.id, found.name
            html = client.report_html(sid, field_temperature_C=args.field_temperature_C,
                                      pH=pH_values, level=args.level,
                                      as_of=args.as_of, salinity=args.salinity,
                                      temperature_model=args.temperature_model,
                                      pathways=args.pathways)
    else:
        _settings, engine, factory = open_database(args)
        try:
            sid, name = _resolve_substance(factory, args.substance)
            from service.api.routes.reports import ReportQuery, reproduce_query

            now = dt.datetime.now(dt.timezone.utc)
            q = ReportQuery(field_temperature_C=args.field_temperature_C, salinity=args.salinity,
                            level=args.level, temperature_model=args.temperature_model,
                            pathways=args.pathways)
            query = reproduce_query(sid, q, as_of or now, pH_values)
            data = report.gather(factory, sid, field_temperature_K=t_K, pH_values=pH_values,
                                 salinity=args.salinity, level=args.level, as_of=as_of,
                                 options=_options(args), reproduce_query=query, now=now)
            html = report.render_report(data)
        finally:
            engine.dispose()
    out = Path(args.output) if args.output else Path(f"report-{_slug(name)}.html")
    out.write_text(html, encoding="utf-8")
    print(f"report on {name} written to {out.resolve()}")
    return 0


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "report", help="save the HTML report of a substance to a file",
        description="Write the HTML report of one substance: study summary, every run's fit "
                    "and residuals, pH-rate profiles at the measured and at a field "
                    "temperature, an Arrhenius plot per pathway, field predictions with "
                    "intervals and flags, and the caution. Data come from the local database "
                    "(default), a running service (--url) or a CSV file (--csv).",
        epilog=_EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("substance", nargs="?", default=None,
                        help="substance id or name (a unique part of the name is enough)")
    parser.add_argument("-o", "--output", default=None, metavar="FILE",
                        help="file to write (default: report-<substance>.html here)")
    parser.add_argument("--csv", default=None, metavar="FILE",
                        help="build the report from a runs CSV file instead of a database")
    parser.add_argument("--field-temperature-C", type=float, default=12.0, metavar="T",
                        help="temperature of the field profile and the predictions [°C] "
                             "(default 12)")
    parser.add_argument("--pH", type=float, nargs="+", default=None, metavar="PH",
                        help="pH values of the prediction table (default 5 6 7 8 9)")
    parser.add_argument("--salinity", type=float, default=0.0,
                        help="practical salinity of the prediction table (default 0)")
    parser.add_argument("--level", type=float, default=0.95,
                        help="confidence level of bands and intervals (default 0.95)")
    parser.add_argument("--as-of", default=None, metavar="TIME",
                        help="use the data as they were at this ISO 8601 time (with zone)")
    parser.add_argument("--temperature-model", choices=("arrhenius", "eyring"),
                        default="arrhenius", help="temperature law of each pathway")
    parser.add_argument("--pathways", default="auto",
                        help="'auto' (chosen by AICc) or a list such as acid,neutral,base")
    add_database_arguments(parser)
    parser.set_defaults(func=guarded(_report))
