"""Overload: does the service shed instead of queueing, and recover when load drops?

Starts ``upshot serve`` (uvicorn, one worker, loopback) on the demo model in ``models/``
with a throw-away decision log, then drives ``POST /v1/score`` with ``wrk`` (Debian
package ``wrk``) in phases: the normal connection count, 3x it, a far heavier load, and
the normal count again. Every request scores a different customer of the demo.

wrk's own latency mixes served and shed answers, so alongside each phase one probe
connection (Python, sequential, keep-alive) scores customers too and records the latency
of its served (200) answers: that is the p99 a served caller sees. Printed per phase:
connections, requests/s, answers by status, wrk's socket errors and time-outs (2 s),
and the probe's served p50/p99 with its shed share.

    python bench/overload.py [--connections 16] [--seconds 15] [--max-in-flight N]
"""

from __future__ import annotations

import argparse
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path
from typing import Any

import httpx
import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "tests" / "api"))  # the shared server harness

_LUA = """
local counter = 0
local template = [[%s]]
wrk.method = "POST"
wrk.headers["Content-Type"] = "application/json"
wrk.headers["Authorization"] = "Bearer %s"
request = function()
  counter = counter + 1
  local body = string.gsub(template, "LTC%%-ID", "LTC-W" .. tostring(math.random(1, 1e9)))
  return wrk.format(nil, "/v1/score", nil, body)
end
local threads = {}
setup = function(thread) table.insert(threads, thread) end
init = function(args) statuses = {} end
response = function(status, headers, body)
  statuses[status] = (statuses[status] or 0) + 1
end
done = function(summary, latency, requests)
  local total = {}
  for _, t in ipairs(threads) do
    for k, v in pairs(t:get("statuses")) do total[k] = (total[k] or 0) + v end
  end
  local out = {}
  for k, v in pairs(total) do table.insert(out, '"' .. k .. '":' .. v) end
  io.write("STATUSES {" .. table.concat(out, ",") .. "}\\n")
end
"""


def _body(customer: str) -> dict[str, Any]:
    from service.api.examples import SCORE

    return {**SCORE, "customer": {**SCORE["customer"], "id": customer}}


def _wrk(url: str, script: Path, connections: int, seconds: int) -> dict[str, Any]:
    threads = min(2, connections)
    out = subprocess.run(
        ["wrk", "-t", str(threads), "-c", str(connections), "-d", f"{seconds}s",
         "--timeout", "2s", "--latency", "-s", str(script), url],
        capture_output=True, text=True, check=True,
    ).stdout  # fmt: skip
    statuses = json.loads(re.search(r"STATUSES (\{.*\})", out).group(1))  # type: ignore[union-attr]
    errors = re.search(
        r"Socket errors: connect (\d+), read (\d+), write (\d+), timeout (\d+)", out
    )
    rate = float(re.search(r"Requests/sec:\s+([\d.]+)", out).group(1))  # type: ignore[union-attr]
    p99 = re.search(r"99%\s+([\d.]+)(us|ms|s)", out)
    return {
        "rate": rate,
        "statuses": {int(k): v for k, v in statuses.items()},
        "socket_errors": sum(int(x) for x in errors.groups()[:3]) if errors else 0,
        "timeouts": int(errors.group(4)) if errors else 0,
        "wrk_p99_ms": _ms(p99.group(1), p99.group(2)) if p99 else float("nan"),
    }


def _ms(value: str, unit: str) -> float:
    return float(value) * {"us": 1e-3, "ms": 1.0, "s": 1e3}[unit]


class _Probe(threading.Thread):
    """One sequential keep-alive caller recording its served latencies."""

    def __init__(self, url: str, key: str) -> None:
        super().__init__(daemon=True)
        self.url, self.key = url, key
        self.served: list[float] = []
        self.shed = 0
        self.failed = 0
        self.stop = threading.Event()

    def run(self) -> None:
        headers = {"Authorization": f"Bearer {self.key}"}
        with httpx.Client(base_url=self.url, headers=headers, timeout=10) as http:
            i = 0
            while not self.stop.is_set():
                i += 1
                start = time.perf_counter()
                try:
                    response = http.post("/v1/score", json=_body(f"LTC-P{i}-{time.time_ns()}"))
                except httpx.TransportError:
                    self.failed += 1
                    continue
                elapsed = (time.perf_counter() - start) * 1e3
                if response.status_code == 200:
                    self.served.append(elapsed)
                elif response.status_code == 503:
                    self.shed += 1
                    time.sleep(0.005)  # like wrk, retry at once (Retry-After is 1 s)
                else:
                    self.failed += 1


def _phase(url: str, key: str, script: Path, connections: int, seconds: int) -> dict[str, Any]:
    probe = _Probe(url, key)
    probe.start()
    result = _wrk(url, script, connections, seconds)
    probe.stop.set()
    probe.join()
    served = np.array(probe.served) if probe.served else np.array([float("nan")])
    total = len(probe.served) + probe.shed
    result.update(
        connections=connections,
        probe_p50_ms=float(np.percentile(served, 50)),
        probe_p99_ms=float(np.percentile(served, 99)),
        probe_served=len(probe.served),
        probe_shed_share=probe.shed / total if total else float("nan"),
        probe_failed=probe.failed,
    )
    return result


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--connections", type=int, default=16, help="the normal load")
    parser.add_argument("--heavy", type=int, default=768, help="connections of the far load")
    parser.add_argument("--seconds", type=int, default=15)
    parser.add_argument("--max-in-flight", type=int, default=None, help="default: the setting's")
    parser.add_argument("--models", type=Path, default=HERE.parent / "models")
    args = parser.parse_args()
    if shutil.which("wrk") is None:
        sys.exit("wrk is not installed: apt-get install -y wrk")

    from api_fuzz import KEYS, serve

    from service.commands.serve import ensure_demo_model
    from service.config import Settings

    ensure_demo_model(args.models)
    limit = args.max_in_flight or Settings.model_fields["max_in_flight"].default
    key = KEYS["scorer"]
    body = json.dumps(_body("LTC-ID"))
    c = args.connections
    plan = [("normal", c), ("3x", 3 * c), (f"{args.heavy // c}x", args.heavy), ("normal again", c)]
    rows = []
    with (
        tempfile.TemporaryDirectory() as tmp,
        serve(args.models.resolve(), Path(tmp), UPSHOT_MAX_IN_FLIGHT=str(limit)) as url,
    ):
        script = Path(tmp) / "score.lua"
        script.write_text(_LUA % (body, key), encoding="utf-8")
        _wrk(url, script, c, 3)  # warm-up: compiled paths, connections, page cache
        for name, connections in plan:
            rows.append((name, _phase(url, key, script, connections, args.seconds)))
            time.sleep(2)
    print(f"POST /v1/score, one worker, UPSHOT_MAX_IN_FLIGHT={limit}, {args.seconds} s/phase, "
          f"{os.cpu_count()} CPUs (shared machine: see the note in the README)")  # fmt: skip
    head = (f"{'phase':<14}{'conns':>6}{'req/s':>8}{'200':>8}{'503':>8}{'other':>7}"
            f"{'t/o':>5}{'sock':>5}{'wrk p99':>9}{'served p50':>11}{'served p99':>11}"
            f"{'p99 ratio':>10}{'probe shed':>11}")  # fmt: skip
    print(head)
    normal = rows[0][1]["probe_p99_ms"]
    for name, r in rows:
        ok, shed = r["statuses"].get(200, 0), r["statuses"].get(503, 0)
        other = sum(r["statuses"].values()) - ok - shed
        print(f"{name:<14}{r['connections']:>6}{r['rate']:>8.0f}{ok:>8}{shed:>8}{other:>7}"
              f"{r['timeouts']:>5}{r['socket_errors']:>5}{r['wrk_p99_ms']:>8.1f}m"
              f"{r['probe_p50_ms']:>10.1f}m{r['probe_p99_ms']:>10.1f}m"
              f"{r['probe_p99_ms'] / normal:>10.2f}{r['probe_shed_share']:>11.1%}")  # fmt: skip
    return 0


if __name__ == "__main__":
    sys.exit(main())
