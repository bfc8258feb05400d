"""Validity domain checks: refuse pressures and temperatures outside a dataset's range."""

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
