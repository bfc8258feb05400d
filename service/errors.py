"""Every error the service can return, mapped to HTTP in one place.

All error responses are RFC 9457 problem details (``application/problem+json``)
with ``type``, ``title``, ``status`` and ``detail``; validation problems add
``errors``, a list of ``{"field", "message"}``.

Mapping (``type`` slugs are appended to the ``PROBLEM_TYPE_BASE`` setting):

- werkzeug ``HTTPException`` (unknown route 404, 405, 406, 413, 415, and the 500
  Flask raises for an unhandled bug) → its own status, ``type`` ``about:blank``
  (the HTTP status says it all);
- :class:`ProblemError` (raised by the service itself, e.g. an unknown dataset in
  the path → 404 ``unknown-resource``, a body that is not JSON → 400
  ``malformed-request``) → its status and slug;
- marshmallow ``ValidationError`` → 422 ``invalid-input`` with ``errors``;
- :class:`thermo.errors.InputError` → 422 ``invalid-input`` naming ``exc.field``;
  its subclass :class:`~thermo.errors.OutOfDomainError` → 422
  ``outside-validity-domain``;
- :class:`thermo.errors.ConvergenceError` → 422 ``not-converged`` with ``diagnostics``;
- :class:`thermo.errors.DatasetError` → 500 ``dataset-error``; any other
  :class:`thermo.errors.HeatpathError` → 500 ``internal-error`` (both logged).

A solver that does not converge on a well-formed request is reported as 422,
not 5xx: the server is healthy, that particular request cannot be processed,
and retrying it unchanged will not help. The body carries the solver's
``diagnostics``. Bugs (any other exception) are turned by Flask into a 500
``InternalServerError``, which the ``HTTPException`` handler renders; no
traceback ever reaches the client. There is deliberately no handler for
``Exception``, so routing errors keep their own status codes.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
from flask import Flask, Response, current_app
from marshmallow import ValidationError
from werkzeug.exceptions import HTTPException

from thermo.errors import ConvergenceError, DatasetError, HeatpathError, InputError, OutOfDomainError

PROBLEM_MEDIA_TYPE = "application/problem+json"


class ProblemError(Exception):
    """A problem the service layer itself detects (e.g. an unknown dataset in the path).

    Parameters
    ----------
    status : int
        HTTP status code.
    slug : str
        Last segment of the problem ``type`` URI.
    title : str
        Short summary of the problem type (the same for every occurrence).
    detail : str
        What went wrong in this occurrence.
    errors : list of dict, optional
        ``{"field", "message"}`` entries naming the offending inputs.
    """

    def __init__(self, status: int, slug: str, title: str, detail: str,
                 errors: list[dict[str, str]] | None = None) -> None:
        super().__init__(detail)
        self.status, self.slug, self.title, self.detail = status, slug, title, detail
        self.errors = errors


def not_found(field: str, message: str) -> ProblemError:
    """404 problem for a named resource that does not exist (``field`` names the path parameter)."""
    return ProblemError(404, "unknown-resource", "Unknown resource", message, [{"field": field, "message": message}])


def problem_type(slug: str) -> str:
    """Full ``type`` URI of one of heatpath's problem types."""
    return current_app.config["PROBLEM_TYPE_BASE"] + slug


def problem_response(status: int, title: str, detail: str, type_uri: str = "about:blank",
                     headers: Mapping[str, str] | None = None, **members: Any) -> Response:
    """Build an ``application/problem+json`` response (extension ``members`` are added as given)."""
    body = {"type": type_uri, "title": title, "status": status, "detail": detail}
    body.update({k: v for k, v in members.items() if v is not None})
    response = current_app.response_class(current_app.json.dumps(body), status=status, mimetype=PROBLEM_MEDIA_TYPE)
    response.headers.extend(headers or {})
    return response


def flatten_messages(messages: Any, prefix: str = "") -> list[dict[str, str]]:
    """Turn marshmallow's nested error messages into ``{"field", "message"}`` entries.

    Dotted paths name nested fields (``composition.oxides.SiO2``). The
    ``key``/``value`` levels marshmallow adds inside ``Dict`` fields are
    dropped; schema-level errors (``_schema``) are reported on the parent.
    """
    if isinstance(messages, Mapping):
        out = []
        for key, sub in messages.items():
            key = str(key)
            skip = key in ("_schema", "key", "value")
            out += flatten_messages(sub, prefix if skip else (f"{prefix}.{key}" if prefix else key))
        return out
    if isinstance(messages, list | tuple) and messages and not all(isinstance(m, str) for m in messages):
        return [e for m in messages for e in flatten_messages(m, prefix)]
    items = messages if isinstance(messages, list | tuple) else [messages]
    return [{"field": prefix or "(request)", "message": str(m)} for m in items]


def jsonable(value: Any) -> Any:
    """Convert solver diagnostics to plain JSON values (arrays → lists, NaN/inf → None)."""
    if isinstance(value, Mapping):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, np.ndarray):
        return jsonable(value.tolist())
    if isinstance(value, list | tuple | set):
        return [jsonable(v) for v in value]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if value is None or isinstance(value, bool | int | str):
        return value
    return str(value)


def _http_error(exc: HTTPException) -> Response:
    headers = {k: v for k, v in exc.get_headers() if k.lower() != "content-type"}
    return problem_response(exc.code or 500, exc.name, exc.description or exc.name, headers=headers)


def _service_problem(exc: ProblemError) -> Response:
    return problem_response(exc.status, exc.title, exc.detail, problem_type(exc.slug), errors=exc.errors)


def _validation_error(exc: ValidationError) -> Response:
    errors = flatten_messages(exc.messages)
    detail = "; ".join(f"{e['field']}: {e['message']}" for e in errors)
    return problem_response(422, "Invalid input", detail, problem_type("invalid-input"), errors=errors)


def _input_error(exc: InputError) -> Response:
    slug, title = ("invalid-input", "Invalid input")
    if isinstance(exc, OutOfDomainError):
        slug, title = ("outside-validity-domain", "Outside the validity domain")
    errors = [{"field": exc.field, "message": exc.message}]
    return problem_response(422, title, str(exc), problem_type(slug), errors=errors)


def _convergence_error(exc: ConvergenceError) -> Response:
    return problem_response(422, "Calculation did not converge", str(exc), problem_type("not-converged"),
                            diagnostics=jsonable(exc.diagnostics))


def _core_error(exc: HeatpathError) -> Response:
    current_app.logger.error("core error: %s", exc, exc_info=exc)
    if isinstance(exc, DatasetError):
        return problem_response(500, "Dataset error", f"the dataset could not be used: {exc}",
                                problem_type("dataset-error"))
    return problem_response(500, "Internal error", "the calculation failed inside the numerical core; "
                            "the error has been logged", problem_type("internal-error"))


def register_error_handlers(app: Flask) -> None:
    """Install the handlers above on ``app`` (called by :func:`service.create_app`)."""
    app.register_error_handler(HTTPException, _http_error)
    app.register_error_handler(ProblemError, _service_problem)
    app.register_error_handler(ValidationError, _validation_error)
    app.register_error_handler(InputError, _input_error)
    app.register_error_handler(ConvergenceError, _convergence_error)
    app.register_error_handler(HeatpathError, _core_error)
