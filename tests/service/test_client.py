"""Tests of service.client against the real application (in-process ASGI and a real uvicorn)."""

from __future__ import annotations

import asyncio
from pathlib import Path

import httpx
import pytest
from numpy.testing import assert_allclose

from kinetics.caution import CAUTION_TEXT
from service import client as fc
from service.config import Settings
from service.main import create_app
from service.migrate import upgrade_head
from service.schemas import RunPublic, SubstancePublic
from service.security import issue_key

from live_server import ThreadedUvicorn, free_port

TEMPLATE = Path(__file__).resolve().parents[2] / "openapi_examples" / "runs_template.csv"
INVENTED = "invented client test data"

SERIES_RUN = {
    "temperature_C": 50.0, "pH": 9.0, "replicate_label": "A",
    "series": {"time": [0, 1, 2, 4, 7], "time_unit": "d",
               "concentration": [10.0, 8.1, 6.6, 4.4, 2.4], "concentration_unit": "mg/L"},
}


@pytest.fixture
def asgi_app(db_url):
    upgrade_head(db_url)  # the ASGI transport does not run the startup hook
    app = create_app(Settings(database_url=db_url, run_migrations_on_startup=False))
    yield app
    app.state.engine.dispose()


def _key(app, scopes: str = "admin") -> str:
    return issue_key(app.state.session_factory, label=f"client test ({scopes})", scopes=scopes,
                     actor="test setup")[1]


class LosesResponses(httpx.AsyncBaseTransport):
    """Passes every request to the application, then loses the first ``n`` answers
    (as a dropped connection after the server did the work would)."""

    def __init__(self, inner: httpx.AsyncBaseTransport, n: int = 1):
        self.inner, self.n = inner, n
        self.keys: list[str | None] = []

    async def handle_async_request(self, request: httpx.Request) -> httpx.Response:
        self.keys.append(request.headers.get("Idempotency-Key"))
        response = await self.inner.handle_async_request(request)
        if self.n > 0:
            self.n -= 1
            await response.aread()
            raise httpx.ReadTimeout("the answer was lost", request=request)
        return response


class AnswersBusy(httpx.AsyncBaseTransport):
    """Answers 503 (with Retry-After: 0) to the first ``n`` requests without passing them on."""

    def __init__(self, inner: httpx.AsyncBaseTransport, n: int = 1):
        self.inner, self.n = inner, n
        self.calls = 0

    async def handle_async_request(self, request: httpx.Request) -> httpx.Response:
        self.calls += 1
        if self.n > 0:
            self.n -= 1
            return httpx.Response(503, json={"error": "unavailable", "detail": "busy"},
                                  headers={"Retry-After": "0"}, request=request)
        return await self.inner.handle_async_request(request)


def _async_client(app, transport=None, **kw) -> fc.AsyncClient:
    transport = transport or httpx.ASGITransport(app=app)
    return fc.AsyncClient("http://fieldrate.test", api_key=kw.pop("api_key", None) or _key(app),
                          transport=transport, backoff_s=0.0, **kw)


def test_async_client_round_trip_is_typed(asgi_app):
    async def scenario():
        async with _async_client(asgi_app) as c:
            assert (await c.health())["status"]
            sub = await c.create_substance("Clientazine (invented)", notes=INVENTED)
            assert isinstance(sub, SubstancePublic)
            study = await c.create_study(sub.id, "Client Bench Lab (invented)")
            run = await c.create_run(study.id, SERIES_RUN)
            assert isinstance(run, RunPublic) and run.kind == "series"
            assert (await c.get_run(run.run_uid)).run_uid == run.run_uid
            page = await c.list_runs(substance_id=sub.id)
            assert page.total == 1 and isinstance(page.items[0], RunPublic)
            imported = await c.import_csv(TEMPLATE.read_text(encoding="utf-8"))
            sid = imported["substance_ids"]["Quillorane (invented)"]
            model = await c.get_model(sid)
            result = await c.predict(sid, [{"temperature_C": 12, "pH": 8.3}])
            page_html = await c.report_html(sid, field_temperature_C=15, pH=[7, 8])
            runs_csv = await c.export_runs(sid)
            return model, result, page_html, runs_csv

    model, result, page_html, runs_csv = asyncio.run(scenario())
    assert model["caution"] == CAUTION_TEXT
    assert result["caution"] == CAUTION_TEXT and len(result["predictions"]) == 1
    assert "15 °C, pH 8" in page_html
    assert runs_csv.startswith("# runs of Quillorane (invented)")


def test_a_lost_answer_is_retried_with_the_same_idempotency_key(asgi_app):
    lossy = LosesResponses(httpx.ASGITransport(app=asgi_app), n=1)

    async def scenario():
        async with _async_client(asgi_app, transport=lossy, retries=2) as c:
            sub = await c.create_substance("Retrazine (invented)", notes=INVENTED)
        async with _async_client(asgi_app) as c:
            return sub, await c.list_substances(name_contains="Retrazine")

    sub, page = asyncio.run(scenario())
    assert sub.name == "Retrazine (invented)"
    assert len(lossy.keys) == 2 and lossy.keys[0] == lossy.keys[1] and lossy.keys[0]
    assert page.total == 1  # stored once although the request reached the server twice


def test_each_call_gets_its_own_key(asgi_app):
    lossy = LosesResponses(httpx.ASGITransport(app=asgi_app), n=0)

    async def scenario():
        async with _async_client(asgi_app, transport=lossy) as c:
            await c.create_substance("Firstazine (invented)")
            await c.create_substance("Secondazine (invented)")

    asyncio.run(scenario())
    assert len(set(lossy.keys)) == 2


def test_busy_answers_are_retried_and_then_raised(asgi_app):
    busy = AnswersBusy(httpx.ASGITransport(app=asgi_app), n=2)

    async def scenario(retries):
        async with _async_client(asgi_app, transport=busy, retries=retries) as c:
            return await c.list_substances()

    assert asyncio.run(scenario(2)).total == 0
    assert busy.calls == 3
    busy.n, busy.calls = 5, 0
    with pytest.raises(fc.ServiceUnavailable) as info:
        asyncio.run(scenario(1))
    assert info.value.status_code == 503 and busy.calls == 2


@pytest.mark.parametrize(
    "call, exc, status, code",
    [
        (lambda c: c.get_substance(999), fc.NotFoundError, 404, "not_found"),
        (lambda c: c.create_substance(""), fc.ValidationFailed, 422, "validation_error"),
        (lambda c: c.create_study(999, "Nowhere Lab (invented)"), fc.NotFoundError, 404,
         "not_found"),
    ],
)
def test_error_answers_become_exceptions(asgi_app, call, exc, status, code):
    async def scenario():
        async with _async_client(asgi_app) as c:
            await call(c)

    with pytest.raises(exc) as info:
        asyncio.run(scenario())
    assert info.value.status_code == status and info.value.code == code
    assert str(info.value).startswith(str(status))


def test_duplicates_and_bad_keys(asgi_app):
    async def scenario():
        async with _async_client(asgi_app) as c:
            await c.create_substance("Twinazine (invented)")
            with pytest.raises(fc.ConflictError):
                await c.create_substance("Twinazine (invented)")
        async with fc.AsyncClient("http://fieldrate.test", api_key="frk_not-a-real-key",
                                  transport=httpx.ASGITransport(app=asgi_app)) as c:
            with pytest.raises(fc.AuthenticationError):
                await c.list_substances()
        async with _async_client(asgi_app, api_key=_key(asgi_app, "read")) as c:
            with pytest.raises(fc.PermissionDenied):
                await c.create_substance("Readonlyazine (invented)")

    asyncio.run(scenario())


def test_validation_detail_lists_the_problems(asgi_app):
    async def scenario():
        async with _async_client(asgi_app) as c:
            sub = await c.create_substance("Detailazine (invented)")
            study = await c.create_study(sub.id, "Detail Lab (invented)")
            await c.create_run(study.id, {**SERIES_RUN, "pH": 15.0})

    with pytest.raises(fc.ValidationFailed) as info:
        asyncio.run(scenario())
    assert isinstance(info.value.detail, list)
    assert any("pH" in item["msg"] for item in info.value.detail)


def test_unreachable_service(tmp_path):
    c = fc.Client(f"http://127.0.0.1:{free_port()}", retries=1, backoff_s=0.0, timeout=2.0)
    with pytest.raises(fc.ServiceUnreachable, match="after 2 attempt"):
        c.health()
    c.close()


def test_bad_retry_settings_are_refused():
    with pytest.raises(ValueError, match="retries"):
        fc.Client(retries=-1)


@pytest.fixture
def live(tmp_path):
    url = f"sqlite:///{tmp_path / 'live.db'}"
    app = create_app(Settings(database_url=url))  # startup runs the migrations
    with ThreadedUvicorn(app) as server:
        yield server, app
    app.state.engine.dispose()


def test_sync_client_against_a_real_uvicorn(live):
    server, app = live
    key = _key(app)
    with fc.Client(server.base_url, api_key=key, backoff_s=0.0) as c:
        assert c.ready()
        summary = c.import_csv(TEMPLATE.read_text(encoding="utf-8"))
        sid = summary["substance_ids"]["Quillorane (invented)"]
        assert c.find_substance("Quillorane (invented)").id == sid
        runs = list(c.iter_runs(substance_id=sid, page_size=4))
        assert len(runs) == 9
        model = c.get_model(sid)
        fits = c.export_fits(sid, format="json")
        assert fits["data_version"] == model["data_version"]
        rows = c.export_predictions(sid, [{"temperature_C": 12, "pH": 8.3}], format="json")
        direct = c.predict(sid, [{"temperature_C": 12, "pH": 8.3}])
        assert_allclose(rows["predictions"][0]["dt50_s"], direct["predictions"][0]["dt50_s"],
                        rtol=1e-12, atol=0)
        page = c.report_html(sid)
        assert "<svg" in page and "Quillorane (invented)" in page
        with pytest.raises(fc.NotFoundError):
            c.get_run("00000000-0000-0000-0000-000000000000")
