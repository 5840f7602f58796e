"""OpenAPI examples read from ``openapi_examples/*.json``.

Each file holds one invented example: ``summary``, ``description``, the ``request`` body,
the ``path`` it is posted to and the expected ``response_status`` and (part of the)
``response``. The same files are the API tests' fixtures, so the documented examples are
known to work.
"""

from __future__ import annotations

import json
from functools import lru_cache
from pathlib import Path
from typing import Any

from fastapi import Body

__all__ = ["EXAMPLES_DIR", "load_example", "openapi_examples"]

EXAMPLES_DIR = Path(__file__).resolve().parent.parent.parent / "openapi_examples"


@lru_cache(maxsize=None)
def load_example(name: str) -> dict[str, Any] | None:
    """The example ``openapi_examples/<name>.json`` (None if it is not shipped)."""
    path = EXAMPLES_DIR / f"{name}.json"
    if not path.is_file():
        return None
    return json.loads(path.read_text(encoding="utf-8"))


def openapi_examples(*names: str) -> Any:
    """A ``Body(...)`` marker carrying the named examples for the OpenAPI document."""
    examples = {}
    for name in names:
        ex = load_example(name)
        if ex is not None:
            examples[name] = {
                "summary": ex.get("summary", name),
                "description": ex.get("description", ""),
                "value": ex["request"],
            }
    return Body(openapi_examples=examples) if examples else Body()
