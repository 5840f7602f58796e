"""Fuzzing: schemathesis requests generated from the service's own OpenAPI schema.

Every operation gets schema-valid (positive) and schema-violating (negative) requests,
sent with a valid admin key to an app holding the invented demo scenario, on SQLite and
(when FIELDRATE_TEST_DATABASE_URL is set) PostgreSQL. Every
response must be below 500 and conform to the schema (documented status code, content
type and body schema). The total number of requests is at least 2,000; the figure is
printed.
"""

from __future__ import annotations

from collections import Counter

import schemathesis
from hypothesis import HealthCheck, Phase, given, settings
from hypothesis.errors import Unsatisfiable
from schemathesis import GenerationMode
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_schema_conformance,
    status_code_conformance,
)
from sqlalchemy import select

from service.config import Settings
from service.demo import load_demo
from service.main import create_app
from service.migrate import upgrade_head
from service.models import ApiKey
from service.security import issue_key

#: examples per operation and generation mode; some operations run out of distinct
#: requests sooner, so the total is asserted separately
EXAMPLES_PER_MODE = {GenerationMode.POSITIVE: 40, GenerationMode.NEGATIVE: 30}
MIN_REQUESTS = 2000
CHECKS = [not_a_server_error, status_code_conformance, content_type_conformance,
          response_schema_conformance]


def test_generated_requests_get_no_5xx_and_conform_to_the_schema(db_url):
    url = db_url
    upgrade_head(url)
    settings_ = Settings(database_url=url, run_migrations_on_startup=False)
    load_demo(settings_)
    app = create_app(settings_)
    factory = app.state.session_factory
    state = {"key_id": 0, "headers": {}}

    def fresh_key() -> None:
        key_id, secret = issue_key(factory, label="fuzzer (invented)", scopes="admin",
                                   actor="test setup")
        state["key_id"] = key_id
        state["headers"] = {"Authorization": f"Bearer {secret}"}

    def key_revoked() -> bool:
        with factory() as s:
            return s.scalar(select(ApiKey.revoked_at).where(ApiKey.id == state["key_id"])) is not None

    fresh_key()
    schema = schemathesis.openapi.from_asgi("/openapi.json", app)
    counts: Counter[str] = Counter()
    statuses: Counter[int] = Counter()

    for result in schema.get_all_operations():
        operation = result.ok()
        for mode, n in EXAMPLES_PER_MODE.items():

            @given(case=operation.as_strategy(generation_mode=mode))
            @settings(max_examples=n, deadline=None, database=None, derandomize=True,
                      phases=[Phase.explicit, Phase.generate],
                      suppress_health_check=list(HealthCheck))
            def exercise(case):
                headers = dict(state["headers"])
                response = case.call(headers=headers)
                counts[operation.label] += 1
                statuses[response.status_code] += 1
                case.validate_response(response, checks=CHECKS, headers=headers)
                if response.status_code == 200 and "/revoke" in operation.label and key_revoked():
                    fresh_key()  # the fuzzer revoked its own key: carry on with a new one

            try:
                exercise()
            except Unsatisfiable:
                # nothing can violate the schema of an operation without inputs (GET /health)
                assert mode is GenerationMode.NEGATIVE, operation.label

    total = sum(counts.values())
    server_errors = sum(n for code, n in statuses.items() if code >= 500)
    app.state.engine.dispose()
    print(f"fuzzed requests: {total} over {len(counts)} operations; status codes "
          f"{dict(sorted(statuses.items()))}; 5xx: {server_errors}")
    assert server_errors == 0
    assert total >= MIN_REQUESTS, counts
