"""Every example in openapi_examples/ is posted in order and its response checked.

The examples are an invented scenario; they are also what /docs shows.
"""

from __future__ import annotations

import json
from pathlib import Path

from service.api.examples import EXAMPLES_DIR

EXAMPLES = sorted(
    (json.loads(p.read_text(encoding="utf-8")) | {"file": p.name} for p in Path(EXAMPLES_DIR).glob("*.json")),
    key=lambda e: e["order"],
)


def _matches(expected, actual, path="response"):
    if isinstance(expected, dict):
        assert isinstance(actual, dict), f"{path}: expected an object, got {actual!r}"
        for key, value in expected.items():
            assert key in actual, f"{path}.{key} missing"
            _matches(value, actual[key], f"{path}.{key}")
    elif isinstance(expected, float):
        assert abs(actual - expected) <= 1e-9 * max(1.0, abs(expected)), f"{path}: {actual} != {expected}"
    else:
        assert actual == expected, f"{path}: {actual!r} != {expected!r}"


def test_examples_are_invented():
    assert EXAMPLES
    for ex in EXAMPLES:
        assert "invented" in json.dumps(ex).lower(), ex["file"]


def test_examples_post_and_answer_as_documented(client):
    context: dict[str, str] = {}
    for ex in EXAMPLES:
        path = ex["path"].format(**context)
        r = client.request(ex["method"], path, json=ex.get("request"), params=ex.get("params"))
        assert r.status_code == ex["response_status"], (ex["file"], r.text)
        body = r.json()
        _matches(ex["response"], body)
        if ex["file"] == "run_create.json":
            context["run_uid"] = body["run_uid"]


def test_examples_appear_in_openapi(client):
    spec = client.get("/openapi.json").json()
    text = json.dumps(spec, ensure_ascii=False)
    for ex in EXAMPLES:
        if ex.get("request") is not None:
            assert ex["summary"] in text, ex["file"]
    assert client.get("/docs").status_code == 200
