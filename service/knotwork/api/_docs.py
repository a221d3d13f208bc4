"""The human docs page (Swagger UI 5, which renders OpenAPI 3.1) served with no CDN.

The Swagger UI assets come from the ``swagger-ui-bundle-v2`` package and are served by this
service under ``/docs/assets``; the page and its assets are open (no token needed).
"""

from __future__ import annotations

from typing import Any

import msgspec
from litestar import Request, Router
from litestar.openapi.plugins import JsonRenderPlugin, SwaggerRenderPlugin
from litestar.static_files import create_static_files_router
from litestar.types import ControllerRouterHandler
from swagger_ui_bundle import swagger_ui_path

from ._openapi import openapi_document

__all__ = ["ASSETS_PATH", "DOCS_PATH", "assets_router", "docs_router", "render_plugins"]

DOCS_PATH = "/docs"
ASSETS_PATH = "/docs/assets"
_PUBLIC = {"public": True}


class _SwaggerPage(SwaggerRenderPlugin):
    """Swagger UI with local assets, showing the completed document."""

    def __init__(self) -> None:
        super().__init__(
            path="/",
            js_url=f"{ASSETS_PATH}/swagger-ui-bundle.js",
            css_url=f"{ASSETS_PATH}/swagger-ui.css",
            standalone_preset_js_url=f"{ASSETS_PATH}/swagger-ui-standalone-preset.js",
            favicon="",
        )

    def render(self, request: Request[Any, Any, Any], openapi_schema: dict[str, Any]) -> bytes:
        return super().render(request, openapi_document(request.app))

    def receive_router(self, router: Router) -> None:
        # No OAuth2 redirect page: the service uses bearer tokens only.
        return None


class _JsonDocument(JsonRenderPlugin):
    """The completed document as JSON (``/docs/openapi.json``, the page's own link)."""

    def render(self, request: Request[Any, Any, Any], openapi_schema: dict[str, Any]) -> bytes:
        return msgspec.json.encode(openapi_document(request.app))


class _DocsRouter(Router):
    """The docs router, without litestar's HTML "not found" page for unknown docs paths.

    Unknown paths then get the same problem+json 404 as everywhere else.
    """

    def register(self, value: ControllerRouterHandler) -> Any:
        if getattr(getattr(value, "fn", None), "__name__", "") == "handle_schema_path_not_found":
            return []
        return super().register(value)


def render_plugins() -> list[Any]:
    """The page at ``/docs`` and its JSON at ``/docs/openapi.json``."""
    return [_SwaggerPage(), _JsonDocument(path="/openapi.json")]


def docs_router() -> Router:
    """The router litestar's OpenAPI plugin fills with the docs routes."""
    return _DocsRouter(path=DOCS_PATH, route_handlers=[], opt=_PUBLIC, include_in_schema=False)


def assets_router() -> Router:
    """Swagger UI's JavaScript and CSS, from the installed package."""
    return create_static_files_router(
        path=ASSETS_PATH,
        directories=[swagger_ui_path],
        name="docs-assets",
        opt=_PUBLIC,
        include_in_schema=False,
    )
