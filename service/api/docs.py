"""Interactive API documentation served from the package itself, so ``/docs`` works offline.

FastAPI's default page loads Swagger UI from a public CDN, which is a blank page on an
isolated network. The ``swagger-ui-bundle`` package ships the Swagger UI distribution
(Apache-2.0); its files are mounted under :data:`ASSETS_PATH` and the page points there.
"""

from __future__ import annotations

from fastapi import FastAPI
from fastapi.openapi.docs import get_swagger_ui_html
from fastapi.responses import HTMLResponse
from starlette.staticfiles import StaticFiles
from swagger_ui_bundle import swagger_ui_path

__all__ = ["ASSETS_PATH", "install_docs"]

ASSETS_PATH = "/docs-assets"
"""Where the Swagger UI files are served (no API key needed, like ``/docs``)."""


def install_docs(app: FastAPI, *, title: str) -> None:
    """Serve ``/docs`` with Swagger UI from :data:`ASSETS_PATH` (create the app with
    ``docs_url=None`` and ``redoc_url=None``)."""
    app.mount(ASSETS_PATH, StaticFiles(directory=str(swagger_ui_path)), name="docs-assets")

    async def docs() -> HTMLResponse:
        return get_swagger_ui_html(
            openapi_url=app.openapi_url or "/openapi.json",
            title=f"{title} - API docs",
            swagger_js_url=f"{ASSETS_PATH}/swagger-ui-bundle.js",
            swagger_css_url=f"{ASSETS_PATH}/swagger-ui.css",
            swagger_favicon_url=f"{ASSETS_PATH}/favicon-32x32.png",
        )

    app.add_api_route("/docs", docs, methods=["GET"], include_in_schema=False)
