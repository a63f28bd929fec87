"""The README's command blocks, run verbatim on a fresh copy of the repository.

Every ```bash block of README.md runs, in order, in one bash session per stretch between
servers (so shell variables carry from block to block, as in one terminal), with
``set -euo pipefail``: any failing command fails the test and names its block. A block
preceded by ``<!-- readme-test: background -->`` starts a real service process (the
"other terminal"); the following blocks run once it answers ``/healthz``. A block
preceded by ``<!-- readme-test: skip (reason) -->`` is not run; the reason is required.
Nothing else is changed, except the port: the README's 8000 becomes a free port
(UPSHOT_PORT, and ``:8000`` in URLs), so the test never collides with a service already
running on the machine. The copy gets the project's environment as ``.venv`` (what the
first ``scripts/upshot`` of a fresh clone would create).
"""

from __future__ import annotations

import hashlib
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import httpx
import pytest

ROOT = Path(__file__).resolve().parents[1]
_BLOCK = re.compile(
    r"(?:<!-- readme-test: (?P<mark>[^>]*?) -->\n)?```bash\n(?P<body>.*?)```", re.S
)


@dataclass(frozen=True)
class Block:
    line: int
    body: str
    mark: str | None


def readme_blocks(text: str) -> list[Block]:
    """The bash blocks of the README with their line and test mark."""
    return [
        Block(text[: m.start("body")].count("\n"), m.group("body"), m.group("mark"))
        for m in _BLOCK.finditer(text)
    ]


def test_every_skipped_block_gives_a_reason() -> None:
    blocks = readme_blocks((ROOT / "README.md").read_text(encoding="utf-8"))
    assert len(blocks) >= 10
    for block in blocks:
        if block.mark is not None:
            assert block.mark == "background" or re.fullmatch(r"skip \(.+\)", block.mark), block


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def _fresh_copy(target: Path) -> None:
    listed = subprocess.run(
        ["git", "ls-files", "-z", "--cached", "--others", "--exclude-standard"],
        cwd=ROOT, check=True, capture_output=True,
    ).stdout.decode().split("\0")  # fmt: skip
    for name in filter(None, listed):
        source = ROOT / name
        if source.is_file():
            (target / name).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(source, target / name)
    # The environment a first `scripts/upshot` would have created: this one, seen through
    # symlinks, with the install stamp that scripts/_venv.sh checks, so nothing reinstalls.
    venv = target / ".venv"
    venv.mkdir()
    for entry in Path(sys.prefix).iterdir():
        if not entry.name.startswith(".installed-"):
            (venv / entry.name).symlink_to(entry)
    digest = hashlib.sha256((target / "pyproject.toml").read_bytes()).hexdigest()[:16]
    (venv / f".installed-{digest}").touch()


def _wait_for(url: str, server: subprocess.Popen[bytes], log: Path) -> None:
    deadline = time.monotonic() + 300
    while time.monotonic() < deadline:
        if server.poll() is not None:
            pytest.fail(f"the README's server exited:\n{log.read_text()[-3000:]}")
        try:
            if httpx.get(url, timeout=2).status_code == 200:
                return
        except httpx.HTTPError:
            pass
        time.sleep(0.5)
    pytest.fail(f"the README's server did not answer {url} within 300 s")


def _script(blocks: list[Block]) -> str:
    parts = ["set -euo pipefail"]
    for block in blocks:
        parts.append(f'echo ">>> README.md block at line {block.line} (t=${{SECONDS}}s)" >&2')
        parts.append(block.body)
    return "\n".join(parts) + "\n"


@pytest.mark.slow
def test_readme_runs_verbatim(tmp_path: Path) -> None:
    clone = tmp_path / "clone"
    clone.mkdir()
    _fresh_copy(clone)
    port = _free_port()
    env = {k: v for k, v in os.environ.items() if not k.startswith("UPSHOT_")}
    env.update(UPSHOT_PORT=str(port), PYTHONDONTWRITEBYTECODE="1")
    text = (clone / "README.md").read_text(encoding="utf-8").replace(":8000", f":{port}")
    servers: list[subprocess.Popen[bytes]] = []
    pending: list[Block] = []

    def run_pending() -> None:
        if not pending:
            return
        done = subprocess.run(
            ["bash", "-c", _script(pending)], cwd=clone, env=env, capture_output=True,
            text=True, timeout=900,
        )  # fmt: skip
        assert done.returncode == 0, (
            f"README command failed (exit {done.returncode}).\n--- stderr (end) ---\n"
            f"{done.stderr[-4000:]}\n--- stdout (end) ---\n{done.stdout[-3000:]}"
        )
        print("\n".join(line for line in done.stderr.splitlines() if line.startswith(">>>")))
        pending.clear()

    try:
        for block in readme_blocks(text):
            if block.mark is not None and block.mark.startswith("skip"):
                continue
            if block.mark == "background":
                run_pending()
                log = tmp_path / f"server-{len(servers)}.log"
                with log.open("wb") as out:
                    servers.append(subprocess.Popen(
                        ["bash", "-c", block.body], cwd=clone, env=env, stdout=out,
                        stderr=subprocess.STDOUT, start_new_session=True,
                    ))  # fmt: skip
                _wait_for(f"http://127.0.0.1:{port}/healthz", servers[-1], log)
                continue
            pending.append(block)
        run_pending()
    finally:
        for server in servers:
            if server.poll() is None:
                os.killpg(server.pid, signal.SIGTERM)  # the session this test started
                try:
                    server.wait(timeout=30)
                except subprocess.TimeoutExpired:
                    os.killpg(server.pid, signal.SIGKILL)
                    server.wait()
    assert servers, "the README starts no service, so its curl examples were not checked"
    # The demo prints its curl examples once the server listens, not before start-up.
    log = (tmp_path / "server-0.log").read_text(encoding="utf-8", errors="replace")
    assert 0 <= log.find("Uvicorn running on") < log.find("curl -s http://127.0.0.1:"), log[:2000]
    # What the walk produced: a pilot log, a first model from it, and the loop's versions.
    assert (clone / "models" / "larkspur" / "v0001").is_dir()
    assert (clone / "pilot.csv.source.json").is_file()
