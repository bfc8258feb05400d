"""heatpath HTTP service: a Flask application over the numerical core :mod:`thermo`.

Each resource lives in its own blueprint module; every endpoint parses its
input with a marshmallow schema, makes one call into :mod:`thermo` and dumps
the result. Errors become RFC 9457 problem details in :mod:`service.errors`.
"""

from __future__ import annotations

from typing import Any

from flask import Flask
from flask.json.provider import DefaultJSONProvider

from service import cooling_paths, datasets, equilibrium, health, infrastructure, isentropes, tables
from service.errors import register_error_handlers
from service.negotiation import check_request

__all__ = ["DEFAULT_CONFIG", "create_app"]

#: Settings every app starts from; ``create_app(config)`` overrides them key by key.
DEFAULT_CONFIG: dict[str, Any] = {
    # Request bodies above 1 MiB are refused with 413 before any parsing.
    "MAX_CONTENT_LENGTH": 1024 * 1024,
    # Prefix of the ``type`` URI of heatpath's own problem types; a deployment
    # that publishes documentation of the problem types can point this at it.
    "PROBLEM_TYPE_BASE": "https://heatpath.invalid/problems/",
}


class StrictJSONProvider(DefaultJSONProvider):
    """JSON provider that refuses NaN and infinity instead of emitting invalid JSON."""

    def dumps(self, obj: Any, **kwargs: Any) -> str:
        kwargs.setdefault("allow_nan", False)
        return super().dumps(obj, **kwargs)


def create_app(config: dict[str, Any] | None = None) -> Flask:
    """Build the heatpath Flask application.

    Parameters
    ----------
    config : dict, optional
        Flask configuration values overriding :data:`DEFAULT_CONFIG`
        (e.g. ``{"TESTING": True}``).
    """
    app = Flask(__name__, static_folder=None)
    app.json_provider_class = StrictJSONProvider
    app.json = StrictJSONProvider(app)
    app.config.update(DEFAULT_CONFIG)
    app.config.update(config or {})
    app.before_request(check_request)
    register_error_handlers(app)
    infrastructure.init_app(app)  # store, API keys, quotas, jobs and cache, request ids, metrics
    app.register_blueprint(health.blueprint, url_prefix="/v1")
    app.register_blueprint(datasets.blueprint, url_prefix="/v1")
    app.register_blueprint(equilibrium.blueprint, url_prefix="/v1")
    app.register_blueprint(cooling_paths.blueprint, url_prefix="/v1")
    app.register_blueprint(isentropes.blueprint, url_prefix="/v1")
    app.register_blueprint(tables.blueprint, url_prefix="/v1")
    return app
