"""Core results → JSON: equilibrium assemblages, cooling paths, isentropes and property tables.

An assemblage is used by ``POST /v1/equilibrium`` and its phase objects by every endpoint
that reports phases (each step of a cooling path carries the fields of the phase object
that the path keeps), so that a state has the same JSON shape wherever it appears. Field
names carry their units; per-kilogram quantities of an assemblage are per kilogram of the
whole system (all phases), molar quantities of a phase are per mole of that phase's
endmember formula units. Every number is a plain Python ``float`` taken from the core's
result without rounding (NaN, which JSON lacks, becomes null only where the contract allows
null), so a client gets exactly what an in-process caller of :mod:`thermo` gets.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from thermo.assemblage import Assemblage, PhaseProperties
from thermo.composition import Bulk
from thermo.formats import table_to_dict
from thermo.isentropes import Isentrope
from thermo.paths import BoundaryRecord, CoolingPath, CumulateLayer, PathPoint, PhaseRecord
from thermo.tables import FIELDS, REFERENCE_STATE, PropertyTable

__all__ = [
    "MODEL_ESTIMATE_NOTE", "PATH_ENERGY_BASIS", "assemblage_json", "bounded", "bulk_composition_json",
    "cooling_path_json", "cumulate_json", "diagnostics_json", "isentrope_json", "path_phase_json", "path_step_json",
    "phase_boundary_json", "phase_json", "table_json",
]

#: Standing note attached to the provenance of every assemblage result.
MODEL_ESTIMATE_NOTE = (
    "Model estimate: phase assemblage and properties follow from the dataset's endmember and solution "
    "parameters by Gibbs energy minimization; they are not measurements and are only as good as the "
    "dataset inside its validity domain."
)


#: Relative overshoot of a fraction's or percentage's upper bound that counts as round-off.
ROUND_OFF = 1e-12


def bounded(value: float, upper: float) -> float:
    """``value`` as a float, with a round-off overshoot of ``upper`` (e.g. 100.00000000000001 %) set to ``upper``.

    Normalisation in floating point can end an ulp above 100 % or 1 (``100 * n / n``); the
    contract bounds these fields, so the overshoot is removed. Anything larger is left alone,
    for the contract tests to catch.
    """
    value = float(value)
    return upper if upper < value <= upper * (1.0 + ROUND_OFF) else value


def phase_json(assemblage: Assemblage, phase: PhaseProperties) -> dict[str, Any]:
    """One phase of ``assemblage`` (instances of one solution are named ``clinopyroxene``, ``clinopyroxene#2``)."""
    return _phase_fields(phase, assemblage.mass_fraction(phase), assemblage.volume_fraction(phase), assemblage.mass_kg)


def _phase_fields(phase: PhaseProperties, mass_fraction: float, volume_fraction: float,
                  system_mass_kg: float) -> dict[str, Any]:
    return {
        "name": phase.name,
        "is_liquid": bool(phase.is_liquid),
        "mass_fraction": bounded(mass_fraction, 1.0),
        "volume_fraction": bounded(volume_fraction, 1.0),
        "amount_mol_per_kg": float(phase.amount_mol / system_mass_kg),
        "molar_mass_kg_per_mol": float(phase.molar_mass_kg_per_mol),
        "composition_wt_percent": {ox: bounded(v, 100.0) for ox, v in phase.composition_wt_percent.items()},
        "endmember_fractions": {em: float(x) for em, x in zip(phase.endmembers, phase.endmember_fractions,
                                                               strict=True)},
        "density_kg_per_m3": float(phase.density_kg_per_m3),
        "molar_gibbs_energy_j_per_mol": float(phase.g_j_per_mol),
        "molar_enthalpy_j_per_mol": float(phase.h_j_per_mol),
        "molar_entropy_j_per_mol_k": float(phase.s_j_per_mol_k),
        "molar_volume_m3_per_mol": float(phase.v_m3_per_mol),
        "molar_heat_capacity_j_per_mol_k": float(phase.cp_j_per_mol_k),
        "thermal_expansivity_per_k": float(phase.alpha_per_k),
    }


def diagnostics_json(diagnostics: Mapping[str, Any]) -> dict[str, Any]:
    """Solver diagnostics of a converged result under the service's own field names.

    Raises ``KeyError`` if the core stops reporting one of them (a bug the
    tests must see, not a value to fill in).
    """
    return {
        "outer_iteration_count": int(diagnostics["outer_iterations"]),
        "gibbs_evaluation_count": int(diagnostics["g_evaluations"]),
        "polish_failure_count": int(diagnostics.get("polish_failures", 0)),
        # The core's key says "largest" but holds the minimum over absent phases (see _absent_min).
        "min_absent_driving_force_j_per_mol": float(diagnostics["min_absent_driving_force_j_per_mol"]),
        "mass_balance_relative_residual": float(diagnostics["mass_balance_residual"]),
        "warm_start_used": bool(diagnostics["warm_start_used"]),
        "solve_time_s": float(diagnostics["wall_time_s"]),
    }


def assemblage_json(assemblage: Assemblage) -> dict[str, Any]:
    """Phases, system totals per kg, chemical potentials and diagnostics of an equilibrium assemblage.

    The state (pressure, temperature) and provenance are left to the caller,
    which knows whether they echo a request or a step of a path.
    """
    a = assemblage
    return {
        "phases": [phase_json(a, ph) for ph in a.phases],
        "melt_fraction": bounded(a.melt_fraction, 1.0),
        "specific_gibbs_energy_j_per_kg": float(a.g_j_per_kg),
        "specific_enthalpy_j_per_kg": float(a.h_j_per_kg),
        "specific_entropy_j_per_kg_k": float(a.s_j_per_kg_k),
        "specific_volume_m3_per_kg": float(a.v_m3_per_kg),
        "heat_capacity_frozen_j_per_kg_k": float(a.cp_frozen_j_per_kg_k),
        "thermal_expansivity_frozen_per_k": float(a.alpha_frozen_per_k),
        "density_kg_per_m3": float(a.density_kg_per_m3),
        "chemical_potentials_j_per_mol": {c: float(mu) for c, mu in zip(a.components,
                                                                         a.chemical_potentials_j_per_mol,
                                                                         strict=True)},
        "diagnostics": diagnostics_json(a.diagnostics),
    }


def bulk_composition_json(bulk: Bulk) -> dict[str, dict[str, float]]:
    """The normalised bulk composition on the dataset's oxide components, as wt % and mol %."""
    return {
        "wt_percent": {ox: bounded(v, 100.0) for ox, v in bulk.wt_percent().items()},
        "mol_percent": {ox: bounded(v, 100.0) for ox, v in bulk.mol_percent().items()},
    }


# --------------------------------------------------------------------------- cooling paths
#: Standing statement of what the per-kilogram numbers of a cooling path refer to.
PATH_ENERGY_BASIS = (
    "Specific quantities of a step (specific_*, heat_capacity_*, thermal_expansivity_*, densities, melt and "
    "phase fractions) are per kg of the material at the step: the whole closed system in equilibrium mode, "
    "the residual parcel (liquid plus the crystals formed in the step) in fractional mode. Heat released, "
    "latent heat and entropy change of a step, and their running totals, are per kg of the starting parcel "
    "(the two bases agree in equilibrium mode); system_mass_kg_per_kg_initial converts between them."
)


def optional_float(value: Any) -> float | None:
    """``value`` as a float, or None when it is None or not finite (JSON has no NaN)."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def path_phase_json(phase: PhaseRecord) -> dict[str, Any]:
    """One phase at a step of a cooling path: the same object as a /v1/equilibrium phase (fractions of the
    material at the step)."""
    return _phase_fields(phase.properties, phase.mass_fraction, phase.volume_fraction, phase.system_mass_kg)


def path_step_json(point: PathPoint) -> dict[str, Any]:
    """One row of a cooling path; the step quantities refer to the step ending at this row."""
    p = point
    return {
        "temperature_k": float(p.temperature_k),
        "kind": p.kind,
        "melt_fraction": bounded(p.melt_fraction, 1.0),
        "phases": [path_phase_json(ph) for ph in p.phases],
        "system_mass_kg_per_kg_initial": float(p.system_mass_kg_per_kg_initial),
        "specific_enthalpy_j_per_kg": float(p.specific_enthalpy_j_per_kg),
        "specific_entropy_j_per_kg_k": float(p.specific_entropy_j_per_kg_k),
        "heat_capacity_frozen_j_per_kg_k": float(p.cp_frozen_j_per_kg_k),
        "heat_capacity_effective_j_per_kg_k": float(p.cp_effective_j_per_kg_k),
        "latent_heat_rate_j_per_kg_k": float(p.latent_heat_rate_j_per_kg_k),
        "thermal_expansivity_frozen_per_k": float(p.alpha_frozen_per_k),
        "thermal_expansivity_effective_per_k": float(p.alpha_effective_per_k),
        "melt_fraction_derivative_per_k": float(p.melt_fraction_derivative_per_k),
        "density_kg_per_m3": float(p.density_kg_per_m3),
        "melt_density_kg_per_m3": optional_float(p.melt_density_kg_per_m3),
        "solid_density_kg_per_m3": optional_float(p.solid_density_kg_per_m3),
        "heat_released_j_per_kg": float(p.step_heat_released_j_per_kg_initial),
        "sensible_heat_j_per_kg": float(p.step_sensible_heat_j_per_kg_initial),
        "latent_heat_j_per_kg": float(p.step_latent_heat_j_per_kg_initial),
        "entropy_change_j_per_kg_k": float(p.step_entropy_change_j_per_k_per_kg_initial),
        "t_ds_j_per_kg": float(p.step_t_ds_j_per_kg_initial),
        "cumulative_heat_released_j_per_kg": float(p.cumulative_heat_released_j_per_kg_initial),
        "cumulative_latent_heat_j_per_kg": float(p.cumulative_latent_heat_j_per_kg_initial),
        "derivative_stencil": p.derivative_stencil,
    }


def phase_boundary_json(b: BoundaryRecord) -> dict[str, Any]:
    """A located phase boundary: both sides' enthalpy and the heat released across it."""
    return {
        "temperature_k": float(b.temperature_k),
        "appearing": list(b.appearing),
        "disappearing": list(b.disappearing),
        "variance": int(b.variance),
        "isothermal": bool(b.isothermal),
        "specific_enthalpy_above_j_per_kg": float(b.specific_enthalpy_above_j_per_kg),
        "specific_enthalpy_below_j_per_kg": float(b.specific_enthalpy_below_j_per_kg),
        "heat_released_j_per_kg": float(b.heat_released_j_per_kg_initial),
    }


def cumulate_json(layer: CumulateLayer) -> dict[str, Any]:
    """One cumulate layer of a fractional path (material removed at one step)."""
    return {
        "temperature_k": float(layer.temperature_k),
        "mass_kg_per_kg_initial": float(layer.mass_kg_per_kg_initial),
        "mineral_proportions": {name: bounded(x, 1.0) for name, x in layer.mineral_proportions.items()},
        "trapped_melt_mass_fraction": bounded(layer.trapped_melt_mass_fraction, 1.0),
        "density_kg_per_m3": float(layer.density_kg_per_m3),
        "enthalpy_j_per_kg_initial": float(layer.enthalpy_j_per_kg_initial),
    }


def energy_balance_json(path: CoolingPath) -> dict[str, Any]:
    """The terms of h_initial = h_parcel + Σ h_removed + Σ heat released, per kg of the starting parcel."""
    removed = sum(layer.enthalpy_j_per_kg_initial for layer in path.cumulates)
    heat = path.points[-1].cumulative_heat_released_j_per_kg_initial
    d = path.diagnostics
    return {
        "initial_enthalpy_j_per_kg": float(path.initial_enthalpy_j_per_kg_initial),
        "final_parcel_mass_kg_per_kg_initial": float(path.final_parcel_mass_kg_per_kg_initial),
        "final_parcel_enthalpy_j_per_kg": float(path.final_parcel_enthalpy_j_per_kg_initial),
        "removed_enthalpy_j_per_kg": float(removed),
        "heat_released_j_per_kg": float(heat),
        "energy_conservation_relative_residual": optional_float(d.get("energy_conservation_relative_residual")),
        "t_ds_identity_relative_residual": optional_float(d.get("t_ds_identity_relative_residual")),
    }


def cooling_path_json(path: CoolingPath) -> dict[str, Any]:
    """A cooling path as JSON (the caller adds the request echo, composition and provenance)."""
    return {
        "mode": path.mode,
        "pressure_gpa": float(path.pressure_gpa),
        "trapped_melt_fraction": float(path.trapped_melt_fraction) if path.mode == "fractional" else None,
        "energy_basis": PATH_ENERGY_BASIS,
        "reference_state": REFERENCE_STATE,
        "steps": [path_step_json(p) for p in path.points],
        "phase_boundaries": [phase_boundary_json(b) for b in path.boundaries],
        "saturation_sequence": [{"phase": e.phase, "temperature_k": float(e.temperature_k), "event": e.event,
                                 "isothermal": bool(e.isothermal)} for e in path.saturation_sequence()],
        "liquidus_k": optional_float(path.liquidus_k),
        "solidus_k": optional_float(path.solidus_k),
        "notes": list(path.notes),
        "cumulates": [cumulate_json(c) for c in path.cumulates] if path.mode == "fractional" else None,
        "energy_balance": energy_balance_json(path),
        "diagnostics": {"restricted_equilibrium_count": int(path.diagnostics["restricted_equilibria"]),
                        "solve_time_s": float(path.diagnostics["wall_time_s"])},
    }


# --------------------------------------------------------------------------- isentropes
def isentrope_json(iso: Isentrope) -> dict[str, Any]:
    """An isentrope as JSON: the entropy it keeps and one point per pressure, in the order given."""
    rows = zip(iso.pressure_gpa, iso.temperature_k, iso.melt_fraction, iso.specific_enthalpy_j_per_kg,
               iso.density_kg_per_m3, iso.on_invariant, strict=True)
    return {
        "specific_entropy_j_per_kg_k": float(iso.specific_entropy_j_per_kg_k),
        "potential_temperature_k": optional_float(iso.potential_temperature_k),
        "reference_pressure_gpa": float(iso.reference_pressure_gpa),
        "reference_state": REFERENCE_STATE,
        "points": [{"pressure_gpa": float(p), "temperature_k": float(t), "melt_fraction": bounded(phi, 1.0),
                    "specific_enthalpy_j_per_kg": float(h), "density_kg_per_m3": float(rho),
                    "on_invariant": bool(inv)} for p, t, phi, h, rho, inv in rows],
    }


# --------------------------------------------------------------------------- tables
def table_json(table: PropertyTable, variables: list[str] | None = None, boundary_points: bool = True) -> dict:
    """A property table as JSON (NaN as null), T-indexed fields limited to ``variables`` (melt fraction always).

    The shape is :func:`thermo.formats.table_to_dict`'s; without ``boundary_points`` that member is null.
    """
    out = table_to_dict(table)
    keep = set(variables or FIELDS) | {"melt_fraction"}
    out["by_temperature"] = {k: v for k, v in out["by_temperature"].items() if k in keep}
    if not boundary_points:
        out["boundary_points"] = None
    out.pop("provenance", None)
    return out
