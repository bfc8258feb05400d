"""Fixtures shared by the service tests: an app, its test client, the OpenAPI document."""

from __future__ import annotations

from pathlib import Path

import pytest
import yaml

from service import create_app
from tests.service.live_server import live_server  # noqa: F401  (session fixture: gunicorn on loopback)

REPO = Path(__file__).resolve().parents[2]


@pytest.fixture
def app():
    return create_app({"TESTING": True})


@pytest.fixture
def client(app):
    return app.test_client()


@pytest.fixture(scope="session")
def openapi() -> dict:
    with (REPO / "openapi.yaml").open(encoding="utf-8") as fh:
        return yaml.safe_load(fh)
