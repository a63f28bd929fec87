"""API keys: stored as SHA-256 digests, roles scorer/admin, 401 and 403; loopback rule."""

from __future__ import annotations

import hashlib
from collections.abc import Callable
from pathlib import Path

import pytest
from api_support import CAMPAIGN, started

from service.api.auth import hash_key, new_key
from service.config import Settings, load_settings, parse_api_keys
from service.decisions import DecisionLog
from service.errors import ConfigError

pytestmark = pytest.mark.anyio

SCORER, ADMIN = new_key(), new_key()


def _entries() -> str:
    return f"crm:scorer:{hash_key(SCORER)},ops:admin:{hash_key(ADMIN)}"


def _auth(key: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {key}"}


def test_keys_are_stored_as_sha256_digests() -> None:
    # Reference: hashlib's SHA-256 (FIPS 180-4) of the key's UTF-8 bytes.
    assert hash_key("abc") == hashlib.sha256(b"abc").hexdigest()
    assert hash_key("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    assert SCORER.startswith("ups_") and len(SCORER) > 40 and SCORER != ADMIN


async def test_missing_or_wrong_keys_get_401_and_wrong_roles_403(
    make_settings: Callable[..., Settings], log: DecisionLog
) -> None:
    settings = make_settings(api_keys=_entries())
    body = {"campaign": CAMPAIGN, "customer": {"id": "LTC-A1", "features": {}}}
    promote = {"version": "v0001", "reason": "test"}
    async with started(settings, log=log) as http:
        missing = await http.post("/v1/score", json=body)
        assert missing.status_code == 401
        assert missing.headers["www-authenticate"] == "Bearer"
        assert missing.json()["error"]["code"] == "unauthorized"
        wrong = await http.post("/v1/score", json=body, headers=_auth("ups_not-a-key"))
        assert wrong.status_code == 401
        scheme = await http.post("/v1/score", json=body, headers={"Authorization": SCORER})
        assert scheme.status_code == 401
        assert (await http.post("/v1/score", json=body, headers=_auth(SCORER))).status_code == 200
        assert (await http.post("/v1/score", json=body, headers=_auth(ADMIN))).status_code == 200
        assert (await http.get("/v1/campaigns", headers=_auth(SCORER))).status_code == 200
        assert (await http.get("/v1/models")).status_code == 401
        forbidden = await http.post(
            "/v1/admin/models/larkspur/promote", json=promote, headers=_auth(SCORER)
        )
        assert forbidden.status_code == 403
        assert "'crm'" in forbidden.json()["error"]["message"]
        allowed = await http.post(
            "/v1/admin/models/larkspur/promote", json=promote, headers=_auth(ADMIN)
        )
        assert allowed.status_code == 200, allowed.text
        for probe in ("/healthz", "/readyz", "/metrics", "/openapi.json"):
            assert (await http.get(probe)).status_code == 200, probe
    # Refused requests log nothing; the two accepted ones are the same decision.
    assert log.records_written == 1


async def test_a_keys_file_works_like_the_environment(
    make_settings: Callable[..., Settings], log: DecisionLog, tmp_path: Path
) -> None:
    keys = tmp_path / "keys"
    keys.write_text(f"# scoring clients\ncrm:scorer:{hash_key(SCORER)}  # the CRM\n")
    settings = make_settings(api_keys_file=keys)
    async with started(settings, log=log) as http:
        assert (await http.get("/v1/campaigns")).status_code == 401
        assert (await http.get("/v1/campaigns", headers=_auth(SCORER))).status_code == 200


def test_no_key_means_loopback_only(tmp_path: Path) -> None:
    log = str(tmp_path / "d.sqlite3")
    with pytest.raises(ConfigError, match="without any API key"):
        load_settings(host="0.0.0.0", decision_log=log)
    assert load_settings(host="127.0.0.1", decision_log=log).host == "127.0.0.1"
    assert load_settings(host="::1", decision_log=log).host == "::1"
    exposed = load_settings(host="0.0.0.0", decision_log=log, api_keys=_entries())
    assert len(exposed.keys()) == 2


@pytest.mark.parametrize(
    ("entries", "words"),
    [
        (f"crm:{hash_key('x')}", "name:role:sha256hex"),
        (f"crm:root:{hash_key('x')}", "role 'root'"),
        ("crm:scorer:ups_plaintextkey", "SHA-256 digest"),
        (f"a:scorer:{hash_key('x')},a:admin:{hash_key('y')}", "appear twice"),
    ],
)
def test_malformed_key_entries_are_refused(entries: str, words: str) -> None:
    with pytest.raises(ConfigError, match=words):
        parse_api_keys(entries, "UPSHOT_API_KEYS")


def test_unsafe_settings_are_refused(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match="UPSHOT_DECISION_LOG"):
        load_settings(decision_log=":memory:")
    with pytest.raises(ConfigError, match="UPSHOT_PORT"):
        load_settings(port=70000, decision_log=str(tmp_path / "d.sqlite3"))
    with pytest.raises(ConfigError, match="UPSHOT_MAX_BATCH"):
        load_settings(max_batch=0, decision_log=str(tmp_path / "d.sqlite3"))


def test_settings_are_read_from_the_environment(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path
) -> None:
    monkeypatch.setenv("UPSHOT_MODELS_DIR", str(tmp_path / "m"))
    monkeypatch.setenv("UPSHOT_PORT", "9123")
    monkeypatch.setenv("UPSHOT_DECISION_LOG", str(tmp_path / "d.sqlite3"))
    settings = load_settings()
    assert settings.models_dir == tmp_path / "m"
    assert settings.port == 9123
