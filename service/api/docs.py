"""API documentation pages served with their assets from the installed package, so /docs
and /redoc work on a network without internet (no CDN, no web fonts)."""

from __future__ import annotations

from pathlib import Path

import fastapi_offline
from fastapi import FastAPI, Request
from fastapi.openapi.docs import get_redoc_html, get_swagger_ui_html
from fastapi.responses import HTMLResponse
from fastapi.staticfiles import StaticFiles

ASSETS = Path(fastapi_offline.__file__).parent / "static"
ASSETS_PATH = "/docs/assets"


def install_docs(app: FastAPI) -> None:
    """/docs (Swagger UI) and /redoc (ReDoc), their scripts and styles from ``ASSETS``."""
    app.mount(ASSETS_PATH, StaticFiles(directory=ASSETS), name="docs-assets")

    def prefix(request: Request) -> str:
        return str(request.scope.get("root_path", "") or "").rstrip("/")

    @app.get("/docs", include_in_schema=False)
    async def interactive_docs(request: Request) -> HTMLResponse:
        root = prefix(request)
        return get_swagger_ui_html(
            openapi_url=f"{root}{app.openapi_url}",
            title=f"{app.title} API",
            swagger_js_url=f"{root}{ASSETS_PATH}/swagger-ui-bundle.js",
            swagger_css_url=f"{root}{ASSETS_PATH}/swagger-ui.css",
            swagger_favicon_url=f"{root}{ASSETS_PATH}/favicon.png",
        )

    @app.get("/redoc", include_in_schema=False)
    async def reference_docs(request: Request) -> HTMLResponse:
        root = prefix(request)
        return get_redoc_html(
            openapi_url=f"{root}{app.openapi_url}",
            title=f"{app.title} API reference",
            redoc_js_url=f"{root}{ASSETS_PATH}/redoc.standalone.js",
            redoc_favicon_url=f"{root}{ASSETS_PATH}/favicon.png",
            with_google_fonts=False,
        )
