"""``fieldrate calc fit|predict FILE``: one-off calculations on a runs CSV file, no database.

The numbers are those of the service's stateless calculation for the same runs.
"""

from __future__ import annotations

import argparse
import json
import math
from typing import Any

from service.commands.clitools import CommandError, format_table, guarded

from kinetics.units import SECONDS_PER_DAY as _SECONDS_PER_DAY  # noqa: E402

_EPILOG_FIT = """\
example:
  fieldrate calc fit openapi_examples/runs_template.csv

Prints each run's series fit (model, k, DT50 with its interval, chi-square error level),
the fitted rate-surface parameters with intervals, warnings, and the caution.
exit status: 0 done, 1 the file or the fit failed (reason on stderr), 2 wrong arguments.
"""

_EPILOG_PREDICT = """\
examples:
  fieldrate calc predict runs.csv --at 12 8.3 --at 20 7.0
  fieldrate calc predict runs.csv --at 10 8.1 --salinity 30 --level 0.9

Prints k, DT50 and DT90 with confidence (CI) and prediction (PI) intervals, the dominant
pathway and the extrapolation flags for each condition, then the caution.
exit status: 0 done, 1 the file, a condition or the fit failed (reason on stderr), 2 wrong
arguments.
"""


def _num(value: Any, sig: int = 3) -> str:
    if value is None:
        return "-"
    v = float(value)
    if not math.isfinite(v):
        return "-"
    if v == 0:
        return "0"
    exponent = math.floor(math.log10(abs(v)))
    if -3 <= exponent < 6:
        return f"{v:.{max(0, sig - 1 - exponent)}f}"
    return f"{v:.{sig - 1}e}"


def _load(args: argparse.Namespace):
    """Runs of one substance from the CSV file, validated as the service validates them."""
    from service import csv_io
    from service.schemas import RunData

    runs = csv_io.read_runs_csv(args.file)
    names = sorted({r.substance for r in runs})
    if args.substance:
        runs = [r for r in runs if r.substance == args.substance]
        if not runs:
            raise CommandError(f"no runs of {args.substance!r} in {args.file}; it has: "
                               f"{', '.join(names)}")
    elif len(names) > 1:
        raise CommandError(f"{args.file} holds {len(names)} substances ({', '.join(names)}); "
                           "choose one with --substance")
    data = []
    for r in runs:
        try:
            data.append(RunData(**csv_io.run_to_payload(r)))
        except ValueError as exc:
            raise CommandError(f"{args.file}: line {r.first_line} (run {r.replicate_label!r}): "
                               f"{' '.join(str(exc).split())}") from None
    return runs, data


def _fit(args: argparse.Namespace):
    from kinetics.errors import KineticsError
    from service.fitting import compute_fit, run_input_from_payload
    from service.report import csv_run_labels
    from service.schemas import FitOptions

    runs, data = _load(args)
    opts = FitOptions(temperature_model=args.temperature_model, pathways=args.pathways,
                      series_model=args.series_model, error_model=args.error_model)
    try:
        result = compute_fit([run_input_from_payload(d, i) for i, d in enumerate(data)],
                             **opts.kinetics_kwargs())
    except KineticsError as exc:
        raise CommandError(f"{args.file}: {csv_run_labels(str(exc), runs)}") from None
    return runs, result, opts


def _fit_cmd(args: argparse.Namespace) -> int:
    from kinetics import units
    from kinetics.caution import CAUTION_TEXT
    from service.fitting import model_flags, model_payload

    runs, result, opts = _fit(args)
    if args.json:
        payload = model_payload(result, level=args.level, options=opts.model_dump(mode="json"),
                                extra={"source": args.file})
        print(json.dumps(payload, indent=2, allow_nan=False))
        return 0
    surface = result.surface
    rows = []
    for run, d in zip(runs, result.runs):
        dt50 = d.get("dt50_s")
        rows.append([
            run.replicate_label, _num(units.kelvin_to_celsius(run.temperature_K)), _num(run.pH),
            d.get("series_model") or "reported",
            _num(None if d.get("k_per_s") is None else d["k_per_s"] * _SECONDS_PER_DAY),
            _num(None if dt50 is None else dt50 / _SECONDS_PER_DAY),
            _num(d.get("se_ln_k")), _num(d.get("chi2_error_level_percent"), 2),
        ])
    print(f"runs of {runs[0].substance} ({len(runs)})")
    print(format_table(["run", "T [°C]", "pH", "model", "k [1/d]", "DT50 [d]", "se ln k",
                        "chi2 err [%]"], rows))
    print()
    iv = surface.interval(args.level)
    prow = []
    for i, name in enumerate(surface.parameter_names):
        prow.append([name, _num(surface.estimates[i], 4), _num(surface.standard_errors[i]),
                     f"{_num(iv.lower[i], 4)} to {_num(iv.upper[i], 4)}"])
    print(f"rate surface: {surface.temperature_model}, pathways {', '.join(surface.pathways)}; "
          f"{surface.n_measurements} rate constants, {surface.dof} degrees of freedom")
    print(format_table(["parameter", "estimate", "std. error", f"{args.level * 100:g} % CI"],
                       prow))
    for flag in model_flags(surface, result.runs):
        print(f"warning: {flag}")
    print()
    print(f"caution: {CAUTION_TEXT}")
    return 0


def _predict_cmd(args: argparse.Namespace) -> int:
    import numpy as np

    from kinetics import units
    from kinetics.caution import CAUTION_TEXT
    from kinetics.prediction import predict
    from service import csv_io

    if not args.at:
        raise CommandError("give at least one condition: --at TEMPERATURE_C PH")
    temps_K = []
    for t_C, ph in args.at:
        temps_K.append(float(units.validate_temperature_K(units.celsius_to_kelvin(t_C))))
        units.validate_pH(ph)
    if not 0.0 <= args.salinity <= 45.0:
        raise CommandError(f"--salinity {args.salinity:g} is outside 0-45")
    _runs, result, _opts = _fit(args)
    n = len(args.at)
    pred = predict(result.surface, np.array(temps_K), np.array([p for _, p in args.at]),
                   ionic_strength_M=np.full(n, args.ionic_strength_M),
                   salinity=np.full(n, args.salinity), level=args.level)
    if args.json:
        print(json.dumps({"caution": CAUTION_TEXT, "predictions": [
            {k: (None if isinstance(v, float) and not math.isfinite(v) else v)
             for k, v in row.items()} for row in csv_io.predictions_to_rows(pred)]},
            indent=2, allow_nan=False))
        return 0
    d = _SECONDS_PER_DAY
    lvl = f"{args.level * 100:g} %"
    rows = []
    for i, (t_C, ph) in enumerate(args.at):
        flags = [name for name, values in pred.flags.items() if bool(np.asarray(values)[i])]
        rows.append([
            _num(t_C), _num(ph), _num(pred.k_per_s[i] * d),
            _num(pred.dt50_s[i] / d),
            f"{_num(pred.dt50_ci_low_s[i] / d)} to {_num(pred.dt50_ci_high_s[i] / d)}",
            f"{_num(pred.dt50_pi_low_s[i] / d)} to {_num(pred.dt50_pi_high_s[i] / d)}",
            _num(pred.dt90_s[i] / d), str(pred.dominant_pathway[i]),
            ", ".join(flags) or "-",
        ])
    print(format_table(["T [°C]", "pH", "k [1/d]", "DT50 [d]", f"DT50 {lvl} CI",
                        f"DT50 {lvl} PI", "DT90 [d]", "dominant", "flags"], rows,
                       right=[True, True, True, True, True, True, True, False, False]))
    print()
    print(f"caution: {CAUTION_TEXT}")
    return 0


def _common(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", help="runs CSV file (the import format)")
    parser.add_argument("--substance", default=None,
                        help="which substance, when the file holds several")
    parser.add_argument("--temperature-model", choices=("arrhenius", "eyring"),
                        default="arrhenius", help="temperature law of each pathway")
    parser.add_argument("--pathways", default="auto",
                        help="'auto' (chosen by AICc) or a list such as acid,neutral,base")
    parser.add_argument("--series-model", choices=("run", "SFO", "FOMC", "DFOP", "HS"),
                        default="run", help="series model: 'run' uses each run's model column "
                                            "(SFO if empty)")
    parser.add_argument("--error-model", choices=("constant", "proportional"),
                        default="constant", help="error model of the series fits")
    parser.add_argument("--level", type=float, default=0.95,
                        help="confidence level of the intervals (default 0.95)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of tables")


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "calc", help="one-off calculations on a CSV file (fit, predict), no database",
        description="Fit a runs CSV file or predict at field conditions without storing "
                    "anything; results are printed as tables (or JSON).")
    sub = parser.add_subparsers(dest="calc_command", metavar="ACTION", required=True)
    fit = sub.add_parser("fit", help="fit every run and the rate surface",
                         description="Fit every series of the file, then the pH-temperature "
                                     "rate surface, and print the results.",
                         epilog=_EPILOG_FIT, formatter_class=argparse.RawDescriptionHelpFormatter)
    _common(fit)
    fit.set_defaults(func=guarded(_fit_cmd))
    pr = sub.add_parser("predict", help="predict k, DT50 and DT90 at field conditions",
                        description="Fit the file, then predict at each --at condition.",
                        epilog=_EPILOG_PREDICT,
                        formatter_class=argparse.RawDescriptionHelpFormatter)
    _common(pr)
    pr.add_argument("--at", nargs=2, type=float, action="append", metavar=("T_C", "PH"),
                    help="a field condition: temperature [°C] and pH (repeat for more)")
    pr.add_argument("--salinity", type=float, default=0.0,
                    help="practical salinity of every condition (default 0: fresh water)")
    pr.add_argument("--ionic-strength-M", type=float, default=0.0,
                    help="ionic strength of every condition [mol/L] (default 0)")
    pr.set_defaults(func=guarded(_predict_cmd))
