"""Convert the team's reference table into heatpath's own endmember file.

Reads ``../shared/reference/endmembers_hp2011.csv`` (Holland & Powell 2011,
J. Metamorph. Geol. 29:333-383, values recalled and checked as described in
its companion note) and writes ``thermo/data/heatpath-ncfmas-2026a/endmembers.csv``
in SI-derived units with heatpath identifiers. Rows without numbers are skipped.

Usage: python scripts/import_endmembers.py [path/to/endmembers_hp2011.csv]
"""

from __future__ import annotations

import csv
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_SOURCE = ROOT.parent / "shared" / "reference" / "endmembers_hp2011.csv"
TARGET = ROOT / "thermo" / "data" / "heatpath-ncfmas-2026a" / "endmembers.csv"

IDENTIFIERS = {
    "forsterite": "forsterite",
    "fayalite": "fayalite",
    "Mg-wadsleyite": "mg_wadsleyite",
    "Fe-wadsleyite": "fe_wadsleyite",
    "Mg-ringwoodite": "mg_ringwoodite",
    "Fe-ringwoodite": "fe_ringwoodite",
    "enstatite (orthopyroxene)": "enstatite",
    "ferrosilite (orthopyroxene)": "ferrosilite",
    "Mg-Tschermak pyroxene": "mg_tschermak",
    "diopside": "diopside",
    "hedenbergite": "hedenbergite",
    "Ca-Tschermak pyroxene": "ca_tschermak",
    "jadeite": "jadeite",
    "clinoenstatite (low-P, P2_1/c)": "clinoenstatite",
    "high-pressure clinoenstatite (C2/c)": "hp_clinoenstatite",
    "pyrope": "pyrope",
    "almandine": "almandine",
    "grossular": "grossular",
    "majorite": "majorite",
    "spinel": "spinel",
    "hercynite": "hercynite",
    "corundum": "corundum",
    "periclase": "periclase",
    "ferropericlase FeO endmember (wustite-structure FeO)": "fe_periclase",
    "lime": "lime",
    "rutile": "rutile",
    "ilmenite": "ilmenite",
    "geikielite": "geikielite",
    "eskolaite": "eskolaite",
    "quartz": "quartz",
    "coesite": "coesite",
    "stishovite": "stishovite",
    "kyanite": "kyanite",
    "sillimanite": "sillimanite",
    "andalusite (extra row, used in checks)": "andalusite",
    "albite (low, ordered)": "albite",
    "high albite (disordered)": "high_albite",
    "anorthite": "anorthite",
    "microcline (extra row)": "microcline",
    "sanidine (K-feldspar)": "sanidine",
    "nepheline": "nepheline",
    "wollastonite": "wollastonite",
    "MgSiO3 perovskite (bridgmanite)": "mg_bridgmanite",
    "FeSiO3 perovskite": "fe_bridgmanite",
    "Al2O3 perovskite (AlAlO3)": "al_bridgmanite",
    "CaSiO3 perovskite": "ca_perovskite",
    "MgSiO3 akimotoite (ilmenite structure)": "mg_akimotoite",
    "forsterite liquid": "forsterite_liquid",
    "fayalite liquid": "fayalite_liquid",
    "enstatite liquid": "enstatite_liquid",
    "diopside liquid": "diopside_liquid",
    "anorthite liquid": "anorthite_liquid",
    "albite liquid": "albite_liquid",
    "silica liquid": "silica_liquid",
    "corundum liquid": "corundum_liquid",
}

# (our column, reference column, factor to our unit)
COLUMNS = [
    ("h0_j_per_mol", "H0_kJ_mol", 1e3),
    ("s0_j_per_mol_k", "S0_J_K_mol", 1.0),
    ("v0_m3_per_mol", "V0_J_bar", 1e-5),
    ("cp_a_j_per_mol_k", "cp_a_kJ_K_mol", 1e3),
    ("cp_b_j_per_mol_k2", "cp_b_kJ_K2_mol", 1e3),
    ("cp_c_j_k_per_mol", "cp_c_kJ_K_mol", 1e3),
    ("cp_d_j_per_mol_k05", "cp_d_kJ_K05_mol", 1e3),
    ("alpha0_per_k", "alpha0_1_K", 1.0),
    ("k0_gpa", "K0_kbar", 0.1),
    ("k0_prime", "K0_prime", 1.0),
    ("k0_dprime_per_gpa", "K0_dprime_1_kbar", 10.0),
    ("landau_tc0_k", "landau_Tc0_K", 1.0),
    ("landau_smax_j_per_mol_k", "landau_Smax_J_K_mol", 1.0),
    ("landau_vmax_m3_per_mol", "landau_Vmax_J_bar", 1e-5),
    ("order_dh_j_per_mol", "bw_dH_kJ_mol", 1e3),
    ("order_dv_m3_per_mol", "bw_dV_J_bar", 1e-5),
    ("order_w_j_per_mol", "bw_W_kJ_mol", 1e3),
    ("order_wv_m3_per_mol", "bw_Wv_J_bar", 1e-5),
    ("order_n", "bw_n", 1.0),
    ("order_factor", "bw_factor", 1.0),
]
TEXT = [("confidence", "confidence"), ("recall_status", "status"), ("source", "source"), ("notes", "notes")]


def _fmt(value: float) -> str:
    return f"{value:.10g}"


def convert(source: Path) -> list[dict[str, str]]:
    out = []
    for row in csv.DictReader(source.open(encoding="utf-8")):
        if not row["H0_kJ_mol"].strip():
            continue
        rec = {"name": IDENTIFIERS[row["name"]], "formula": row["formula"], "state": row["state"],
               "n_atoms": row["n_atoms"]}
        for ours, theirs, factor in COLUMNS:
            raw = row[theirs].strip()
            rec[ours] = _fmt(float(raw) * factor) if raw else ""
        for ours, theirs in TEXT:
            rec[ours] = row[theirs].strip()
        out.append(rec)
    return out


def main(argv: list[str]) -> None:
    source = Path(argv[1]) if len(argv) > 1 else DEFAULT_SOURCE
    rows = convert(source)
    TARGET.parent.mkdir(parents=True, exist_ok=True)
    with TARGET.open("w", encoding="utf-8", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(rows[0]), lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)
    print(f"wrote {len(rows)} endmembers to {TARGET.relative_to(ROOT)}")


if __name__ == "__main__":
    main(sys.argv)
