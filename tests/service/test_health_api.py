"""GET /v1/health."""

import thermo


def test_health_reports_ok_and_code_version(client):
    response = client.get("/v1/health")
    assert response.status_code == 200
    assert response.mimetype == "application/json"
    assert response.get_json() == {"status": "ok", "version": thermo.__version__}


def test_health_accepts_wildcard_and_json_accept_headers(client):
    for accept in ("*/*", "application/*", "application/json", "text/html, application/json;q=0.1"):
        assert client.get("/v1/health", headers={"Accept": accept}).status_code == 200, accept
