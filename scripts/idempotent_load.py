"""One load-test client: posts runs to a fieldrate server with deliberate retries.

Each run is posted with its own ``Idempotency-Key`` and then, on purpose, posted again
in one of three ways, the way a laboratory system retries after a timeout:

* ``repeat``: the same request again after the first answer arrived;
* ``race``: the same request twice at the same moment, from two threads;
* ``abandon``: a first attempt with a client timeout so short that the answer is never
  read (the server may or may not have stored the run), then a normal retry.

Every attempt must end in the same answer: 201 with the same run id. The summary (JSON
on stdout) counts status codes and lists the run id stored for each key.

Usage::

    python scripts/idempotent_load.py --base-url http://127.0.0.1:8123 --key frk_... \\
        --study-id 1 --client 0 --runs 200

The data are invented (a fictitious series; replicate labels name client and index).
"""

from __future__ import annotations

import argparse
import json
import sys
import threading
from collections import Counter

import httpx

MODES = ("repeat", "race", "abandon")


def run_body(study_id: int, client: int, index: int) -> dict:
    """An invented run; the replicate label makes each (client, index) distinct."""
    return {
        "study_id": study_id,
        "temperature_C": 25.0,
        "pH": 7.0,
        "replicate_label": f"load-c{client}-r{index}",
        "notes": "invented load-test data",
        "series": {
            "time": [0, 1, 2, 4, 7],
            "time_unit": "d",
            "concentration": [10.0, 8.1, 6.6, 4.4, 2.4],
            "concentration_unit": "mg/L",
        },
    }


def post(client: httpx.Client, body: dict, key: str, timeout: float | None = None):
    try:
        r = client.post("/v1/runs", json=body, headers={"Idempotency-Key": key},
                        timeout=timeout if timeout is not None else 120.0)
    except httpx.TimeoutException:
        return None, None
    if r.status_code == 201:
        return r.status_code, r.json().get("run_uid")
    return r.status_code, "!" + r.text[:300]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--base-url", required=True)
    parser.add_argument("--key", required=True, help="an API key with the ingest scope")
    parser.add_argument("--study-id", type=int, required=True)
    parser.add_argument("--client", type=int, required=True, help="index of this client")
    parser.add_argument("--runs", type=int, default=200)
    args = parser.parse_args(argv)

    statuses: Counter[str] = Counter()
    stored: dict[str, list[str | None]] = {}
    problems: list[str] = []
    headers = {"Authorization": f"Bearer {args.key}"}
    with httpx.Client(base_url=args.base_url, headers=headers) as client:
        for i in range(args.runs):
            key = f"load-c{args.client}-r{i}"
            body = run_body(args.study_id, args.client, i)
            mode = MODES[i % len(MODES)]
            answers: list[tuple[int | None, str | None]] = []
            if mode == "repeat":
                answers.append(post(client, body, key))
                answers.append(post(client, body, key))
            elif mode == "race":
                results: list = [None, None]

                def worker(slot: int) -> None:
                    with httpx.Client(base_url=args.base_url, headers=headers) as c2:
                        results[slot] = post(c2, body, key)

                threads = [threading.Thread(target=worker, args=(s,)) for s in (0, 1)]
                for t in threads:
                    t.start()
                for t in threads:
                    t.join()
                answers.extend(results)
            else:
                first = post(client, body, key, timeout=0.002)
                if first[0] is not None:
                    answers.append(first)
                else:
                    statuses["abandoned"] += 1
                answers.append(post(client, body, key))
            for status, run_uid in answers:
                statuses[str(status)] += 1
                if status != 201:
                    problems.append(f"{key} ({mode}): status {status}: {run_uid}")
            uids = sorted({u for s, u in answers if s == 201})
            stored[key] = uids
            if len(uids) != 1:
                problems.append(f"{key} ({mode}): run ids {uids}")
    print(json.dumps({"client": args.client, "statuses": statuses, "stored": stored,
                      "problems": problems}))
    return 0 if not problems else 1


if __name__ == "__main__":
    sys.exit(main())
