"""Provenance block and canonical request hash (service/provenance.py)."""

from __future__ import annotations

import hashlib

import pytest

import thermo
from service.provenance import build_provenance, canonical_json, code_version, request_hash
from thermo.dataset import load_dataset


def test_canonical_json_sorts_keys_and_has_no_whitespace():
    assert canonical_json({"b": 1, "a": [1.5, "é"], "c": {"z": None, "y": True}}) == (
        '{"a":[1.5,"é"],"b":1,"c":{"y":true,"z":null}}'
    )


def test_canonical_json_refuses_nan():
    with pytest.raises(ValueError):
        canonical_json({"x": float("nan")})


def test_request_hash_is_sha256_of_the_canonical_json():
    params = {"temperature_k": 1500.0, "pressure_gpa": 3.0}
    expected = hashlib.sha256(b'{"pressure_gpa":3.0,"temperature_k":1500.0}').hexdigest()
    assert request_hash(params) == expected


def test_request_hash_ignores_key_order_but_not_values():
    assert request_hash({"a": 1.0, "b": 2.0}) == request_hash({"b": 2.0, "a": 1.0})
    assert request_hash({"a": 1.0, "b": 2.0}) != request_hash({"a": 1.0, "b": 2.5})


def test_provenance_names_dataset_checksum_code_version_and_warnings():
    ds = load_dataset()
    prov = build_provenance(ds, {"operation": "x"}, ["careful"])
    assert prov == {
        "dataset_id": ds.id, "dataset_checksum": ds.checksum, "code_version": thermo.__version__,
        "request_hash": request_hash({"operation": "x"}), "warnings": ["careful"],
    }
    assert code_version() == thermo.__version__
