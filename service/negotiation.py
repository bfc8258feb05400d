"""Checks made on every routed request before its view runs: body size and Accept.

Views declare the media types they can produce with :func:`produces`
(default: JSON only). A request whose ``Accept`` header allows none of them
gets 406; a declared body larger than ``MAX_CONTENT_LENGTH`` gets 413 even on
endpoints that never read a body. Requests that did not match a route are left
alone so that they get their 404/405.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TypeVar

from flask import current_app, request
from werkzeug.exceptions import NotAcceptable, RequestEntityTooLarge

JSON_MEDIA_TYPE = "application/json"
F = TypeVar("F", bound=Callable)


def produces(*media_types: str) -> Callable[[F], F]:
    """Declare the response media types of a view, in order of preference."""

    def mark(view: F) -> F:
        view.produces = media_types  # type: ignore[attr-defined]
        return view

    return mark


def offered_media_types() -> tuple[str, ...]:
    """Media types the view of the current request can produce."""
    view = current_app.view_functions.get(request.endpoint or "")
    return getattr(view, "produces", (JSON_MEDIA_TYPE,))


def check_request() -> None:
    """``before_request`` hook: refuse oversized bodies (413) and unacceptable Accept headers (406)."""
    if request.routing_exception is not None:
        return
    limit = current_app.config.get("MAX_CONTENT_LENGTH")
    if limit is not None and (request.content_length or 0) > limit:
        raise RequestEntityTooLarge(f"the request body is {request.content_length} bytes; the limit is {limit} bytes")
    offered = offered_media_types()
    # No (or an empty) Accept header means any media type is acceptable (RFC 9110, section 12.5.1).
    if request.accept_mimetypes and request.accept_mimetypes.best_match(offered) is None:
        raise NotAcceptable(
            f"this resource is available as {', '.join(offered)}; "
            f"the Accept header ({request.headers.get('Accept', '')!r}) allows none of them"
        )
