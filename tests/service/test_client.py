"""The Python client (service/client.py) against a real gunicorn on loopback, and in-process.

The live server (tests/service/live_server.py) also serves the test ``count`` endpoint, a
stand-in for long work that reports progress, so following a 202 job is exercised on the
real job worker. Methods of endpoints that other work adds later skip until the route exists.
"""

from __future__ import annotations

import numpy as np
import pytest
import requests

from service.auth import create_key
from service.client import (
    HeatpathClient,
    HeatpathClientError,
    arrays_from_json,
    composition,
    grid_axis,
    parse_csv,
    parse_netcdf,
)
from tests.service.live_server import requires_route
from tests.service.team_support import COUNT_URL, count_squares, make_app
from tests.service.test_gunicorn_server import free_port
from thermo.dataset import DEFAULT_DATASET_ID

#: A composition to exercise the API with (not a physical check).
BULK = composition({"SiO2": 50.0, "MgO": 30.0, "CaO": 15.0, "Al2O3": 5.0})


@pytest.fixture
def hp(live_server):
    with HeatpathClient(live_server.url, poll_interval=(0.05, 0.3)) as client:
        yield client


def without_timing(result: dict) -> dict:
    """A result without the solver's wall time (the one number two runs do not share)."""
    return {**result, "diagnostics": {k: v for k, v in result["diagnostics"].items() if k != "solve_time_s"}}


# ------------------------------------------------------------------ plain resources
def test_health_ready_and_datasets_are_the_servers_answers(hp, live_server):
    assert hp.health() == requests.get(f"{live_server.url}/v1/health", timeout=10).json()
    assert hp.ready()["status"] == "ready"
    assert hp.datasets() == requests.get(f"{live_server.url}/v1/datasets", timeout=10).json()["datasets"]


def test_endmembers_and_endmember_properties(hp, live_server):
    listing = hp.endmembers()
    assert "forsterite" in [e["name"] for e in listing["endmembers"]]
    assert listing["provenance"]["dataset_id"] == DEFAULT_DATASET_ID
    props = hp.endmember_properties("forsterite", 3, 1500, dataset=DEFAULT_DATASET_ID)
    raw = requests.get(f"{live_server.url}/v1/datasets/{DEFAULT_DATASET_ID}/endmembers/forsterite",
                       params={"pressure_gpa": 3, "temperature_k": 1500}, timeout=10).json()
    assert props == raw


def test_equilibrium_is_the_same_as_a_raw_post_and_as_in_process(hp, live_server):
    body = {"composition": BULK, "pressure_gpa": 1.0, "temperature_k": 1700.0}
    raw = requests.post(f"{live_server.url}/v1/equilibrium", json=body, timeout=60).json()
    result = hp.equilibrium(BULK, 1.0, 1700.0)
    assert result == raw  # the second answer comes from the server's cache: the same bytes
    with HeatpathClient.in_process() as local:
        assert without_timing(local.equilibrium(BULK, 1.0, 1700.0)) == without_timing(result)


def test_user_agent_names_the_client(hp):
    assert hp.session.headers["User-Agent"].startswith("heatpath-client/")


# ------------------------------------------------------------------ errors
def test_bad_input_raises_one_error_type_with_the_problem_details(hp):
    with pytest.raises(HeatpathClientError) as info:
        hp.equilibrium(composition({"SiO2": 50, "Xx": 1}), 99.0, 1700.0)
    err = info.value
    assert err.status == 422 and err.response.status_code == 422
    assert err.problem["type"].endswith("/invalid-input")
    fields = {e["field"] for e in err.errors}
    assert {"pressure_gpa", "composition.oxides.Xx"} <= fields
    assert "pressure_gpa" in str(err) and "422" in str(err)


def test_unknown_resource_and_missing_route_are_404_errors(hp):
    with pytest.raises(HeatpathClientError) as info:
        hp.endmember_properties("no_such_mineral", 1, 1500, dataset=DEFAULT_DATASET_ID)
    assert info.value.status == 404 and info.value.problem["errors"][0]["field"] == "name"
    with pytest.raises(HeatpathClientError, match="no resource at POST /v1/nowhere") as info:
        hp.post("/v1/nowhere", {})
    assert info.value.status == 404


def test_server_down_is_a_clear_error():
    with HeatpathClient(f"http://127.0.0.1:{free_port()}", timeout=(1.0, 1.0)) as hp, \
            pytest.raises(HeatpathClientError, match="cannot reach the heatpath server") as info:
        hp.health()
    assert info.value.status is None and info.value.response is None


def test_read_timeout_is_a_clear_error(live_server):
    with HeatpathClient(live_server.url, timeout=(2.0, 0.3)) as hp, \
            pytest.raises(HeatpathClientError, match=r"no answer .* within the timeout") as info:
        hp.post(COUNT_URL, {"points": 4, "delay_s": 0.4})  # 1.6 s of work, answered synchronously
    assert info.value.status is None


# ------------------------------------------------------------------ jobs (202 Accepted)
def test_a_202_job_is_followed_to_its_result_with_progress(hp):
    seen = []
    result = hp.post(COUNT_URL, {"points": 12, "delay_s": 0.15, "async": True}, progress=seen.append)
    assert result == count_squares({"points": 12}, lambda *a: None)
    states = [job["state"] for job in seen]
    assert states[-1] == "succeeded" and set(states) <= {"queued", "running", "succeeded"}
    fractions = [job["progress"]["fraction"] for job in seen]
    assert fractions == sorted(fractions) and fractions[-1] == 1.0
    assert any(0 < f < 1 for f in fractions), fractions  # progress seen while it ran


def test_equilibrium_as_a_background_job_gives_the_synchronous_answer(hp):
    sync = hp.equilibrium(BULK, 2.0, 1800.0)
    calls = []
    job_result = hp.equilibrium(BULK, 2.0, 1800.0, background=True, progress=calls.append)
    assert job_result == sync and calls and calls[-1]["state"] == "succeeded"


def test_a_failed_job_raises_with_the_jobs_problem(hp):
    with pytest.raises(HeatpathClientError, match="failed") as info:
        hp.post(COUNT_URL, {"points": 2, "fail": True, "async": True})
    err = info.value
    assert err.status == 422 and err.problem["type"].endswith("/not-converged")
    assert err.job["state"] == "failed"


def test_job_timeout_leaves_the_job_which_can_then_be_cancelled(live_server):
    with HeatpathClient(live_server.url, job_timeout=0.6, poll_interval=(0.1, 0.2)) as hp:
        with pytest.raises(HeatpathClientError, match="goes on at the server") as info:
            hp.post(COUNT_URL, {"points": 200, "delay_s": 0.05, "async": True})
        job_id = info.value.job["id"]
        assert hp.job(job_id)["state"] in ("queued", "running")
        assert job_id in [j["id"] for j in hp.jobs()]
        assert hp.cancel_job(job_id)["state"] == "cancelled"
        with pytest.raises(HeatpathClientError) as info:
            hp.job_result(job_id)
        assert info.value.status == 409


def test_wait_by_id_and_job_result(hp, live_server):
    response = requests.post(f"{live_server.url}{COUNT_URL}", json={"points": 3, "async": True}, timeout=10)
    job_id = response.json()["id"]
    final = hp.wait(job_id, timeout=30)
    assert final["state"] == "succeeded"
    assert hp.job_result(job_id) == count_squares({"points": 3}, lambda *a: None)


# ------------------------------------------------------------------ keys, in-process transport
def test_api_key_is_sent_as_bearer_token(tmp_path):
    app = make_app(tmp_path)
    _, key = create_key(app.extensions["heatpath"].store, "Test owner")
    with HeatpathClient.in_process(app) as anonymous, pytest.raises(HeatpathClientError) as info:
        anonymous.datasets()
    assert info.value.status == 401 and info.value.problem["type"].endswith("/unauthenticated")
    with HeatpathClient.in_process(app, key=key) as keyed:
        assert keyed.datasets()[0]["id"] == DEFAULT_DATASET_ID
    assert keyed.session.headers["Authorization"] == f"Bearer {key}"


def test_environment_gives_the_default_url_and_key(monkeypatch):
    monkeypatch.setenv("HEATPATH_URL", "http://127.0.0.1:9999/")
    monkeypatch.setenv("HEATPATH_KEY", "hpk_x_y")
    with HeatpathClient() as hp:
        assert hp.url == "http://127.0.0.1:9999"
        assert hp.session.headers["Authorization"] == "Bearer hpk_x_y"


def test_in_process_client_runs_background_jobs_at_once():
    with HeatpathClient.in_process() as hp:
        result = hp.equilibrium(BULK, 1.0, 1700.0, background=True)
    assert result["provenance"]["dataset_id"] == DEFAULT_DATASET_ID


# ------------------------------------------------------------------ helpers
def test_grid_axis_forms():
    assert grid_axis((0, 4, 5)) == {"start": 0.0, "stop": 4.0, "count": 5}
    assert grid_axis([1, 2.5]) == [1.0, 2.5]
    assert grid_axis(3) == [3.0]
    assert grid_axis({"start": 1, "stop": 2, "count": 3}) == {"start": 1, "stop": 2, "count": 3}


def test_arrays_from_json_turns_numeric_lists_into_arrays():
    out = arrays_from_json({"a": [[1, None], [3, 4]], "names": ["x", "y"], "n": 2, "rows": [{"t": [1, 2]}]})
    np.testing.assert_array_equal(out["a"], [[1.0, np.nan], [3.0, 4.0]])
    assert out["names"] == ["x", "y"] and out["n"] == 2
    np.testing.assert_array_equal(out["rows"][0]["t"], [1.0, 2.0])


def test_parse_csv_reads_header_and_columns():
    text = "# heatpath table\n# column: t | K | temperature\n# checks: {\"ok\": true}\nt,phase\n1.5,x\n2.0,y\n"
    parsed = parse_csv(text)
    assert parsed["header"]["checks"] == {"ok": True}
    assert parsed["header"]["column"] == [("t", "K", "temperature")]
    np.testing.assert_array_equal(parsed["columns"]["t"], [1.5, 2.0])
    assert list(parsed["columns"]["phase"]) == ["x", "y"]


def test_parse_netcdf_reads_variables_and_fill_values(tmp_path):
    from scipy.io import netcdf_file

    path = tmp_path / "x.nc"
    with netcdf_file(path, "w", version=2) as f:
        f.title = "t"
        f.createDimension("n", 3)
        v = f.createVariable("v", "d", ("n",))
        v._FillValue = np.array([-9.0])
        v[:] = [1.0, -9.0, 3.0]
        v.units = "K"
    parsed = parse_netcdf(path.read_bytes())
    assert parsed["attributes"]["title"] == "t"
    np.testing.assert_array_equal(parsed["variables"]["v"], [1.0, np.nan, 3.0])
    assert parsed["variable_attributes"]["v"]["units"] == "K"


# ------------------------------------------------------------------ issue-7 endpoints (skip until they exist)
PATH_ARGS = {"pressure_gpa": 1.0, "start_k": 2000.0, "stop_k": 1980.0, "step_k": 10.0}
TABLE_ARGS = {"pressure_gpa": [1.0, 2.0], "temperature_k": (1700.0, 2000.0, 4)}


@requires_route("/v1/cooling-paths")
def test_cooling_path_has_the_documented_shape_and_a_figure(hp):
    result = hp.cooling_path(BULK, **PATH_ARGS)
    assert result["steps"][0]["temperature_k"] == pytest.approx(2000.0)
    for key in ("saturation_sequence", "liquidus_k", "solidus_k", "provenance"):
        assert key in result
    svg = hp.cooling_path(BULK, **PATH_ARGS, image="svg")
    assert svg.lstrip().startswith(b"<?xml") and b"<svg" in svg
    assert hp.cooling_path(BULK, **PATH_ARGS, image="png")[:8] == b"\x89PNG\r\n\x1a\n"


@requires_route("/v1/isentropes")
def test_isentrope_answers(hp):
    result = hp.isentrope(BULK, [0.5, 1.0], potential_temperature_k=1900.0)
    assert "provenance" in result


@requires_route("/v1/tables")
def test_table_formats_round_trip_to_the_same_numbers(hp):
    as_json = hp.table(BULK, **TABLE_ARGS)
    melt = as_json["by_temperature"]["melt_fraction"]
    assert isinstance(melt, np.ndarray) and melt.shape == (2, 4)
    as_csv = hp.table(BULK, **TABLE_ARGS, fmt="csv")
    np.testing.assert_array_equal(as_csv["columns"]["melt_fraction"], melt.ravel())
    as_nc = hp.table(BULK, **TABLE_ARGS, fmt="netcdf")
    np.testing.assert_array_equal(as_nc["variables"]["melt_fraction"], melt)
    assert as_nc["attributes"]["Conventions"].startswith("CF-")
    raw = hp.table(BULK, **TABLE_ARGS, fmt="netcdf", parse=False)
    assert isinstance(raw, bytes) and raw[:3] == b"CDF"
    assert hp.table(BULK, **TABLE_ARGS, image="png")[:8] == b"\x89PNG\r\n\x1a\n"


def test_table_refuses_an_unknown_format(hp):
    with pytest.raises(ValueError, match="fmt must be one of"):
        hp.table(BULK, [1.0], [1500.0, 1600.0], fmt="xlsx")
