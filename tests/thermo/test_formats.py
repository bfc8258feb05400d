"""Serialisation: JSON-ready dicts, CSV with '#' header lines, netCDF-3 following the CF conventions."""

from __future__ import annotations

import json

import numpy as np
import pytest

from tests.thermo.binary_systems import di_an
from thermo.errors import InputError
from thermo.formats import (
    CF_CONVENTIONS,
    TABLE_FORMS,
    path_to_csv,
    path_to_dict,
    read_csv,
    read_netcdf,
    table_to_csv,
    table_to_dict,
    table_to_netcdf,
)
from thermo.paths import cooling_path
from thermo.tables import FIELDS, TableSettings, property_table

PROVENANCE = {"dataset_id": "test", "code_version": "0.0-test", "request_hash": "abc123", "warnings": []}


@pytest.fixture(scope="module")
def table():
    return property_table(di_an(60.0), [1e-4, 0.3], 1520.0, 1680.0, 9, settings=TableSettings(workers=1))


@pytest.fixture(scope="module")
def path():
    return cooling_path(di_an(60.0), 1e-4, 1680.0, 1530.0, 50.0)


def _expected(table, form):
    if form == "temperature":
        return table.temperature_k, table.by_temperature
    if form == "enthalpy":
        return table.enthalpy_axis_j_per_kg, table.by_enthalpy
    return table.entropy_axis_j_per_kg_k, table.by_entropy


@pytest.mark.parametrize("form", ["temperature", "enthalpy", "entropy"])
def test_csv_round_trip_gives_the_same_numbers(table, form):
    """Every value reads back bit for bit; pressure varies slowest, the index fastest."""
    parsed = read_csv(table_to_csv(table, form, PROVENANCE))
    cols, header = parsed["columns"], parsed["header"]
    axis, data = _expected(table, form)
    n = len(axis)
    assert np.array_equal(cols["pressure_gpa"], np.repeat(table.pressure_gpa, n))
    for name, arr in data.items():
        assert np.array_equal(cols[name], arr.ravel(), equal_nan=True), name
    assert header["form"] == form and "fastest" in header["index_order"]
    assert header["provenance"] == PROVENANCE
    assert "298.15 K" in header["reference_state"]
    assert header["checks"]["all_passed"] == table.checks["all_passed"]


def test_csv_header_gives_units_of_every_column(table):
    parsed = read_csv(table_to_csv(table, "temperature", PROVENANCE))
    described = {name: units for name, units, _ in parsed["header"]["column"]}
    assert list(described) == list(parsed["columns"])
    assert described["temperature_k"] == "K" and described["pressure_gpa"] == "GPa"
    assert all(described[f] == FIELDS[f][0] for f in FIELDS)


def test_csv_boundary_points_and_limits_round_trip(table):
    parsed = read_csv(table_to_csv(table, "boundaries"))
    bp = table.boundary_points
    assert np.array_equal(parsed["columns"]["temperature_k"], bp["temperature_k"])
    assert np.array_equal(parsed["columns"]["side"], bp["side"])
    assert np.array_equal(parsed["columns"]["specific_enthalpy_j_per_kg"], bp["specific_enthalpy_j_per_kg"])
    assert parsed["header"]["solidus"]["temperature_k"] == list(table.solidus["temperature_k"])


def test_unknown_csv_form_is_refused(table):
    with pytest.raises(InputError):
        table_to_csv(table, "pressure")
    assert set(TABLE_FORMS) == {"temperature", "enthalpy", "entropy", "boundaries"}


def test_netcdf_round_trip_gives_the_same_numbers(table):
    nc = read_netcdf(table_to_netcdf(table, PROVENANCE))
    v = nc["variables"]
    assert np.array_equal(v["pressure"], table.pressure_gpa)
    assert np.array_equal(v["temperature"], table.temperature_k)
    assert np.array_equal(v["enthalpy_axis"], table.enthalpy_axis_j_per_kg)
    for name, arr in table.by_temperature.items():
        assert np.array_equal(v[name], arr), name
    for name, arr in table.by_enthalpy.items():
        assert np.array_equal(v[f"{name}_at_enthalpy"], arr, equal_nan=True), name
    for name, arr in table.by_entropy.items():
        assert np.array_equal(v[f"{name}_at_entropy"], arr, equal_nan=True), name
    assert np.array_equal(v["enthalpy_range_high"], table.enthalpy_range_j_per_kg[:, 1])
    assert np.array_equal(v["solidus_temperature_k"], table.solidus["temperature_k"], equal_nan=True)
    assert np.array_equal(v["boundary_side"], table.boundary_points["side"])
    assert json.loads(nc["attributes"]["provenance"]) == PROVENANCE


def test_netcdf_follows_the_cf_conventions(table):
    """Conventions attribute, coordinate variables for every dimension, units and long_name everywhere,
    no invented standard_name, _FillValue of the variable's own type."""
    nc = read_netcdf(table_to_netcdf(table))
    assert nc["attributes"]["Conventions"] == CF_CONVENTIONS == "CF-1.10"
    attrs = nc["variable_attributes"]
    dims = {d for a in attrs.values() for d in a["dimensions"]}
    for d in dims:
        assert d in nc["variables"] and attrs[d]["dimensions"] == (d,)
    for name, a in attrs.items():
        assert "units" in a and "long_name" in a, name
        assert "standard_name" not in a, name
        if "_FillValue" in a:
            assert np.asarray(a["_FillValue"]).dtype == nc["variables"][name].dtype, name
    assert attrs["temperature"]["units"] == "K" and attrs["pressure"]["units"] == "GPa"
    assert attrs["specific_enthalpy_j_per_kg"]["dimensions"] == ("pressure", "temperature")
    assert attrs["boundary_side"]["flag_meanings"] == "just_below just_above"


def test_missing_values_become_fill_values_in_netcdf_and_nulls_in_json(table):
    """A pressure row without a solidus in range: NaN in the table, _FillValue in netCDF, null in JSON."""
    short = property_table(di_an(60.0), [1e-4], 1560.0, 1680.0, 5, settings=TableSettings(workers=1))
    assert np.isnan(short.solidus["temperature_k"][0])
    nc = read_netcdf(table_to_netcdf(short))
    assert np.isnan(nc["variables"]["solidus_temperature_k"][0])
    d = table_to_dict(short)
    assert d["solidus"]["temperature_k"] == [None]
    json.dumps(d, allow_nan=False)


def test_table_dict_is_json_ready_with_units_and_index_order(table):
    d = table_to_dict(table, PROVENANCE)
    text = json.dumps(d, allow_nan=False)
    back = json.loads(text)
    assert np.array_equal(np.array(back["by_temperature"]["melt_fraction"]), table.by_temperature["melt_fraction"])
    assert back["units"]["heat_capacity_effective_j_per_kg_k"] == "J kg-1 K-1"
    assert "temperature fastest" in back["index_order"] and back["provenance"] == PROVENANCE


def test_path_serialisations_round_trip(path):
    d = path_to_dict(path, PROVENANCE)
    json.dumps(d, allow_nan=False)
    assert [e["phase"] for e in d["saturation_sequence"]] == ["anorthite", "diopside", "liquid"]
    parsed = read_csv(path_to_csv(path, PROVENANCE))
    cols = parsed["columns"]
    assert np.array_equal(cols["temperature_k"], [p.temperature_k for p in path.points])
    assert np.array_equal(cols["latent_heat_j_per_kg"], [p.step_latent_heat_j_per_kg_initial for p in path.points])
    assert np.array_equal(cols["heat_capacity_effective_j_per_kg_k"], [p.cp_effective_j_per_kg_k for p in path.points])
    assert np.allclose(cols["mass_fraction_liquid"], [p.melt_fraction for p in path.points], atol=1e-12)
    assert parsed["header"]["mode"] == "equilibrium" and parsed["header"]["solidus_k"] == path.solidus_k
