"""The HTTP service: a litestar application over the codecs and the core.

:func:`create_app` builds it from :class:`knotwork.settings.Settings`;
:func:`openapi_document` gives its complete OpenAPI 3.1 document.
"""

from ._app import create_app
from ._openapi import openapi_document
from ._problems import PROBLEM_BASE, PROBLEM_MEDIA_TYPE, ApiError

__all__ = [
    "PROBLEM_BASE",
    "PROBLEM_MEDIA_TYPE",
    "ApiError",
    "create_app",
    "openapi_document",
]
