"""Background jobs in-process (service/jobs.py): 202/Location, progress view, failure, cancel, worker loss.

The queue runs tasks at once here (``HEATPATH_QUEUE=immediate``) or not at all (``memory``); the
real gunicorn + job worker processes are exercised in test_jobs_gunicorn.py.
"""

from __future__ import annotations

import time

import pytest

from service.jobs import Heartbeat, JobCancelledError, _claim, reap_stalled
from tests.service.team_support import COUNT_URL, make_app


def submit(client, **body):
    response = client.post(COUNT_URL, json=body)
    assert response.status_code == 202, response.get_data(as_text=True)
    assert response.headers["Location"] == f"/v1/jobs/{response.get_json()['id']}"
    return response.get_json()


def test_async_request_answers_202_and_the_job_result_equals_the_synchronous_answer(tmp_path):
    client = make_app(tmp_path).test_client()
    job = submit(client, points=5, delay_s=0.01, **{"async": True})
    view = client.get(f"/v1/jobs/{job['id']}").get_json()
    assert view["state"] == "succeeded" and view["attempts"] == 1
    assert view["progress"]["fraction"] == 1.0 and view["progress"]["points_done"] == 5
    assert view["progress"]["elapsed_s"] >= 0.05 and view["progress"]["remaining_estimate_s"] == 0.0
    assert view["links"]["result"] == f"/v1/jobs/{job['id']}/result"
    result = client.get(view["links"]["result"])
    sync = make_app(tmp_path / "other").test_client().post(COUNT_URL, json={"points": 5, "delay_s": 0.01})
    assert result.get_data() == sync.get_data()
    assert result.headers["ETag"] == sync.headers["ETag"]
    assert client.get(view["links"]["result"], headers={"If-None-Match": result.headers["ETag"]}).status_code == 304


def test_work_above_the_size_threshold_becomes_a_job(tmp_path):
    client = make_app(tmp_path, HEATPATH_ASYNC_THRESHOLD=10).test_client()
    assert client.post(COUNT_URL, json={"points": 10}).status_code == 200
    assert submit(client, points=11)["state"] in ("queued", "succeeded")


def test_an_async_request_for_a_cached_result_is_a_job_finished_at_once(tmp_path):
    client = make_app(tmp_path, HEATPATH_QUEUE="memory").test_client()  # nothing would run a queued job
    client.post(COUNT_URL, json={"points": 3})
    job = submit(client, points=3, **{"async": True})
    assert job["state"] == "succeeded" and job["notes"] == ["served from the result cache"]
    assert client.get(f"/v1/jobs/{job['id']}/result").get_json()["sum_of_squares"] == 5


def test_a_failing_computation_ends_failed_with_problem_details(tmp_path):
    client = make_app(tmp_path).test_client()
    job = submit(client, points=2, fail=True, **{"async": True})
    view = client.get(f"/v1/jobs/{job['id']}").get_json()
    assert view["state"] == "failed"
    assert view["error"]["status"] == 422 and view["error"]["type"].endswith("/not-converged")
    assert view["error"]["diagnostics"] == {"points": 2}
    result = client.get(f"/v1/jobs/{job['id']}/result")
    assert result.status_code == 409 and "failed" in result.get_json()["detail"]


def test_cancel_a_queued_job_and_it_never_runs(tmp_path):
    app = make_app(tmp_path, HEATPATH_QUEUE="memory")
    client = app.test_client()
    job = submit(client, points=3, **{"async": True})
    assert job["state"] == "queued" and job["progress"]["fraction"] == 0.0
    cancelled = client.delete(f"/v1/jobs/{job['id']}")
    assert cancelled.status_code == 200 and cancelled.get_json()["state"] == "cancelled"
    infra = app.extensions["heatpath"]
    assert _claim(infra, job["id"]) is None  # a worker dequeuing it later skips it
    assert client.delete(f"/v1/jobs/{job['id']}").status_code == 409
    assert client.get(f"/v1/jobs/{job['id']}/result").status_code == 409


def test_a_running_job_notices_cancellation_at_its_next_progress_report(tmp_path):
    app = make_app(tmp_path, HEATPATH_QUEUE="memory", HEATPATH_JOB_STALL_S=0.2)
    client = app.test_client()
    job = submit(client, points=3, **{"async": True})
    infra = app.extensions["heatpath"]
    claimed = _claim(infra, job["id"])
    beat = Heartbeat(infra, job["id"], claimed["attempts"])
    beat.progress(1, 3)
    beat.beat()
    assert client.get(f"/v1/jobs/{job['id']}").get_json()["progress"]["points_done"] == 1
    client.delete(f"/v1/jobs/{job['id']}")
    beat.beat()
    with pytest.raises(JobCancelledError):
        beat.progress(2, 3)


def _stall(app, job_id):
    """Make a job look as if its worker died while running it."""
    infra = app.extensions["heatpath"]
    _claim(infra, job_id)
    infra.store.modify("job", job_id, lambda d: {**d, "heartbeat_at": time.time() - 60})


def test_a_job_whose_worker_died_is_queued_again_and_completes(tmp_path):
    app = make_app(tmp_path, HEATPATH_QUEUE="memory", HEATPATH_JOB_STALL_S=5)
    client = app.test_client()
    job = submit(client, points=4, **{"async": True})
    _stall(app, job["id"])
    app.extensions["heatpath"].queue.immediate = True  # from now on a requeued job runs at once
    view = client.get(f"/v1/jobs/{job['id']}").get_json()  # polling finds the stale heartbeat
    assert view["state"] == "succeeded" and view["attempts"] == 2
    assert "stopped during attempt 1; queued again" in view["notes"][0]


def test_a_job_whose_worker_died_on_the_last_attempt_ends_failed_with_the_reason(tmp_path):
    app = make_app(tmp_path, HEATPATH_QUEUE="memory", HEATPATH_JOB_MAX_ATTEMPTS=1)
    client = app.test_client()
    job = submit(client, points=4, **{"async": True})
    _stall(app, job["id"])
    assert reap_stalled(app.extensions["heatpath"]) == 1
    view = client.get(f"/v1/jobs/{job['id']}").get_json()
    assert view["state"] == "failed" and view["error"]["type"].endswith("/worker-lost")
    assert "1 time(s)" in view["error"]["detail"]


def test_finished_jobs_expire_after_the_retention_time(tmp_path):
    client = make_app(tmp_path, HEATPATH_JOB_RETENTION_S=1).test_client()
    job = submit(client, points=2, **{"async": True})
    view = client.get(f"/v1/jobs/{job['id']}").get_json()
    assert view["expires_at"] is not None
    time.sleep(1.2)
    assert client.get(f"/v1/jobs/{job['id']}").status_code == 404
    assert client.get(f"/v1/jobs/{job['id']}/result").status_code == 404


def test_unknown_job_is_404_problem(tmp_path):
    response = make_app(tmp_path).test_client().get("/v1/jobs/nothing")
    assert response.status_code == 404 and response.mimetype == "application/problem+json"


def test_job_list_shows_the_callers_jobs_newest_first(tmp_path):
    client = make_app(tmp_path).test_client()
    ids = [submit(client, points=n, **{"async": True})["id"] for n in (1, 2)]
    assert [j["id"] for j in client.get("/v1/jobs").get_json()["jobs"]] == ids[::-1]


EQUILIBRIUM = {"composition": {"basis": "wt_percent", "oxides": {"SiO2": 50, "Al2O3": 15, "FeO": 10, "MgO": 8,
                                                                  "CaO": 12, "Na2O": 3}},
               "pressure_gpa": 1, "temperature_k": 1500}


def test_equilibrium_endpoint_is_cacheable_and_job_capable(tmp_path):
    """POST /v1/equilibrium goes through run_or_enqueue: async job, cache hit, 304."""
    client = make_app(tmp_path).test_client()
    job = client.post("/v1/equilibrium", json={**EQUILIBRIUM, "async": True})
    assert job.status_code == 202
    view = client.get(job.headers["Location"]).get_json()
    assert view["state"] == "succeeded" and view["operation"] == "v1/equilibrium"
    from_job = client.get(view["links"]["result"])
    sync = make_app(tmp_path / "other").test_client().post("/v1/equilibrium", json=EQUILIBRIUM)
    assert sync.status_code == 200
    timeless = [r.get_json() for r in (from_job, sync)]
    for body in timeless:  # the solver's wall-clock time is the only part that differs between two runs
        body["diagnostics"].pop("solve_time_s")
    assert timeless[0] == timeless[1]
    cached = client.post("/v1/equilibrium", json=EQUILIBRIUM)
    assert cached.headers["X-Heatpath-Cache"] == "hit" and cached.headers["ETag"] == sync.headers["ETag"]
    assert client.post("/v1/equilibrium", json=EQUILIBRIUM, headers={"If-None-Match": cached.headers["ETag"]}
                       ).status_code == 304
    assert client.post("/v1/equilibrium", json={**EQUILIBRIUM, "async": "yes"}).status_code == 422
