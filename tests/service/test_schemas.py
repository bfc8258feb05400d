"""Shared marshmallow schemas and request loaders (service/schemas.py)."""

from __future__ import annotations

import pytest
from flask import Flask
from marshmallow import ValidationError

from service import create_app
from service.errors import flatten_messages
from service.schemas import CompositionSchema, StatePointQuery, load_json
from thermo.composition import KNOWN_OXIDES, bulk_from_oxides


def composition_errors(data) -> dict[str, str]:
    with pytest.raises(ValidationError) as info:
        CompositionSchema().load(data)
    return {e["field"]: e["message"] for e in flatten_messages(info.value.messages)}


def test_composition_loads_and_defaults_drop_to_false():
    data = {"basis": "wt_percent", "oxides": {"SiO2": 45, "MgO": 38.5}}
    assert CompositionSchema().load(data) == {**data, "drop_unsupported_oxides": False}
    loaded = CompositionSchema().load({**data, "basis": "mol_percent", "drop_unsupported_oxides": True})
    assert loaded["drop_unsupported_oxides"] is True


def test_loaded_composition_feeds_the_core_converter():
    loaded = CompositionSchema().load({"basis": "wt_percent", "oxides": {"SiO2": 40.0, "MgO": 60.0}})
    bulk = bulk_from_oxides(loaded["oxides"], loaded["basis"], drop_unsupported=loaded["drop_unsupported_oxides"])
    assert bulk.wt_percent() == pytest.approx({"SiO2": 40.0, "MgO": 60.0}, rel=1e-12)


@pytest.mark.parametrize(
    ("data", "field"),
    [
        ({"oxides": {"SiO2": 50}}, "basis"),
        ({"basis": "ppm", "oxides": {"SiO2": 50}}, "basis"),
        ({"basis": "wt_percent"}, "oxides"),
        ({"basis": "wt_percent", "oxides": {}}, "oxides"),
        ({"basis": "wt_percent", "oxides": {"SiO2": 0, "MgO": 0}}, "oxides"),
        ({"basis": "wt_percent", "oxides": {"SiO2": -1, "MgO": 50}}, "oxides.SiO2"),
        ({"basis": "wt_percent", "oxides": {"SiO2": "45", "MgO": 50}}, "oxides.SiO2"),
        ({"basis": "wt_percent", "oxides": {"SiO2": True, "MgO": 50}}, "oxides.SiO2"),
        ({"basis": "wt_percent", "oxides": {"SiO2": float("nan")}}, "oxides.SiO2"),
        ({"basis": "wt_percent", "oxides": {"SiO2": 10**400}}, "oxides.SiO2"),
        ({"basis": "wt_percent", "oxides": {"Unobtainium": 5, "MgO": 50}}, "oxides.Unobtainium"),
        ({"basis": "wt_percent", "oxides": {"SiO2": 50}, "drop_unsupported_oxides": "yes"}, "drop_unsupported_oxides"),
        ({"basis": "wt_percent", "oxides": {"SiO2": 50}, "normalise": True}, "normalise"),
    ],
)
def test_bad_composition_names_the_field(data, field):
    assert field in composition_errors(data)


def test_composition_oxides_agree_with_the_core_and_the_openapi_schema(openapi):
    spec = openapi["components"]["schemas"]["Composition"]
    assert spec["properties"]["oxides"]["propertyNames"]["enum"] == list(KNOWN_OXIDES)
    assert spec["properties"]["basis"]["enum"] == ["wt_percent", "mol_percent"]


def test_state_point_query_checks_the_given_ranges():
    schema = StatePointQuery((0.0, 10.0), (1000.0, 2000.0))
    loaded = schema.load({"pressure_gpa": "10", "temperature_k": "1000"})
    assert loaded == {"pressure_gpa": 10.0, "temperature_k": 1000.0}
    with pytest.raises(ValidationError) as info:
        schema.load({"pressure_gpa": "10.5", "temperature_k": "999"})
    assert set(info.value.messages) == {"pressure_gpa", "temperature_k"}


def _echo_app() -> Flask:
    app = create_app({"TESTING": True})

    @app.post("/v1/_echo")
    def _echo():
        return load_json(CompositionSchema())

    return app


def test_json_body_loader_gives_400_for_malformed_json_and_422_for_bad_fields():
    client = _echo_app().test_client()
    good = {"basis": "wt_percent", "oxides": {"SiO2": 50}}
    assert client.post("/v1/_echo", json=good).status_code == 200
    response = client.post("/v1/_echo", data="{not json", content_type="application/json")
    assert response.status_code == 400
    assert response.get_json()["type"].endswith("/malformed-request")
    response = client.post("/v1/_echo", json=[1, 2])
    assert response.status_code == 422
    response = client.post("/v1/_echo", json={"basis": "wt_percent", "oxides": {"SiO2": -3}})
    assert response.status_code == 422
    assert response.get_json()["errors"][0]["field"] == "oxides.SiO2"
    response = client.post("/v1/_echo", data="basis=wt_percent", content_type="application/x-www-form-urlencoded")
    assert response.status_code == 415
    assert response.mimetype == "application/problem+json"
