"""Property tables over (P, T) and their enthalpy- and entropy-indexed forms (Di–An join)."""

from __future__ import annotations

import numpy as np
import pytest

from tests.thermo.binary_systems import di_an
from thermo.saturation import melting_interval
from thermo.tables import FIELDS, TableSettings, check_table, property_table

PRESSURES_GPA = [1e-4, 0.3]
T_MIN_K, T_MAX_K, N_T = 1500.0, 1700.0, 21


@pytest.fixture(scope="module")
def serial():
    return property_table(di_an(60.0), PRESSURES_GPA, T_MIN_K, T_MAX_K, N_T, n_enthalpy=200, n_entropy=400,
                          settings=TableSettings(workers=1))


@pytest.fixture(scope="module")
def parallel():
    return property_table(di_an(60.0), PRESSURES_GPA, T_MIN_K, T_MAX_K, N_T, n_enthalpy=200, n_entropy=400,
                          settings=TableSettings(workers=2))


def test_table_passes_its_own_checks(serial):
    """0 ≤ φ ≤ 1, solidus < liquidus, h increasing, ∫cp_eff dT = Δh, no NaN; each check reports its numbers.

    ∫cp_eff dT uses the end-corrected trapezoid rule on the 10 K grid plus the exact steps across
    boundaries; its truncation error here is ~1e-7 of Δh, so the residual is held to 1e-5 (a cp_eff
    missing even 0.01 % of the latent heat would fail)."""
    c = serial.checks
    assert c["all_passed"], c
    assert c["cp_effective_integrates_to_enthalpy"]["max_relative_residual"] < 1e-5
    assert c["melt_fraction_within_0_1"]["min"] == 0.0 and c["melt_fraction_within_0_1"]["max"] == 1.0
    assert c["solidus_below_liquidus"]["max_solidus_minus_liquidus_k"] < -50.0


def test_parallel_and_serial_tables_are_identical(serial, parallel):
    """One pressure row per process task, warm-started along T within the row: same numbers, bit for bit."""
    for a, b in ((serial.by_temperature, parallel.by_temperature), (serial.by_enthalpy, parallel.by_enthalpy),
                 (serial.by_entropy, parallel.by_entropy), (serial.boundary_points, parallel.boundary_points),
                 (serial.solidus, parallel.solidus), (serial.liquidus, parallel.liquidus)):
        assert a.keys() == b.keys()
        for k in a:
            assert np.array_equal(a[k], b[k], equal_nan=True), k


def test_table_solidus_and_liquidus_are_the_root_found_ones(serial):
    one_bar = melting_interval(di_an(60.0), 1e-4, T_MAX_K, T_MIN_K, 20.0)
    assert serial.solidus["temperature_k"][0] == pytest.approx(one_bar.solidus_k, abs=1e-5)
    assert serial.liquidus["temperature_k"][0] == pytest.approx(one_bar.liquidus_k, abs=1e-5)
    # the solidus entropy is the all-solid side of the eutectic step (well below the liquid-bearing side)
    bp = serial.boundary_points
    at_e = (bp["pressure_index"] == 0) & (np.abs(bp["temperature_k"] - one_bar.solidus_k) < 1e-3)
    s_side = dict(zip(bp["side"][at_e], bp["specific_entropy_j_per_kg_k"][at_e], strict=True))
    assert serial.solidus["specific_entropy_j_per_kg_k"][0] == s_side[-1]
    assert s_side[1] - s_side[-1] > 100.0


def test_enthalpy_form_is_flat_across_the_eutectic(serial):
    """T(h) at 1 bar: the latent heat of the eutectic is released at one temperature, so every h-axis
    node inside the step maps to the eutectic temperature (±1e-5 K), and T(h) never decreases."""
    t_e = serial.solidus["temperature_k"][0]
    bp = serial.boundary_points
    at_e = (bp["pressure_index"] == 0) & (np.abs(bp["temperature_k"] - t_e) < 1e-3)
    h_lo, h_hi = np.sort(bp["specific_enthalpy_j_per_kg"][at_e])
    inside = (serial.enthalpy_axis_j_per_kg > h_lo) & (serial.enthalpy_axis_j_per_kg < h_hi)
    assert inside.sum() >= 10
    t_of_h = serial.by_enthalpy["temperature_k"][0]
    assert np.all(np.abs(t_of_h[inside] - t_e) < 1e-5)
    for row in serial.by_enthalpy["temperature_k"]:
        assert np.all(np.diff(row[np.isfinite(row)]) >= -1e-9)
    phi = serial.by_enthalpy["melt_fraction"][0][inside]
    assert np.all(np.diff(phi) > 0)  # melt fraction grows through the step as h grows


def test_entropy_form_is_monotone_and_consistent_with_the_temperature_form(serial):
    """T(P, s) is monotone and, read at the T-grid entropies, returns the grid temperatures to within
    the interpolation error of the monotone cubic on the 10 K grid (0.05 K away from boundaries; the
    linear read-back on the 400-node s axis adds < 0.01 K)."""
    s_axis = serial.entropy_axis_j_per_kg_k
    for i in range(len(PRESSURES_GPA)):
        t_of_s = serial.by_entropy["temperature_k"][i]
        covered = np.isfinite(t_of_s)
        assert np.all(np.diff(t_of_s[covered]) >= -1e-9)
        s_grid = serial.by_temperature["specific_entropy_j_per_kg_k"][i]
        ok = (s_grid > s_axis[covered][0]) & (s_grid < s_axis[covered][-1])
        t_back = np.interp(s_grid[ok], s_axis[covered], t_of_s[covered])
        far = np.min(np.abs(serial.temperature_k[ok][:, None] - np.concatenate(
            [serial.solidus["temperature_k"], serial.liquidus["temperature_k"]])[None]), axis=1) > 15.0
        assert np.all(np.abs(t_back - serial.temperature_k[ok])[far] < 0.05)


def test_effective_and_frozen_cp_differ_only_where_crystals_form(serial):
    """cp_eff = cp_frozen (1e-6 relative) and α_eff = α_frozen outside the melting interval, at both
    pressures (this caught an inconsistent ordering heat capacity of anorthite at 0.3 GPa); inside,
    cp_eff exceeds cp_frozen by the latent heat rate and dφ/dT > 0."""
    bt = serial.by_temperature
    for i in range(len(PRESSURES_GPA)):
        t = serial.temperature_k
        outside = (t < serial.solidus["temperature_k"][i] - 0.1) | (t > serial.liquidus["temperature_k"][i] + 0.1)
        cp_f, cp_e = bt["heat_capacity_frozen_j_per_kg_k"][i], bt["heat_capacity_effective_j_per_kg_k"][i]
        np.testing.assert_allclose(cp_e[outside], cp_f[outside], rtol=1e-6)
        alpha_e, alpha_f = bt["thermal_expansivity_effective_per_k"][i], bt["thermal_expansivity_frozen_per_k"][i]
        np.testing.assert_allclose(alpha_e[outside], alpha_f[outside], rtol=1e-5)
        assert np.all(cp_e[~outside] > cp_f[~outside]) and np.all(bt["melt_fraction_derivative_per_k"][i][~outside] > 0)


def _good_inputs(serial):
    indexed = [(serial.enthalpy_axis_j_per_kg, serial.by_enthalpy, serial.enthalpy_range_j_per_kg),
               (serial.entropy_axis_j_per_kg_k, serial.by_entropy, serial.entropy_range_j_per_kg_k)]
    return ({k: v.copy() for k, v in serial.by_temperature.items()}, serial.solidus["temperature_k"].copy(),
            serial.liquidus["temperature_k"].copy(), [1e-4, 1e-4], indexed)


def test_indexed_forms_cover_the_union_of_the_rows_ranges(serial):
    """One regular h axis for all pressures over the union of the rows' h ranges; NaN (not computed)
    exactly outside each row's own range, which is h(t_min_k)..h(t_max_k) of that row."""
    h = serial.enthalpy_axis_j_per_kg
    rng = serial.enthalpy_range_j_per_kg
    assert h[0] == rng[:, 0].min() and h[-1] == rng[:, 1].max()
    np.testing.assert_array_equal(rng[:, 0], serial.by_temperature["specific_enthalpy_j_per_kg"][:, 0])
    np.testing.assert_array_equal(rng[:, 1], serial.by_temperature["specific_enthalpy_j_per_kg"][:, -1])
    for i, t_of_h in enumerate(serial.by_enthalpy["temperature_k"]):
        inside = (h >= rng[i, 0]) & (h <= rng[i, 1])
        assert np.all(np.isfinite(t_of_h[inside])) and np.all(np.isnan(t_of_h[~inside]))
        assert np.nanmin(t_of_h) >= T_MIN_K - 1e-6 and np.nanmax(t_of_h) <= T_MAX_K + 1e-6


@pytest.mark.parametrize("defect", ["phi_above_1", "nan", "nan_in_h_form", "h_decreasing",
                                    "solidus_above_liquidus", "integral_off"])
def test_checks_catch_defective_tables(serial, defect):
    by_t, sol, liq, resid, indexed = _good_inputs(serial)
    name = {"phi_above_1": "melt_fraction_within_0_1", "nan": "no_nan", "nan_in_h_form": "no_nan",
            "h_decreasing": "enthalpy_increases_with_temperature", "solidus_above_liquidus": "solidus_below_liquidus",
            "integral_off": "cp_effective_integrates_to_enthalpy"}[defect]
    assert check_table(by_t, sol, liq, resid, indexed, 1e-3)["all_passed"]
    if defect == "phi_above_1":
        by_t["melt_fraction"][0, -1] = 1.2
    elif defect == "nan":
        by_t["density_kg_per_m3"][1, 3] = np.nan
    elif defect == "nan_in_h_form":
        axis, fields, ranges = indexed[0]
        fields = {k: v.copy() for k, v in fields.items()}
        j = int(np.flatnonzero(np.isfinite(fields["density_kg_per_m3"][0]))[5])
        fields["density_kg_per_m3"][0, j] = np.nan
        indexed = [(axis, fields, ranges), indexed[1]]
    elif defect == "h_decreasing":
        by_t["specific_enthalpy_j_per_kg"][0, 5] = by_t["specific_enthalpy_j_per_kg"][0, 4] - 1.0
    elif defect == "solidus_above_liquidus":
        sol[1] = liq[1] + 1.0
    else:
        resid = [1e-4, 5e-3]
    checks = check_table(by_t, sol, liq, resid, indexed, 1e-3)
    assert not checks[name]["passed"] and not checks["all_passed"]


def test_metadata_states_index_order_reference_state_and_units(serial):
    md = serial.metadata
    assert "temperature fastest" in md["index_order"]
    assert "298.15 K" in md["reference_state"] and "1 bar" in md["reference_state"]
    assert md["dataset_checksum"] and set(serial.by_temperature) == set(FIELDS)
    assert serial.by_temperature["specific_enthalpy_j_per_kg"].shape == (len(PRESSURES_GPA), N_T)
