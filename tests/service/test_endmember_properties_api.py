"""GET /v1/datasets/<id>/endmembers/<name>?pressure_gpa=…&temperature_k=…"""

from __future__ import annotations

import math

import janaf
import numpy as np
import polars as pl
import pytest

from service import datasets as datasets_module
from thermo.dataset import DEFAULT_DATASET_ID as DATASET_ID
from thermo.dataset import load_dataset
from thermo.endmembers import StandardState, standard_state

URL = f"/v1/datasets/{DATASET_ID}/endmembers"
PROPERTY_FIELDS = (
    "gibbs_energy_j_per_mol", "enthalpy_j_per_mol", "entropy_j_per_mol_k", "heat_capacity_j_per_mol_k",
    "volume_m3_per_mol", "density_kg_per_m3", "thermal_expansivity_per_k", "bulk_modulus_gpa",
)


def get_props(client, name: str, p_gpa, t_k) -> dict:
    response = client.get(f"{URL}/{name}", query_string={"pressure_gpa": p_gpa, "temperature_k": t_k})
    assert response.status_code == 200, response.get_data(as_text=True)
    return response.get_json()


def problem(client, query, name="forsterite", status=422) -> dict:
    response = client.get(f"{URL}/{name}", query_string=query)
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.mimetype == "application/problem+json"
    body = response.get_json()
    assert {"type", "title", "status", "detail"} <= body.keys()
    assert body["status"] == status
    return body


def fields_named(body: dict) -> set[str]:
    return {e["field"] for e in body["errors"]}


# --- happy path -----------------------------------------------------------------------------------

def test_properties_response_has_every_field_with_units_and_echoes_the_state(client):
    body = get_props(client, "forsterite", "3", "1500")
    assert set(body) == {"name", "pressure_gpa", "temperature_k", "provenance", *PROPERTY_FIELDS}
    assert body["name"] == "forsterite"
    assert body["pressure_gpa"] == 3.0
    assert body["temperature_k"] == 1500.0
    assert all(isinstance(body[k], float) and math.isfinite(body[k]) for k in PROPERTY_FIELDS)


@pytest.mark.parametrize(
    ("name", "p_gpa", "t_k"),
    [
        ("forsterite", 3.0, 1500.0),  # solid, plain
        ("quartz", 0.5, 900.0),  # Landau term
        ("spinel", 1.0, 1600.0),  # Bragg-Williams ordering term
        ("forsterite_liquid", 10.0, 2600.0),  # liquid volume treatment
        ("mg_bridgmanite", 25.0, 500.0),  # corner of the validity domain
        ("periclase", 0.0, 3500.0),  # other corner
    ],
)
def test_properties_equal_the_in_process_standard_state(client, name, p_gpa, t_k):
    body = get_props(client, name, repr(p_gpa), repr(t_k))
    ds = load_dataset(DATASET_ID)
    st: StandardState = standard_state(ds.endmembers.subset([name]), p_gpa * 1e9, t_k)
    expected = {
        "gibbs_energy_j_per_mol": st.g_j_per_mol, "enthalpy_j_per_mol": st.h_j_per_mol,
        "entropy_j_per_mol_k": st.s_j_per_mol_k, "heat_capacity_j_per_mol_k": st.cp_j_per_mol_k,
        "volume_m3_per_mol": st.v_m3_per_mol,
        "density_kg_per_m3": ds.info[name].molar_mass_kg_per_mol / st.v_m3_per_mol,
        "thermal_expansivity_per_k": st.alpha_per_k, "bulk_modulus_gpa": st.k_t_pa / 1e9,
    }
    # JSON carries floats by their shortest round-trip repr, so equality is exact.
    assert {k: body[k] for k in expected} == {k: float(np.ravel(v)[0]) for k, v in expected.items()}


def test_served_energies_obey_g_equals_h_minus_ts(client):
    for name in ("forsterite", "diopside_liquid", "quartz"):
        b = get_props(client, name, 2, 1700)
        residual = b["enthalpy_j_per_mol"] - 1700.0 * b["entropy_j_per_mol_k"] - b["gibbs_energy_j_per_mol"]
        assert abs(residual) <= 1e-9 * abs(b["enthalpy_j_per_mol"]), (name, residual)


@pytest.mark.parametrize("name", ["forsterite", "diopside_liquid"])
def test_served_derivatives_match_central_differences_of_served_energies(client, name):
    """Cp = ∂H/∂T, S = -∂G/∂T, V = ∂G/∂P, α = ∂lnV/∂T: checks field mapping and the GPa → Pa conversion.

    Central differences with dT = 1 K, dP = 0.002 GPa have a truncation error ~ step²·f'''/6,
    measured at most 3e-8 relative here (bulk modulus of the liquid); 1e-6 leaves a margin without
    hiding a unit slip (which would be off by 1e-3 or more).
    """
    p, t, dt, dp = 5.0, 2000.0, 1.0, 0.002
    c, hi_t, lo_t = (get_props(client, name, p, x) for x in (t, t + dt, t - dt))
    hi_p, lo_p = get_props(client, name, p + dp, t), get_props(client, name, p - dp, t)
    cp_fd = (hi_t["enthalpy_j_per_mol"] - lo_t["enthalpy_j_per_mol"]) / (2 * dt)
    s_fd = -(hi_t["gibbs_energy_j_per_mol"] - lo_t["gibbs_energy_j_per_mol"]) / (2 * dt)
    v_fd = (hi_p["gibbs_energy_j_per_mol"] - lo_p["gibbs_energy_j_per_mol"]) / (2 * dp * 1e9)
    alpha_fd = (math.log(hi_t["volume_m3_per_mol"]) - math.log(lo_t["volume_m3_per_mol"])) / (2 * dt)
    k_fd = -c["volume_m3_per_mol"] * 2 * dp / (hi_p["volume_m3_per_mol"] - lo_p["volume_m3_per_mol"])
    assert cp_fd == pytest.approx(c["heat_capacity_j_per_mol_k"], rel=1e-6)
    assert s_fd == pytest.approx(c["entropy_j_per_mol_k"], rel=1e-6)
    assert v_fd == pytest.approx(c["volume_m3_per_mol"], rel=1e-6)
    assert alpha_fd == pytest.approx(c["thermal_expansivity_per_k"], rel=1e-6)
    assert k_fd == pytest.approx(c["bulk_modulus_gpa"], rel=1e-6)


def test_density_is_molar_mass_over_molar_volume(client):
    mass = next(e["molar_mass_kg_per_mol"] for e in client.get(URL).get_json()["endmembers"] if e["name"] == "pyrope")
    b = get_props(client, "pyrope", 4, 1400)
    assert b["density_kg_per_m3"] == pytest.approx(mass / b["volume_m3_per_mol"], rel=1e-15)


def test_periclase_heat_capacity_and_entropy_agree_with_janaf(client):
    """NIST-JANAF MgO(cr) table Mg-008 (Chase 1998, J. Phys. Chem. Ref. Data Monograph 9) at 1000 K, 1 bar.

    Served through HTTP, so a unit slip (kJ for J) or swapped fields would show. Tolerance 2 %:
    HP2011 Cp polynomials are fitted to calorimetry and reproduce simple oxides to about 1-2 %
    (common practice, not a stated uncertainty). Measured: Cp 50.86 vs 51.21, S 81.49 vs 82.26 J/(mol K).
    """
    row = janaf.Table("Mg-008").df.filter(pl.col("T(K)") == 1000.0)
    b = get_props(client, "periclase", 1e-4, 1000)
    assert b["heat_capacity_j_per_mol_k"] == pytest.approx(row["Cp"][0], rel=0.02)
    assert b["entropy_j_per_mol_k"] == pytest.approx(row["S"][0], rel=0.02)


def test_periclase_density_near_ambient_is_about_3560_kg_per_m3(client):
    """Periclase: 3583 kg/m³ at 298 K (from the lattice parameter a = 4.2117 Å; from memory), expanded
    to 500 K with a mean α ≈ 3.1e-5 /K (from memory) gives ≈ 3561 kg/m³. Tolerance 1 % for the memory
    values; a GPa/Pa or cm³/m³ slip would be off by orders of magnitude. Measured: 3557 kg/m³."""
    b = get_props(client, "periclase", 1e-4, 500)
    assert b["density_kg_per_m3"] == pytest.approx(3583.0 * math.exp(-3.1e-5 * 201.85), rel=0.01)


def test_inclusive_validity_bounds_are_accepted(client):
    ds = load_dataset(DATASET_ID)
    for p in ds.pressure_range_gpa:
        for t in ds.temperature_range_k:
            assert get_props(client, "forsterite", p, t)["pressure_gpa"] == p


# --- provenance -----------------------------------------------------------------------------------

def test_properties_carry_provenance_of_dataset_and_code(client):
    prov = get_props(client, "forsterite", 3, 1500)["provenance"]
    ds = load_dataset(DATASET_ID)
    assert prov["dataset_id"] == ds.id
    assert prov["dataset_checksum"] == ds.checksum
    assert prov["code_version"] == client.get("/v1/health").get_json()["version"]
    assert prov["warnings"] == []  # forsterite has high-confidence parameters


def test_request_hash_identifies_the_parsed_request(client):
    def digest(name, query):
        return client.get(f"{URL}/{name}", query_string=query).get_json()["provenance"]["request_hash"]

    base = digest("forsterite", [("pressure_gpa", "3"), ("temperature_k", "1500")])
    assert digest("forsterite", [("temperature_k", "1500.0"), ("pressure_gpa", "3.0")]) == base
    assert digest("forsterite", [("pressure_gpa", "3"), ("temperature_k", "1501")]) != base
    assert digest("fayalite", [("pressure_gpa", "3"), ("temperature_k", "1500")]) != base


def test_low_confidence_endmember_result_carries_a_warning(client):
    ds = load_dataset(DATASET_ID)
    weak = next(n for n in ds.endmembers.names if ds.info[n].confidence == "low")
    warnings = get_props(client, weak, 1, 1500)["provenance"]["warnings"]
    assert any("low confidence" in w and weak in w for w in warnings)


def test_endmember_outside_the_dataset_components_carries_a_warning(client):
    warnings = get_props(client, "rutile", 1, 1500)["provenance"]["warnings"]
    assert any("outside the dataset's components" in w for w in warnings)


# --- bad input ------------------------------------------------------------------------------------

@pytest.mark.parametrize(
    ("query", "field"),
    [
        ({"temperature_k": "1500"}, "pressure_gpa"),  # missing
        ({"pressure_gpa": "3"}, "temperature_k"),  # missing
        ({"pressure_gpa": "three", "temperature_k": "1500"}, "pressure_gpa"),  # not a number
        ({"pressure_gpa": "", "temperature_k": "1500"}, "pressure_gpa"),  # empty
        ({"pressure_gpa": "3", "temperature_k": "15OO"}, "temperature_k"),  # letter O
        ({"pressure_gpa": "nan", "temperature_k": "1500"}, "pressure_gpa"),
        ({"pressure_gpa": "3", "temperature_k": "NaN"}, "temperature_k"),
        ({"pressure_gpa": "inf", "temperature_k": "1500"}, "pressure_gpa"),
        ({"pressure_gpa": "3", "temperature_k": "-Infinity"}, "temperature_k"),
        ({"pressure_gpa": "1e400", "temperature_k": "1500"}, "pressure_gpa"),  # overflows to inf
        ({"pressure_gpa": "-0.5", "temperature_k": "1500"}, "pressure_gpa"),  # below range
        ({"pressure_gpa": "25.001", "temperature_k": "1500"}, "pressure_gpa"),  # above range
        ({"pressure_gpa": "3", "temperature_k": "499.9"}, "temperature_k"),
        ({"pressure_gpa": "3", "temperature_k": "3500.5"}, "temperature_k"),
        ({"pressure_gpa": "3", "temperature_k": "1500", "pressure_bar": "1"}, "pressure_bar"),  # unknown
    ],
)
def test_bad_query_is_422_problem_naming_the_field(client, query, field):
    body = problem(client, query)
    assert field in fields_named(body)
    assert body["type"].endswith("/invalid-input")
    assert field in body["detail"]


def test_out_of_range_message_states_the_allowed_range_and_unit(client):
    body = problem(client, {"pressure_gpa": "30", "temperature_k": "1500"})
    message = body["errors"][0]["message"]
    assert "[0, 25] GPa" in message and "30 GPa" in message


def test_every_bad_parameter_is_reported_at_once(client):
    body = problem(client, {"pressure_gpa": "nan", "temperature_k": "9000"})
    assert fields_named(body) == {"pressure_gpa", "temperature_k"}


def test_repeated_query_parameter_is_refused(client):
    body = problem(client, [("pressure_gpa", "1"), ("pressure_gpa", "2"), ("temperature_k", "1500")])
    assert fields_named(body) == {"pressure_gpa"}


def test_unknown_endmember_is_404_naming_the_path_parameter(client):
    body = problem(client, {"pressure_gpa": "3", "temperature_k": "1500"}, name="unobtainium", status=404)
    assert fields_named(body) == {"name"}
    assert body["type"].endswith("/unknown-resource")
    assert problem(client, {"pressure_gpa": "3", "temperature_k": "1500"}, name="Forsterite", status=404)


def test_unknown_dataset_is_404_naming_dataset_id(client):
    response = client.get("/v1/datasets/nope/endmembers/forsterite?pressure_gpa=3&temperature_k=1500")
    assert response.status_code == 404
    assert {e["field"] for e in response.get_json()["errors"]} == {"dataset_id"}


def test_non_finite_equation_of_state_result_is_422_not_invalid_json(client, monkeypatch):
    """Inside the stated domain the equation of state is finite for every endmember; if a future
    dataset is not, the endpoint must refuse the point rather than emit NaN."""

    def nan_volume(params, pressure_pa, temperature_k):
        st = standard_state(params, pressure_pa, temperature_k)
        return StandardState(**{**st.__dict__, "v_m3_per_mol": np.full_like(st.v_m3_per_mol, np.nan)})

    monkeypatch.setattr(datasets_module, "standard_state", nan_volume)
    body = problem(client, {"pressure_gpa": "3", "temperature_k": "1500"})
    assert body["type"].endswith("/outside-validity-domain")
    assert fields_named(body) == {"pressure_gpa"}


def test_no_served_property_is_non_finite_anywhere_in_the_validity_domain():
    """Guards the premise of the test above on the shipped dataset (11 x 11 grid, every endmember)."""
    ds = load_dataset(DATASET_ID)
    p = np.linspace(*ds.pressure_range_gpa, 11)[:, None] * 1e9
    t = np.linspace(*ds.temperature_range_k, 11)[None, :]
    st = standard_state(ds.endmembers, p, t)
    for key in ("g_j_per_mol", "h_j_per_mol", "s_j_per_mol_k", "cp_j_per_mol_k", "v_m3_per_mol",
                "alpha_per_k", "k_t_pa"):
        assert np.isfinite(getattr(st, key)).all(), key
