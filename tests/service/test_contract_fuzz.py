"""Property-based fuzzing of every operation in openapi.yaml against the app, in-process (schemathesis).

For each documented operation schemathesis sends the document's examples, boundary cases
(its coverage phase) and generated requests, schema-valid and schema-invalid, through the
WSGI app, and checks each answer:

- ``not_a_server_error``: no 5xx;
- ``status_code_conformance``: the status is documented for the operation;
- ``content_type_conformance``: the media type is documented for that status;
- ``response_schema_conformance``: the body validates against the documented schema;
- ``response_headers_conformance``: documented headers are present and well-formed;
- ``negative_data_rejection``: a request the schema forbids is refused with a 4xx.

Not checked: ``positive_data_acceptance`` (every schema-valid request answered 2xx). The
dataset's validity domain, which phases a dataset has and whether the solver converges for a
composition are semantic and cannot be written in JSON Schema, so a schema-valid request can
rightly get a 422 naming the field.

The app runs with an in-memory store and a job queue nobody consumes, and work above 8 points
becomes a job: generated requests for big grids get their ``202`` at once instead of running
for minutes. The request limits of the cooling-path, isentrope and table endpoints are set
tiny (2 steps, 2 pressures, 4 grid nodes), so generated requests above them are answered
with their 422 at once and those that reach the core stay cheap. A second, smaller run uses an
app that requires an API key (none is sent), so the 401 answers of every protected operation
are checked against the document too.

Generated path parameters are almost never real dataset or endmember names, so two targeted
properties add requests that reach the numerical core, under the same checks: standard-state
properties of every endmember at random states inside the validity domain, and equilibria of
random compositions of the dataset's oxides at random states inside it (answers 200, or 422
naming the reason, never 5xx).

Bounded for the normal suite (``HEATPATH_FUZZ_EXAMPLES``, default 12 generated requests per
operation, derandomized so CI sees the same cases). The opt-in deep run,
``HEATPATH_DEEP_FUZZ=1`` (or ``benchmarks/fuzz_deep.py``, which prints the figures), uses
random seeds and many more examples. With ``HEATPATH_FUZZ_REPORT=FILE`` the number of
requests per operation and the failures found are written to FILE as JSON.
"""

from __future__ import annotations

import collections
import json
import os
from pathlib import Path

import pytest

schemathesis = pytest.importorskip("schemathesis")
from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402
from schemathesis.checks import (  # noqa: E402
    content_type_conformance,
    negative_data_rejection,
    not_a_server_error,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from service import create_app  # noqa: E402
from thermo.dataset import load_dataset  # noqa: E402

REPO = Path(__file__).resolve().parents[2]
pytestmark = pytest.mark.slow  # ~15-30 s: hundreds of requests through the app
DEEP = os.environ.get("HEATPATH_DEEP_FUZZ") == "1"
EXAMPLES = int(os.environ.get("HEATPATH_FUZZ_EXAMPLES", "300" if DEEP else "12"))
CHECKS = [not_a_server_error, status_code_conformance, content_type_conformance, response_schema_conformance,
          response_headers_conformance, negative_data_rejection]
FUZZ_CONFIG = {"TESTING": True, "PROPAGATE_EXCEPTIONS": False, "HEATPATH_STORE": ":memory:",
               "HEATPATH_QUEUE": "memory", "HEATPATH_ASYNC_THRESHOLD": 8, "HEATPATH_CACHE_MAX_BYTES": 0,
               # Paths, isentropes and tables cost up to seconds per point: tiny request limits keep the
               # requests that reach the core small (larger ones get their 422 naming the limit at once).
               "HEATPATH_MAX_PATH_STEPS": 2, "HEATPATH_MAX_ISENTROPE_POINTS": 2, "HEATPATH_MAX_TABLE_POINTS": 4}
SETTINGS = settings(max_examples=EXAMPLES, deadline=None, database=None, derandomize=not DEEP,
                    suppress_health_check=list(HealthCheck))

TALLY: dict[str, collections.Counter] = {"requests": collections.Counter(), "failures": collections.Counter(),
                                         "statuses": collections.Counter()}
FAILURES: list[dict[str, str]] = []


def load_schema(config: dict):
    schema = schemathesis.openapi.from_path(REPO / "openapi.yaml")
    schema.app = create_app(config)
    return schema


open_schema = load_schema(FUZZ_CONFIG)
keyed_schema = load_schema({**FUZZ_CONFIG, "HEATPATH_AUTH": "required"})


def call_and_check(case, run: str) -> None:
    label = f"{run}: {case.operation.label}"
    TALLY["requests"][label] += 1
    try:
        response = case.call_and_validate(checks=CHECKS)
        TALLY["statuses"][f"{label} -> {response.status_code}"] += 1
    except BaseException as exc:
        TALLY["failures"][label] += 1
        FAILURES.append({"run": run, "operation": case.operation.label, "failure": str(exc)[:2000]})
        raise


@pytest.fixture(scope="module", autouse=True)
def report():
    yield
    path = os.environ.get("HEATPATH_FUZZ_REPORT")
    if path:
        Path(path).write_text(json.dumps({
            "examples_per_operation_and_mode": EXAMPLES, "deep": DEEP,
            "requests": dict(TALLY["requests"]), "statuses": dict(TALLY["statuses"]),
            "failing_calls": dict(TALLY["failures"]), "failures": FAILURES,
        }, indent=2))


@open_schema.parametrize()
@SETTINGS
def test_every_documented_operation_survives_fuzzing(case):
    call_and_check(case, "open")


@keyed_schema.parametrize()
@settings(SETTINGS, max_examples=max(2, EXAMPLES // 6))
def test_every_operation_answers_per_contract_when_a_key_is_required(case):
    call_and_check(case, "key required")


# ------------------------------------------------------------------ targeted: requests that reach the core
DATASET = load_dataset()
(P_LO, P_HI), (T_LO, T_HI) = DATASET.pressure_range_gpa, DATASET.temperature_range_k
STATE = st.tuples(st.floats(P_LO, P_HI), st.floats(T_LO, T_HI))
CORE_EXAMPLES = max(3, EXAMPLES // 2)


@settings(SETTINGS, max_examples=3 * EXAMPLES)
@given(name=st.sampled_from(list(DATASET.endmembers.names)), state=STATE)
def test_endmember_properties_at_random_states_inside_the_domain(name, state):
    op = open_schema["/v1/datasets/{dataset_id}/endmembers/{name}"]["GET"]
    case = op.Case(path_parameters={"dataset_id": DATASET.id, "name": name},
                   query={"pressure_gpa": repr(state[0]), "temperature_k": repr(state[1])})
    call_and_check(case, "targeted")


COMPOSITION = st.dictionaries(st.sampled_from(list(DATASET.oxides)), st.floats(0.0, 100.0), min_size=1).filter(
    lambda oxides: sum(oxides.values()) > 0)


@settings(SETTINGS, max_examples=CORE_EXAMPLES)
@given(oxides=COMPOSITION, basis=st.sampled_from(["wt_percent", "mol_percent"]), state=STATE)
def test_equilibrium_of_random_compositions_inside_the_domain(oxides, basis, state):
    body = {"composition": {"basis": basis, "oxides": oxides}, "pressure_gpa": state[0], "temperature_k": state[1]}
    case = open_schema["/v1/equilibrium"]["POST"].Case(body=body, media_type="application/json")
    call_and_check(case, "targeted")


# ------------------------------------------------------------------ cases the fuzzing found (kept as regressions)
@pytest.mark.parametrize("body", [
    # 100 * n / n ended an ulp above 100 % in composition.mol_percent (a response-schema violation)
    {"composition": {"basis": "wt_percent", "oxides": {"FeO": 2.2250738585e-313}}, "pressure_gpa": 0.0,
     "temperature_k": 500.0},
    # oxide amounts whose sum overflows: the total check raised OverflowError (a 500)
    {"composition": {"basis": "mol_percent", "oxides": {"SiO2": 1e308, "MgO": 1e308}}, "pressure_gpa": 1.0,
     "temperature_k": 1500.0},
])
def test_requests_the_fuzzing_found_answer_per_contract(body):
    case = open_schema["/v1/equilibrium"]["POST"].Case(body=body, media_type="application/json")
    response = case.call_and_validate(checks=CHECKS)
    assert response.status_code in (200, 422)


def test_round_off_above_a_bound_is_removed_but_real_excess_is_kept():
    from service.serializers import bounded

    assert bounded(100.00000000000001, 100.0) == 100.0
    assert bounded(1.0000000000000002, 1.0) == 1.0
    assert bounded(100.1, 100.0) == 100.1
    assert bounded(99.5, 100.0) == 99.5
