"""Core results → JSON: one equilibrium assemblage, its phases and the bulk composition.

Used by ``POST /v1/equilibrium`` and meant for every endpoint that reports an
assemblage (e.g. each step of a cooling path), so that a state has the same
JSON shape wherever it appears. Field names carry their units; per-kilogram
quantities are per kilogram of the whole system (all phases), molar
quantities of a phase are per mole of that phase's endmember formula units.
Every number is a plain Python ``float`` computed from the
:class:`thermo.assemblage.Assemblage` without rounding, so a client gets
exactly what an in-process caller of :func:`thermo.equilibrium.solve_point`
gets.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from thermo.assemblage import Assemblage, PhaseProperties
from thermo.composition import Bulk

__all__ = [
    "MODEL_ESTIMATE_NOTE", "assemblage_json", "bounded", "bulk_composition_json", "diagnostics_json", "phase_json",
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
    return {
        "name": phase.name,
        "is_liquid": bool(phase.is_liquid),
        "mass_fraction": bounded(assemblage.mass_fraction(phase), 1.0),
        "volume_fraction": bounded(assemblage.volume_fraction(phase), 1.0),
        "amount_mol_per_kg": float(phase.amount_mol / assemblage.mass_kg),
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
