"""Tests of service.csv_io: the runs CSV format, its validation, storage and export."""

from __future__ import annotations

import dataclasses
import io
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from service import csv_io
from service.db import make_engine, make_session_factory, session_scope
from service.errors import ItemErrors
from service.migrate import upgrade_head

TEMPLATE = Path(__file__).resolve().parents[2] / "openapi_examples" / "runs_template.csv"

HEAD = "substance,laboratory,run,temperature_C,pH,time_d,concentration_mg_per_L\n"


def _rows(*rows: str, head: str = HEAD) -> list[str]:
    return (head + "".join(r + "\n" for r in rows)).splitlines()


def _series(label: str = "A", t_C: float = 50, pH: float = 9, substance: str = "Testazine "
            "(invented)") -> list[str]:
    return [f"{substance},Bench Lab (invented),{label},{t_C},{pH},{t},{c}"
            for t, c in ((0, 10.0), (1, 6.1), (2, 3.7), (4, 1.4))]


def _strip_lines(runs):
    return [dataclasses.replace(r, first_line=0, observations=tuple(
        dataclasses.replace(o, line=0) for o in r.observations)) for r in runs]


def test_template_reads_and_says_it_is_invented():
    text = TEMPLATE.read_text(encoding="utf-8")
    assert "INVENTED" in text.splitlines()[0]
    runs = csv_io.read_runs_csv(TEMPLATE)
    assert len(runs) == 9
    assert {r.substance for r in runs} == {"Quillorane (invented)"}
    assert all(len(r.observations) == 8 for r in runs)
    assert {round(r.pH) for r in runs} == {4, 7, 9}
    # 0 °C = 273.15 K exactly (SI Brochure, 9th edition, 2019, section 2.3.1)
    assert_allclose(sorted({r.temperature_K for r in runs}), [293.15, 308.15, 323.15],
                    rtol=0, atol=1e-9)


def test_units_come_from_the_header():
    runs = csv_io.parse_runs_csv(_rows(
        *[f"X,L,A,25,7,{t},{c}" for t, c in ((0, 100), (2, 50), (4, 25))],
        head="substance,laboratory,run,temperature_C,pH,time_h,concentration_percent\n"))
    (run,) = runs
    assert run.time_unit == "h"
    assert run.concentration_unit == "%"
    assert_allclose(run.temperature_K, 298.15, rtol=0, atol=1e-12)


def test_kelvin_column_is_validated_as_liquid_water():
    with pytest.raises(csv_io.CsvFormatError, match=r"line 2, column 'temperature_K'"):
        csv_io.parse_runs_csv(_rows(
            "X,L,A,25,7,0,100", "X,L,A,25,7,2,50", "X,L,A,25,7,4,25",
            head="substance,laboratory,run,temperature_K,pH,time_h,concentration_percent\n"))


def test_unit_columns_instead_of_header_units():
    runs = csv_io.parse_runs_csv(_rows(
        "X,L,A,20,7,0,d,10,umol/L", "X,L,A,20,7,1,d,8,umol/L", "X,L,A,20,7,2,d,6,umol/L",
        head="substance,laboratory,run,temperature_C,pH,time,time_unit,concentration,"
             "concentration_unit\n"))
    assert runs[0].time_unit == "d" and runs[0].concentration_unit == "umol/L"


def test_reported_rate_rows():
    runs = csv_io.parse_runs_csv(_rows(
        "X,L,A,20,7,0.05,0.1", "X,L,B,30,7,0.12,0.1",
        head="substance,laboratory,run,temperature_C,pH,k_obs_per_d,se_ln_k\n"))
    assert [r.kind for r in runs] == ["rate", "rate"]
    assert runs[0].rate_unit == "1/d"
    payload = csv_io.run_to_payload(runs[0])
    assert payload["rate"] == {"k": 0.05, "k_unit": "1/d", "se_ln_k": 0.1}


@pytest.mark.parametrize(
    "lines, line, column, fragment",
    [
        (_series()[:1] + ["Testazine (invented),Bench Lab (invented),A,50,15,1,6.1"], 3, "pH",
         "pH 15.0 is outside"),
        (["X,L,A,abc,7,0,1"], 2, "temperature_C", "'abc' is not a number"),
        (["X,L,A,20,7,0,-1"], 2, "concentration_mg_per_L", "negative"),
        (["X,L,A,20,7,-1,1"], 2, "time_d", "negative"),
        (["X,L,A,120,7,0,1"], 2, "temperature_C", "temperature 120"),
        (["X,,A,20,7,0,1"], 2, "laboratory", "laboratory is empty"),
        (["X,L,A,20,7,0,1", "X,L,A,20,7,2,1", "X,L,A,20,7,1,1"], 4, "time", "does not follow"),
        (["X,L,A,20,7,0,1", "X,L,A,20,7,1,1"], 2, "", "at least 3"),
        (["X,L,A,20,7,0,1", "X,L,A,30,7,1,1"], 3, "temperature_C", "already has temperature_K"),
        (["X,L,A,20,7,0,1,extra"], 2, "", "the header has 7 columns"),
    ],
)
def test_row_problems_name_line_and_column(lines, line, column, fragment):
    with pytest.raises(csv_io.CsvFormatError) as info:
        csv_io.parse_runs_csv(_rows(*lines))
    problem = info.value.problems[0]
    assert (problem.line, problem.column) == (line, column), str(problem)
    assert fragment in problem.message
    assert f"line {line}" in str(info.value)


@pytest.mark.parametrize(
    "head, fragment",
    [
        ("substance,laboratory,run,temperature_C,pH,time_d,concentration_mg_per_X\n",
         "unknown concentration unit"),
        ("substance,laboratory,run,temperature_C,pH,time_d,conc\n", "unknown column 'conc'"),
        ("substance,laboratory,temperature_C,pH,time_d,concentration_mg_per_L\n",
         "required column 'run'"),
        ("substance,laboratory,run,pH,time_d,concentration_mg_per_L\n", "temperature column"),
        ("substance,laboratory,run,temperature_C,pH,time_d\n", "concentration"),
        ("substance,laboratory,run,temperature_C,temperature_K,pH,time_d,"
         "concentration_mg_per_L\n", "give the temperature once"),
        ("substance,laboratory,run,temperature_C,pH,time,concentration_mg_per_L\n",
         "needs a 'time_unit' column"),
    ],
)
def test_header_problems_are_on_line_1(head, fragment):
    with pytest.raises(csv_io.CsvFormatError) as info:
        csv_io.parse_runs_csv(_rows("X,L,A,20,7,0,1", head=head))
    assert info.value.problems[0].line == 1
    assert any(fragment in p.message for p in info.value.problems), info.value.problems


def test_every_problem_is_collected_not_only_the_first():
    with pytest.raises(csv_io.CsvFormatError) as info:
        csv_io.parse_runs_csv(_rows("X,L,A,20,15,0,1", "X,L,A,abc,7,1,-1", "X,L,A,20,7,x,1"))
    lines = [p.line for p in info.value.problems]
    assert lines == [2, 3, 3, 4]
    assert "and 1 more problem" in str(info.value)


def test_comment_rows_and_bom_are_accepted_and_counted():
    text = "\ufeff# invented\n" + HEAD + "\n".join(_series()) + "\n"
    runs = csv_io.read_runs_csv(io.StringIO(text))
    assert runs[0].first_line == 3


@pytest.mark.parametrize("text, fragment", [("", "empty"), (HEAD, "no data rows")])
def test_empty_files_are_refused(text, fragment):
    with pytest.raises(csv_io.CsvFormatError, match=fragment):
        csv_io.parse_runs_csv(text.splitlines())


def test_export_imports_again_to_the_same_runs():
    runs = csv_io.read_runs_csv(TEMPLATE)
    again = csv_io.parse_runs_csv(csv_io.runs_to_csv(runs, comment="round trip").splitlines())
    assert _strip_lines(again) == _strip_lines(runs)


def test_progress_is_reported_for_long_files():
    seen = []
    lines = _rows(*[f"X,L,R{i // 4},20,7,{i % 4},{10 - i % 4}" for i in range(2000)])
    csv_io.parse_runs_csv(lines, progress=seen.append)
    assert seen and seen[-1] >= 1500


@pytest.fixture
def factory(tmp_path):
    url = f"sqlite:///{tmp_path / 'csv.db'}"
    upgrade_head(url)
    engine = make_engine(url)
    yield make_session_factory(engine)
    engine.dispose()


def test_store_creates_substances_studies_and_runs_once(factory):
    runs = csv_io.read_runs_csv(TEMPLATE)
    with session_scope(factory, write=True) as session:
        summary = csv_io.store_runs(session, runs, actor="test", max_points=10_000)
    assert summary.runs_created == 9
    assert summary.substances_created == ("Quillorane (invented)",)
    assert len(summary.studies_created) == 1
    # the second import of the same file is refused and stores nothing
    with pytest.raises(ItemErrors) as info:
        with session_scope(factory, write=True) as session:
            csv_io.store_runs(session, runs, actor="test", max_points=10_000)
    assert info.value.status_code == 409
    assert info.value.items[0]["msg"].startswith(f"line {runs[0].first_line} (run ")
    from service import crud

    with factory() as session:
        assert len(crud.current_runs(session, substance_id=summary.substance_ids[
            "Quillorane (invented)"])) == 9


def test_store_refuses_new_substances_without_permission(factory):
    runs = csv_io.parse_runs_csv(_rows(*_series()))
    with pytest.raises(csv_io.NewSubstanceRefused, match="Testazine"):
        with session_scope(factory, write=True) as session:
            csv_io.store_runs(session, runs, actor="test", max_points=10_000,
                              may_create_substances=False)


def test_stored_runs_export_in_the_units_sent(factory):
    from sqlalchemy import select

    from service.models import Run, Study

    runs = csv_io.read_runs_csv(TEMPLATE)
    with session_scope(factory, write=True) as session:
        csv_io.store_runs(session, runs, actor="test", max_points=10_000)
    with factory() as session:
        stored = session.scalars(select(Run).order_by(Run.id)).all()
        study = session.scalars(select(Study)).one()
        back = [csv_io.csv_run_from_stored(r, substance="Quillorane (invented)", study=study)
                for r in stored]
    assert [r.concentration_unit for r in back] == ["mg/L"] * 9
    assert [r.time_unit for r in back] == ["d"] * 9
    for a, b in zip(back, runs):
        assert_allclose([o.time for o in a.observations], [o.time for o in b.observations],
                        rtol=1e-12, atol=0)
        # mg/L -> kg/m3 -> mg/L (1 mg/L = 1e-3 kg/m3, SI Brochure 9th ed. prefixes)
        assert_allclose([o.concentration for o in a.observations],
                        [o.concentration for o in b.observations], rtol=1e-12, atol=0)


def test_prediction_and_fit_rows_carry_units_in_their_names():
    plain = ("pH", "salinity", "level", "method")
    assert all(("_" in c) or c in plain for c in csv_io.PREDICTION_COLUMNS)
    assert "dt50_pi_high_s" in csv_io.PREDICTION_COLUMNS


def test_csv_cells_never_hold_nan():
    text = csv_io.rows_to_csv([{"a": float("nan"), "b": True, "c": None, "d": 1.5}])
    assert text.splitlines()[1] == ",yes,,1.5"
    assert csv_io.to_json({"x": float("inf"), "y": [1.0, float("nan")]}).count("null") == 2
