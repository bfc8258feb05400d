"""openapi.yaml is the contract: the running app and the document must agree.

(a) every Flask route under /v1 is a path in openapi.yaml with the same methods, and vice versa;
(b) real responses (success and problem details) validate against the response schemas the
    document declares for their path, method, status and media type.
"""

from __future__ import annotations

import re

import pytest
from jsonschema import Draft202012Validator

from service.schemas import StatePointQuery
from thermo.dataset import DEFAULT_DATASET_ID as DATASET_ID

ENDMEMBERS = f"/v1/datasets/{DATASET_ID}/endmembers"
HTTP_METHODS = {"get", "put", "post", "delete", "patch", "options", "head", "trace"}


def flask_routes(app) -> dict[str, set[str]]:
    routes: dict[str, set[str]] = {}
    for rule in app.url_map.iter_rules():
        if rule.rule.startswith("/v1/"):
            path = re.sub(r"<(?:[^:<>]+:)?([^<>]+)>", r"{\1}", rule.rule)
            routes.setdefault(path, set()).update(m.lower() for m in rule.methods - {"HEAD", "OPTIONS"})
    return routes


def documented_routes(openapi) -> dict[str, set[str]]:
    return {path: set(item) & HTTP_METHODS for path, item in openapi["paths"].items()}


def test_every_route_is_documented_and_every_documented_path_exists(app, openapi):
    assert flask_routes(app) == documented_routes(openapi)


def test_document_declares_openapi_31_and_states_results_are_model_estimates(openapi):
    assert openapi["openapi"].startswith("3.1.")
    description = openapi["info"]["description"]
    assert "model estimates" in description and "validity domain" in description


def test_every_documented_path_parameter_appears_in_its_path(openapi):
    for path, item in openapi["paths"].items():
        for method in set(item) & HTTP_METHODS:
            params = [resolve(openapi, p) for p in item[method].get("parameters", [])]
            in_path = {p["name"] for p in params if p["in"] == "path"}
            assert in_path == set(re.findall(r"{([^}]+)}", path)), path


def test_query_parameters_of_the_properties_endpoint_match_the_schema(openapi):
    op = openapi["paths"]["/v1/datasets/{dataset_id}/endmembers/{name}"]["get"]
    documented = {p["name"] for p in map(lambda p: resolve(openapi, p), op["parameters"]) if p["in"] == "query"}
    assert documented == set(StatePointQuery((0, 1), (0, 1)).fields)


def resolve(openapi, node):
    while isinstance(node, dict) and "$ref" in node:
        target = openapi
        for part in node["$ref"].removeprefix("#/").split("/"):
            target = target[part]
        node = target
    return node


def response_validator(openapi, path: str, method: str, status: int, media_type: str) -> Draft202012Validator:
    responses = openapi["paths"][path][method]["responses"]
    assert str(status) in responses, f"{method.upper()} {path}: status {status} not documented"
    content = resolve(openapi, responses[str(status)])["content"]
    assert media_type in content, f"{method.upper()} {path} {status}: {media_type} not documented"
    schema = {"$schema": "https://json-schema.org/draft/2020-12/schema",
              "components": openapi["components"], **content[media_type]["schema"]}
    Draft202012Validator.check_schema(schema)
    return Draft202012Validator(schema)


CASES = [
    # (request URL, request headers, documented path, expected status)
    ("/v1/health", {}, "/v1/health", 200),
    ("/v1/health", {"Accept": "image/gif"}, "/v1/health", 406),
    ("/v1/datasets", {}, "/v1/datasets", 200),
    ("/v1/datasets", {"Accept": "text/html"}, "/v1/datasets", 406),
    (ENDMEMBERS, {}, "/v1/datasets/{dataset_id}/endmembers", 200),
    ("/v1/datasets/none/endmembers", {}, "/v1/datasets/{dataset_id}/endmembers", 404),
    (f"{ENDMEMBERS}/forsterite?pressure_gpa=3&temperature_k=1500", {},
     "/v1/datasets/{dataset_id}/endmembers/{name}", 200),
    (f"{ENDMEMBERS}/albite_liquid?pressure_gpa=0&temperature_k=1400", {},
     "/v1/datasets/{dataset_id}/endmembers/{name}", 200),
    (f"{ENDMEMBERS}/rutile?pressure_gpa=1&temperature_k=1400", {},
     "/v1/datasets/{dataset_id}/endmembers/{name}", 200),
    (f"{ENDMEMBERS}/forsterite?pressure_gpa=nan&temperature_k=99999", {},
     "/v1/datasets/{dataset_id}/endmembers/{name}", 422),
    (f"{ENDMEMBERS}/forsterite", {}, "/v1/datasets/{dataset_id}/endmembers/{name}", 422),
    (f"{ENDMEMBERS}/nothing?pressure_gpa=3&temperature_k=1500", {},
     "/v1/datasets/{dataset_id}/endmembers/{name}", 404),
]


@pytest.mark.parametrize(("url", "headers", "path", "status"), CASES)
def test_response_validates_against_the_documented_schema(client, openapi, url, headers, path, status):
    response = client.get(url, headers=headers)
    assert response.status_code == status, response.get_data(as_text=True)
    validator = response_validator(openapi, path, "get", status, response.mimetype)
    errors = [f"{'/'.join(map(str, e.absolute_path))}: {e.message}" for e in validator.iter_errors(response.get_json())]
    assert not errors, errors


def test_schemas_reject_a_response_missing_a_field(client, openapi):
    """The validation above can fail: a response with a field removed is refused."""
    body = client.get(f"{ENDMEMBERS}/forsterite?pressure_gpa=3&temperature_k=1500").get_json()
    validator = response_validator(openapi, "/v1/datasets/{dataset_id}/endmembers/{name}", "get", 200,
                                   "application/json")
    del body["provenance"]["request_hash"]
    assert not validator.is_valid(body)
    body.pop("provenance")
    body["density_kg_m3"] = 1.0
    assert not validator.is_valid(body)
