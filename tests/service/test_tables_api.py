"""``POST /v1/tables``: contract, equality with the core, CSV and netCDF round trips, figures, jobs, 4xx, 406.

The composition is a melt of forsterite stoichiometry (Mg2SiO4), a simple bulk whose melting
on these isobars is an isobaric invariant inside the small grid (2 pressures x 3
temperatures), so the table has boundary points and indexed forms with a flat T(h). The
default dataset's melt model is still being calibrated, so these tests check identities,
equalities and round trips, not petrology.
"""

from __future__ import annotations

import io
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from scipy.io import netcdf_file

from service.client import parse_csv
from service.serializers import table_json
from tests.service.team_support import make_app
from tests.service.test_openapi_contract import response_validator
from thermo.equilibrium import prepare
from thermo.tables import FIELDS, TableSettings, property_table

PATH = "/v1/tables"
FORSTERITE = {"basis": "wt_percent", "oxides": {"MgO": 57.3, "SiO2": 42.7}}
PRESSURES = [0.5, 1.0]
TEMPERATURES = {"start": 2100.0, "stop": 2300.0, "count": 3}
BODY = {"composition": FORSTERITE, "pressure_gpa": PRESSURES, "temperature_k": TEMPERATURES}
CSV, NETCDF, JSON = "text/csv", "application/x-netcdf", "application/json"


@pytest.fixture(scope="module")
def cached_app(tmp_path_factory):
    """An app with a result cache: the table is computed once and served in every format from the cache."""
    return make_app(tmp_path_factory.mktemp("tables"), HEATPATH_CACHE_MAX_BYTES=1 << 24)


@pytest.fixture(scope="module")
def answer(cached_app):
    response = cached_app.test_client().post(PATH, json=BODY)
    assert response.status_code == 200, response.get_data(as_text=True)
    return response


@pytest.fixture(scope="module")
def result(answer):
    return answer.get_json()


def as_array(value) -> np.ndarray:
    """A JSON (nested) list as floats, null as NaN."""
    cells = np.array(value, dtype=object)
    return np.where(np.equal(cells, None), np.nan, cells).astype(float)


def post(app, accept: str, body: dict = BODY):
    response = app.test_client().post(PATH, json=body, headers={"Accept": accept})
    assert response.status_code == 200, response.get_data(as_text=True)[:2000]
    return response


# ------------------------------------------------------------------ JSON
def test_answer_validates_against_the_documented_schema(openapi, answer):
    validator = response_validator(openapi, PATH, "post", 200, answer.mimetype)
    assert not [f"{list(e.absolute_path)}: {e.message}" for e in validator.iter_errors(answer.get_json())]
    assert answer.headers["Vary"] == "Accept"


def test_table_is_the_core_tables_numbers(result):
    table = property_table(prepare(FORSTERITE["oxides"], FORSTERITE["basis"]), PRESSURES, 2100.0, 2300.0, 3,
                           settings=TableSettings(workers=1))
    expected = table_json(table)
    for key in ("pressure_gpa", "temperature_k", "by_temperature", "solidus", "liquidus", "enthalpy_axis_j_per_kg",
                "by_enthalpy", "entropy_axis_j_per_kg_k", "by_entropy", "boundary_points", "checks"):
        assert result[key] == expected[key], key
    assert np.shape(result["by_temperature"]["melt_fraction"]) == (2, 3)  # [pressure][temperature]
    assert result["form"] == "temperature" and "temperature fastest" in result["index_order"]


def test_table_carries_its_checks_and_they_pass_here(result):
    checks = result["checks"]
    assert checks["all_passed"] is True, checks
    assert checks["melt_fraction_within_0_1"]["min"] >= 0 and checks["melt_fraction_within_0_1"]["max"] <= 1
    assert not [w for w in result["provenance"]["warnings"] if w.startswith("table check")]


def test_the_invariant_appears_as_boundary_points_on_both_sides(result):
    points = result["boundary_points"]
    assert sorted(set(points["side"])) == [-1, 1] and len(points["side"]) >= 2
    for i in range(len(PRESSURES)):
        temps = [t for t, k in zip(points["temperature_k"], points["pressure_index"], strict=True) if k == i]
        assert temps and max(temps) - min(temps) <= 2e-2  # one isothermal step per isobar: T* ± ε, ε ≤ 0.01 K
    solidus = as_array(result["solidus"]["temperature_k"])
    assert np.all((solidus > 2100.0) & (solidus < 2300.0))


def test_variable_selection_and_no_boundary_points(cached_app):
    body = {**BODY, "variables": ["density_kg_per_m3", "heat_capacity_effective_j_per_kg_k"], "boundary_points": False,
            "form": "enthalpy"}
    response = post(cached_app, JSON, body)
    out = response.get_json()
    assert set(out["by_temperature"]) == {"density_kg_per_m3", "heat_capacity_effective_j_per_kg_k", "melt_fraction"}
    assert out["boundary_points"] is None and out["form"] == "enthalpy"
    as_csv = parse_csv(post(cached_app, CSV, body).get_data(as_text=True))
    assert as_csv["header"]["form"] == "enthalpy" and "temperature_k" in as_csv["columns"]
    np.testing.assert_array_equal(as_csv["columns"]["temperature_k"],
                                  as_array(out["by_enthalpy"]["temperature_k"]).ravel())
    with netcdf_file(io.BytesIO(post(cached_app, NETCDF, body).data), "r", mmap=False) as nc:
        assert "heat_capacity_frozen_j_per_kg_k" not in nc.variables and "density_kg_per_m3" in nc.variables
        assert nc.dimensions["boundary_point"] in (0, None)


# ------------------------------------------------------------------ CSV
def test_csv_reads_back_to_the_json_numbers(cached_app, result):
    response = post(cached_app, CSV)
    assert response.mimetype == "text/csv" and response.headers["X-Heatpath-Cache"] == "hit"
    assert response.get_etag()[0] == f"{cached_app.test_client().post(PATH, json=BODY).get_etag()[0]}.csv"
    parsed = parse_csv(response.get_data(as_text=True))
    cols, header = parsed["columns"], parsed["header"]
    np.testing.assert_array_equal(cols["pressure_gpa"], np.repeat(PRESSURES, 3))  # pressure slowest
    np.testing.assert_array_equal(cols["temperature_k"], np.tile(result["temperature_k"], 2))
    for name in FIELDS:
        np.testing.assert_array_equal(cols[name], as_array(result["by_temperature"][name]).ravel(), err_msg=name)
    units = {name: unit for name, unit, _ in header["column"]}
    assert units["temperature_k"] == "K" and units["specific_enthalpy_j_per_kg"] == "J kg-1"
    assert header["checks"] == result["checks"] and header["provenance"] == result["provenance"]
    assert "298.15 K" in header["reference_state"]


@pytest.mark.parametrize(("form", "axis", "data"), [("enthalpy", "specific_enthalpy_j_per_kg", "by_enthalpy"),
                                                    ("entropy", "specific_entropy_j_per_kg_k", "by_entropy")])
def test_csv_of_an_indexed_form(cached_app, form, axis, data):
    out = post(cached_app, JSON, {**BODY, "form": form}).get_json()
    cols = parse_csv(post(cached_app, CSV, {**BODY, "form": form}).get_data(as_text=True))["columns"]
    index = out["enthalpy_axis_j_per_kg" if form == "enthalpy" else "entropy_axis_j_per_kg_k"]
    np.testing.assert_array_equal(cols[axis], np.tile(index, len(PRESSURES)))
    np.testing.assert_array_equal(cols["temperature_k"], as_array(out[data]["temperature_k"]).ravel())


# ------------------------------------------------------------------ netCDF
def test_netcdf_reads_back_to_the_json_numbers_with_cf_attributes(cached_app, result):
    response = post(cached_app, NETCDF)
    assert response.mimetype == NETCDF and response.data[:3] == b"CDF"
    with netcdf_file(io.BytesIO(response.data), "r", mmap=False) as nc:
        assert nc.Conventions.decode() == "CF-1.10"
        np.testing.assert_array_equal(nc.variables["pressure"][:], PRESSURES)
        np.testing.assert_array_equal(nc.variables["temperature"][:], result["temperature_k"])
        for name in FIELDS:
            var = nc.variables[name]
            assert var.dimensions == ("pressure", "temperature")
            np.testing.assert_array_equal(var[:], as_array(result["by_temperature"][name]), err_msg=name)
        fill = nc.variables["temperature_k_at_enthalpy"]._FillValue
        values = np.array(nc.variables["temperature_k_at_enthalpy"][:])
        np.testing.assert_array_equal(np.where(values == fill, np.nan, values),
                                      as_array(result["by_enthalpy"]["temperature_k"]))
        for name, var in nc.variables.items():
            assert var.units and var.long_name, name
        assert nc.checks_all_passed.decode() == "true"


# ------------------------------------------------------------------ figures and negotiation
def test_melt_fraction_map_as_svg_and_png(cached_app):
    svg = post(cached_app, "image/svg+xml")
    texts = {"".join(el.itertext()).strip() for el in ET.fromstring(svg.data).iter("{http://www.w3.org/2000/svg}text")}
    assert {"temperature [K]", "pressure [GPa]", "melt fraction [kg liquid per kg of system]"} <= texts
    assert post(cached_app, "image/png").data[:8] == b"\x89PNG\r\n\x1a\n"


@pytest.mark.parametrize(("accept", "media_type"), [
    ("text/csv;q=0.9, application/x-netcdf", NETCDF), ("*/*", JSON), ("text/*", CSV), ("image/*", "image/svg+xml"),
])
def test_accept_header_chooses_the_format(cached_app, accept, media_type):
    assert post(cached_app, accept).mimetype == media_type


@pytest.mark.parametrize("accept", ["application/xml", "text/html", "image/gif"])
def test_an_unoffered_media_type_is_406_naming_the_offered_ones(client, accept):
    response = client.post(PATH, json=BODY, headers={"Accept": accept})
    assert response.status_code == 406 and response.mimetype == "application/problem+json"
    assert "text/csv" in response.get_json()["detail"] and "application/x-netcdf" in response.get_json()["detail"]


# ------------------------------------------------------------------ jobs
def test_a_table_job_round_trip_ends_in_csv(tmp_path, cached_app):
    """202 → job → its result as CSV, netCDF and PNG; the CSV is the synchronous answer's."""
    app = make_app(tmp_path)  # jobs run at once in this process
    client = app.test_client()
    accepted = client.post(PATH, json={**BODY, "async": True}, headers={"Accept": CSV})
    assert accepted.status_code == 202 and accepted.mimetype == JSON
    job = client.get(accepted.headers["Location"]).get_json()
    assert job["state"] == "succeeded" and job["operation"] == "v1/tables"
    assert job["progress"]["points_total"] == len(PRESSURES) * TEMPERATURES["count"]
    as_csv = client.get(job["links"]["result"], headers={"Accept": CSV})
    assert as_csv.status_code == 200 and as_csv.mimetype == CSV
    synchronous = parse_csv(post(cached_app, CSV).get_data(as_text=True))["columns"]
    from_job = parse_csv(as_csv.get_data(as_text=True))["columns"]
    assert from_job.keys() == synchronous.keys()
    for name in synchronous:
        np.testing.assert_array_equal(from_job[name], synchronous[name], err_msg=name)
    assert client.get(job["links"]["result"], headers={"Accept": NETCDF}).data[:3] == b"CDF"
    assert client.get(job["links"]["result"], headers={"Accept": "image/png"}).data[:8] == b"\x89PNG\r\n\x1a\n"
    assert client.get(job["links"]["result"], headers={"Accept": "application/xml"}).status_code == 406


def test_an_equilibrium_jobs_result_is_not_offered_as_csv(tmp_path):
    client = make_app(tmp_path).test_client()
    accepted = client.post("/v1/equilibrium", json={"composition": FORSTERITE, "pressure_gpa": 1.0,
                                                    "temperature_k": 2400.0, "async": True})
    result_url = client.get(accepted.headers["Location"]).get_json()["links"]["result"]
    response = client.get(result_url, headers={"Accept": CSV})
    assert response.status_code == 406 and "application/json" in response.get_json()["detail"]


# ------------------------------------------------------------------ 4xx
def problem_fields(response) -> dict[str, str]:
    assert response.mimetype == "application/problem+json"
    return {e["field"]: e["message"] for e in response.get_json()["errors"]}


@pytest.mark.parametrize(("change", "field", "words"), [
    ({"temperature_k": [2100.0, 2200.0, 2210.0]}, "temperature_k", "evenly spaced"),
    ({"temperature_k": [2300.0, 2200.0]}, "temperature_k", "increasing"),
    ({"temperature_k": [2100.0]}, "temperature_k", "at least two"),
    ({"temperature_k": {"start": 2300.0, "stop": 2100.0, "count": 3}}, "temperature_k", "stop must be above start"),
    ({"temperature_k": {"start": 2100.0, "stop": 3600.0, "count": 3}}, "temperature_k", "outside the validity range"),
    ({"pressure_gpa": [1.0, 0.5]}, "pressure_gpa", "must increase strictly"),
    ({"pressure_gpa": [-1.0, 0.5]}, "pressure_gpa", "outside the validity range"),
    ({"temperature_k": {"start": 600.0, "stop": 3000.0, "count": 10001}}, "temperature_k",
     "2 pressures x 10001 temperatures = 20002 grid nodes; the limit is 20000 nodes per table"),
    ({"indexed_count": 10001}, "indexed_count", "20002 grid nodes; the limit is 20000 nodes per table"),
    ({"indexed_count": 1}, "indexed_count", "at least 2"),
    ({"form": "boundaries"}, "form", "Must be one of"),
    ({"variables": ["melt_fraction", "colour"]}, "variables.1", "unknown variable"),
    ({"variables": ["melt_fraction", "melt_fraction"]}, "variables.1", "more than once"),
    ({"boundary_points": "yes"}, "boundary_points", "must be true or false"),
])
def test_bad_requests_are_422_naming_the_field(client, change, field, words):
    response = client.post(PATH, json={**BODY, **change})
    assert response.status_code == 422
    fields = problem_fields(response)
    assert words in fields[field], fields


def test_grid_limit_is_a_server_setting(tmp_path):
    response = make_app(tmp_path, HEATPATH_MAX_TABLE_POINTS=5).test_client().post(PATH, json=BODY)
    assert response.status_code == 422
    assert "2 pressures x 3 temperatures = 6 grid nodes; the limit is 5 nodes per table" in \
        problem_fields(response)["temperature_k"]


def test_a_table_job_reports_progress_in_grid_nodes():
    """The job's points_total is pressures × temperatures; the core reports nodes as rows finish."""
    from service.schemas import TableRequest, axis_length
    from service.tables import compute_table

    body = {"composition": {"basis": "wt_percent", "oxides": {"CaO": 18.5, "MgO": 10.4, "SiO2": 49.9,
                                                               "Al2O3": 21.2}},
            "pressure_gpa": [0.0001, 0.5], "temperature_k": {"start": 1500.0, "stop": 1700.0, "count": 5}}
    req = TableRequest().load(body)
    calls = []
    compute_table(req, progress=lambda done, total: calls.append((done, total)))
    size = axis_length(req["pressure_gpa"]) * axis_length(req["temperature_k"])
    assert calls[-1] == (size, size) and [c[0] for c in calls] == [5, 10]
