"""Python client of the heatpath HTTP API.

One class, :class:`HeatpathClient`, wraps a :class:`requests.Session`: one method per
resource, plain Python (and numpy) values back, and one exception type,
:class:`HeatpathClientError`, that keeps the HTTP status, the RFC 9457 problem details and
the response::

    from service.client import HeatpathClient, composition

    kestrel = composition({"SiO2": 45.5, "Al2O3": 4.5, "FeO": 8.5, "MgO": 37.5, "CaO": 3.5, "Na2O": 0.5})
    with HeatpathClient("http://127.0.0.1:8000") as hp:
        point = hp.equilibrium(kestrel, pressure_gpa=4, temperature_k=2000)
        print(point["melt_fraction"], [p["name"] for p in point["phases"]])

Every ``POST`` method follows a ``202 Accepted`` answer to its end: it polls the job at
``Location`` with a growing interval, hands each job resource to an optional ``progress``
callback, and returns the job's result (or raises with the job's problem details). Long work
can therefore be requested the same way whether the server runs it at once or in the
background.

Without a URL the client talks to the one given by ``$HEATPATH_URL`` (default
http://127.0.0.1:8000), with the key in ``$HEATPATH_KEY`` if set.
:meth:`HeatpathClient.in_process` makes a client that calls a Flask app in this process
through the same code (no network, no server), which is what ``heatpath`` commands do when
no ``--url`` is given.
"""

from __future__ import annotations

import io
import os
import time
from collections.abc import Callable, Mapping, Sequence
from typing import Any
from urllib.parse import urljoin, urlsplit

import numpy as np
import requests
from requests.adapters import BaseAdapter
from requests.structures import CaseInsensitiveDict

__all__ = [
    "DEFAULT_TIMEOUT", "DEFAULT_URL", "HeatpathClient", "HeatpathClientError", "WSGIAdapter", "composition",
    "grid_axis", "parse_csv", "parse_netcdf",
]

DEFAULT_URL = "http://127.0.0.1:8000"
#: (connect, read) timeouts of one HTTP request [s]; the read timeout exceeds the server's 120 s worker limit.
DEFAULT_TIMEOUT = (5.0, 150.0)
#: Longest wait for a background job to finish [s].
DEFAULT_JOB_TIMEOUT = 3600.0
#: First and largest pause between two polls of a job [s]; the pause grows by POLL_GROWTH per poll.
POLL_INTERVAL = (0.2, 5.0)
POLL_GROWTH = 1.5
IN_PROCESS_URL = "http://in-process.invalid"

JSON = "application/json"
PROBLEM = "application/problem+json"
#: Table formats (``fmt``) and plot formats (``image``) → media types.
TABLE_MEDIA_TYPES = {"json": JSON, "csv": "text/csv", "netcdf": "application/x-netcdf"}
IMAGE_MEDIA_TYPES = {"svg": "image/svg+xml", "png": "image/png"}
FINISHED = ("succeeded", "failed", "cancelled")

Progress = Callable[[dict[str, Any]], None]


class HeatpathClientError(Exception):
    """Any failure of a client call: an error answer, an unreachable server, a timeout, a failed job.

    Attributes
    ----------
    status : int or None
        HTTP status of the error answer (or of the failed job's problem); None when there was
        no answer (server down, timeout).
    problem : dict or None
        The RFC 9457 problem details (``type``, ``title``, ``status``, ``detail``, and
        ``errors`` naming the offending fields for validation problems).
    response : requests.Response or None
        The last response received.
    job : dict or None
        The job resource, when the error concerns a background job.
    """

    def __init__(self, message: str, status: int | None = None, problem: dict[str, Any] | None = None,
                 response: requests.Response | None = None, job: dict[str, Any] | None = None) -> None:
        super().__init__(message)
        self.message, self.status, self.problem, self.response, self.job = message, status, problem, response, job

    @property
    def errors(self) -> list[dict[str, str]]:
        """The ``{"field", "message"}`` entries of the problem details (empty if none)."""
        return list((self.problem or {}).get("errors") or [])

    def __str__(self) -> str:
        lines = [self.message] + [f"  {e.get('field')}: {e.get('message')}" for e in self.errors]
        return "\n".join(lines)


def composition(oxides: Mapping[str, float], basis: str = "wt_percent",
                drop_unsupported_oxides: bool | None = None) -> dict[str, Any]:
    """A ``composition`` object of the API: oxide amounts on ``basis`` (``wt_percent`` or ``mol_percent``)."""
    out: dict[str, Any] = {"basis": basis, "oxides": {str(k): float(v) for k, v in oxides.items()}}
    if drop_unsupported_oxides is not None:
        out["drop_unsupported_oxides"] = bool(drop_unsupported_oxides)
    return out


def grid_axis(values: Any) -> Any:
    """An axis of a table request: a list of values, or ``(start, stop, count)`` → ``{"start", "stop", "count"}``."""
    if isinstance(values, Mapping):
        return dict(values)
    if isinstance(values, tuple) and len(values) == 3:
        start, stop, count = values
        return {"start": float(start), "stop": float(stop), "count": int(count)}
    if np.ndim(values) == 0:
        return [float(values)]
    return [float(v) for v in np.asarray(values, dtype=float).ravel()]


# --------------------------------------------------------------------------- decoding
def _float_array(value: Any) -> np.ndarray | None:
    """A float array of a (nested, rectangular) list of numbers and nulls, or None if it is not one."""
    if not isinstance(value, list) or not value:
        return None
    try:
        arr = np.array(value, dtype=object)
    except ValueError:  # ragged
        return None
    if arr.dtype != object or arr.size == 0:
        return None
    flat = arr.ravel()
    if not all(v is None or (isinstance(v, int | float) and not isinstance(v, bool)) for v in flat):
        return None
    return np.array([np.nan if v is None else float(v) for v in flat], dtype=float).reshape(arr.shape)


def arrays_from_json(value: Any) -> Any:
    """Copy of a JSON result with every list of numbers (any depth, rectangular) as a float ndarray (null → NaN)."""
    if isinstance(value, dict):
        return {k: arrays_from_json(v) for k, v in value.items()}
    arr = _float_array(value)
    if arr is not None:
        return arr
    if isinstance(value, list):
        return [arrays_from_json(v) for v in value]
    return value


def parse_csv(text: str) -> dict[str, Any]:
    """Read heatpath CSV text: ``{"header": {...}, "columns": {name: float ndarray}}``.

    ``# key: value`` header lines become ``header[key]`` (JSON values decoded); ``# column:
    name | units | description`` lines are collected in order under ``header["column"]``.
    """
    import csv
    import json

    header: dict[str, Any] = {"column": []}
    body = []
    for line in text.splitlines():
        if line.startswith("#"):
            key, sep, value = line[1:].strip().partition(": ")
            if not sep:
                continue
            if key == "column":
                header["column"].append(tuple(part.strip() for part in value.split("|")))
                continue
            try:
                header[key] = json.loads(value)
            except ValueError:
                header[key] = value
        elif line.strip():
            body.append(line)
    rows = list(csv.reader(body))
    if not rows:
        return {"header": header, "columns": {}}
    names, data = rows[0], rows[1:]
    columns = {}
    for i, name in enumerate(names):
        try:
            columns[name] = np.array([float(r[i]) if r[i] != "" else np.nan for r in data], dtype=float)
        except ValueError:
            columns[name] = np.array([r[i] for r in data], dtype=object)
    return {"header": header, "columns": columns}


def parse_netcdf(data: bytes) -> dict[str, Any]:
    """Read netCDF-3 bytes: ``{"attributes", "variables" (ndarrays, fill values as NaN), "variable_attributes"}``."""
    from scipy.io import netcdf_file

    def text(v: Any) -> Any:
        return v.decode() if isinstance(v, bytes) else v

    f = netcdf_file(io.BytesIO(data), "r", mmap=False)
    try:
        out: dict[str, Any] = {"attributes": {k: text(v) for k, v in f._attributes.items()},
                               "variables": {}, "variable_attributes": {}}
        for name, var in f.variables.items():
            arr = np.array(var[:], copy=True)
            fill = getattr(var, "_FillValue", None)
            if fill is not None and arr.dtype.kind == "f":
                arr = np.where(arr == np.asarray(fill).ravel()[0], np.nan, arr)
            out["variables"][name] = arr
            attrs = {k: text(v) for k, v in var._attributes.items()}
            out["variable_attributes"][name] = {**attrs, "dimensions": tuple(var.dimensions)}
        return out
    finally:
        f.close()


# --------------------------------------------------------------------------- in-process transport
class WSGIAdapter(BaseAdapter):
    """A requests transport that hands each request to a WSGI app in this process (no socket)."""

    def __init__(self, app: Any) -> None:
        super().__init__()
        self.app = app
        self.client = app.test_client()

    def send(self, request: requests.PreparedRequest, stream: bool = False, timeout: Any = None,
             verify: Any = True, cert: Any = None, proxies: Any = None) -> requests.Response:
        url = urlsplit(request.url)
        headers = [(k, v) for k, v in request.headers.items() if k.lower() != "content-length"]
        body = request.body.encode("utf-8") if isinstance(request.body, str) else request.body
        answer = self.client.open(url.path, method=request.method, query_string=url.query, headers=headers,
                                  data=body or None)
        response = requests.Response()
        response.status_code = answer.status_code
        response.reason = answer.status.partition(" ")[2]
        response.headers = CaseInsensitiveDict(answer.headers.items())
        response._content = answer.get_data()
        response.url, response.request, response.connection = request.url, request, self
        response.encoding = requests.utils.get_encoding_from_headers(response.headers)
        answer.close()
        return response

    def close(self) -> None:
        pass


def in_process_app() -> Any:
    """A heatpath app for in-process use: private in-memory store, jobs run at once, no cache, no key."""
    from service import create_app

    return create_app({"TESTING": True, "PROPAGATE_EXCEPTIONS": False, "HEATPATH_STORE": ":memory:",
                       "HEATPATH_QUEUE": "immediate", "HEATPATH_CACHE_MAX_BYTES": 0})


# --------------------------------------------------------------------------- the client
class HeatpathClient:
    """Client of one heatpath server.

    Parameters
    ----------
    url : str, optional
        Base URL of the server (default ``$HEATPATH_URL`` or http://127.0.0.1:8000).
    key : str, optional
        API key, sent as ``Authorization: Bearer <key>`` (default ``$HEATPATH_KEY``, if set).
    timeout : float or (float, float)
        Connect and read timeout of each HTTP request [s].
    job_timeout : float
        Longest wait for a background job to finish [s].
    poll_interval : (float, float)
        First and largest pause between two polls of a job [s].
    session : requests.Session, optional
        A session to use (the client closes only sessions it made).
    """

    def __init__(self, url: str | None = None, key: str | None = None, *,
                 timeout: float | tuple[float, float] = DEFAULT_TIMEOUT, job_timeout: float = DEFAULT_JOB_TIMEOUT,
                 poll_interval: tuple[float, float] = POLL_INTERVAL, session: requests.Session | None = None) -> None:
        self.url = (url or os.environ.get("HEATPATH_URL") or DEFAULT_URL).rstrip("/")
        key = key if key is not None else os.environ.get("HEATPATH_KEY") or None
        self.timeout, self.job_timeout, self.poll_interval = timeout, job_timeout, poll_interval
        self._own_session = session is None
        self.session = session or requests.Session()
        from service.provenance import code_version

        self.session.headers["User-Agent"] = f"heatpath-client/{code_version()}"
        if key:
            self.session.headers["Authorization"] = f"Bearer {key}"

    @classmethod
    def in_process(cls, app: Any = None, **kwargs: Any) -> HeatpathClient:
        """A client of a Flask app in this process (default: :func:`in_process_app`), through the same code."""
        session = requests.Session()
        session.mount(IN_PROCESS_URL + "/", WSGIAdapter(app if app is not None else in_process_app()))
        client = cls(IN_PROCESS_URL, session=session, **kwargs)
        client._own_session = True
        return client

    # -- context manager
    def __enter__(self) -> HeatpathClient:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        """Close the session (if the client made it)."""
        if self._own_session:
            self.session.close()

    # -- service
    def health(self) -> dict[str, Any]:
        """``GET /v1/health``: ``{"status": "ok", "version"}``."""
        return self.get("/v1/health")

    def ready(self) -> dict[str, Any]:
        """``GET /v1/ready``: the readiness checks (raises with the failed checks when not ready)."""
        return self.get("/v1/ready")

    # -- datasets
    def datasets(self) -> list[dict[str, Any]]:
        """``GET /v1/datasets``: the shipped datasets with their checksums and validity domains."""
        return self.get("/v1/datasets")["datasets"]

    def endmembers(self, dataset: str | None = None) -> dict[str, Any]:
        """``GET /v1/datasets/<id>/endmembers``: ``{"endmembers": [...], "provenance"}`` (default dataset if None)."""
        return self.get(f"/v1/datasets/{self._dataset(dataset)}/endmembers")

    def endmember_properties(self, name: str, pressure_gpa: float, temperature_k: float,
                             dataset: str | None = None) -> dict[str, Any]:
        """``GET /v1/datasets/<id>/endmembers/<name>``: standard-state properties at one (P, T)."""
        params = {"pressure_gpa": repr(float(pressure_gpa)), "temperature_k": repr(float(temperature_k))}
        return self.get(f"/v1/datasets/{self._dataset(dataset)}/endmembers/{name}", params=params)

    def _dataset(self, dataset: str | None) -> str:
        return dataset if dataset is not None else self.datasets()[0]["id"]

    # -- computations (every one follows a 202 job to its end)
    def equilibrium(self, composition: Mapping[str, Any], pressure_gpa: float, temperature_k: float, *,
                    dataset: str | None = None, phases: Sequence[str] | None = None, background: bool = False,
                    progress: Progress | None = None, **fields: Any) -> dict[str, Any]:
        """``POST /v1/equilibrium``: the stable assemblage at one pressure and temperature."""
        body = _body(composition, {"pressure_gpa": pressure_gpa, "temperature_k": temperature_k,
                                   "dataset": dataset, "phases": list(phases) if phases else None}, background, fields)
        return self.post("/v1/equilibrium", body, progress=progress)

    def cooling_path(self, composition: Mapping[str, Any], pressure_gpa: float, start_k: float, stop_k: float,
                     step_k: float, *, mode: str = "equilibrium", trapped_melt_fraction: float | None = None,
                     dataset: str | None = None, image: str | None = None, background: bool = False,
                     progress: Progress | None = None, **fields: Any) -> Any:
        """``POST /v1/cooling-paths``: an isobaric cooling path (``mode`` ``equilibrium`` or ``fractional``).

        Returns the result dict (``steps``, ``saturation_sequence``, ``liquidus_k``, ``solidus_k``,
        ``cumulates`` in fractional mode, ``provenance``), or the figure's bytes with
        ``image="svg"`` or ``"png"``.
        """
        body = _body(composition, {"pressure_gpa": pressure_gpa, "start_k": start_k, "stop_k": stop_k,
                                   "step_k": step_k, "mode": mode, "trapped_melt_fraction": trapped_melt_fraction,
                                   "dataset": dataset}, background, fields)
        return self.post("/v1/cooling-paths", body, accept=_image(image) or JSON, progress=progress)

    def isentrope(self, composition: Mapping[str, Any], pressure_gpa: Any, *,
                  potential_temperature_k: float | None = None, specific_entropy_j_per_kg_k: float | None = None,
                  dataset: str | None = None, image: str | None = None, background: bool = False,
                  progress: Progress | None = None, **fields: Any) -> Any:
        """``POST /v1/isentropes``: T(P) at constant specific entropy, from a potential temperature or an entropy.

        ``pressure_gpa`` is a list of pressures or ``(start, stop, count)``.
        """
        body = _body(composition, {"pressure_gpa": grid_axis(pressure_gpa),
                                   "potential_temperature_k": potential_temperature_k,
                                   "specific_entropy_j_per_kg_k": specific_entropy_j_per_kg_k,
                                   "dataset": dataset}, background, fields)
        return self.post("/v1/isentropes", body, accept=_image(image) or JSON, progress=progress)

    def table(self, composition: Mapping[str, Any], pressure_gpa: Any, temperature_k: Any, *,
              form: str = "temperature", fmt: str = "json", parse: bool = True, dataset: str | None = None,
              image: str | None = None, background: bool = False, progress: Progress | None = None,
              **fields: Any) -> Any:
        """``POST /v1/tables``: properties over a (P, T) grid for convection codes.

        Parameters
        ----------
        pressure_gpa, temperature_k
            Each a list of values or ``(start, stop, count)``.
        form : {"temperature", "enthalpy", "entropy"}
            T-, h- or s-indexed table.
        fmt : {"json", "csv", "netcdf"}
            Format asked for with ``Accept``.
        parse : bool
            True: JSON with every numeric list as a float ndarray (null → NaN); CSV as
            :func:`parse_csv`; netCDF as :func:`parse_netcdf`. False: the JSON dict as sent,
            the CSV text, the netCDF bytes.
        image : {"svg", "png"}, optional
            Ask for the melt-fraction map instead (bytes).
        """
        if fmt not in TABLE_MEDIA_TYPES:
            raise ValueError(f"fmt must be one of {', '.join(TABLE_MEDIA_TYPES)} (got {fmt!r})")
        body = _body(composition, {"pressure_gpa": grid_axis(pressure_gpa), "temperature_k": grid_axis(temperature_k),
                                   "form": form, "dataset": dataset}, background, fields)
        result = self.post("/v1/tables", body, accept=_image(image) or TABLE_MEDIA_TYPES[fmt], progress=progress)
        if image or not parse:
            return result
        if fmt == "json":
            return arrays_from_json(result)
        return parse_csv(result) if fmt == "csv" else parse_netcdf(result)

    # -- jobs
    def jobs(self) -> list[dict[str, Any]]:
        """``GET /v1/jobs``: the caller's jobs, newest first."""
        return self.get("/v1/jobs")["jobs"]

    def job(self, job_id: str) -> dict[str, Any]:
        """``GET /v1/jobs/<id>``: state and progress of a job."""
        return self.get(f"/v1/jobs/{job_id}")

    def cancel_job(self, job_id: str) -> dict[str, Any]:
        """``DELETE /v1/jobs/<id>``: cancel a queued or running job; the job, now ``cancelled``."""
        return self._decode(self._send("DELETE", f"/v1/jobs/{job_id}"))

    def job_result(self, job_id: str, accept: str = JSON) -> Any:
        """``GET /v1/jobs/<id>/result``: the result of a succeeded job."""
        return self._decode(self._send("GET", f"/v1/jobs/{job_id}/result", headers={"Accept": accept}))

    def wait(self, job: dict[str, Any] | str, progress: Progress | None = None,
             timeout: float | None = None) -> dict[str, Any]:
        """Poll a job (resource, id or URL) until it ends; the final job resource.

        Raises :class:`HeatpathClientError` if it does not end within ``timeout`` (default
        ``job_timeout``); the job goes on at the server.
        """
        location = job["links"]["self"] if isinstance(job, dict) else job
        if "/" not in location:
            location = f"/v1/jobs/{location}"
        timeout = self.job_timeout if timeout is None else timeout
        deadline, pause = time.monotonic() + timeout, self.poll_interval[0]
        current = job if isinstance(job, dict) else self.get(location)
        while True:
            if progress is not None:
                progress(current)
            if current["state"] in FINISHED:
                return current
            if time.monotonic() + pause > deadline:
                raise HeatpathClientError(
                    f"job {current['id']} is still {current['state']} after {timeout:g} s; it goes on at the server "
                    f"({self._absolute(location)}); wait again or cancel it", job=current)
            time.sleep(pause)
            pause = min(pause * POLL_GROWTH, self.poll_interval[1])
            current = self.get(location)

    # -- HTTP
    def get(self, path: str, params: Mapping[str, Any] | None = None, accept: str = JSON) -> Any:
        """GET ``path`` and decode the answer (JSON → dict; errors raise :class:`HeatpathClientError`)."""
        return self._decode(self._send("GET", path, params=params, headers={"Accept": accept}))

    def post(self, path: str, body: Mapping[str, Any], *, accept: str = JSON, progress: Progress | None = None,
             timeout: float | None = None) -> Any:
        """POST a JSON body; follow a ``202`` job to its end; decode the result by its media type.

        JSON → dict; ``text/*`` → str; anything else (netCDF, images) → bytes.
        """
        response = self._send("POST", path, json=dict(body), headers={"Accept": accept})
        if response.status_code != 202:
            return self._decode(response)
        job = self._decode(response)
        location = response.headers.get("Location") or job["links"]["self"]
        final = self.wait({**job, "links": {**job.get("links", {}), "self": location}}, progress, timeout)
        return self._job_outcome(final, accept)

    def _job_outcome(self, job: dict[str, Any], accept: str) -> Any:
        if job["state"] == "succeeded":
            link = job.get("links", {}).get("result") or f"/v1/jobs/{job['id']}/result"
            response = self._send("GET", link, headers={"Accept": accept})
            kind = _plot_kind(job.get("operation", ""))
            if response.status_code == 406 and accept in IMAGE_MEDIA_TYPES.values() and kind:
                # An operation without a figure renderer on this server (or an older server) serves the
                # job's result as JSON only; draw its figure here with the server's own code.
                from service.plots import IMAGE_FORMATS, render

                return render(self._decode(self._send("GET", link)), kind, IMAGE_FORMATS[accept])
            return self._decode(response)
        problem = job.get("error") or {}
        if job["state"] == "cancelled":
            raise HeatpathClientError(f"job {job['id']} was cancelled", job=job)
        detail = problem.get("detail") or problem.get("title") or "no reason given"
        raise HeatpathClientError(f"job {job['id']} failed: {detail}", status=problem.get("status"),
                                  problem=problem or None, job=job)

    def _absolute(self, path: str) -> str:
        return urljoin(self.url + "/", path)

    def _send(self, method: str, path: str, **kwargs: Any) -> requests.Response:
        url = self._absolute(path)
        try:
            return self.session.request(method, url, timeout=self.timeout, **kwargs)
        except requests.Timeout as exc:
            raise HeatpathClientError(f"no answer from {self.url} within the timeout ({_seconds(self.timeout)}) "
                                      f"for {method} {urlsplit(url).path}") from exc
        except requests.ConnectionError as exc:
            raise HeatpathClientError(f"cannot reach the heatpath server at {self.url} (is it running? "
                                      f"start one with 'heatpath serve'): {exc.__class__.__name__}") from exc

    def _decode(self, response: requests.Response) -> Any:
        media = response.headers.get("Content-Type", "").split(";")[0].strip().lower()
        if response.status_code >= 400:
            raise _error(response, media)
        if media in (JSON, PROBLEM) or media.endswith("+json"):
            return response.json()
        if media.startswith("text/"):
            return response.text
        return response.content


def _seconds(timeout: Any) -> str:
    if isinstance(timeout, tuple):
        return f"connect {timeout[0]:g} s, read {timeout[1]:g} s"
    return f"{timeout:g} s"


def _error(response: requests.Response, media: str) -> HeatpathClientError:
    problem = None
    if media in (JSON, PROBLEM):
        try:
            problem = response.json()
        except ValueError:
            problem = None
    if isinstance(problem, dict):
        title = problem.get("title") or response.reason
        detail = problem.get("detail") or ""
        if problem.get("errors"):
            detail = ""  # the field errors are listed by HeatpathClientError.__str__
        if response.status_code == 404 and problem.get("type") == "about:blank":
            request = response.request
            where = f"{request.method} {urlsplit(request.url).path}" if request is not None else "this URL"
            detail = f"the server has no resource at {where} (is it an older heatpath version?)"
        message = f"{response.status_code} {title}" + (f": {detail}" if detail and detail != title else "")
    else:
        problem = None
        message = f"{response.status_code} {response.reason} (no problem details in the answer)"
    return HeatpathClientError(message, status=response.status_code, problem=problem, response=response)


def _plot_kind(operation: str) -> str | None:
    """Figure kind of a job's operation name (``v1/cooling_paths`` → ``cooling_path``), if it has one."""
    for word, kind in (("cooling", "cooling_path"), ("table", "table"), ("isentrope", "isentrope")):
        if word in operation:
            return kind
    return None


def _image(image: str | None) -> str | None:
    if image is None:
        return None
    if image not in IMAGE_MEDIA_TYPES:
        raise ValueError(f"image must be one of {', '.join(IMAGE_MEDIA_TYPES)} (got {image!r})")
    return IMAGE_MEDIA_TYPES[image]


def _body(comp: Mapping[str, Any], values: dict[str, Any], background: bool, fields: dict[str, Any]) -> dict[str, Any]:
    """A request body: the composition, the values given (None left out), ``"async"``, and extra fields."""
    body: dict[str, Any] = {"composition": dict(comp)}
    body.update({k: v for k, v in values.items() if v is not None})
    if background:
        body["async"] = True
    body.update(fields)
    return body
