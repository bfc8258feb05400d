"""The ``provenance`` block every result carries, and the canonical request hash.

A result is reproducible from (dataset checksum, code version, request hash):
the hash identifies the request by its *parsed* parameters, so ``3`` and
``3.0`` or a different order of query parameters give the same hash.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterable, Mapping
from typing import Any

import thermo
from thermo.dataset import Dataset


def code_version() -> str:
    """Version of the heatpath code that computes results."""
    return thermo.__version__


def canonical_json(value: Any) -> str:
    """Canonical JSON text: sorted keys, no whitespace, UTF-8 characters kept, NaN refused.

    Floats are written with Python's shortest round-trip representation.
    """
    return json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)


def request_hash(params: Mapping[str, Any]) -> str:
    """SHA-256 (hex) of the canonical JSON of the request parameters.

    ``params`` should name the operation as well as its inputs so that two
    operations with the same inputs do not share a hash.
    """
    return hashlib.sha256(canonical_json(dict(params)).encode("utf-8")).hexdigest()


def build_provenance(dataset: Dataset, params: Mapping[str, Any], warnings: Iterable[str] = ()) -> dict[str, Any]:
    """The ``provenance`` object of a result computed with ``dataset`` for request ``params``."""
    return {
        "dataset_id": dataset.id,
        "dataset_checksum": dataset.checksum,
        "code_version": code_version(),
        "request_hash": request_hash(params),
        "warnings": list(warnings),
    }
