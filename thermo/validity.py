"""Validity domain checks: refuse pressures and temperatures outside a dataset's range, and flag
results that lie inside it but outside the range over which its melt model is calibrated."""

from __future__ import annotations

import numpy as np

from thermo.dataset import Dataset
from thermo.errors import OutOfDomainError


def check_conditions(dataset: Dataset, pressure_gpa, temperature_k, p_field="pressure_gpa", t_field="temperature_k"):
    """Raise :class:`OutOfDomainError` naming the field if any value lies outside the dataset domain."""
    for val, (lo, hi), field, unit in (
        (pressure_gpa, dataset.pressure_range_gpa, p_field, "GPa"),
        (temperature_k, dataset.temperature_range_k, t_field, "K"),
    ):
        arr = np.asarray(val, float)
        if not np.all(np.isfinite(arr)):
            raise OutOfDomainError(field, "must be a finite number")
        if np.any(arr < lo) or np.any(arr > hi):
            raise OutOfDomainError(field, f"must lie within the validity domain of {dataset.id}: {lo}-{hi} {unit}")


def melt_model_warnings(dataset: Dataset, pressure_gpa) -> list[str]:
    """A warning if any pressure lies above the dataset's calibrated melt-model range (else none)."""
    rng = dataset.melt_model_pressure_range_gpa
    if rng is None or not np.any(np.asarray(pressure_gpa, float) > rng[1]):
        return []
    return [f"above {rng[1]:g} GPa the melt model of {dataset.id} is extrapolated beyond its calibration: "
            "solidus, liquidus, melt fractions and latent heats there are unreliable; from about 11 GPa the "
            "silica activity of its olivine-rich melts is too low, so ferropericlase beside a liquid is a model "
            "artefact (subsolidus assemblages still follow the experiments; see the dataset page, validity domain "
            "and known weaknesses)"]


def coexisting_liquids_warnings(liquid_counts, where: str = "") -> list[str]:
    """A warning if any state has more than one liquid (``liquid_counts``: number of liquid phases per state).

    The default melt model has a miscibility gap along Mg2SiO4-MgSiO3 liquids (from its large
    forsterite-enstatite interaction, fitted at 1 bar), stable from about 2150 to 2750 K at every
    pressure; no liquid immiscibility is observed there (docs/dataset.md, known weaknesses). Results
    with two liquids say so rather than pass the split off as physics.
    """
    counts = np.atleast_1d(np.asarray(liquid_counts, int))
    if not counts.size or counts.max() < 2:
        return []
    place = f" ({where})" if where else ""
    return [f"two coexisting liquids{place}: the melt model's liquid miscibility gap (Mg2SiO4-MgSiO3-rich "
            "liquids, about 2150-2750 K) is an artefact of its interaction energies, not an observed immiscibility; "
            "treat the split and its latent heats as unreliable (see the dataset page, known weaknesses)"]
