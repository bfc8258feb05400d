"""Datasets and their endmembers: ``/v1/datasets...``.

Standard-state properties of one endmember at a pressure-temperature point come
from :func:`thermo.endmembers.standard_state` (Holland & Powell 2011,
J. Metamorph. Geol. 29:333-383), evaluated only inside the dataset's stated
validity domain.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from flask import Blueprint

from service.errors import not_found
from service.provenance import build_provenance
from service.schemas import StatePointQuery, load_query
from thermo.dataset import Dataset, available_datasets, load_dataset
from thermo.endmembers import StandardState, standard_state
from thermo.errors import OutOfDomainError

blueprint = Blueprint("datasets", __name__)

#: Confidence grades of endmember parameters that earn a warning in results.
WEAK_CONFIDENCE = ("low", "medium-low")


def get_dataset(dataset_id: str) -> Dataset:
    """The shipped dataset ``dataset_id``, or a 404 problem naming ``dataset_id``."""
    ids = available_datasets()
    if dataset_id not in ids:
        raise not_found("dataset_id", f"unknown dataset {dataset_id!r}; available: {', '.join(ids)}")
    return load_dataset(dataset_id)


def dataset_summary(ds: Dataset) -> dict[str, Any]:
    """One entry of the dataset list."""
    return {
        "id": ds.id,
        "checksum": ds.checksum,
        "title": ds.title,
        "oxides": list(ds.oxides),
        "endmember_count": len(ds.endmembers.names),
        "validity": {"pressure_gpa": list(ds.pressure_range_gpa), "temperature_k": list(ds.temperature_range_k),
                     **({"melt_model_pressure_gpa": list(ds.melt_model_pressure_range_gpa)}
                        if ds.melt_model_pressure_range_gpa else {})},
    }


@blueprint.get("/datasets")
def list_datasets() -> dict[str, Any]:
    """Every shipped dataset with its checksum, components and validity domain."""
    return {"datasets": [dataset_summary(load_dataset(i)) for i in available_datasets()]}


@blueprint.get("/datasets/<dataset_id>/endmembers")
def list_endmembers(dataset_id: str) -> dict[str, Any]:
    """Descriptive data and provenance grades of every endmember of a dataset."""
    ds = get_dataset(dataset_id)
    rows = []
    for name in ds.endmembers.names:
        info = ds.info[name]
        rows.append({
            "name": name, "formula": info.formula, "state": info.state,
            "molar_mass_kg_per_mol": info.molar_mass_kg_per_mol, "source": info.source,
            "confidence": info.confidence, "recall_status": info.recall_status, "notes": info.notes,
        })
    params = {"operation": "v1/endmember_list", "dataset_id": ds.id}
    return {"endmembers": rows, "provenance": build_provenance(ds, params)}


def endmember_warnings(ds: Dataset, name: str) -> list[str]:
    """Caveats a result for endmember ``name`` should carry."""
    info, out = ds.info[name], []
    if info.confidence in WEAK_CONFIDENCE:
        note = f": {info.notes}" if info.notes else ""
        out.append(f"parameters of {name} have {info.confidence} confidence ({info.recall_status}){note}")
    if not ds.in_system[ds.index(name)]:
        out.append(f"{name} contains an oxide outside the dataset's components ({', '.join(ds.oxides)}); "
                   "it takes no part in phase-equilibrium calculations")
    return out


def state_properties(state: StandardState, molar_mass_kg_per_mol: float) -> dict[str, float]:
    """JSON fields of a one-endmember, one-point :class:`StandardState` (units in the names)."""
    values = {
        "gibbs_energy_j_per_mol": state.g_j_per_mol,
        "enthalpy_j_per_mol": state.h_j_per_mol,
        "entropy_j_per_mol_k": state.s_j_per_mol_k,
        "heat_capacity_j_per_mol_k": state.cp_j_per_mol_k,
        "volume_m3_per_mol": state.v_m3_per_mol,
        "density_kg_per_m3": molar_mass_kg_per_mol / state.v_m3_per_mol,
        "thermal_expansivity_per_k": state.alpha_per_k,
        "bulk_modulus_gpa": state.k_t_pa / 1e9,
    }
    return {key: float(np.asarray(val).reshape(-1)[0]) for key, val in values.items()}


@blueprint.get("/datasets/<dataset_id>/endmembers/<name>")
def endmember_properties(dataset_id: str, name: str) -> dict[str, Any]:
    """Standard-state properties of one endmember at ``pressure_gpa`` and ``temperature_k``."""
    ds = get_dataset(dataset_id)
    if name not in ds.info:
        raise not_found("name", f"unknown endmember {name!r} in dataset {ds.id}; list them at "
                                f"/v1/datasets/{ds.id}/endmembers")
    query = load_query(StatePointQuery(ds.pressure_range_gpa, ds.temperature_range_k))
    p_gpa, t_k = query["pressure_gpa"], query["temperature_k"]
    state = standard_state(ds.endmembers.subset([name]), p_gpa * 1e9, t_k)
    values = state_properties(state, ds.info[name].molar_mass_kg_per_mol)
    if not all(np.isfinite(list(values.values()))):
        raise OutOfDomainError("pressure_gpa", f"the equation of state of {name} has no solution at "
                                               f"{p_gpa:g} GPa and {t_k:g} K")
    params = {"operation": "v1/endmember_properties", "dataset_id": ds.id, "name": name,
              "pressure_gpa": p_gpa, "temperature_k": t_k}
    return {"name": name, "pressure_gpa": p_gpa, "temperature_k": t_k, **values,
            "provenance": build_provenance(ds, params, endmember_warnings(ds, name))}
