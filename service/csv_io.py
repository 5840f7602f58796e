"""CSV exchange of runs: import (validated row by row) and export of runs, fits and predictions.

Import format: one row per observation
---------------------------------------
A file starts with a header row; rows whose first cell starts with ``#`` are comments
and are skipped (they still count for line numbers). Rows with the same
``substance``, ``laboratory``, ``study_reference`` and ``run`` form one run; its
conditions (temperature, pH, buffer, ...) must be the same on every row of the run.

======================================  =========  ===============================================
column                                  required   meaning
======================================  =========  ===============================================
``substance``                           yes        substance name (created if new)
``laboratory``                          yes        laboratory that ran the study
``study_reference``                     no         study report or protocol reference
``test_guideline``                      no         test guideline followed
``glp``                                 no         GLP study: yes/no, true/false, 1/0
``run``                                 yes        run (replicate) label, unique within a study at
                                                   one temperature and pH
``temperature_C`` or ``temperature_K``  yes        incubation temperature [°C] or [K]
``pH``                                  yes        pH measured at the incubation temperature
``buffer``                              no         buffer description
``ionic_strength_M``                    no         ionic strength [mol/L]
``cosolvent_percent_v_v``               no         co-solvent [% v/v]
``sterile``, ``dark``                   no         yes/no (default yes)
``time_<u>``                            series     time since start; ``<u>`` one of s, min, h, d
``concentration_<u>``                   series     concentration; ``<u>`` e.g. ``mg_per_L``,
                                                   ``umol_per_L``, ``percent`` (of initial)
``below_loq``                           no         yes/no: the value is below the LOQ
``loq``                                 no         limit of quantification, in the
                                                   concentration unit of the row
``k_obs_per_<u>`` or ``dt50_<u>``       rate       a reported rate constant or DT50 instead of a
                                                   series (one row per run; ``<u>`` s, min, h, d)
``se_ln_k``                             no         standard error of ln k of a reported rate
``model``                               no         series model for the run: SFO, FOMC, DFOP, HS
``notes``                               no         free text (kept with the run)
======================================  =========  ===============================================

Instead of a unit in the header, ``time`` with a ``time_unit`` column and
``concentration`` with a ``concentration_unit`` column may be used (units then may
differ between runs, e.g. ``mg/L`` or ``%``).

Every problem is reported with its line number (the header is line 1) and column;
nothing is imported from a file with a problem. Exports write the same columns, so an
exported file imports again.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import IO, Any

import numpy as np

from kinetics import units
from kinetics.errors import InputError

__all__ = [
    "CsvProblem",
    "CsvFormatError",
    "CsvObservation",
    "CsvRun",
    "KNOWN_COLUMNS",
    "read_runs_csv",
    "parse_runs_csv",
    "run_to_payload",
    "csv_run_from_stored",
    "ImportSummary",
    "NewSubstanceRefused",
    "store_runs",
    "runs_to_csv",
    "rows_to_csv",
    "to_json",
    "PREDICTION_COLUMNS",
    "predictions_to_rows",
    "series_fit_rows",
    "surface_parameter_rows",
]

_MAX_PROBLEMS = 50
_TRUE = {"yes", "y", "true", "t", "1"}
_FALSE = {"no", "n", "false", "f", "0"}

#: fixed column names (unit-carrying columns are matched by pattern, see module docstring)
KNOWN_COLUMNS = (
    "substance", "laboratory", "study_reference", "test_guideline", "glp", "run",
    "temperature_C", "temperature_K", "pH", "buffer", "ionic_strength_M",
    "cosolvent_percent_v_v", "sterile", "dark", "time", "time_unit", "concentration",
    "concentration_unit", "below_loq", "loq", "se_ln_k", "model", "notes",
)

_TIME_RE = re.compile(r"^time_(s|min|h|d)$")
_CONC_RE = re.compile(r"^concentration_([A-Za-z0-9_]+)$")
_RATE_RE = re.compile(r"^k_obs_per_(s|min|h|d)$")
_DT50_RE = re.compile(r"^dt50_(s|min|h|d)$")

_SERIES_MODELS = ("SFO", "FOMC", "DFOP", "HS")


def _conc_token_to_unit(token: str) -> str | None:
    """``mg_per_L`` -> ``mg/L``, ``percent`` -> ``%``; None if not a known unit."""
    if token == "percent":
        return "%"
    unit = token.replace("_per_", "/")
    return unit if unit in units.CONCENTRATION_UNITS else None


def _unit_to_conc_token(unit: str) -> str:
    return "percent" if unit == "%" else unit.replace("/", "_per_")


@dataclass(frozen=True)
class CsvProblem:
    """One problem found in a CSV file.

    Attributes
    ----------
    line : int
        Line number in the file (the header is line 1).
    column : str
        Column name ("" when the problem concerns the whole row).
    message : str
        What is wrong, repeating the bad value.
    """

    line: int
    column: str
    message: str

    def __str__(self) -> str:
        where = f"line {self.line}" + (f", column {self.column!r}" if self.column else "")
        return f"{where}: {self.message}"

    def to_dict(self) -> dict[str, Any]:
        return {"line": self.line, "column": self.column, "message": self.message}


class CsvFormatError(InputError):
    """A CSV file could not be imported; ``problems`` lists every problem found (capped)."""

    def __init__(self, problems: Sequence[CsvProblem], truncated: bool = False):
        self.problems = tuple(problems)
        self.truncated = truncated
        head = "; ".join(str(p) for p in self.problems[:3])
        more = len(self.problems) - 3
        suffix = f" (and {more} more problem{'s' if more != 1 else ''})" if more > 0 else ""
        if truncated:
            suffix += " (stopped after the first problems)"
        super().__init__(f"CSV not imported: {head}{suffix}")


@dataclass(frozen=True)
class CsvObservation:
    """One observation row: time [unit of the run], concentration [unit of the run]."""

    line: int
    time: float
    concentration: float
    below_loq: bool = False


@dataclass(frozen=True)
class CsvRun:
    """One run assembled from the rows of a CSV file.

    Times and concentrations are kept in the units the file gives (``time_unit``,
    ``concentration_unit``); the service converts them to SI when it stores them.
    """

    first_line: int
    substance: str
    laboratory: str
    replicate_label: str
    temperature_K: float
    pH: float
    study_reference: str | None = None
    test_guideline: str | None = None
    glp: bool | None = None
    buffer: str | None = None
    ionic_strength_M: float | None = None
    cosolvent_percent_v_v: float | None = None
    sterile: bool = True
    dark: bool = True
    kind: str = "series"
    time_unit: str | None = None
    concentration_unit: str | None = None
    loq: float | None = None
    observations: tuple[CsvObservation, ...] = ()
    k_obs: float | None = None
    rate_unit: str | None = None
    dt50: float | None = None
    dt50_unit: str | None = None
    se_ln_k: float | None = None
    model: str | None = None
    notes: str | None = None

    @property
    def study_key(self) -> tuple[str, str, str]:
        """(substance, laboratory, study reference) that identifies the study of this run."""
        return (self.substance, self.laboratory, self.study_reference or "")


@dataclass
class _Columns:
    index: dict[str, int]
    time_col: str | None = None
    time_unit: str | None = None
    conc_col: str | None = None
    conc_unit: str | None = None
    rate_col: str | None = None
    rate_unit: str | None = None
    dt50_col: str | None = None
    dt50_unit: str | None = None
    temp_col: str | None = None


def _read_header(header: list[str], problems: list[CsvProblem]) -> _Columns:
    cols = _Columns(index={})
    for pos, raw in enumerate(header):
        name = raw.strip().lstrip("\ufeff")
        if not name:
            problems.append(CsvProblem(1, "", f"column {pos + 1} of the header is empty"))
            continue
        if name in cols.index:
            problems.append(CsvProblem(1, name, f"column {name!r} appears twice in the header"))
            continue
        cols.index[name] = pos
        if name in KNOWN_COLUMNS:
            if name in ("temperature_C", "temperature_K"):
                if cols.temp_col:
                    problems.append(CsvProblem(
                        1, name, f"give the temperature once: both {cols.temp_col!r} and "
                        f"{name!r} are present"))
                cols.temp_col = name
            elif name == "time":
                cols.time_col = name
            elif name == "concentration":
                cols.conc_col = name
            continue
        if m := _TIME_RE.match(name):
            cols.time_col, cols.time_unit = name, m.group(1)
        elif m := _RATE_RE.match(name):
            cols.rate_col, cols.rate_unit = name, f"1/{m.group(1)}"
        elif m := _DT50_RE.match(name):
            cols.dt50_col, cols.dt50_unit = name, m.group(1)
        elif m := _CONC_RE.match(name):
            unit = _conc_token_to_unit(m.group(1))
            if unit is None:
                valid = ", ".join(f"concentration_{_unit_to_conc_token(u)}"
                                  for u in units.CONCENTRATION_UNITS)
                problems.append(CsvProblem(
                    1, name, f"unknown concentration unit in column {name!r}; valid: {valid}"))
            else:
                cols.conc_col, cols.conc_unit = name, unit
        else:
            problems.append(CsvProblem(
                1, name,
                f"unknown column {name!r}; valid columns: {', '.join(KNOWN_COLUMNS)}, "
                "time_<s|min|h|d>, concentration_<unit>, k_obs_per_<s|min|h|d>, dt50_<s|min|h|d>"))
    for required in ("substance", "laboratory", "run", "pH"):
        if required not in cols.index:
            problems.append(CsvProblem(1, required, f"required column {required!r} is missing"))
    if cols.temp_col is None:
        problems.append(CsvProblem(
            1, "temperature_C",
            "a temperature column is required: temperature_C or temperature_K"))
    has_series = cols.time_col is not None or cols.conc_col is not None
    has_rate = cols.rate_col is not None or cols.dt50_col is not None
    if not has_series and not has_rate:
        problems.append(CsvProblem(
            1, "", "no measurement columns: give time_<unit> and concentration_<unit> "
            "(one row per observation) or k_obs_per_<unit> / dt50_<unit> (one row per run)"))
    if has_series and (cols.time_col is None or cols.conc_col is None):
        missing = "a time column (time_<unit>)" if cols.time_col is None else \
            "a concentration column (concentration_<unit>)"
        problems.append(CsvProblem(1, "", f"a series needs both time and concentration: "
                                          f"{missing} is missing"))
    if cols.time_col == "time" and "time_unit" not in cols.index:
        problems.append(CsvProblem(1, "time", "column 'time' needs a 'time_unit' column "
                                              "(or name the column time_d, time_h, ...)"))
    if cols.conc_col == "concentration" and "concentration_unit" not in cols.index:
        problems.append(CsvProblem(1, "concentration",
                                   "column 'concentration' needs a 'concentration_unit' column "
                                   "(or name the column concentration_mg_per_L, ...)"))
    if cols.rate_col and cols.dt50_col:
        problems.append(CsvProblem(1, cols.dt50_col, "give either k_obs_per_<unit> or "
                                                     "dt50_<unit>, not both"))
    return cols


class _Row:
    """Accessor for one data row that records problems instead of raising."""

    def __init__(self, cells: list[str], line: int, cols: _Columns, problems: list[CsvProblem]):
        self.cells, self.line, self.cols, self.problems = cells, line, cols, problems
        self.ok = True

    def problem(self, column: str, message: str) -> None:
        self.ok = False
        self.problems.append(CsvProblem(self.line, column, message))

    def text(self, name: str | None) -> str:
        if name is None or name not in self.cols.index:
            return ""
        pos = self.cols.index[name]
        return self.cells[pos].strip() if pos < len(self.cells) else ""

    def required_text(self, name: str) -> str:
        value = self.text(name)
        if not value and name in self.cols.index:
            self.problem(name, f"{name} is empty")
        return value

    def number(self, name: str | None, *, required: bool = False, what: str = "") -> float | None:
        raw = self.text(name)
        if not raw:
            if required and name is not None:
                self.problem(name, f"{what or name} is empty")
            return None
        try:
            value = float(raw.replace("\u2212", "-"))
        except ValueError:
            self.problem(name or "", f"{what or name} {raw!r} is not a number")
            return None
        if not math.isfinite(value):
            self.problem(name or "", f"{what or name} {raw!r} is not a finite number")
            return None
        return value

    def flag(self, name: str, default: bool | None) -> bool | None:
        raw = self.text(name).lower()
        if not raw:
            return default
        if raw in _TRUE:
            return True
        if raw in _FALSE:
            return False
        self.problem(name, f"{name} {self.text(name)!r} is not yes/no (also accepted: "
                           "true/false, 1/0)")
        return default


def _parse_row(row: _Row) -> dict[str, Any] | None:
    cols = row.cols
    rec: dict[str, Any] = {
        "substance": row.required_text("substance"),
        "laboratory": row.required_text("laboratory"),
        "replicate_label": row.required_text("run"),
        "study_reference": row.text("study_reference") or None,
        "test_guideline": row.text("test_guideline") or None,
        "glp": row.flag("glp", None),
        "buffer": row.text("buffer") or None,
        "sterile": row.flag("sterile", True),
        "dark": row.flag("dark", True),
        "notes": row.text("notes") or None,
    }
    model = row.text("model")
    if model:
        if model.upper() not in _SERIES_MODELS:
            row.problem("model", f"unknown model {model!r}; valid models: "
                                 f"{', '.join(_SERIES_MODELS)}")
        rec["model"] = model.upper()
    else:
        rec["model"] = None

    temp = row.number(cols.temp_col, required=True, what="temperature")
    if temp is not None:
        try:
            kelvin = (temp if cols.temp_col == "temperature_K"
                      else float(units.celsius_to_kelvin(temp)))
            rec["temperature_K"] = float(units.validate_temperature_K(kelvin))
        except InputError as exc:
            unit = "K" if cols.temp_col == "temperature_K" else "°C"
            row.problem(cols.temp_col or "", f"temperature {temp:g} {unit}: {exc}")
    ph = row.number("pH", required=True, what="pH")
    if ph is not None:
        try:
            rec["pH"] = float(units.validate_pH(ph))
        except InputError as exc:
            row.problem("pH", str(exc))
    ionic = row.number("ionic_strength_M", what="ionic strength")
    if ionic is not None and ionic < 0:
        row.problem("ionic_strength_M", f"ionic strength {ionic:g} mol/L is negative")
    rec["ionic_strength_M"] = ionic
    cos = row.number("cosolvent_percent_v_v", what="co-solvent")
    if cos is not None and not 0 <= cos <= 100:
        row.problem("cosolvent_percent_v_v", f"co-solvent {cos:g} % v/v is outside 0-100")
    rec["cosolvent_percent_v_v"] = cos

    time_v = row.number(cols.time_col, what="time")
    conc_v = row.number(cols.conc_col, what="concentration")
    rate_v = row.number(cols.rate_col, what="rate constant")
    dt50_v = row.number(cols.dt50_col, what="DT50")
    se = row.number("se_ln_k", what="standard error of ln k")
    loq = row.number("loq", what="LOQ")
    is_series = time_v is not None or conc_v is not None
    is_rate = rate_v is not None or dt50_v is not None
    if is_series and is_rate:
        row.problem("", "a row holds either an observation (time, concentration) or a reported "
                        "rate (k_obs or DT50), not both")
        return None
    if not is_series and not is_rate:
        if row.ok:
            row.problem("", "the row has neither an observation (time and concentration) nor a "
                            "reported rate (k_obs or DT50)")
        return None
    if is_series:
        if time_v is None:
            if not row.text(cols.time_col):
                row.problem(cols.time_col or "time", "time is empty")
        elif time_v < 0:
            row.problem(cols.time_col or "time", f"time {time_v:g} is negative")
        if conc_v is None:
            if not row.text(cols.conc_col):
                row.problem(cols.conc_col or "concentration", "concentration is empty")
        elif conc_v < 0:
            row.problem(cols.conc_col or "concentration",
                        f"concentration {conc_v:g} is negative")
        t_unit = cols.time_unit or row.text("time_unit")
        c_unit = cols.conc_unit or row.text("concentration_unit")
        if cols.time_unit is None:
            if t_unit not in units.TIME_UNITS:
                row.problem("time_unit", f"unknown time unit {t_unit!r}; valid units: "
                                         f"{', '.join(units.TIME_UNITS)}")
        if cols.conc_unit is None:
            c_unit = c_unit.replace("\u00b5", "u").replace("\u03bc", "u")
            if c_unit not in units.CONCENTRATION_UNITS:
                row.problem("concentration_unit",
                            f"unknown concentration unit {c_unit!r}; valid units: "
                            f"{', '.join(units.CONCENTRATION_UNITS)}")
        if loq is not None and loq <= 0:
            row.problem("loq", f"LOQ {loq:g} must be > 0")
        rec.update(kind="series", time=time_v, concentration=conc_v, time_unit=t_unit,
                   concentration_unit=c_unit, below_loq=bool(row.flag("below_loq", False)),
                   loq=loq)
        if se is not None:
            row.problem("se_ln_k", "se_ln_k belongs to a reported rate, not to an observation")
    else:
        if rate_v is not None and rate_v <= 0:
            row.problem(cols.rate_col or "", f"rate constant {rate_v:g} must be > 0")
        if dt50_v is not None and dt50_v <= 0:
            row.problem(cols.dt50_col or "", f"DT50 {dt50_v:g} must be > 0")
        if se is not None and se <= 0:
            row.problem("se_ln_k", f"standard error of ln k {se:g} must be > 0")
        rec.update(kind="rate", k_obs=rate_v, rate_unit=cols.rate_unit if rate_v is not None
                   else None, dt50=dt50_v, dt50_unit=cols.dt50_unit if dt50_v is not None
                   else None, se_ln_k=se)
    return rec if row.ok else None


_RUN_CONSTANT = ("temperature_K", "pH", "buffer", "ionic_strength_M", "cosolvent_percent_v_v",
                 "sterile", "dark", "time_unit", "concentration_unit", "test_guideline", "glp",
                 "model", "kind")


def parse_runs_csv(
    lines: Iterable[str],
    *,
    max_problems: int = _MAX_PROBLEMS,
    progress: Callable[[int], None] | None = None,
) -> list[CsvRun]:
    """Parse and validate CSV text into runs.

    Parameters
    ----------
    lines : iterable of str
        The file's lines (an open text file, ``text.splitlines()``, ...).
    max_problems : int
        Stop collecting problems after this many.
    progress : callable or None
        Called with the current line number every 500 lines (for progress bars).

    Returns
    -------
    list of CsvRun
        Runs in the order of their first row.

    Raises
    ------
    CsvFormatError
        If any row has a problem; ``problems`` holds every problem (with line numbers).
    """
    problems: list[CsvProblem] = []
    reader = csv.reader(lines)
    header: list[str] | None = None
    cols: _Columns | None = None
    groups: dict[tuple[str, str, str, str], dict[str, Any]] = {}
    truncated = False
    try:
        for cells in reader:
            line = reader.line_num
            if progress is not None and line % 500 == 0:
                progress(line)
            if cells and line == 1:
                cells[0] = cells[0].lstrip("\ufeff")
            if not cells or all(not c.strip() for c in cells):
                continue
            if cells[0].lstrip().startswith("#"):
                continue
            if header is None:
                header = cells
                cols = _read_header(cells, problems)
                if problems:
                    break
                continue
            assert cols is not None
            if len(cells) > len(header):
                extra = [c for c in cells[len(header):] if c.strip()]
                if extra:
                    problems.append(CsvProblem(line, "", f"the row has {len(cells)} cells but "
                                               f"the header has {len(header)} columns"))
                    continue
            row = _Row(cells, line, cols, problems)
            rec = _parse_row(row)
            if len(problems) >= max_problems:
                truncated = True
                break
            if rec is None:
                continue
            key = (rec["substance"], rec["laboratory"], rec["study_reference"] or "",
                   rec["replicate_label"])
            group = groups.get(key)
            if group is None:
                groups[key] = {"first_line": line, "rec": rec, "obs": [], "rate_rows": 0}
                group = groups[key]
            else:
                first = group["rec"]
                for name in _RUN_CONSTANT:
                    if first.get(name) != rec.get(name):
                        column = {"temperature_K": cols.temp_col, "kind": ""}.get(name, name)
                        problems.append(CsvProblem(
                            line, column or "",
                            f"run {rec['replicate_label']!r} already has {name} = "
                            f"{_show(first.get(name))} (line {group['first_line']}); this row "
                            f"gives {_show(rec.get(name))}. Give each run a distinct 'run' label"))
                        break
                if first.get("loq") != rec.get("loq"):
                    problems.append(CsvProblem(line, "loq", f"run {rec['replicate_label']!r} "
                                               f"has a different LOQ on line "
                                               f"{group['first_line']}"))
            if rec["kind"] == "series":
                group["obs"].append(CsvObservation(line, rec["time"], rec["concentration"],
                                                   rec["below_loq"]))
            else:
                group["rate_rows"] += 1
                if group["rate_rows"] > 1:
                    problems.append(CsvProblem(line, "", f"run {rec['replicate_label']!r} has "
                                               "more than one reported-rate row (first on line "
                                               f"{group['first_line']})"))
            if len(problems) >= max_problems:
                truncated = True
                break
    except csv.Error as exc:
        problems.append(CsvProblem(reader.line_num, "", f"the file is not valid CSV: {exc}"))
    if header is None and not problems:
        problems.append(CsvProblem(1, "", "the file is empty: a header row is required"))
    if not problems and not groups:
        problems.append(CsvProblem(1, "", "the file has a header but no data rows"))
    if not problems:
        for group in groups.values():
            rec = group["rec"]
            obs = group["obs"]
            if rec["kind"] == "series":
                if len(obs) < 3:
                    problems.append(CsvProblem(
                        group["first_line"], "", f"run {rec['replicate_label']!r} has "
                        f"{len(obs)} observation(s); a series needs at least 3"))
                for prev, cur in zip(obs, obs[1:]):
                    if cur.time <= prev.time:
                        problems.append(CsvProblem(
                            cur.line, "time", f"run {rec['replicate_label']!r}: time "
                            f"{cur.time:g} does not follow {prev.time:g} (line {prev.line}); "
                            "list the observations of a run in increasing time, one per time"))
                        break
    if problems:
        raise CsvFormatError(problems, truncated)
    runs = []
    for group in groups.values():
        rec = group["rec"]
        runs.append(CsvRun(
            first_line=group["first_line"], substance=rec["substance"],
            laboratory=rec["laboratory"], replicate_label=rec["replicate_label"],
            temperature_K=rec["temperature_K"], pH=rec["pH"],
            study_reference=rec["study_reference"], test_guideline=rec["test_guideline"],
            glp=rec["glp"], buffer=rec["buffer"], ionic_strength_M=rec["ionic_strength_M"],
            cosolvent_percent_v_v=rec["cosolvent_percent_v_v"], sterile=rec["sterile"],
            dark=rec["dark"], kind=rec["kind"], time_unit=rec.get("time_unit"),
            concentration_unit=rec.get("concentration_unit"), loq=rec.get("loq"),
            observations=tuple(group["obs"]), k_obs=rec.get("k_obs"),
            rate_unit=rec.get("rate_unit"), dt50=rec.get("dt50"), dt50_unit=rec.get("dt50_unit"),
            se_ln_k=rec.get("se_ln_k"), model=rec["model"], notes=rec["notes"],
        ))
    return runs


def _show(value: Any) -> str:
    if isinstance(value, float):
        return f"{value:g}"
    return repr(value)


def read_runs_csv(
    source: str | Path | IO[str],
    *,
    max_problems: int = _MAX_PROBLEMS,
    progress: Callable[[int], None] | None = None,
) -> list[CsvRun]:
    """Read and validate a runs CSV file (see the module docstring for the columns).

    Parameters
    ----------
    source : path or text stream
        The CSV file (UTF-8; a byte-order mark is accepted).
    max_problems, progress
        As for :func:`parse_runs_csv`.

    Raises
    ------
    CsvFormatError
        If the file has problems (every problem carries its line number).
    FileNotFoundError
        If the path does not exist.
    """
    if isinstance(source, (str, Path)):
        with open(source, newline="", encoding="utf-8-sig") as handle:
            return parse_runs_csv(handle, max_problems=max_problems, progress=progress)
    return parse_runs_csv(source, max_problems=max_problems, progress=progress)


# ---------------------------------------------------------------------------------------
# export


def rows_to_csv(rows: Sequence[Mapping[str, Any]], columns: Sequence[str] | None = None,
                comment: str | None = None) -> str:
    """Write dict rows as CSV text.

    Parameters
    ----------
    rows : sequence of mapping
        One mapping per row.
    columns : sequence of str or None
        Column order; default the keys of the first row (then any new keys).
    comment : str or None
        A ``# ...`` line written before the header (e.g. the caution or the data version).
    """
    if columns is None:
        seen: dict[str, None] = {}
        for r in rows:
            for k in r:
                seen.setdefault(k, None)
        columns = list(seen)
    buffer = io.StringIO()
    if comment:
        for text in comment.splitlines():
            buffer.write(f"# {text}\n")
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(columns)
    for r in rows:
        writer.writerow([_cell(r.get(c)) for c in columns])
    return buffer.getvalue()


def _cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        if not math.isfinite(value):
            return ""
        return repr(value)
    if isinstance(value, (list, tuple)):
        return ";".join(_cell(v) for v in value)
    return str(value)


def to_json(payload: Any) -> str:
    """JSON text with non-finite numbers written as null (never NaN in output)."""
    return json.dumps(_clean(payload), ensure_ascii=False, indent=2)


def _clean(value: Any) -> Any:
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, Mapping):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if hasattr(value, "tolist"):
        return _clean(value.tolist())
    return value


_RUN_EXPORT_COLUMNS = (
    "substance", "laboratory", "study_reference", "test_guideline", "glp", "run",
    "temperature_K", "pH", "buffer", "ionic_strength_M", "cosolvent_percent_v_v", "sterile",
    "dark", "model", "time", "time_unit", "concentration", "concentration_unit", "below_loq",
    "loq", "k_obs_per_s", "se_ln_k", "notes",
)


def runs_to_csv(runs: Sequence[CsvRun], comment: str | None = None) -> str:
    """Write runs in the import format (``time``/``time_unit`` columns; reported rates in 1/s).

    The result imports again with :func:`parse_runs_csv` and gives the same runs.
    """
    rows = []
    for run in runs:
        base = {
            "substance": run.substance, "laboratory": run.laboratory,
            "study_reference": run.study_reference, "test_guideline": run.test_guideline,
            "glp": run.glp, "run": run.replicate_label, "temperature_K": run.temperature_K,
            "pH": run.pH, "buffer": run.buffer, "ionic_strength_M": run.ionic_strength_M,
            "cosolvent_percent_v_v": run.cosolvent_percent_v_v, "sterile": run.sterile,
            "dark": run.dark, "model": run.model, "notes": run.notes,
        }
        if run.kind == "series":
            for obs in run.observations:
                rows.append({**base, "time": obs.time, "time_unit": run.time_unit,
                             "concentration": obs.concentration,
                             "concentration_unit": run.concentration_unit,
                             "below_loq": obs.below_loq, "loq": run.loq})
        else:
            if run.k_obs is not None:
                k = float(units.rate_to_per_s(run.k_obs, run.rate_unit or "1/s"))
            else:
                k = float(units.half_life_to_rate_per_s(run.dt50, run.dt50_unit or "s"))
            rows.append({**base, "k_obs_per_s": k, "se_ln_k": run.se_ln_k})
    columns = list(_RUN_EXPORT_COLUMNS)
    if all(r.get("k_obs_per_s") is None for r in rows):
        columns = [c for c in columns if c not in ("k_obs_per_s", "se_ln_k")]
    if all(r.get("time") is None for r in rows):
        columns = [c for c in columns if c not in ("time", "time_unit", "concentration",
                                                   "concentration_unit", "below_loq", "loq")]
    return rows_to_csv(rows, columns, comment)


def run_to_payload(run: CsvRun) -> dict[str, Any]:
    """The JSON body of one run for ``POST /v1/runs`` (without ``study_id``)."""
    payload: dict[str, Any] = {
        "temperature_K": run.temperature_K,
        "pH": run.pH,
        "replicate_label": run.replicate_label,
        "sterile": run.sterile,
        "dark": run.dark,
    }
    for name in ("buffer", "ionic_strength_M", "cosolvent_percent_v_v", "notes"):
        value = getattr(run, name)
        if value is not None:
            payload[name] = value
    if run.kind == "series":
        if run.model:
            payload["series_model"] = run.model
        series: dict[str, Any] = {
            "time": [o.time for o in run.observations],
            "time_unit": run.time_unit,
            "concentration": [o.concentration for o in run.observations],
            "concentration_unit": run.concentration_unit,
        }
        if any(o.below_loq for o in run.observations):
            series["below_loq"] = [o.below_loq for o in run.observations]
        if run.loq is not None:
            series["loq"] = run.loq
        payload["series"] = series
    else:
        rate: dict[str, Any] = {}
        if run.k_obs is not None:
            rate.update(k=run.k_obs, k_unit=run.rate_unit)
        else:
            rate.update(dt50=run.dt50, dt50_unit=run.dt50_unit)
        if run.se_ln_k is not None:
            rate["se_ln_k"] = run.se_ln_k
        payload["rate"] = rate
    return payload


def csv_run_from_stored(run: Any, *, substance: str, study: Any) -> CsvRun:
    """A stored run version as a :class:`CsvRun`, in the units the laboratory sent.

    Parameters
    ----------
    run : service.models.Run
        The stored version (observations loaded).
    substance : str
        Substance name.
    study : service.models.Study
        The run's study.
    """
    common = dict(
        first_line=0, substance=substance, laboratory=study.laboratory,
        replicate_label=run.replicate_label, temperature_K=float(run.temperature_K),
        pH=float(run.pH), study_reference=study.reference, test_guideline=study.test_guideline,
        glp=bool(study.glp), buffer=run.buffer, ionic_strength_M=run.ionic_strength_M,
        cosolvent_percent_v_v=run.cosolvent_percent_v_v, sterile=bool(run.sterile),
        dark=bool(run.dark), model=run.series_model, notes=run.notes,
    )
    if run.kind == "series":
        t_unit = run.time_unit_sent if run.time_unit_sent in units.TIME_UNITS else "s"
        c_unit = run.concentration_unit_sent or run.concentration_unit
        obs = list(run.observations)
        times = np.atleast_1d(units.time_from_s([o.time_s for o in obs], t_unit))
        conc = np.atleast_1d(units.concentration_from_canonical([o.concentration for o in obs],
                                                                c_unit))
        loq = (None if run.loq is None
               else float(units.concentration_from_canonical(run.loq, c_unit)))
        return CsvRun(kind="series", time_unit=t_unit, concentration_unit=c_unit, loq=loq,
                      observations=tuple(CsvObservation(0, float(t), float(c), bool(o.below_loq))
                                         for t, c, o in zip(times, conc, obs)), **common)
    if run.k_per_s is not None:
        return CsvRun(kind="rate", k_obs=float(run.k_per_s), rate_unit="1/s",
                      se_ln_k=run.se_ln_k, **common)
    return CsvRun(kind="rate", dt50=float(run.dt50_s), dt50_unit="s", se_ln_k=run.se_ln_k,
                  **common)


@dataclass(frozen=True)
class ImportSummary:
    """What an import stored.

    Attributes
    ----------
    substances_created, studies_created : tuple of str
        Names of new substances; "laboratory (reference)" of new studies.
    runs_created : int
        Number of runs stored.
    run_uids : tuple of str
        Identifiers of the stored runs, in file order.
    substance_ids : dict
        Substance name -> id, for every substance in the file.
    """

    substances_created: tuple[str, ...]
    studies_created: tuple[str, ...]
    runs_created: int
    run_uids: tuple[str, ...]
    substance_ids: Mapping[str, int]

    def to_dict(self) -> dict[str, Any]:
        return {
            "substances_created": list(self.substances_created),
            "studies_created": list(self.studies_created),
            "runs_created": self.runs_created,
            "run_uids": list(self.run_uids),
            "substance_ids": dict(self.substance_ids),
        }


class NewSubstanceRefused(InputError):
    """The file names substances that are not registered and may not be created."""

    def __init__(self, names: Sequence[str]):
        self.names = tuple(names)
        super().__init__(
            f"substance(s) not registered: {', '.join(repr(n) for n in names)}; register them "
            "first (an admin key may import new substances)")


def store_runs(session: Any, runs: Sequence[CsvRun], *, actor: str, max_points: int,
               may_create_substances: bool = True,
               progress: Callable[[int, int], None] | None = None) -> ImportSummary:
    """Store runs read from a CSV file, creating missing substances and studies.

    Everything happens in the caller's transaction; the caller commits. On any problem
    nothing is stored (the caller rolls back) and the error names the CSV line.

    Parameters
    ----------
    session : sqlalchemy.orm.Session
        A write session.
    runs : sequence of CsvRun
        From :func:`read_runs_csv`.
    actor : str
        Who imports (recorded in the audit trail).
    max_points : int
        Largest accepted series.
    may_create_substances : bool
        Whether substances not yet registered may be created.
    progress : callable or None
        Called with (runs prepared, total runs).

    Raises
    ------
    CsvFormatError
        A run is rejected by the service's validation (line numbers of the run's rows).
    NewSubstanceRefused
        New substances named while ``may_create_substances`` is false.
    service.errors.ItemErrors
        Duplicates of stored runs (409), translated to CSV lines in the message.
    """
    from pydantic import ValidationError
    from sqlalchemy import select

    from service import crud
    from service.errors import ItemErrors
    from service.models import Study, Substance
    from service.schemas import RunCreate, StudyCreate, SubstanceCreate

    names = list(dict.fromkeys(r.substance for r in runs))
    existing = {s.name: s for s in session.scalars(
        select(Substance).where(Substance.name.in_(names))).all()}
    missing = [n for n in names if n not in existing]
    if missing and not may_create_substances:
        raise NewSubstanceRefused(missing)
    created_subs: list[str] = []
    problems: list[CsvProblem] = []
    first_line = {r.substance: r.first_line for r in reversed(runs)}
    for name in missing:
        try:
            data = SubstanceCreate(name=name, notes="registered by CSV import")
        except ValidationError as exc:
            problems.append(CsvProblem(first_line[name], "substance", _pydantic_message(exc)))
            continue
        existing[name] = crud.create_substance(session, data=data, actor=actor)
        created_subs.append(name)
    if problems:
        raise CsvFormatError(problems)
    studies: dict[tuple[str, str, str], Any] = {}
    created_studies: list[str] = []
    for run in runs:
        key = run.study_key
        if key in studies:
            continue
        sub = existing[run.substance]
        stmt = select(Study).where(Study.substance_id == sub.id,
                                   Study.laboratory == run.laboratory)
        match = None
        for st in session.scalars(stmt.order_by(Study.id)).all():
            if (st.reference or "") == (run.study_reference or ""):
                match = st
                break
        if match is None:
            try:
                data = StudyCreate(substance_id=sub.id, laboratory=run.laboratory,
                                   test_guideline=run.test_guideline, glp=bool(run.glp),
                                   reference=run.study_reference)
            except ValidationError as exc:
                problems.append(CsvProblem(run.first_line, "laboratory", _pydantic_message(exc)))
                continue
            match = crud.create_study(session, data=data, actor=actor)
            created_studies.append(run.laboratory + (f" ({run.study_reference})"
                                                     if run.study_reference else ""))
        studies[key] = match
    if problems:
        raise CsvFormatError(problems)
    bodies: list[Any] = []
    for i, run in enumerate(runs):
        try:
            bodies.append(RunCreate(study_id=studies[run.study_key].id, **run_to_payload(run)))
        except ValidationError as exc:
            problems.append(CsvProblem(run.first_line, "", f"run {run.replicate_label!r}: "
                                       f"{_pydantic_message(exc)}"))
        if progress is not None and (i % 50 == 0 or i == len(runs) - 1):
            progress(i + 1, len(runs))
    if problems:
        raise CsvFormatError(problems)
    try:
        stored = crud.create_runs_batch(session, runs=bodies, actor=actor, max_points=max_points)
    except ItemErrors as exc:
        items = []
        for item in exc.items:
            loc = item.get("loc", [])
            index = loc[2] if len(loc) > 2 and isinstance(loc[2], int) else None
            msg = str(item.get("msg", ""))
            if index is not None and index < len(runs):
                r = runs[index]
                msg = msg.replace(f"runs.{index}: ", "", 1)
                msg = f"line {r.first_line} (run {r.replicate_label!r}): {msg}"
            items.append({**item, "msg": msg})
        raise ItemErrors(items, status_code=exc.status_code) from None
    return ImportSummary(
        substances_created=tuple(created_subs), studies_created=tuple(created_studies),
        runs_created=len(stored), run_uids=tuple(r.run_uid for r in stored),
        substance_ids={n: existing[n].id for n in names},
    )


def _pydantic_message(exc: Any) -> str:
    msgs = []
    for err in exc.errors():
        msg = str(err.get("msg", "invalid value"))
        if msg.startswith("Value error, "):
            msg = msg[len("Value error, "):]
        loc = ".".join(str(p) for p in err.get("loc", ()))
        msgs.append(f"{loc}: {msg}" if loc else msg)
    return "; ".join(msgs)


#: columns of a predictions export, in order
PREDICTION_COLUMNS = (
    "temperature_K", "pH", "ionic_strength_M", "salinity", "k_per_s", "k_ci_low_per_s",
    "k_ci_high_per_s", "k_pi_low_per_s", "k_pi_high_per_s", "dt50_s", "dt50_ci_low_s",
    "dt50_ci_high_s", "dt50_pi_low_s", "dt50_pi_high_s", "dt90_s", "dt90_ci_low_s",
    "dt90_ci_high_s", "dt90_pi_low_s", "dt90_pi_high_s", "dominant_pathway",
    "temperature_outside_range", "pH_outside_range", "uncharacterised_pathway_matters",
    "ea_from_prior", "level", "method",
)


def predictions_to_rows(prediction: Any) -> list[dict[str, Any]]:
    """Rows (one per condition) of a :class:`kinetics.prediction.Prediction`."""
    n = len(prediction.k_per_s)
    rows = []
    flags = prediction.flags
    for i in range(n):
        row: dict[str, Any] = {}
        for name in PREDICTION_COLUMNS:
            if name in flags:
                row[name] = bool(flags[name][i])
            elif name in ("level", "method"):
                row[name] = getattr(prediction, name)
            elif name == "dominant_pathway":
                row[name] = str(prediction.dominant_pathway[i])
            else:
                row[name] = float(getattr(prediction, name)[i])
        for pathway, fractions in prediction.contributions.items():
            row[f"fraction_{pathway}"] = float(fractions[i])
        rows.append(row)
    return rows


def series_fit_rows(entries: Sequence[tuple[Mapping[str, Any], Any]],
                    level: float = 0.95) -> list[dict[str, Any]]:
    """Rows of per-run fit results.

    Parameters
    ----------
    entries : sequence of (run description, SeriesFit)
        The run description holds at least ``run`` (label), ``temperature_K`` and ``pH``.
    """
    rows = []
    for info, fit in entries:
        lo, hi = _k_interval(fit, level)
        rows.append({
            **{k: info.get(k) for k in ("run_uid", "run", "temperature_K", "pH")},
            "model": fit.model, "n_points": int(fit.n_points), "k_per_s": float(fit.k_per_s),
            "k_ci_low_per_s": lo, "k_ci_high_per_s": hi, "se_ln_k": float(fit.se_ln_k),
            "dt50_s": float(fit.dt50_s), "dt90_s": float(fit.dt90_s),
            "chi2_error_level_percent": float(fit.chi2_error_level_percent),
            "aicc": None if fit.aicc is None else float(fit.aicc), "rss": float(fit.rss),
        })
    return rows


def _k_interval(fit: Any, level: float = 0.95) -> tuple[float | None, float | None]:
    """Confidence interval of the run's rate constant (from :meth:`SeriesFit.interval`)."""
    iv = fit.interval(level)
    return float(iv.k_low_per_s), float(iv.k_high_per_s)


def surface_parameter_rows(surface: Any, level: float = 0.95) -> list[dict[str, Any]]:
    """Rows (one per parameter) of a fitted surface: estimate, standard error, interval."""
    interval = surface.interval(level)
    rows = []
    for i, name in enumerate(surface.parameter_names):
        rows.append({
            "parameter": name, "estimate": float(surface.estimates[i]),
            "standard_error": float(surface.standard_errors[i]),
            "ci_low": float(interval.lower[i]), "ci_high": float(interval.upper[i]),
            "level": float(interval.level),
            "from_prior": any(name == f"Ea_{p}_J_per_mol" for p in surface.ea_from_prior),
        })
    return rows
