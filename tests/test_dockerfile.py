"""The Dockerfile (no Docker engine runs here, so its text is checked instead)."""

from __future__ import annotations

import json
import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _instructions() -> list[tuple[str, str]]:
    text = (ROOT / "Dockerfile").read_text(encoding="utf-8")
    joined = re.sub(r"\\\n", " ", text)  # line continuations
    out = []
    for line in joined.splitlines():
        line = line.strip()
        if line and not line.startswith("#"):
            keyword, _, rest = line.partition(" ")
            out.append((keyword.upper(), rest.strip()))
    return out


def _all(keyword: str) -> list[str]:
    return [rest for key, rest in _instructions() if key == keyword]


def test_slim_python_base_and_a_non_root_user() -> None:
    (base,) = _all("FROM")
    assert re.fullmatch(r"python:3\.1[1-9]-slim", base)
    users = _all("USER")
    assert users and users[-1] not in ("root", "0", "0:0")
    # The last USER comes before CMD, so the service never runs as root.
    keys = [key for key, _ in _instructions()]
    assert max(i for i, k in enumerate(keys) if k == "USER") < keys.index("CMD")


def test_installs_the_package() -> None:
    runs = " ".join(_all("RUN"))
    assert re.search(r"pip install (--no-cache-dir )?\.(\s|$)", runs)
    copied = " ".join(_all("COPY"))
    assert "pyproject.toml" in copied and "service" in copied and "campaigns" in copied


def test_healthcheck_probes_healthz() -> None:
    (check,) = _all("HEALTHCHECK")
    assert "/healthz" in check and "CMD" in check


def test_configuration_by_environment_with_volumes() -> None:
    env = " ".join(_all("ENV"))
    for name in ("UPSHOT_MODELS_DIR", "UPSHOT_DECISION_LOG", "UPSHOT_HOST", "UPSHOT_PORT"):
        assert name in env
    volumes = json.loads(_all("VOLUME")[0])
    assert {"/data/models", "/data/log"} <= set(volumes)
    assert "/data/models" in env and "/data/log/" in env


def test_cmd_is_the_command_the_readme_documents() -> None:
    (cmd,) = _all("CMD")
    command = " ".join(json.loads(cmd))
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## Scoring service", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```(?:bash|sh)?\n(.*?)```", section, flags=re.S)
    documented = {
        " ".join(line.split("#", 1)[0].split())
        for block in blocks
        for line in block.splitlines()
        if line.strip()
    }
    assert command in documented
