"""Loading, validating and checksumming datasets (thermo.dataset)."""

from __future__ import annotations

import csv
import re
import shutil
import tomllib
from pathlib import Path

import numpy as np
import pytest

from thermo.dataset import DATA_DIR, DEFAULT_DATASET_ID, available_datasets, load_dataset, load_dataset_dir
from thermo.errors import DatasetError, InputError

#: Molar masses [g/mol] from the ``molar_mass_g_mol`` column of reference/endmembers_hp2011.csv
#: (computed there from IUPAC atomic weights, Prohaska et al. 2022, Pure Appl. Chem. 94:573); cristobalite,
#: derived in this project from NIST-JANAF and not in that table, is SiO2 like quartz; the nepheline liquid, derived
#: here too (calibration/nepheline_liquid.py), is NaAlSiO4 like nepheline.
REFERENCE_MOLAR_MASS_G_PER_MOL = {
    "forsterite": 140.691, "fayalite": 203.772, "mg_wadsleyite": 140.691, "fe_wadsleyite": 203.772,
    "mg_ringwoodite": 140.691, "fe_ringwoodite": 203.772, "enstatite": 200.775, "ferrosilite": 263.855,
    "mg_tschermak": 202.348, "diopside": 216.548, "hedenbergite": 248.088, "ca_tschermak": 218.121,
    "jadeite": 202.136, "clinoenstatite": 200.775, "hp_clinoenstatite": 200.775, "pyrope": 403.123,
    "almandine": 497.743, "grossular": 450.442, "majorite": 401.550, "spinel": 142.264, "hercynite": 173.804,
    "corundum": 101.960, "periclase": 40.304, "fe_periclase": 71.844, "lime": 56.077, "rutile": 79.865,
    "ilmenite": 151.709, "geikielite": 120.169, "eskolaite": 151.989, "quartz": 60.084, "cristobalite": 60.084,
    "coesite": 60.084,
    "stishovite": 60.084, "kyanite": 162.044, "sillimanite": 162.044, "andalusite": 162.044, "albite": 262.220,
    "high_albite": 262.220, "anorthite": 278.204, "microcline": 278.328, "sanidine": 278.328, "nepheline": 142.053,
    "wollastonite": 116.160, "mg_bridgmanite": 100.388, "fe_bridgmanite": 131.928, "al_bridgmanite": 101.960,
    "ca_perovskite": 116.160, "mg_akimotoite": 100.388, "forsterite_liquid": 140.691, "fayalite_liquid": 203.772,
    "enstatite_liquid": 200.775, "diopside_liquid": 216.548, "anorthite_liquid": 278.204, "albite_liquid": 262.220,
    "silica_liquid": 60.084, "corundum_liquid": 101.960, "nepheline_liquid": 142.053,
}  # fmt: skip


@pytest.fixture
def dataset_copy(tmp_path: Path) -> Path:
    """A writable copy of the shipped dataset directory."""
    target = tmp_path / DEFAULT_DATASET_ID
    shutil.copytree(DATA_DIR / DEFAULT_DATASET_ID, target)
    return target


def _edit_row(directory: Path, index: int, **changes: str) -> int:
    """Change fields of data row ``index`` (0-based) of endmembers.csv; returns its line number."""
    path = directory / "endmembers.csv"
    with path.open(encoding="utf-8", newline="") as fh:
        reader = csv.DictReader(fh)
        fields, rows = reader.fieldnames, list(reader)
    rows[index].update(changes)
    with path.open("w", encoding="utf-8", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=fields)
        writer.writeheader()
        writer.writerows(rows)
    return index + 2  # line 1 is the header


def test_shipped_dataset_loads_with_57_endmembers():
    ds = load_dataset()
    assert ds.id == DEFAULT_DATASET_ID
    assert DEFAULT_DATASET_ID in available_datasets()
    assert len(ds.endmembers.names) == 57  # 55 recalled rows + cristobalite (JANAF) and nepheline liquid (derived)
    assert ds.oxides == ("SiO2", "Al2O3", "FeO", "MgO", "CaO", "Na2O")
    assert 0.0 <= ds.pressure_range_gpa[0] < ds.pressure_range_gpa[1]
    assert 0.0 < ds.temperature_range_k[0] < ds.temperature_range_k[1]
    assert int(ds.endmembers.is_liquid.sum()) == 9


def test_stoichiometry_and_system_membership():
    ds = load_dataset()
    np.testing.assert_array_equal(ds.stoichiometry[ds.index("forsterite")], [1, 0, 0, 2, 0, 0])
    np.testing.assert_array_equal(ds.stoichiometry[ds.index("albite")], [3, 0.5, 0, 0, 0, 0.5])
    assert ds.in_system[ds.index("diopside")]
    for outside in ("rutile", "eskolaite", "microcline", "ilmenite"):
        assert not ds.in_system[ds.index(outside)]


def test_molar_masses_match_reference_table():
    ds = load_dataset()
    assert set(REFERENCE_MOLAR_MASS_G_PER_MOL) == set(ds.endmembers.names)
    for name, reference in REFERENCE_MOLAR_MASS_G_PER_MOL.items():
        assert 1000.0 * ds.info[name].molar_mass_kg_per_mol == pytest.approx(reference, abs=0.01), name


def test_unknown_dataset_id_is_an_input_error():
    with pytest.raises(InputError) as err:
        load_dataset("no-such-dataset")
    assert err.value.field == "dataset"
    assert DEFAULT_DATASET_ID in err.value.message


def test_unknown_endmember_name_is_an_input_error():
    with pytest.raises(InputError, match="unknown endmember 'unobtainium'"):
        load_dataset().index("unobtainium")


def test_checksum_is_sha256_hex_and_reproducible(dataset_copy):
    shipped = load_dataset().checksum
    assert re.fullmatch(r"[0-9a-f]{64}", shipped)
    assert load_dataset_dir(dataset_copy).checksum == shipped


def test_checksum_changes_when_one_data_byte_changes(dataset_copy):
    path = dataset_copy / "endmembers.csv"
    data = path.read_bytes()
    assert data.count(b"-2172590") == 1  # forsterite H0
    path.write_bytes(data.replace(b"-2172590", b"-2172591"))
    edited = load_dataset_dir(dataset_copy)
    assert edited.checksum != load_dataset().checksum
    assert edited.endmembers.h0[edited.index("forsterite")] == -2172591.0


def _listed_files() -> list[str]:
    text = (DATA_DIR / DEFAULT_DATASET_ID / "manifest.toml").read_text(encoding="utf-8")
    return ["manifest.toml", *tomllib.loads(text)["files"]]


@pytest.mark.parametrize("name", _listed_files())
def test_checksum_changes_when_any_listed_file_changes(dataset_copy, name):
    # one appended newline: a blank line, so every file still parses to the same content
    path = dataset_copy / name
    path.write_bytes(path.read_bytes() + b"\n")
    edited = load_dataset_dir(dataset_copy)
    assert edited.checksum != load_dataset().checksum
    np.testing.assert_array_equal(edited.endmembers.h0, load_dataset().endmembers.h0)


def test_listed_file_that_is_missing_is_refused(dataset_copy):
    (dataset_copy / "endmembers.csv").unlink()
    with pytest.raises(DatasetError, match=re.escape("manifest.toml: key 'files' lists 'endmembers.csv'")):
        load_dataset_dir(dataset_copy)


def test_manifest_must_list_the_endmember_table(dataset_copy):
    path = dataset_copy / "manifest.toml"
    path.write_text(re.sub(r"(?m)^files = .*$", "files = []", path.read_text(encoding="utf-8")), encoding="utf-8")
    with pytest.raises(DatasetError, match=re.escape("must list endmembers.csv")):
        load_dataset_dir(dataset_copy)


def test_invalid_toml_data_file_names_the_file(dataset_copy):
    toml_files = [n for n in _listed_files() if n.endswith(".toml") and n != "manifest.toml"]
    if not toml_files:
        pytest.skip("the shipped dataset lists no TOML data file")
    path = dataset_copy / toml_files[0]
    path.write_text(path.read_text(encoding="utf-8") + "\n[[broken\n", encoding="utf-8")
    with pytest.raises(DatasetError, match=re.escape(f"{toml_files[0]}: not valid TOML")):
        load_dataset_dir(dataset_copy)


MALFORMED = [
    pytest.param(0, {"h0_j_per_mol": ""}, "h0_j_per_mol", "missing", id="missing-field"),
    pytest.param(4, {"k0_gpa": "17x.3"}, "k0_gpa", "not a number", id="non-numeric"),
    pytest.param(9, {"cp_a_j_per_mol_k": "inf"}, "cp_a_j_per_mol_k", "not finite", id="non-finite"),
    pytest.param(21, {"v0_m3_per_mol": "-2.558e-05"}, "v0_m3_per_mol", "positive", id="negative-volume"),
    pytest.param(1, {"formula": "Fe2(SiO4)"}, "'formula'", "cannot parse", id="bad-formula"),
    pytest.param(2, {"formula": "Mg2XxO4"}, "'formula'", "unknown element 'Xx'", id="unknown-element"),
    pytest.param(3, {"state": "glass"}, "'state'", "solid", id="bad-state"),
    pytest.param(6, {"name": "forsterite"}, "'name'", "repeats row 2", id="duplicate-name"),
    pytest.param(29, {"landau_vmax_m3_per_mol": ""}, "landau_vmax_m3_per_mol", "all set or all empty",
                 id="partial-landau-group"),
    pytest.param(20, {"order_n": ""}, "order_n", "all set or all empty", id="partial-order-group"),
]


@pytest.mark.parametrize(("index", "changes", "field", "words"), MALFORMED)
def test_malformed_row_names_file_row_and_field(dataset_copy, index, changes, field, words):
    line = _edit_row(dataset_copy, index, **changes)
    with pytest.raises(DatasetError) as err:
        load_dataset_dir(dataset_copy)
    message = str(err.value)
    assert message.startswith(f"endmembers.csv: row {line} ")
    assert field in message
    assert words in message


def test_malformed_cases_edit_the_intended_rows(dataset_copy):
    # guard for the indices used above: quartz carries Landau parameters, hercynite Bragg-Williams ones
    with (dataset_copy / "endmembers.csv").open(encoding="utf-8", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert rows[29]["name"] == "quartz" and rows[29]["landau_tc0_k"]
    assert rows[20]["name"] == "hercynite" and rows[20]["order_n"]


def test_manifest_without_required_key_is_refused(dataset_copy):
    path = dataset_copy / "manifest.toml"
    text = path.read_text(encoding="utf-8")
    path.write_text(re.sub(r"(?m)^oxides = .*$", "", text), encoding="utf-8")
    with pytest.raises(DatasetError, match=re.escape("manifest.toml: missing key 'oxides'")):
        load_dataset_dir(dataset_copy)


def test_melt_model_range_is_read_and_a_bad_one_refused(dataset_copy):
    assert load_dataset_dir(dataset_copy).melt_model_pressure_range_gpa == (0.0, 9.0)
    path = dataset_copy / "manifest.toml"
    text = path.read_text(encoding="utf-8")
    path.write_text(text.replace("melt_model_pressure_gpa = [0.0, 9.0]", "melt_model_pressure_gpa = [9.0, 0.0]"),
                    encoding="utf-8")
    with pytest.raises(DatasetError, match=re.escape("validity.melt_model_pressure_gpa must be")):
        load_dataset_dir(dataset_copy)


def test_results_above_the_melt_model_range_are_flagged_and_those_inside_are_not():
    """The calibrated range of the default melt model ends at 9 GPa: from 10 GPa ferropericlase coexists with
    peridotite-like liquid above its liquidus, from about 11 GPa at any temperature (docs/dataset.md)."""
    from thermo.dataset import load_dataset
    from thermo.validity import melt_model_warnings

    ds = load_dataset()
    assert melt_model_warnings(ds, 9.0) == [] and melt_model_warnings(ds, [1.0, 9.0]) == []
    (warning,) = melt_model_warnings(ds, [9.0, 10.0])
    assert "above 9 GPa" in warning and "extrapolated" in warning


def test_two_liquids_are_flagged_and_one_is_not():
    from thermo.validity import coexisting_liquids_warnings

    assert coexisting_liquids_warnings(1) == [] and coexisting_liquids_warnings([0, 1, 1]) == []
    (warning,) = coexisting_liquids_warnings([1, 2, 1], "at some rows of the path")
    assert "two coexisting liquids (at some rows of the path)" in warning and "artefact" in warning
