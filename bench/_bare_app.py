"""A bare FastAPI endpoint returning a constant JSON object: the benchmark's yardstick."""

from fastapi import FastAPI

app = FastAPI()
_CONSTANT = {"status": "ok", "value": 1.0}


@app.post("/constant")
def constant() -> dict:
    return _CONSTANT
