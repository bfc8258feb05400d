"""``POST /v1/cooling-paths``: contract, equality with the core, energy bookkeeping, figures, 4xx and 406.

Compositions: a melt of forsterite stoichiometry (Mg2SiO4, a one-component bulk whose melting
on this isobar is an isobaric invariant: an isothermal step), and the invented peridotite-like
melt of the fictional planet Kestrel IV from the examples (made up for the demo scenario; it
stands for no real sample). The default dataset's melt model is still being calibrated, so
these tests check identities, equalities and bookkeeping, not petrology.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import numpy as np
import pytest

from service import create_app
from service.cooling_paths import request_parameters
from service.provenance import request_hash
from service.schemas import CoolingPathRequest
from service.serializers import path_step_json
from tests.service.team_support import make_app
from tests.service.test_openapi_contract import response_validator
from thermo.dataset import DEFAULT_DATASET_ID
from thermo.equilibrium import prepare
from thermo.formats import path_to_csv, read_csv
from thermo.paths import cooling_path

PATH = "/v1/cooling-paths"
FORSTERITE = {"basis": "wt_percent", "oxides": {"MgO": 57.3, "SiO2": 42.7}}
#: Invented bulk composition of the Kestrel IV magma ocean (demo scenario) [wt %].
KESTREL_IV = {"basis": "wt_percent", "oxides": {"SiO2": 45.5, "Al2O3": 4.5, "FeO": 8.5, "MgO": 37.5, "CaO": 3.5,
                                                "Na2O": 0.5}}
#: Melting of the forsterite bulk at 0.5 GPa lies between 2250 and 2100 K (three grid steps).
THROUGH_INVARIANT = {"composition": FORSTERITE, "pressure_gpa": 0.5, "start_k": 2250.0, "stop_k": 2100.0,
                     "step_k": 50.0}
#: Kestrel IV melt cooled past its olivine saturation at 1 GPa with crystals removed (two steps).
FRACTIONAL = {"composition": KESTREL_IV, "pressure_gpa": 1.0, "start_k": 2100.0, "stop_k": 2000.0, "step_k": 50.0,
              "mode": "fractional", "trapped_melt_fraction": 0.05}
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
SVG_NS = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def module_app():
    return create_app({"TESTING": True})


@pytest.fixture(scope="module")
def equilibrium_answer(module_app):
    response = module_app.test_client().post(PATH, json=THROUGH_INVARIANT)
    assert response.status_code == 200, response.get_data(as_text=True)
    return response


@pytest.fixture(scope="module")
def fractional_answer(module_app):
    response = module_app.test_client().post(PATH, json=FRACTIONAL)
    assert response.status_code == 200, response.get_data(as_text=True)
    return response


def core_path(body: dict):
    comp = body["composition"]
    return cooling_path(prepare(comp["oxides"], comp["basis"]), body["pressure_gpa"], body["start_k"], body["stop_k"],
                        body["step_k"], body.get("mode", "equilibrium"), body.get("trapped_melt_fraction") or 0.0)


def schema_errors(openapi, response) -> list[str]:
    validator = response_validator(openapi, PATH, "post", response.status_code, response.mimetype)
    return [f"{'/'.join(map(str, e.absolute_path))}: {e.message}" for e in validator.iter_errors(response.get_json())]


# ------------------------------------------------------------------ contract and equality with the core
@pytest.mark.parametrize("answer", ["equilibrium_answer", "fractional_answer"])
def test_answer_validates_against_the_documented_schema(request, openapi, answer):
    response = request.getfixturevalue(answer)
    assert response.mimetype == "application/json"
    assert not schema_errors(openapi, response)
    assert response.headers["Vary"] == "Accept" and response.get_etag()[0]


@pytest.mark.parametrize(("body", "answer"), [(THROUGH_INVARIANT, "equilibrium_answer"),
                                              (FRACTIONAL, "fractional_answer")])
def test_steps_are_the_core_paths_numbers(request, body, answer):
    result = request.getfixturevalue(answer).get_json()
    path = core_path(body)
    assert len(result["steps"]) == len(path.points)
    for step, point in zip(result["steps"], path.points, strict=True):
        assert step["temperature_k"] == point.temperature_k and step["kind"] == point.kind
        assert step["specific_enthalpy_j_per_kg"] == point.specific_enthalpy_j_per_kg
        assert step["specific_entropy_j_per_kg_k"] == point.specific_entropy_j_per_kg_k
        assert step["heat_capacity_frozen_j_per_kg_k"] == point.cp_frozen_j_per_kg_k
        assert step["heat_capacity_effective_j_per_kg_k"] == point.cp_effective_j_per_kg_k
        assert step["latent_heat_j_per_kg"] == point.step_latent_heat_j_per_kg_initial
        assert step["cumulative_latent_heat_j_per_kg"] == point.cumulative_latent_heat_j_per_kg_initial
        assert step["entropy_change_j_per_kg_k"] == point.step_entropy_change_j_per_k_per_kg_initial
        assert step["density_kg_per_m3"] == point.density_kg_per_m3
        assert step["melt_density_kg_per_m3"] == point.melt_density_kg_per_m3
        assert step["solid_density_kg_per_m3"] == point.solid_density_kg_per_m3
        assert [(p["name"], p["mass_fraction"]) for p in step["phases"]] == [
            (p.name, p.mass_fraction) for p in point.phases]
    assert (result["liquidus_k"], result["solidus_k"]) == (path.liquidus_k, path.solidus_k)
    assert result["notes"] == list(path.notes)
    assert [(e["phase"], e["event"], e["temperature_k"]) for e in result["saturation_sequence"]] == [
        (e.phase, e.event, e.temperature_k) for e in path.saturation_sequence()]


def test_cumulates_are_the_core_paths_layers(fractional_answer):
    result = fractional_answer.get_json()
    layers = core_path(FRACTIONAL).cumulates
    assert result["cumulates"] and len(result["cumulates"]) == len(layers)
    for layer, core in zip(result["cumulates"], layers, strict=True):
        assert layer["mass_kg_per_kg_initial"] == core.mass_kg_per_kg_initial
        assert layer["mineral_proportions"] == core.mineral_proportions
        assert layer["enthalpy_j_per_kg_initial"] == core.enthalpy_j_per_kg_initial
        # trapped melt by mass, as requested (the layer keeps f/(1-f) of its crystal mass of melt)
        assert layer["trapped_melt_mass_fraction"] == pytest.approx(FRACTIONAL["trapped_melt_fraction"], rel=1e-12)


# ------------------------------------------------------------------ energy bookkeeping as served
def test_isothermal_invariant_shows_both_sides_and_the_heat_released(equilibrium_answer):
    result = equilibrium_answer.get_json()
    invariant = [b for b in result["phase_boundaries"] if b["isothermal"]]
    assert len(invariant) == 1  # melting of a one-component bulk (phase rule: F = 0 at fixed P)
    b = invariant[0]
    kinds = [s["kind"] for s in result["steps"]]
    above = result["steps"][kinds.index("boundary_above")]
    below = result["steps"][kinds.index("boundary_below")]
    # T* ± ε with ε ≤ 0.01 K (thermo.saturation.BoundaryFinder.max_offset_k): an isothermal step
    assert above["temperature_k"] - below["temperature_k"] <= 2e-2
    assert above["temperature_k"] > b["temperature_k"] > below["temperature_k"]
    assert b["specific_enthalpy_above_j_per_kg"] == above["specific_enthalpy_j_per_kg"]
    assert b["specific_enthalpy_below_j_per_kg"] == below["specific_enthalpy_j_per_kg"]
    jump = above["specific_enthalpy_j_per_kg"] - below["specific_enthalpy_j_per_kg"]
    assert b["heat_released_j_per_kg"] == below["heat_released_j_per_kg"] == pytest.approx(jump, rel=1e-12)
    assert jump > 1e5  # finite latent heat at constant T (hundreds of kJ/kg for silicate melting)


def test_running_totals_are_the_sums_of_the_steps(equilibrium_answer, fractional_answer):
    for result in (equilibrium_answer.get_json(), fractional_answer.get_json()):
        steps = result["steps"]
        latent = heat = 0.0
        for step in steps:
            latent += step["latent_heat_j_per_kg"]
            heat += step["heat_released_j_per_kg"]
            assert step["cumulative_latent_heat_j_per_kg"] == pytest.approx(latent, rel=1e-12, abs=1e-9)
            assert step["cumulative_heat_released_j_per_kg"] == pytest.approx(heat, rel=1e-12, abs=1e-9)
            assert step["heat_released_j_per_kg"] == pytest.approx(
                step["sensible_heat_j_per_kg"] + step["latent_heat_j_per_kg"], rel=1e-12, abs=1e-9)
        assert result["energy_balance"]["heat_released_j_per_kg"] == steps[-1]["cumulative_heat_released_j_per_kg"]


def test_equilibrium_path_energy_balance_closes(equilibrium_answer):
    """Closed system: h_initial − h_final = Σ heat released, and ∫T ds = Δh (issue 7: to 1e-4 relative)."""
    result = equilibrium_answer.get_json()
    balance = result["energy_balance"]
    steps = result["steps"]
    # per kg of starting parcel (H = h·m with m = 1 kg): equal to the steps' specific h up to round-off
    assert balance["initial_enthalpy_j_per_kg"] == pytest.approx(steps[0]["specific_enthalpy_j_per_kg"], rel=1e-14)
    assert balance["final_parcel_enthalpy_j_per_kg"] == pytest.approx(steps[-1]["specific_enthalpy_j_per_kg"],
                                                                      rel=1e-14)
    released = balance["initial_enthalpy_j_per_kg"] - balance["final_parcel_enthalpy_j_per_kg"]
    assert balance["heat_released_j_per_kg"] == pytest.approx(released, rel=1e-12)
    t_ds = sum(s["t_ds_j_per_kg"] for s in steps)
    assert abs(t_ds - released) / released < 1e-4
    assert balance["t_ds_identity_relative_residual"] < 1e-4
    assert balance["energy_conservation_relative_residual"] is None
    assert result["cumulates"] is None and result["trapped_melt_fraction"] is None


def test_fractional_path_conserves_energy_and_says_the_solidus_is_not_reached(fractional_answer):
    """h_initial = h_parcel + Σ h_removed + Σ heat released to 1e-8 relative (issue 7)."""
    result = fractional_answer.get_json()
    b = result["energy_balance"]
    assert b["removed_enthalpy_j_per_kg"] == pytest.approx(
        sum(layer["enthalpy_j_per_kg_initial"] for layer in result["cumulates"]), rel=1e-12)
    total = b["final_parcel_enthalpy_j_per_kg"] + b["removed_enthalpy_j_per_kg"] + b["heat_released_j_per_kg"]
    assert abs(total - b["initial_enthalpy_j_per_kg"]) / abs(b["initial_enthalpy_j_per_kg"]) < 1e-8
    assert b["energy_conservation_relative_residual"] < 1e-8
    assert 0 < b["final_parcel_mass_kg_per_kg_initial"] < 1
    assert result["steps"][-1]["system_mass_kg_per_kg_initial"] < 1
    assert result["solidus_k"] is None and any("solidus is not reached" in n for n in result["notes"])
    assert result["trapped_melt_fraction"] == FRACTIONAL["trapped_melt_fraction"]


def test_saturation_sequence_is_the_boundaries_in_cooling_order(equilibrium_answer, fractional_answer):
    for result in (equilibrium_answer.get_json(), fractional_answer.get_json()):
        events = result["saturation_sequence"]
        assert events
        temps = [e["temperature_k"] for e in events]
        assert temps == sorted(temps, reverse=True)
        boundaries = {b["temperature_k"]: b for b in result["phase_boundaries"]}
        for e in events:
            b = boundaries[e["temperature_k"]]
            assert e["phase"] in (b["appearing"] if e["event"] == "appears" else b["disappearing"])


def test_provenance_hashes_the_request_with_its_defaults(equilibrium_answer):
    prov = equilibrium_answer.get_json()["provenance"]
    assert prov["dataset_id"] == DEFAULT_DATASET_ID and "Model estimate" in prov["note"]
    params = request_parameters(CoolingPathRequest().load(THROUGH_INVARIANT))
    assert params["mode"] == "equilibrium" and params["phases"]  # defaults filled in
    assert prov["request_hash"] == request_hash(params)
    assert request_hash({**params, "pressure_gpa": 0.5000000000000001}) != prov["request_hash"]


# ------------------------------------------------------------------ figures and negotiation
def test_svg_figure_has_the_axes_of_a_cooling_path(module_app):
    response = module_app.test_client().post(PATH, json=THROUGH_INVARIANT, headers={"Accept": "image/svg+xml"})
    assert response.status_code == 200 and response.mimetype == "image/svg+xml"
    texts = {"".join(el.itertext()).strip() for el in ET.fromstring(response.data).iter(f"{SVG_NS}text")}
    assert {"temperature [K]  (cooling →)", "phase mass fraction [kg per kg of system]"} <= texts
    assert response.headers["Vary"] == "Accept" and response.get_etag()[0].endswith(".svg")


def test_png_figure_is_a_png(module_app):
    response = module_app.test_client().post(PATH, json=FRACTIONAL, headers={"Accept": "image/png"})
    assert response.status_code == 200 and response.data[:8] == PNG_SIGNATURE


@pytest.mark.parametrize("accept", ["text/csv", "application/x-netcdf", "image/gif"])
def test_a_media_type_the_path_is_not_offered_in_is_406(client, accept):
    response = client.post(PATH, json=THROUGH_INVARIANT, headers={"Accept": accept})
    assert response.status_code == 406 and response.mimetype == "application/problem+json"
    assert "image/svg+xml" in response.get_json()["detail"]


def test_a_cached_path_answers_304_to_its_etag(tmp_path):
    app = make_app(tmp_path, HEATPATH_CACHE_MAX_BYTES=1 << 22)
    body = {**THROUGH_INVARIANT, "start_k": 2200.0, "stop_k": 2150.0}
    first = app.test_client().post(PATH, json=body)
    second = app.test_client().post(PATH, json=body)
    assert (first.headers["X-Heatpath-Cache"], second.headers["X-Heatpath-Cache"]) == ("miss", "hit")
    assert second.data == first.data
    etag = first.get_etag()[0]
    assert app.test_client().post(PATH, json=body, headers={"If-None-Match": f'"{etag}"'}).status_code == 304


def test_a_path_job_serves_its_figure_as_its_result(tmp_path):
    """The figure of a background job's result comes from GET /v1/jobs/<id>/result (Accept)."""
    app = make_app(tmp_path)  # jobs run at once in this process
    client = app.test_client()
    body = {**THROUGH_INVARIANT, "start_k": 2200.0, "stop_k": 2150.0}
    accepted = client.post(PATH, json={**body, "async": True}, headers={"Accept": "image/svg+xml"})
    assert accepted.status_code == 202 and accepted.mimetype == "application/json"
    result_url = client.get(accepted.headers["Location"]).get_json()["links"]["result"]
    as_json = client.get(result_url)
    synchronous = client.post(PATH, json=body)  # the job's result, from the cache
    assert synchronous.headers["X-Heatpath-Cache"] == "hit" and synchronous.data == as_json.data
    figure = client.get(result_url, headers={"Accept": "image/png"})
    assert figure.status_code == 200 and figure.data[:8] == PNG_SIGNATURE
    assert figure.get_etag()[0] == f"{as_json.get_etag()[0]}.png"
    assert client.get(result_url, headers={"Accept": "text/csv"}).status_code == 406


# ------------------------------------------------------------------ 4xx
def problem_fields(response) -> dict[str, str]:
    assert response.mimetype == "application/problem+json"
    return {e["field"]: e["message"] for e in response.get_json()["errors"]}


@pytest.mark.parametrize(("change", "field", "words"), [
    ({"stop_k": 2300.0}, "stop_k", "must be below start_k"),
    ({"step_k": 0.0}, "step_k", "must be positive"),
    ({"step_k": 0.1}, "step_k", "1500 steps; the limit is 1000 steps per path"),
    ({"pressure_gpa": 30.0}, "pressure_gpa", "outside the validity range"),
    ({"start_k": 4000.0}, "start_k", "outside the validity range"),
    ({"stop_k": 100.0}, "stop_k", "outside the validity range"),
    ({"trapped_melt_fraction": 0.1}, "trapped_melt_fraction", "applies to mode 'fractional' only"),
    ({"mode": "fractional", "trapped_melt_fraction": 1.0}, "trapped_melt_fraction", "0 <= f < 1"),
    ({"mode": "batch"}, "mode", "Must be one of"),
    ({"step_k": "10"}, "step_k", "must be a JSON number"),
    ({"phases": ["liquid", "unobtainium"]}, "phases.1", "unknown phase"),
    ({"dataset": "nope"}, "dataset", "unknown dataset"),
    ({"colour": "red"}, "colour", "unknown field"),
    ({"async": 1}, "async", "must be true or false"),
])
def test_bad_requests_are_422_naming_the_field(client, change, field, words):
    response = client.post(PATH, json={**THROUGH_INVARIANT, **change})
    assert response.status_code == 422
    fields = problem_fields(response)
    assert words in fields[field], fields


def test_missing_quantities_are_each_named(client):
    fields = problem_fields(client.post(PATH, json={"composition": FORSTERITE}))
    assert {"pressure_gpa", "start_k", "stop_k", "step_k"} <= fields.keys()


def test_step_limit_is_a_server_setting(tmp_path):
    app = make_app(tmp_path, HEATPATH_MAX_PATH_STEPS=2)
    response = app.test_client().post(PATH, json=THROUGH_INVARIANT)  # 3 steps
    assert response.status_code == 422
    assert "3 steps; the limit is 2 steps per path" in problem_fields(response)["step_k"]


def test_a_body_that_is_not_json_is_400_and_a_form_is_415(client):
    response = client.post(PATH, data="{not json", headers={"Content-Type": "application/json"})
    assert response.status_code == 400 and response.get_json()["type"].endswith("/malformed-request")
    assert client.post(PATH, data={"a": "b"}).status_code == 415


def test_path_csv_columns_carry_the_json_step_names_and_numbers():
    """The CSV of a path (CLI --format csv) names its columns as the JSON steps do, with the same values."""
    path = core_path(THROUGH_INVARIANT)
    cols = read_csv(path_to_csv(path))["columns"]
    steps = [path_step_json(p) for p in path.points]
    numeric = [c for c in cols if not c.startswith("mass_fraction_")]
    assert {"heat_capacity_effective_j_per_kg_k", "thermal_expansivity_frozen_per_k", "latent_heat_j_per_kg"} <= set(
        numeric)
    for c in numeric:
        assert c in steps[0], c
        np.testing.assert_array_equal(cols[c], [s[c] for s in steps])


def test_a_path_job_reports_progress_in_the_units_of_its_size():
    """The job's points_total is the path's step count; the core reports (k, steps) after each step."""
    from service.cooling_paths import compute_cooling_path
    from service.schemas import path_step_count

    req = CoolingPathRequest().load(THROUGH_INVARIANT)
    calls = []
    compute_cooling_path(req, progress=lambda done, total: calls.append((done, total)))
    size = path_step_count(req["start_k"], req["stop_k"], req["step_k"])
    assert calls[-1] == (size, size) and len(calls) == size
