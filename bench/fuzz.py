"""Fuzz the real service for a long run: requests, server errors and contract violations.

Starts ``upshot serve`` (uvicorn, loopback) on the demo model in ``models/`` (``upshot
demo`` trains it on first use) with a throw-away decision log, and lets schemathesis
generate requests for every operation of its OpenAPI document, valid and
schema-violating, each sent with no key and with a scorer, analyst and admin key. Every
response is checked for 5xx and against the declared status codes, content types,
headers and body schemas. Target: 0 server errors and 0 violations over >= 20,000
requests.

    python bench/fuzz.py [--examples 300] [--seed 0] [--models models]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "tests" / "api"))  # the shared harness


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--examples", type=int, default=300, help="cases per operation and mode")
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--models", type=Path, default=HERE.parent / "models")
    args = parser.parse_args()

    from api_fuzz import fuzz, key_headers, serve

    from service.commands.serve import ensure_demo_model

    ensure_demo_model(args.models)
    headers = key_headers("none", "scorer", "analyst", "admin")
    with tempfile.TemporaryDirectory() as tmp, serve(args.models.resolve(), Path(tmp)) as url:
        start = time.perf_counter()
        result = fuzz(url, max_examples=args.examples, headers=headers, random_seed=args.seed)
        seconds = time.perf_counter() - start
    print(f"{'operation':<42} {'requests':>9}")
    for operation, count in sorted(result.by_operation.items()):
        print(f"{operation:<42} {count:>9,}")
    print()
    print(f"{'requests':<42} {result.requests:>9,}")
    print(f"{'server errors (5xx)':<42} {result.server_errors:>9,}")
    print(f"{'contract violations':<42} {result.violations:>9,}")
    print(f"{'seconds':<42} {seconds:>9.0f}")
    print("statuses: " + ", ".join(f"{s}: {n:,}" for s, n in sorted(result.statuses.items())))
    for example in result.examples:
        print(example)
    return 0 if result.server_errors == 0 and result.violations == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
