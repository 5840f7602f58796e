"""Tests of the fieldrate command: registration, db upgrade, and the data commands
import-csv, report and calc."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from kinetics.caution import CAUTION_TEXT
from service.cli import COMMAND_MODULES, build_parser, main
from service.db import make_engine
from service.migrate import current_revision, head_revision

from live_server import ThreadedUvicorn

TEMPLATE = Path(__file__).resolve().parents[2] / "openapi_examples" / "runs_template.csv"


@pytest.fixture
def db(tmp_path, monkeypatch) -> str:
    url = f"sqlite:///{tmp_path / 'cli.db'}"
    monkeypatch.setenv("FIELDRATE_DATABASE_URL", url)
    return url


def run(capsys, *argv: str) -> tuple[int, str, str]:
    rc = main(list(argv))
    out, err = capsys.readouterr()
    return rc, out, err


def one_error_line(err: str) -> str:
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    assert lines[0].startswith("error: ")
    return lines[0]


@pytest.mark.parametrize(
    "argv, words",
    [
        (["import-csv", "--help"], ["concentration_<unit>", "--check", "--url", "exit status",
                                    "runs_template.csv"]),
        (["report", "--help"], ["--field-temperature-C", "--as-of", "--csv", "exit status"]),
        (["calc", "--help"], ["fit", "predict"]),
        (["calc", "fit", "--help"], ["--temperature-model", "--json", "exit status"]),
        (["calc", "predict", "--help"], ["--at", "--salinity", "exit status"]),
    ],
)
def test_help_is_complete(capsys, argv, words):
    with pytest.raises(SystemExit) as info:
        main(argv)
    assert info.value.code == 0
    out = capsys.readouterr().out
    for word in words:
        assert word in out


def test_commands_are_listed(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    out = capsys.readouterr().out
    for name in ("import-csv", "report", "calc", "serve"):
        assert name in out


def test_import_then_duplicate_import_fails_with_one_line(capsys, db):
    rc, out, err = run(capsys, "import-csv", str(TEMPLATE))
    assert rc == 0, err
    assert "imported: 9 run(s)" in out and "new substance: Quillorane (invented)" in out
    rc, out, err = run(capsys, "import-csv", str(TEMPLATE))
    assert rc == 1
    line = one_error_line(err)
    assert "line 3 (run 'pH4-20C-A')" in line and "8 more problem(s)" in line


def test_check_stores_nothing(capsys, db):
    rc, out, _ = run(capsys, "import-csv", str(TEMPLATE), "--check")
    assert rc == 0 and out.startswith("checked (nothing stored): 9 run(s)")
    rc, out, err = run(capsys, "import-csv", str(TEMPLATE))
    assert rc == 0, err


def test_bad_csv_names_the_line(capsys, db, tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text(TEMPLATE.read_text(encoding="utf-8").replace(",4,acetate", ",41,acetate", 1),
                   encoding="utf-8")
    rc, _, err = run(capsys, "import-csv", str(bad))
    assert rc == 1
    assert "line 3, column 'pH': pH 41.0 is outside" in one_error_line(err)
    rc, _, err = run(capsys, "import-csv", str(bad), "--all-problems")
    assert rc == 1
    assert err.count("line 3, column 'pH'") == 2  # the listing and the summary line


def test_progress_bar_goes_to_stderr(capsys, db):
    rc, out, err = run(capsys, "import-csv", str(TEMPLATE), "--progress")
    assert rc == 0
    assert "reading " in err and "100.0 %" in err
    assert "[" not in out


def test_missing_file(capsys, db):
    rc, _, err = run(capsys, "import-csv", "no/such/file.csv")
    assert rc == 1
    assert one_error_line(err) == "error: no such file: no/such/file.csv"


def test_report_from_database_by_id_and_name(capsys, db, tmp_path):
    assert run(capsys, "import-csv", str(TEMPLATE))[0] == 0
    target = tmp_path / "r.html"
    rc, out, err = run(capsys, "report", "1", "-o", str(target), "--pH", "6", "8")
    assert rc == 0, err
    page = target.read_text(encoding="utf-8")
    assert "Hydrolysis report: Quillorane (invented)" in page
    assert CAUTION_TEXT.split(".")[0] in page
    assert "12 °C, pH 8" in page
    rc, out, err = run(capsys, "report", "quillo", "-o", str(tmp_path / "r2.html"))
    assert rc == 0, err
    assert "written to" in out


@pytest.mark.parametrize(
    "argv, fragment",
    [
        (["report", "Nothing-like-this"], "no substance named 'Nothing-like-this'"),
        (["report", "99"], "no substance with id 99"),
        (["report"], "name a SUBSTANCE"),
        (["report", "1", "--as-of", "yesterday"], "not an ISO 8601 time"),
        (["report", "1", "--as-of", "2026-01-01T00:00:00"], "needs a time zone"),
        (["report", "1", "--field-temperature-C", "150"], "150"),
    ],
)
def test_report_errors_are_one_line(capsys, db, argv, fragment):
    assert run(capsys, "import-csv", str(TEMPLATE))[0] == 0
    rc, _, err = run(capsys, *argv)
    assert rc == 1
    assert fragment in one_error_line(err)


def test_report_from_csv_needs_no_database(capsys, tmp_path):
    target = tmp_path / "csv.html"
    rc, out, err = run(capsys, "report", "--csv", str(TEMPLATE), "-o", str(target))
    assert rc == 0, err
    assert "<svg" in target.read_text(encoding="utf-8")


def _table_rows(out: str, first_header: str) -> list[list[str]]:
    lines = out.splitlines()
    start = next(i for i, ln in enumerate(lines) if ln.startswith(first_header))
    rows = []
    for ln in lines[start + 2:]:
        if not ln.strip():
            break
        rows.append(re.split(r"\s{2,}", ln.strip()))
    return rows


def test_calc_fit_prints_tables_equal_to_a_direct_fit(capsys):
    from kinetics.series import fit_series
    from kinetics import units
    from service import csv_io

    rc, out, err = run(capsys, "calc", "fit", str(TEMPLATE))
    assert rc == 0, err
    rows = _table_rows(out, "run  ")
    runs = csv_io.read_runs_csv(TEMPLATE)
    assert [r[0] for r in rows] == [r.replicate_label for r in runs]
    first = runs[0]
    fit = fit_series([o.time for o in first.observations],
                     [o.concentration for o in first.observations], time_unit="d")
    dt50_d = float(units.time_from_s(fit.dt50_s, "d"))
    assert float(rows[0][5]) == pytest.approx(dt50_d, rel=5e-3)
    assert "rate surface: arrhenius" in out
    assert f"caution: {CAUTION_TEXT}" in out


def test_calc_predict_matches_kinetics_predict(capsys):
    from kinetics.prediction import predict
    from service import csv_io
    from service.commands.calc import _num
    from service.fitting import compute_fit, run_input_from_payload
    from service.schemas import FitOptions, RunData

    rc, out, err = run(capsys, "calc", "predict", str(TEMPLATE), "--at", "12", "8.3",
                       "--at", "20", "7")
    assert rc == 0, err
    rows = _table_rows(out, "T [°C]")
    assert len(rows) == 2
    runs = csv_io.read_runs_csv(TEMPLATE)
    data = [RunData(**csv_io.run_to_payload(r)) for r in runs]
    surface = compute_fit([run_input_from_payload(d, i) for i, d in enumerate(data)],
                          **FitOptions().kinetics_kwargs()).surface
    pred = predict(surface, np.array([285.15, 293.15]), np.array([8.3, 7.0]))
    assert rows[0][3] == _num(pred.dt50_s[0] / 86400.0)
    assert rows[1][3] == _num(pred.dt50_s[1] / 86400.0)
    assert "temperature_outside_range" in rows[0][-1]


@pytest.mark.parametrize(
    "argv, fragment",
    [
        (["calc", "predict", str(TEMPLATE), "--at", "12", "15"], "pH 15.0 is outside"),
        (["calc", "predict", str(TEMPLATE)], "at least one condition"),
        (["calc", "predict", str(TEMPLATE), "--at", "150", "7"], "temperature"),
        (["calc", "fit", str(TEMPLATE), "--substance", "Other"], "no runs of 'Other'"),
        (["calc", "fit", str(TEMPLATE), "--pathways", "acid,quantum"], "quantum"),
    ],
)
def test_calc_errors_are_one_line(capsys, argv, fragment):
    rc, _, err = run(capsys, *argv)
    assert rc == 1
    assert fragment in one_error_line(err)


def test_calc_fit_json(capsys):
    import json

    rc, out, _ = run(capsys, "calc", "fit", str(TEMPLATE), "--json")
    assert rc == 0
    payload = json.loads(out)
    assert payload["caution"] == CAUTION_TEXT
    assert len(payload["runs"]) == 9


def test_wrong_arguments_exit_2(capsys):
    with pytest.raises(SystemExit) as info:
        main(["calc", "predict", str(TEMPLATE), "--at", "12"])
    assert info.value.code == 2


# ------------------------------------------------------------------ registration, db
def test_subcommands_registered():
    help_text = build_parser().format_help()
    assert "serve" in help_text and "db" in help_text
    assert "service.commands.serve" in COMMAND_MODULES


def test_db_upgrade(tmp_path, capsys):
    url = f"sqlite:///{tmp_path / 'cli.db'}"
    assert main(["db", "upgrade", "--database-url", url]) == 0
    assert head_revision() in capsys.readouterr().out
    engine = make_engine(url)
    try:
        assert current_revision(engine) == head_revision()
    finally:
        engine.dispose()


def test_no_command_prints_help(capsys):
    assert main([]) == 2
    assert "usage" in capsys.readouterr().out


def test_unknown_command_exits():
    with pytest.raises(SystemExit):
        main(["frobnicate"])


# ------------------------------------------------------------------ through a service
def test_import_and_report_through_a_running_service(capsys, tmp_path, monkeypatch):
    from service.config import Settings
    from service.main import create_app
    from service.security import issue_key

    app = create_app(Settings(database_url=f"sqlite:///{tmp_path / 'remote.db'}"))
    with ThreadedUvicorn(app) as server:
        key = issue_key(app.state.session_factory, label="cli remote test", scopes="admin",
                        actor="test setup")[1]
        rc, _, err = run(capsys, "import-csv", str(TEMPLATE), "--url", server.base_url)
        assert rc == 1
        assert "401" in one_error_line(err)
        monkeypatch.setenv("FIELDRATE_API_KEY", key)
        rc, out, err = run(capsys, "import-csv", str(TEMPLATE), "--url", server.base_url)
        assert rc == 0, err
        assert f"imported: 9 run(s) from {TEMPLATE} into {server.base_url}" in out
        target = tmp_path / "remote.html"
        rc, out, err = run(capsys, "report", "Quillorane (invented)", "--url", server.base_url,
                           "-o", str(target), "--field-temperature-C", "8")
        assert rc == 0, err
        page = target.read_text(encoding="utf-8")
        assert "8 °C, pH 5" in page and "<svg" in page
    app.state.engine.dispose()
