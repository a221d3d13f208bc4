"""What the report route answers with (kept apart so naming it does not load matplotlib)."""

__all__ = ["CONTENT_SECURITY_POLICY", "REPORT_MEDIA_TYPE"]

REPORT_MEDIA_TYPE = "text/html; charset=utf-8"
#: The page may load nothing: only its own inline style sheet applies (also sent as a header).
CONTENT_SECURITY_POLICY = "default-src 'none'; style-src 'unsafe-inline'"
