"""``POST /v1/isentropes``: contract, equality with the core, the two ways to name an isentrope, figures, 4xx, 406.

The composition is a melt of forsterite stoichiometry (Mg2SiO4), a simple bulk; the default
dataset's melt model is still being calibrated, so these tests check identities and
equalities, not petrology.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import pytest

from service import create_app
from tests.service.team_support import make_app
from tests.service.test_openapi_contract import response_validator
from thermo.equilibrium import prepare
from thermo.isentropes import isentrope

PATH = "/v1/isentropes"
FORSTERITE = {"basis": "wt_percent", "oxides": {"MgO": 57.3, "SiO2": 42.7}}
PRESSURES = [0.0001, 0.5, 1.0]
FROM_POTENTIAL = {"composition": FORSTERITE, "pressure_gpa": PRESSURES, "potential_temperature_k": 2300.0}
SVG_NS = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def module_client():
    return create_app({"TESTING": True}).test_client()


@pytest.fixture(scope="module")
def answer(module_client):
    response = module_client.post(PATH, json=FROM_POTENTIAL)
    assert response.status_code == 200, response.get_data(as_text=True)
    return response


def test_answer_validates_against_the_documented_schema(openapi, answer):
    validator = response_validator(openapi, PATH, "post", 200, answer.mimetype)
    assert not [e.message for e in validator.iter_errors(answer.get_json())]
    assert answer.headers["Vary"] == "Accept"


def test_points_are_the_core_isentropes_numbers(answer):
    result = answer.get_json()
    iso = isentrope(prepare(FORSTERITE["oxides"], FORSTERITE["basis"]), PRESSURES, potential_temperature_k=2300.0)
    assert result["specific_entropy_j_per_kg_k"] == iso.specific_entropy_j_per_kg_k
    assert result["potential_temperature_k"] == 2300.0
    assert [p["pressure_gpa"] for p in result["points"]] == PRESSURES
    assert [p["temperature_k"] for p in result["points"]] == list(iso.temperature_k)
    assert [p["melt_fraction"] for p in result["points"]] == list(iso.melt_fraction)
    assert [p["specific_enthalpy_j_per_kg"] for p in result["points"]] == list(iso.specific_enthalpy_j_per_kg)
    assert [p["density_kg_per_m3"] for p in result["points"]] == list(iso.density_kg_per_m3)
    assert [p["on_invariant"] for p in result["points"]] == list(iso.on_invariant)


def test_the_point_at_one_bar_is_the_potential_temperature(answer):
    first = answer.get_json()["points"][0]
    assert first["pressure_gpa"] == answer.get_json()["reference_pressure_gpa"]
    assert first["temperature_k"] == pytest.approx(2300.0, abs=1e-6)  # root tolerance 1e-7 K


def test_the_same_isentrope_named_by_its_entropy(module_client, answer):
    """Given the entropy the potential temperature led to, the server finds the same temperatures."""
    result = answer.get_json()
    by_entropy = module_client.post(PATH, json={
        "composition": FORSTERITE, "pressure_gpa": PRESSURES,
        "specific_entropy_j_per_kg_k": result["specific_entropy_j_per_kg_k"]})
    assert by_entropy.status_code == 200
    other = by_entropy.get_json()
    assert other["potential_temperature_k"] is None
    for a, b in zip(result["points"], other["points"], strict=True):
        assert b["temperature_k"] == pytest.approx(a["temperature_k"], abs=1e-6)  # two root finds, 1e-7 K each


def test_a_pressure_range_is_the_list_it_stands_for(module_client):
    as_range = module_client.post(PATH, json={**FROM_POTENTIAL, "pressure_gpa": {"start": 0.5, "stop": 1.0,
                                                                                  "count": 2}})
    as_list = module_client.post(PATH, json={**FROM_POTENTIAL, "pressure_gpa": [0.5, 1.0]})
    assert as_range.status_code == as_list.status_code == 200
    assert as_range.get_json()["points"] == as_list.get_json()["points"]
    assert as_range.get_json()["provenance"]["request_hash"] != as_list.get_json()["provenance"]["request_hash"]


def test_svg_and_png_figures(module_client):
    svg = module_client.post(PATH, json=FROM_POTENTIAL, headers={"Accept": "image/svg+xml"})
    assert svg.status_code == 200 and svg.mimetype == "image/svg+xml"
    texts = {"".join(el.itertext()).strip() for el in ET.fromstring(svg.data).iter(f"{SVG_NS}text")}
    assert {"temperature [K]", "pressure [GPa]", "Isentrope (potential temperature 2300 K)"} <= texts
    png = module_client.post(PATH, json=FROM_POTENTIAL, headers={"Accept": "image/png"})
    assert png.status_code == 200 and png.data[:8] == b"\x89PNG\r\n\x1a\n"


def test_an_unoffered_media_type_is_406(client):
    response = client.post(PATH, json=FROM_POTENTIAL, headers={"Accept": "text/csv"})
    assert response.status_code == 406 and response.mimetype == "application/problem+json"


# ------------------------------------------------------------------ 4xx
def problem_fields(response) -> dict[str, str]:
    assert response.mimetype == "application/problem+json"
    return {e["field"]: e["message"] for e in response.get_json()["errors"]}


@pytest.mark.parametrize(("body", "field", "words"), [
    ({**FROM_POTENTIAL, "specific_entropy_j_per_kg_k": 3000.0}, "specific_entropy_j_per_kg_k", "not both"),
    ({"composition": FORSTERITE, "pressure_gpa": [1.0]}, "potential_temperature_k", "is required unless"),
    ({**FROM_POTENTIAL, "pressure_gpa": [1.0, 30.0]}, "pressure_gpa", "outside the validity range"),
    ({**FROM_POTENTIAL, "potential_temperature_k": 100.0}, "potential_temperature_k", "outside the validity range"),
    ({**FROM_POTENTIAL, "pressure_gpa": []}, "pressure_gpa", "at least one value"),
    ({**FROM_POTENTIAL, "pressure_gpa": [1.0, None]}, "pressure_gpa.1", "not null"),
    ({**FROM_POTENTIAL, "pressure_gpa": "1,2"}, "pressure_gpa", "a list of numbers or an object"),
    ({**FROM_POTENTIAL, "pressure_gpa": {"start": 0, "stop": 1, "count": 1}}, "pressure_gpa.count", "at least 2"),
    ({**FROM_POTENTIAL, "pressure_gpa": {"start": 0, "stop": 1, "count": 2.5}}, "pressure_gpa.count",
     "must be an integer"),
    ({**FROM_POTENTIAL, "pressure_gpa": {"start": 1, "stop": 1, "count": 3}}, "pressure_gpa.stop", "differ"),
    ({**FROM_POTENTIAL, "pressure_gpa": {"start": 0, "stop": 1, "count": 201}}, "pressure_gpa",
     "201 pressures; the limit is 200 pressures per isentrope"),
    ({**FROM_POTENTIAL, "temperature_k": 1500}, "temperature_k", "unknown field"),
])
def test_bad_requests_are_422_naming_the_field(client, body, field, words):
    response = client.post(PATH, json=body)
    assert response.status_code == 422
    fields = problem_fields(response)
    assert words in fields[field], fields


def test_pressure_limit_is_a_server_setting(tmp_path):
    response = make_app(tmp_path, HEATPATH_MAX_ISENTROPE_POINTS=2).test_client().post(PATH, json=FROM_POTENTIAL)
    assert response.status_code == 422
    assert problem_fields(response)["pressure_gpa"] == "3 pressures; the limit is 2 pressures per isentrope"


def test_an_entropy_no_temperature_of_the_domain_reaches_is_422_not_converged(client):
    response = client.post(PATH, json={"composition": FORSTERITE, "pressure_gpa": [1.0],
                                       "specific_entropy_j_per_kg_k": 1.0e5})
    assert response.status_code == 422
    assert response.get_json()["type"].endswith("/not-converged")
    assert "above the validity domain" in response.get_json()["detail"]
