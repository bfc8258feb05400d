"""Loading and validating heatpath datasets.

A dataset is a directory under ``thermo/data/`` holding ``manifest.toml`` (id,
oxide components, validity domain, list of files) and the files it lists. Its
checksum is the SHA-256 of the manifest and every listed file (name and bytes,
in manifest order), so any change to the data changes the stamp results carry.
"""

from __future__ import annotations

import csv
import hashlib
import math
import tomllib
from dataclasses import dataclass, field, replace
from functools import lru_cache
from pathlib import Path
from typing import Any

import numpy as np

from thermo.composition import oxide_stoichiometry
from thermo.elements import molar_mass_g_per_mol
from thermo.endmembers import EndmemberParameters
from thermo.errors import DatasetError, HeatpathError, InputError

DATA_DIR = Path(__file__).resolve().parent / "data"
DEFAULT_DATASET_ID = "heatpath-ncfmas-2026a"

_REQUIRED = (
    "h0_j_per_mol", "s0_j_per_mol_k", "v0_m3_per_mol", "cp_a_j_per_mol_k", "cp_b_j_per_mol_k2",
    "cp_c_j_k_per_mol", "cp_d_j_per_mol_k05", "alpha0_per_k", "k0_gpa", "k0_prime", "k0_dprime_per_gpa",
)
_LANDAU = ("landau_tc0_k", "landau_smax_j_per_mol_k", "landau_vmax_m3_per_mol")
_ORDER = (
    "order_dh_j_per_mol", "order_dv_m3_per_mol", "order_w_j_per_mol", "order_wv_m3_per_mol", "order_n", "order_factor",
)
_TEXT = ("name", "formula", "state", "confidence", "recall_status", "source")
_POSITIVE = ("v0_m3_per_mol", "k0_gpa", "n_atoms")
#: Oxides of cations outside a dataset's components; endmembers carrying them load
#: (for standard-state queries) but are kept out of phase-equilibrium calculations.
OUTSIDE_OXIDES = ("TiO2", "Cr2O3", "K2O", "MnO", "NiO", "P2O5", "H2O")


@dataclass(frozen=True)
class EndmemberInfo:
    """Descriptive data of one endmember."""

    name: str
    formula: str
    state: str
    molar_mass_kg_per_mol: float
    source: str
    confidence: str
    recall_status: str
    notes: str


@dataclass(frozen=True)
class Dataset:
    """A loaded, validated dataset."""

    id: str
    title: str
    checksum: str
    oxides: tuple[str, ...]
    pressure_range_gpa: tuple[float, float]
    temperature_range_k: tuple[float, float]
    endmembers: EndmemberParameters
    info: dict[str, EndmemberInfo]
    stoichiometry: np.ndarray  # (n_endmembers, n_oxides) moles of oxide per formula unit
    in_system: np.ndarray  # (n_endmembers,) True where the endmember lies inside ``oxides``
    extra: dict[str, Any] = field(default_factory=dict)  # other parsed files, by stem
    #: pressures [GPa] over which the melt model is calibrated (None: the whole validity domain)
    melt_model_pressure_range_gpa: tuple[float, float] | None = None

    def index(self, name: str) -> int:
        """Position of an endmember; raises :class:`InputError` for unknown names."""
        try:
            return self.endmembers.names.index(name)
        except ValueError:
            raise InputError("endmember", f"unknown endmember {name!r} in dataset {self.id}") from None

    @property
    def molar_mass_kg_per_mol(self) -> np.ndarray:
        return np.array([self.info[n].molar_mass_kg_per_mol for n in self.endmembers.names])


def _num(path: Path, row: int, name: str, key: str, raw: str, required: bool) -> float:
    raw = (raw or "").strip()
    if not raw:
        if required:
            raise DatasetError(f"{path.name}: row {row} ({name}): field {key!r} is missing")
        return math.nan
    try:
        value = float(raw)
    except ValueError:
        raise DatasetError(f"{path.name}: row {row} ({name}): field {key!r} is not a number: {raw!r}") from None
    if not math.isfinite(value):
        raise DatasetError(f"{path.name}: row {row} ({name}): field {key!r} is not finite")
    return value


def _read_row(path: Path, row_no: int, rec: dict[str, str], oxides: tuple[str, ...]):
    name = (rec.get("name") or "").strip()
    for key in _TEXT:
        if not (rec.get(key) or "").strip():
            raise DatasetError(f"{path.name}: row {row_no} ({name or '?'}): field {key!r} is missing")
    if rec["state"] not in ("solid", "liquid"):
        raise DatasetError(f"{path.name}: row {row_no} ({name}): field 'state' must be 'solid' or 'liquid'")
    vals = {k: _num(path, row_no, name, k, rec.get(k, ""), True) for k in (*_REQUIRED, "n_atoms")}
    vals.update({k: _num(path, row_no, name, k, rec.get(k, ""), False) for k in (*_LANDAU, *_ORDER)})
    for key in _POSITIVE:
        if vals[key] <= 0:
            raise DatasetError(f"{path.name}: row {row_no} ({name}): field {key!r} must be positive")
    for group in (_LANDAU, _ORDER):
        present = [not math.isnan(vals[k]) for k in group]
        if any(present) and not all(present):
            raise DatasetError(
                f"{path.name}: row {row_no} ({name}): fields {', '.join(group)} must be all set or all empty"
            )
    try:
        mass = molar_mass_g_per_mol(rec["formula"]) / 1000.0
        stoich = oxide_stoichiometry(rec["formula"], oxides + OUTSIDE_OXIDES)
    except HeatpathError as exc:
        raise DatasetError(f"{path.name}: row {row_no} ({name}): field 'formula': {exc}") from None
    info = EndmemberInfo(name, rec["formula"], rec["state"], mass, rec["source"], rec["confidence"],
                         rec["recall_status"], (rec.get("notes") or "").strip())
    return vals, info, stoich


def read_endmembers(path: Path, oxides: tuple[str, ...]):
    """Read and validate an endmember CSV; returns parameters, info and stoichiometry."""
    rows, infos, stoich, first_row = [], {}, [], {}
    with path.open(encoding="utf-8", newline="") as fh:
        for row_no, rec in enumerate(csv.DictReader(fh), start=2):
            vals, info, vec = _read_row(path, row_no, rec, oxides)
            if info.name in infos:
                raise DatasetError(
                    f"{path.name}: row {row_no} ({info.name}): field 'name' repeats row {first_row[info.name]}"
                )
            first_row[info.name] = row_no
            rows.append(vals)
            infos[info.name] = info
            stoich.append(vec)
    if not rows:
        raise DatasetError(f"{path.name}: no endmember rows")
    col = {k: np.array([r[k] for r in rows]) for k in rows[0]}
    params = EndmemberParameters(
        names=tuple(infos),
        is_liquid=np.array([i.state == "liquid" for i in infos.values()]),
        n_atoms=col["n_atoms"], h0=col["h0_j_per_mol"], s0=col["s0_j_per_mol_k"], v0=col["v0_m3_per_mol"],
        cp_a=col["cp_a_j_per_mol_k"], cp_b=col["cp_b_j_per_mol_k2"], cp_c=col["cp_c_j_k_per_mol"],
        cp_d=col["cp_d_j_per_mol_k05"], alpha0=col["alpha0_per_k"], k0_pa=col["k0_gpa"] * 1e9,
        k0_prime=col["k0_prime"], k0_dprime_per_pa=col["k0_dprime_per_gpa"] * 1e-9,
        landau=np.stack([col[k] for k in _LANDAU], axis=1),
        order=np.stack([col[k] for k in _ORDER], axis=1),
    )
    return params, infos, np.array(stoich)


def checksum(directory: Path, files: list[str]) -> str:
    """SHA-256 over the manifest and the listed files (name and bytes)."""
    digest = hashlib.sha256()
    for name in ["manifest.toml", *files]:
        digest.update(name.encode() + b"\0")
        digest.update((directory / name).read_bytes())
    return digest.hexdigest()


def _manifest(directory: Path) -> dict[str, Any]:
    path = directory / "manifest.toml"
    try:
        man = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise DatasetError(f"{path}: cannot read manifest: {exc}") from None
    for key in ("id", "title", "oxides", "files", "validity"):
        if key not in man:
            raise DatasetError(f"{path.name}: missing key {key!r}")
    for key in ("pressure_gpa", "temperature_k", "melt_model_pressure_gpa"):
        rng = man["validity"].get(key)
        if key == "melt_model_pressure_gpa" and rng is None:
            continue
        if not (isinstance(rng, list) and len(rng) == 2 and rng[0] < rng[1]):
            raise DatasetError(f"{path.name}: validity.{key} must be [low, high] with low < high")
    return man


def _listed_files(directory: Path, man: dict[str, Any]) -> list[str]:
    """The manifest's ``files``: they must exist and include endmembers.csv (the checksum covers only these)."""
    files = list(man["files"])
    if "endmembers.csv" not in files:
        raise DatasetError("manifest.toml: key 'files' must list endmembers.csv (only listed files are checksummed)")
    for name in files:
        if not (directory / name).is_file():
            raise DatasetError(f"manifest.toml: key 'files' lists {name!r}, which does not exist")
    return files


# --- liquid volumes (liquid_volumes.toml) -------------------------------------------------------------------------
_LIQUID_VOLUME_KEYS = {
    "reference_temperature_k", "volume_cm3_per_mol", "bulk_modulus_gpa", "k_prime", "source", "fitted_to", "note",
}


def apply_liquid_volumes(params: EndmemberParameters, table: dict[str, Any] | None) -> EndmemberParameters:
    """Per-liquid volume and bulk-modulus factors from ``liquid_volumes.toml`` (thermo.liquid_eos).

    The file states, for a liquid, its volume and/or isothermal bulk modulus at 1 bar and a
    reference temperature; they are turned into factors on the endmembers.csv V0 and K0 (which
    stay as recalled). An entry may also replace the liquid's K′ (``k_prime``, where the melting
    data demand it; docs/liquid-volumes.md). Without the file every liquid keeps factors 1, its
    recalled K′ and the default Anderson–Grüneisen δ (thermo.liquid_eos).
    """
    from thermo.liquid_eos import DEFAULT_ANDERSON_GRUNEISEN_DELTA, one_bar_state

    table = table or {}
    delta = table.get("anderson_gruneisen_delta", DEFAULT_ANDERSON_GRUNEISEN_DELTA)
    if not (isinstance(delta, int | float) and math.isfinite(delta) and 0.0 <= delta <= 10.0):
        raise DatasetError("liquid_volumes.toml: anderson_gruneisen_delta must be a number in [0, 10]")
    out = np.column_stack([np.ones(len(params.names)), np.ones(len(params.names)), float(delta) * params.alpha0])
    k_prime = params.k0_prime.copy()
    for name, entry in table.get("liquids", {}).items():
        where = f"liquid_volumes.toml: [liquids.{name}]"
        if name not in params.names or not params.is_liquid[params.names.index(name)]:
            raise DatasetError(f"{where}: not a liquid endmember of endmembers.csv")
        if set(entry) - _LIQUID_VOLUME_KEYS:
            raise DatasetError(f"{where}: unknown keys {sorted(set(entry) - _LIQUID_VOLUME_KEYS)}")
        values = {k: entry.get(k) for k in ("reference_temperature_k", "volume_cm3_per_mol", "bulk_modulus_gpa")}
        if not all(v is None or (isinstance(v, int | float) and math.isfinite(v) and v > 0) for v in values.values()):
            raise DatasetError(f"{where}: temperature, volume and bulk modulus must be positive numbers")
        if values["reference_temperature_k"] is None or not entry.get("source"):
            raise DatasetError(f"{where}: reference_temperature_k and source are required")
        i = params.names.index(name)
        v1, k1 = one_bar_state(values["reference_temperature_k"], params.v0[i], params.alpha0[i], params.k0_pa[i],
                               out[i, 2])
        if values["volume_cm3_per_mol"] is not None:
            out[i, 0] = values["volume_cm3_per_mol"] * 1e-6 / v1
        if values["bulk_modulus_gpa"] is not None:
            out[i, 1] = values["bulk_modulus_gpa"] * 1e9 / k1
        if "k_prime" in entry:
            kp = entry["k_prime"]
            if not (isinstance(kp, int | float) and math.isfinite(kp) and 1.0 < kp < 20.0):
                raise DatasetError(f"{where}: k_prime must be a number in (1, 20)")
            k_prime[i] = float(kp)
    return replace(params, liquid_volume=out, k0_prime=k_prime)


# --- liquid calibration (liquid_calibration.toml) ----------------------------------------------------------------
def apply_liquid_calibration(
    params: EndmemberParameters, extra: dict[str, Any]
) -> tuple[EndmemberParameters, dict[str, Any]]:
    """Apply the fitted liquid parameters of ``liquid_calibration.toml`` (written by calibration/fit_liquid.py).

    The file holds shifts of liquid endmember H0 and S0 (``[[endmember_adjustments]]``:
    ``dh0_j_per_mol``, ``ds0_j_per_mol_k``), the liquid's mixing-unit counts
    (``[mixing_units.<species>] value``), whether the van Laar asymmetry equals those counts
    (``asymmetry = "units"``) and its interaction energies (``[[interactions]]``: ``pair``,
    ``w_h_j_per_mol``, ``w_s_j_per_mol_k``, ``w_v_m3_per_mol``). The shifts change the
    endmember parameters; the rest replaces the corresponding keys of the ``[solution.<name>]``
    table of solutions.toml. Without the file nothing changes.
    """
    cal = extra.get("liquid_calibration")
    if not cal:
        return params, extra
    where = "liquid_calibration.toml"
    name = cal.get("solution", "liquid")
    solutions = {k: dict(v) for k, v in extra.get("solutions", {}).get("solution", {}).items()}
    if name not in solutions:
        raise DatasetError(f"{where}: key 'solution' names {name!r}, which solutions.toml does not define")
    spec = solutions[name]
    species = list(spec.get("endmembers", []))
    h0, s0 = params.h0.copy(), params.s0.copy()
    for adj in cal.get("endmember_adjustments", []):
        em = adj.get("endmember")
        if em not in params.names or not params.is_liquid[params.names.index(em)]:
            raise DatasetError(f"{where}: endmember_adjustments: {em!r} is not a liquid endmember of endmembers.csv")
        values = (float(adj.get("dh0_j_per_mol", 0.0)), float(adj.get("ds0_j_per_mol_k", 0.0)))
        if not all(math.isfinite(v) for v in values) or not adj.get("fitted_to"):
            raise DatasetError(f"{where}: endmember_adjustments of {em}: finite shifts and 'fitted_to' are required")
        h0[params.names.index(em)] += values[0]
        s0[params.names.index(em)] += values[1]
    units = {k: float(v["value"]) for k, v in cal.get("mixing_units", {}).items()}
    if any(k not in species for k in units) or not all(math.isfinite(v) and v > 0 for v in units.values()):
        raise DatasetError(f"{where}: mixing_units must name species of [{name}] with positive values")
    if units:
        spec["mixing_units"] = units
        spec["asymmetry"] = dict(units) if cal.get("asymmetry") == "units" else {}
    if "interactions" in cal:
        for inter in cal["interactions"]:
            if any(e not in species for e in inter.get("pair", [])) or not inter.get("fitted_to"):
                raise DatasetError(f"{where}: interaction {inter.get('pair')}: unknown species or no 'fitted_to'")
        keys = ("pair", "w_h_j_per_mol", "w_s_j_per_mol_k", "w_v_m3_per_mol")
        spec["interactions"] = [{k: inter[k] for k in keys if k in inter} for inter in cal["interactions"]]
    solutions[name] = spec
    extra = {**extra, "solutions": {**extra["solutions"], "solution": solutions}}
    return replace(params, h0=h0, s0=s0), extra


def load_dataset_dir(directory: Path) -> Dataset:
    """Load and validate the dataset stored in ``directory``."""
    man = _manifest(directory)
    oxides = tuple(man["oxides"])
    files = _listed_files(directory, man)
    params, infos, stoich = read_endmembers(directory / "endmembers.csv", oxides)
    extra = {}
    for name in files:
        if name.endswith(".toml"):
            try:
                extra[Path(name).stem] = tomllib.loads((directory / name).read_text(encoding="utf-8"))
            except tomllib.TOMLDecodeError as exc:
                raise DatasetError(f"{name}: not valid TOML: {exc}") from None
    params = apply_liquid_volumes(params, extra.get("liquid_volumes"))
    params, extra = apply_liquid_calibration(params, extra)
    return Dataset(
        id=man["id"], title=man["title"], checksum=checksum(directory, files), oxides=oxides,
        pressure_range_gpa=tuple(man["validity"]["pressure_gpa"]),
        temperature_range_k=tuple(man["validity"]["temperature_k"]),
        endmembers=params, info=infos, stoichiometry=stoich[:, : len(oxides)],
        in_system=~np.any(stoich[:, len(oxides) :] > 0, axis=1), extra=extra,
        melt_model_pressure_range_gpa=(tuple(man["validity"]["melt_model_pressure_gpa"])
                                       if "melt_model_pressure_gpa" in man["validity"] else None),
    )


def available_datasets() -> list[str]:
    """Ids of the datasets shipped under ``thermo/data``."""
    return sorted(p.name for p in DATA_DIR.iterdir() if (p / "manifest.toml").is_file())


@lru_cache(maxsize=8)
def load_dataset(dataset_id: str = DEFAULT_DATASET_ID) -> Dataset:
    """Load a shipped dataset by id (cached).

    Raises
    ------
    InputError
        If no dataset has that id.
    """
    if dataset_id not in available_datasets():
        raise InputError("dataset", f"unknown dataset {dataset_id!r}; available: {', '.join(available_datasets())}")
    return load_dataset_dir(DATA_DIR / dataset_id)
