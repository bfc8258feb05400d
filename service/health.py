"""``GET /v1/health``: liveness of the service."""

from __future__ import annotations

from flask import Blueprint

from service.provenance import code_version

blueprint = Blueprint("health", __name__)


@blueprint.get("/health")
def health() -> dict[str, str]:
    """The service is up; reports the code version."""
    return {"status": "ok", "version": code_version()}
