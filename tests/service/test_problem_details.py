"""Errors → RFC 9457 problem details (service/errors.py, service/negotiation.py)."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from marshmallow import ValidationError

from service import create_app
from service.errors import flatten_messages, jsonable
from thermo.errors import CompositionError, ConvergenceError, DatasetError, HeatpathError, OutOfDomainError

PROBLEM = "application/problem+json"


def assert_problem(response, status: int) -> dict:
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.mimetype == PROBLEM
    body = response.get_json()
    assert {"type", "title", "status", "detail"} <= body.keys()
    assert body["status"] == status
    assert isinstance(body["title"], str) and body["title"]
    assert isinstance(body["detail"], str) and body["detail"]
    return body


def test_unknown_route_is_404_problem(client):
    body = assert_problem(client.get("/v1/no-such-thing"), 404)
    assert body["type"] == "about:blank"
    assert_problem(client.get("/"), 404)
    assert_problem(client.get("/v2/health"), 404)


@pytest.mark.parametrize("method", ["post", "put", "delete", "patch"])
def test_wrong_method_is_405_problem_with_allow_header(client, method):
    response = getattr(client, method)("/v1/datasets")
    assert_problem(response, 405)
    assert set(response.headers["Allow"].replace(" ", "").split(",")) == {"GET", "HEAD", "OPTIONS"}


@pytest.mark.parametrize("accept", ["image/gif", "text/html", "application/json;q=0", "application/problem+json"])
def test_unacceptable_accept_header_is_406_problem(client, accept):
    for url in ("/v1/health", "/v1/datasets", "/v1/datasets/x/endmembers"):
        body = assert_problem(client.get(url, headers={"Accept": accept}), 406)
        assert "application/json" in body["detail"]


def test_unknown_route_with_unacceptable_accept_is_still_404(client):
    assert_problem(client.get("/nowhere", headers={"Accept": "image/gif"}), 404)


def test_body_over_the_size_limit_is_413_problem(client, app):
    limit = app.config["MAX_CONTENT_LENGTH"]
    assert limit == 1024 * 1024
    body = assert_problem(client.get("/v1/health", data=b"x" * (limit + 1)), 413)
    assert str(limit) in body["detail"]
    assert client.get("/v1/health", data=b"x" * limit).status_code == 200


def _app_raising(exc: BaseException, **config):
    app = create_app({"TESTING": True, **config})

    @app.get("/v1/_raise")
    def _raise():
        raise exc

    return app


def test_convergence_error_is_422_with_jsonable_diagnostics():
    diagnostics = {"iterations": np.int64(50), "residual": np.float64(1e-3), "gaps": np.array([0.5, np.nan])}
    app = _app_raising(ConvergenceError("column generation stalled", diagnostics))
    body = assert_problem(app.test_client().get("/v1/_raise"), 422)
    assert body["type"].endswith("/not-converged")
    assert body["diagnostics"] == {"iterations": 50, "residual": 1e-3, "gaps": [0.5, None]}
    assert "stalled" in body["detail"]


def test_core_input_errors_are_422_naming_the_field():
    body = assert_problem(_app_raising(CompositionError("composition.oxides.SiO2", "must not be negative"))
                          .test_client().get("/v1/_raise"), 422)
    assert body["errors"] == [{"field": "composition.oxides.SiO2", "message": "must not be negative"}]
    assert body["type"].endswith("/invalid-input")
    body = assert_problem(_app_raising(OutOfDomainError("temperature_k", "above the dataset's range"))
                          .test_client().get("/v1/_raise"), 422)
    assert body["type"].endswith("/outside-validity-domain")


def test_marshmallow_validation_error_is_422_with_dotted_fields():
    exc = ValidationError({"composition": {"oxides": {"SiO2": {"value": ["must not be negative"]}}}})
    body = assert_problem(_app_raising(exc).test_client().get("/v1/_raise"), 422)
    assert body["errors"] == [{"field": "composition.oxides.SiO2", "message": "must not be negative"}]


@pytest.mark.parametrize(
    ("exc", "slug"),
    [(DatasetError("endmembers.csv: row 7 (fayalite): field 'h0' is missing"), "dataset-error"),
     (HeatpathError("something inside the core"), "internal-error")],
)
def test_core_faults_are_500_problems_without_traceback(exc, slug):
    app = _app_raising(exc)
    response = app.test_client().get("/v1/_raise")
    body = assert_problem(response, 500)
    assert body["type"].endswith("/" + slug)
    assert "Traceback" not in response.get_data(as_text=True)


def test_unexpected_bug_is_500_problem_without_traceback_when_not_testing():
    app = _app_raising(ZeroDivisionError("secret internals"), TESTING=False, PROPAGATE_EXCEPTIONS=False)
    response = app.test_client().get("/v1/_raise")
    body = assert_problem(response, 500)
    assert body["type"] == "about:blank"
    text = response.get_data(as_text=True)
    assert "Traceback" not in text and "secret internals" not in text


def test_problem_type_prefix_is_configurable():
    app = create_app({"TESTING": True, "PROBLEM_TYPE_BASE": "https://docs.example.org/heatpath/problems/"})
    body = app.test_client().get("/v1/datasets/none/endmembers").get_json()
    assert body["type"] == "https://docs.example.org/heatpath/problems/unknown-resource"


def test_successful_responses_never_contain_nan(app):
    """The JSON provider refuses NaN instead of writing the invalid token."""
    with app.app_context(), pytest.raises(ValueError):
        app.json.dumps({"x": math.nan})


def test_flatten_messages_turns_nested_errors_into_dotted_fields():
    messages = {
        "basis": ["Must be one of: wt_percent, mol_percent."],
        "oxides": {"Xx": {"key": ["unknown oxide"]}, "MgO": {"value": ["must be a JSON number"]}},
        "_schema": ["the request body must be a JSON object"],
        "steps": {0: ["bad"]},
    }
    assert flatten_messages(messages) == [
        {"field": "basis", "message": "Must be one of: wt_percent, mol_percent."},
        {"field": "oxides.Xx", "message": "unknown oxide"},
        {"field": "oxides.MgO", "message": "must be a JSON number"},
        {"field": "(request)", "message": "the request body must be a JSON object"},
        {"field": "steps.0", "message": "bad"},
    ]


def test_jsonable_makes_diagnostics_serialisable():
    value = {1: np.array([[1.0, np.inf]]), "ok": np.bool_(True), "obj": object, "t": (np.float32(0.5), None)}
    out = jsonable(value)
    json.dumps(out, allow_nan=False)
    assert out["1"] == [[1.0, None]] and out["ok"] is True and out["t"] == [0.5, None]
