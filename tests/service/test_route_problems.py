"""404, 405, 406 and 413 are the same problem details on every route, and documented on every operation.

Walks the app's url_map, so routes added later are covered without editing this file.
"""

from __future__ import annotations

import re

import pytest

from service import create_app
from thermo.dataset import DEFAULT_DATASET_ID

PROBLEM = "application/problem+json"
HTTP_METHODS = ("GET", "POST", "PUT", "PATCH", "DELETE")
SAMPLE_VALUES = {"dataset_id": DEFAULT_DATASET_ID, "name": "forsterite", "job_id": "0123abcd"}


def routes() -> list[tuple[str, frozenset[str]]]:
    app = create_app({"TESTING": True})
    out: dict[str, set[str]] = {}
    for rule in app.url_map.iter_rules():
        if rule.rule.startswith("/v1/") or rule.rule == "/metrics":
            url = re.sub(r"<(?:[^:<>]+:)?([^<>]+)>", lambda m: SAMPLE_VALUES.get(m.group(1), "x"), rule.rule)
            out.setdefault(url, set()).update(rule.methods - {"HEAD", "OPTIONS"})
    return sorted((url, frozenset(methods)) for url, methods in out.items())


ROUTES = routes()


def assert_problem(response, status: int) -> dict:
    assert response.status_code == status, response.get_data(as_text=True)[:500]
    assert response.mimetype == PROBLEM
    body = response.get_json()
    assert {"type", "title", "status", "detail"} <= body.keys() and body["status"] == status
    assert body["detail"] and body["title"]
    return body


@pytest.mark.parametrize(("url", "methods"), ROUTES)
def test_a_method_the_route_lacks_is_405_problem_with_allow(client, url, methods):
    missing = next(m for m in HTTP_METHODS if m not in methods)
    response = client.open(url, method=missing)
    assert_problem(response, 405)
    assert methods <= set(response.headers["Allow"].replace(" ", "").split(","))


@pytest.mark.parametrize(("url", "methods"), ROUTES)
def test_an_unacceptable_accept_header_is_406_problem(client, url, methods):
    method = sorted(methods)[0]
    body = assert_problem(client.open(url, method=method, json={}, headers={"Accept": "application/x-nothing"}), 406)
    assert "application/x-nothing" in body["detail"]


@pytest.mark.parametrize(("url", "methods"), ROUTES)
def test_a_body_over_the_limit_is_413_problem(client, app, url, methods):
    limit = app.config["MAX_CONTENT_LENGTH"]
    method = sorted(methods)[0]
    body = assert_problem(client.open(url, method=method, data=b"x" * (limit + 1),
                                      headers={"Content-Type": "application/json"}), 413)
    assert str(limit) in body["detail"]


@pytest.mark.parametrize(("url", "methods"), ROUTES)
def test_a_path_below_a_route_that_does_not_exist_is_404_problem(client, url, methods):
    assert assert_problem(client.get(url + "/no/such/thing"), 404)["type"] == "about:blank"


def test_every_documented_operation_lists_the_common_problems(openapi):
    for path, item in openapi["paths"].items():
        for method, op in item.items():
            if method not in ("get", "post", "put", "patch", "delete"):
                continue
            documented = set(op["responses"])
            assert {"406", "413"} <= documented, f"{method.upper()} {path}"
            if method == "post":
                assert {"400", "415", "422"} <= documented, f"{method.upper()} {path}"
            if op.get("security", openapi["security"]) != [{}]:
                assert {"401", "429"} <= documented, f"{method.upper()} {path}: needs a key once keys exist"
