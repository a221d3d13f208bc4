"""The HTML report: one self-contained page for one assessment (charts by matplotlib, as SVG).

Not part of the core (the core is numpy and scipy only): the API calls :func:`render_report` on
its work pool, after the codecs have computed the assessment. matplotlib is imported on the
first use of :func:`render_report` or :func:`format_vif`, so a service that never draws a
report never loads it.
"""

from ._media import CONTENT_SECURITY_POLICY, REPORT_MEDIA_TYPE

__all__ = ["CONTENT_SECURITY_POLICY", "REPORT_MEDIA_TYPE", "format_vif", "render_report"]


def __getattr__(name: str):  # type: ignore[no-untyped-def]
    if name in ("format_vif", "render_report"):
        from . import _page

        return getattr(_page, name)
    raise AttributeError(name)
