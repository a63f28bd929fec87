"""/docs works with no network: the page and every asset it loads come from the service."""

from __future__ import annotations

import re

import httpx
import pytest

pytestmark = pytest.mark.anyio


async def test_docs_page_loads_only_local_assets(client: httpx.AsyncClient) -> None:
    page = await client.get("/docs")
    assert page.status_code == 200
    sources = re.findall(r"""(?:src|href)=["']([^"']+)["']""", page.text)
    assert sources, page.text
    # No external host: every script, style sheet and icon is a path on this service.
    assert all(s.startswith("/") and not s.startswith("//") for s in sources), sources
    for source in sources:
        asset = await client.get(source)
        assert asset.status_code == 200, source
        assert len(asset.content) > 100, source
    assert "SwaggerUIBundle" in (await client.get("/docs-assets/swagger-ui-bundle.js")).text
    assert "'/openapi.json'" in page.text or '"/openapi.json"' in page.text
