"""GET /v1/datasets and GET /v1/datasets/<id>/endmembers."""

from thermo.dataset import DEFAULT_DATASET_ID as DATASET_ID
from thermo.dataset import available_datasets, load_dataset

ENDMEMBERS_URL = f"/v1/datasets/{DATASET_ID}/endmembers"


def test_dataset_list_describes_every_shipped_dataset(client):
    response = client.get("/v1/datasets")
    assert response.status_code == 200
    rows = response.get_json()["datasets"]
    assert [r["id"] for r in rows] == available_datasets()
    row = next(r for r in rows if r["id"] == DATASET_ID)
    ds = load_dataset(DATASET_ID)
    assert row == {
        "id": ds.id,
        "checksum": ds.checksum,
        "title": ds.title,
        "oxides": list(ds.oxides),
        "endmember_count": len(ds.endmembers.names),
        "validity": {"pressure_gpa": list(ds.pressure_range_gpa), "temperature_k": list(ds.temperature_range_k),
                     "melt_model_pressure_gpa": list(ds.melt_model_pressure_range_gpa)},
    }


def test_endmember_list_gives_every_endmember_with_its_source_and_grade(client):
    response = client.get(ENDMEMBERS_URL)
    assert response.status_code == 200
    body = response.get_json()
    ds = load_dataset(DATASET_ID)
    assert [e["name"] for e in body["endmembers"]] == list(ds.endmembers.names)
    fo = next(e for e in body["endmembers"] if e["name"] == "forsterite")
    info = ds.info["forsterite"]
    assert fo == {
        "name": "forsterite", "formula": "Mg2SiO4", "state": "solid",
        "molar_mass_kg_per_mol": info.molar_mass_kg_per_mol, "source": info.source,
        "confidence": info.confidence, "recall_status": info.recall_status, "notes": info.notes,
    }
    assert {e["state"] for e in body["endmembers"]} == {"solid", "liquid"}


def test_endmember_list_carries_provenance_of_the_dataset(client):
    prov = client.get(ENDMEMBERS_URL).get_json()["provenance"]
    ds = load_dataset(DATASET_ID)
    assert prov["dataset_id"] == ds.id
    assert prov["dataset_checksum"] == ds.checksum
    assert len(prov["request_hash"]) == 64


def test_endmember_list_of_unknown_dataset_is_404_naming_dataset_id(client):
    response = client.get("/v1/datasets/no-such-dataset/endmembers")
    assert response.status_code == 404
    assert response.mimetype == "application/problem+json"
    body = response.get_json()
    assert body["errors"][0]["field"] == "dataset_id"
    assert "no-such-dataset" in body["detail"]
    assert DATASET_ID in body["detail"]  # says what is available
