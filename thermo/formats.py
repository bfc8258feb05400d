"""Serialisation of property tables and cooling paths: JSON-ready dicts, CSV, netCDF-3 (CF).

CSV layout (heatpath's own): header lines start with ``#`` and read
``# key: value``; ``column`` lines give ``name | units | description`` for
every column in order; structured values (solidus, liquidus, checks,
metadata, provenance) are compact JSON with NaN written as null. Then one
comma-separated line of column names and one line per record. Numbers are
written with the shortest representation that reads back to the same
double (``repr``), so a round trip is exact.

netCDF-3 (64-bit offset) via :class:`scipy.io.netcdf_file`, following the CF
conventions (CF-1.10): a coordinate variable per dimension, ``units``
(UDUNITS strings) and ``long_name`` on every variable, ``_FillValue`` where
values can be missing, ``flag_values``/``flag_meanings`` on the side flag.
No ``standard_name`` is set: the CF standard-name table has no entries for
these properties of silicate melts and rocks, and none is invented.
"""

from __future__ import annotations

import csv
import io
import json
import math
from dataclasses import asdict, fields, is_dataclass

import numpy as np
from scipy.io import netcdf_file

from thermo.errors import InputError
from thermo.paths import CoolingPath
from thermo.tables import FIELDS, REFERENCE_STATE, PropertyTable

CF_CONVENTIONS = "CF-1.10"
NETCDF_FILL_DOUBLE = 9.969209968386869e36  # netCDF default fill value for doubles
AXIS_UNITS = {"pressure_gpa": ("GPa", "pressure"), "temperature_k": ("K", "temperature")}
TABLE_FORMS = ("temperature", "enthalpy", "entropy", "boundaries")


def _clean(x):
    """JSON-ready copy: arrays to lists, numpy scalars to Python, NaN/inf to None."""
    if isinstance(x, dict):
        return {str(k): _clean(v) for k, v in x.items()}
    if isinstance(x, list | tuple | np.ndarray):
        return [_clean(v) for v in x]
    if isinstance(x, np.bool_ | bool):
        return bool(x)
    if isinstance(x, np.integer):
        return int(x)
    if isinstance(x, float | np.floating):
        return float(x) if math.isfinite(x) else None
    return x


def _units(name: str) -> tuple[str, str]:
    if name in FIELDS:
        return FIELDS[name]
    if name in AXIS_UNITS:
        return AXIS_UNITS[name]
    if name == "side":
        return "1", "side of the phase boundary: -1 just below, +1 just above"
    raise KeyError(name)


# ------------------------------------------------------------------ JSON
def table_to_dict(table: PropertyTable, provenance: dict | None = None) -> dict:
    """JSON-ready dict of a table (NaN written as None)."""
    units = {k: _units(k)[0] for k in (*AXIS_UNITS, *FIELDS)}
    return _clean({
        "index_order": table.metadata.get("index_order"), "reference_state": REFERENCE_STATE, "units": units,
        "pressure_gpa": table.pressure_gpa, "temperature_k": table.temperature_k,
        "by_temperature": table.by_temperature, "solidus": table.solidus, "liquidus": table.liquidus,
        "enthalpy_axis_j_per_kg": table.enthalpy_axis_j_per_kg, "by_enthalpy": table.by_enthalpy,
        "enthalpy_range_j_per_kg": table.enthalpy_range_j_per_kg,
        "entropy_axis_j_per_kg_k": table.entropy_axis_j_per_kg_k, "by_entropy": table.by_entropy,
        "entropy_range_j_per_kg_k": table.entropy_range_j_per_kg_k,
        "boundary_points": table.boundary_points, "checks": table.checks, "metadata": table.metadata,
        "provenance": provenance or {},
    })


def path_to_dict(path: CoolingPath, provenance: dict | None = None) -> dict:
    """JSON-ready dict of a cooling path."""
    d = {f.name: _plain(getattr(path, f.name)) for f in fields(path) if not f.name.startswith("_")}
    d["saturation_sequence"] = [asdict(e) for e in path.saturation_sequence()]
    d["reference_state"] = REFERENCE_STATE
    d["provenance"] = provenance or {}
    return _clean(d)


def _plain(value):
    """Dataclasses (and tuples of them) as dicts, other values unchanged."""
    if is_dataclass(value):
        return asdict(value)
    if isinstance(value, tuple | list):
        return [_plain(v) for v in value]
    return value


# ------------------------------------------------------------------- CSV
def _table_columns(table: PropertyTable, form: str) -> dict[str, np.ndarray]:
    n_p = len(table.pressure_gpa)
    if form == "boundaries":
        bp = table.boundary_points
        cols = {"pressure_gpa": table.pressure_gpa[bp["pressure_index"]], "temperature_k": bp["temperature_k"],
                "side": bp["side"]}
        return cols | {f: bp[f] for f in FIELDS}
    axis_name, axis, data = {
        "temperature": ("temperature_k", table.temperature_k, table.by_temperature),
        "enthalpy": ("specific_enthalpy_j_per_kg", table.enthalpy_axis_j_per_kg, table.by_enthalpy),
        "entropy": ("specific_entropy_j_per_kg_k", table.entropy_axis_j_per_kg_k, table.by_entropy),
    }[form]
    cols = {"pressure_gpa": np.repeat(table.pressure_gpa, len(axis)), axis_name: np.tile(axis, n_p)}
    return cols | {k: v.ravel() for k, v in data.items() if k != axis_name}


def _header(lines: list[str], key: str, value) -> None:
    text = value if isinstance(value, str) else json.dumps(_clean(value), separators=(",", ":"))
    lines.append(f"# {key}: {text}")


def _num(x) -> str:
    return repr(float(x)) if not isinstance(x, int | np.integer) else str(int(x))


def _table_column(name: str) -> tuple[str, str]:
    return _units(name) if name != "phase" else ("", "")


def _write_csv(title: str, meta: list[tuple[str, object]], cols: dict[str, np.ndarray], describe=_table_column) -> str:
    """CSV text: ``#`` header lines (title, one line per column with unit and description, metadata), then rows."""
    lines = [f"# {title}"]
    for name in cols:
        unit, desc = describe(name)
        lines.append(f"# column: {name} | {unit} | {desc}")
    for key, value in meta:
        _header(lines, key, value)
    out = io.StringIO()
    out.write("\n".join(lines) + "\n")
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(list(cols))
    for row in zip(*cols.values(), strict=True):
        writer.writerow([_num(v) for v in row])
    return out.getvalue()


def table_to_csv(table: PropertyTable, form: str = "temperature", provenance: dict | None = None) -> str:
    """CSV text of one form of a table: ``temperature``, ``enthalpy``, ``entropy`` or ``boundaries``.

    One line per node, pressure varying slowest (the boundary form: one line per
    boundary point, grouped by pressure).
    """
    if form not in TABLE_FORMS:
        raise InputError("form", f"must be one of {', '.join(TABLE_FORMS)} (got {form!r})")
    order = {"boundaries": "one line per boundary point, grouped by pressure (pressure_gpa column)"}.get(
        form, f"one line per (pressure, {form}) node; pressure varies slowest, {form} fastest")
    meta = [("form", form), ("index_order", order), ("reference_state", REFERENCE_STATE),
            ("solidus", table.solidus | {"pressure_gpa": table.pressure_gpa}),
            ("liquidus", table.liquidus | {"pressure_gpa": table.pressure_gpa}),
            ("enthalpy_range_j_per_kg", table.enthalpy_range_j_per_kg),
            ("entropy_range_j_per_kg_k", table.entropy_range_j_per_kg_k),
            ("missing_values", "nan marks values not computed (see metadata.missing_values)"),
            ("checks", table.checks), ("metadata", table.metadata), ("provenance", provenance or {})]
    return _write_csv("heatpath property table", meta, _table_columns(table, form))


def read_csv(text: str) -> dict:
    """Parse heatpath CSV text: ``{"header": {...}, "columns": {name: ndarray}}``.

    Header values that are JSON are decoded; ``column`` lines are collected in
    order as (name, units, description).
    """
    header: dict = {"column": []}
    body = []
    for line in text.splitlines():
        if line.startswith("# ") and ": " in line:
            key, value = line[2:].split(": ", 1)
            if key == "column":
                header["column"].append(tuple(s.strip() for s in value.split("|")))
                continue
            try:
                header[key] = json.loads(value)
            except json.JSONDecodeError:
                header[key] = value
        elif not line.startswith("#") and line:
            body.append(line)
    rows = list(csv.reader(body))
    names, data = rows[0], rows[1:]
    cols = {n: np.array([float(r[i]) for r in data]) for i, n in enumerate(names)}
    return {"header": header, "columns": cols}


#: Cooling-path CSV columns: (column name, the same name as in the JSON steps of /v1/cooling-paths) →
#: PathPoint attribute. Step and cumulative heats are per kg of the starting parcel.
_PATH_COLUMNS = (
    ("temperature_k", "temperature_k"), ("melt_fraction", "melt_fraction"),
    ("system_mass_kg_per_kg_initial", "system_mass_kg_per_kg_initial"),
    ("specific_enthalpy_j_per_kg", "specific_enthalpy_j_per_kg"),
    ("specific_entropy_j_per_kg_k", "specific_entropy_j_per_kg_k"),
    ("heat_capacity_frozen_j_per_kg_k", "cp_frozen_j_per_kg_k"),
    ("heat_capacity_effective_j_per_kg_k", "cp_effective_j_per_kg_k"),
    ("latent_heat_rate_j_per_kg_k", "latent_heat_rate_j_per_kg_k"),
    ("thermal_expansivity_frozen_per_k", "alpha_frozen_per_k"),
    ("thermal_expansivity_effective_per_k", "alpha_effective_per_k"),
    ("density_kg_per_m3", "density_kg_per_m3"),
    ("heat_released_j_per_kg", "step_heat_released_j_per_kg_initial"),
    ("latent_heat_j_per_kg", "step_latent_heat_j_per_kg_initial"),
    ("entropy_change_j_per_kg_k", "step_entropy_change_j_per_k_per_kg_initial"),
    ("cumulative_latent_heat_j_per_kg", "cumulative_latent_heat_j_per_kg_initial"),
)
_PATH_UNITS = {"k": "K", "per_k": "K-1", "j_per_kg": "J kg-1", "j_per_kg_k": "J kg-1 K-1", "kg_per_m3": "kg m-3",
               "kg_per_kg_initial": "kg kg-1", "j_per_kg_initial": "J kg-1", "j_per_k_per_kg_initial": "J K-1 kg-1"}


def path_to_csv(path: CoolingPath, provenance: dict | None = None) -> str:
    """CSV text of a cooling path: one line per row, plus the mass fraction of every phase met."""
    names = sorted({ph.name for pt in path.points for ph in pt.phases})
    cols = {c: np.array([getattr(pt, attr) for pt in path.points], float) for c, attr in _PATH_COLUMNS}
    for n in names:
        cols[f"mass_fraction_{n}"] = np.array(
            [next((ph.mass_fraction for ph in pt.phases if ph.name == n), 0.0) for pt in path.points])
    meta = [("mode", path.mode), ("pressure_gpa", path.pressure_gpa), ("reference_state", REFERENCE_STATE),
            ("liquidus_k", path.liquidus_k), ("solidus_k", path.solidus_k), ("notes", list(path.notes)),
            ("diagnostics", path.diagnostics), ("provenance", provenance or {})]
    return _write_csv("heatpath cooling path", meta, cols, describe=_path_column)


def _path_column(name: str) -> tuple[str, str]:
    unit = next((u for k, u in sorted(_PATH_UNITS.items(), key=lambda kv: -len(kv[0])) if name.endswith(k)), "1")
    return unit, name.replace("_", " ")


# ---------------------------------------------------------------- netCDF
def _variable(f, name: str, dims: tuple[str, ...], data, units: str, long_name: str, dtype="d"):
    v = f.createVariable(name, dtype, dims)
    arr = np.asarray(data)
    if dtype == "d":
        arr = np.where(np.isfinite(arr), arr, NETCDF_FILL_DOUBLE)
        v._FillValue = np.array([NETCDF_FILL_DOUBLE], dtype="f8")  # a Python float would be written as float32
    v[:] = arr
    v.units, v.long_name = units, long_name
    return v


def _write_table_netcdf(f, table: PropertyTable, provenance: dict) -> None:
    f.Conventions = CF_CONVENTIONS
    f.title = "heatpath property table"
    f.source = "heatpath thermo.tables (Gibbs energy minimization, Holland & Powell 2011 formalism)"
    f.references = "Holland T.J.B. & Powell R. (2011) J. Metamorph. Geol. 29:333-383"
    f.comment = REFERENCE_STATE
    f.index_order = table.metadata.get("index_order", "")
    f.metadata = json.dumps(_clean(table.metadata))
    f.checks = json.dumps(_clean(table.checks))
    f.checks_all_passed = "true" if table.checks.get("all_passed") else "false"
    f.provenance = json.dumps(_clean(provenance))
    axes = {"pressure": (table.pressure_gpa, "GPa", "pressure"),
            "temperature": (table.temperature_k, "K", "temperature"),
            "enthalpy_axis": (table.enthalpy_axis_j_per_kg, "J kg-1", "specific enthalpy (index of the h-form)"),
            "entropy_axis": (table.entropy_axis_j_per_kg_k, "J kg-1 K-1", "specific entropy (index of the s-form)"),
            "boundary_point": (np.arange(len(table.boundary_points["temperature_k"])), "1", "boundary point index")}
    for dim, (vals, units, long_name) in axes.items():
        f.createDimension(dim, len(vals))
        _variable(f, dim, (dim,), vals, units, long_name, "d" if dim != "boundary_point" else "i")
    for name, arr in table.by_temperature.items():
        _variable(f, name, ("pressure", "temperature"), arr, *FIELDS[name])
    for suffix, dim, data in (("at_enthalpy", "enthalpy_axis", table.by_enthalpy),
                              ("at_entropy", "entropy_axis", table.by_entropy)):
        for name, arr in data.items():
            units, long_name = _units(name)
            _variable(f, f"{name}_{suffix}", ("pressure", dim), arr, units, f"{long_name} on the {dim}")
    for name, rng, units in (("enthalpy", table.enthalpy_range_j_per_kg, "J kg-1"),
                             ("entropy", table.entropy_range_j_per_kg_k, "J kg-1 K-1")):
        for k, end in enumerate(("low", "high")):
            _variable(f, f"{name}_range_{end}", ("pressure",), rng[:, k], units,
                      f"{end} end of the specific {name} covered by the pressure row")
    for which in ("solidus", "liquidus"):
        for name, arr in getattr(table, which).items():
            units, long_name = FIELDS.get(name, AXIS_UNITS.get(name))
            _variable(f, f"{which}_{name}", ("pressure",), arr, units, f"{which}: {long_name}")
    _write_boundary_points(f, table.boundary_points)


def _write_boundary_points(f, bp: dict) -> None:
    _variable(f, "boundary_pressure_index", ("boundary_point",), bp["pressure_index"].astype(np.int32), "1",
              "index of the pressure row of the boundary point", "i")
    _variable(f, "boundary_temperature_k", ("boundary_point",), bp["temperature_k"], "K",
              "temperature of the boundary point")
    side = _variable(f, "boundary_side", ("boundary_point",), bp["side"].astype(np.int8), "1",
                     "side of the phase boundary", "b")
    side.flag_values = np.array([-1, 1], np.int8)
    side.flag_meanings = "just_below just_above"
    for name in FIELDS:
        _variable(f, f"boundary_{name}", ("boundary_point",), bp[name], *FIELDS[name])


def table_to_netcdf(table: PropertyTable, provenance: dict | None = None) -> bytes:
    """netCDF-3 (64-bit offset) bytes of a table following the CF-1.10 conventions."""
    buf = io.BytesIO()
    f = netcdf_file(buf, "w", version=2)
    _write_table_netcdf(f, table, provenance or {})
    f.flush()
    data = buf.getvalue()
    f.close()
    return data


def read_netcdf(data: bytes) -> dict:
    """Variables (fill values as NaN), variable attributes and global attributes of netCDF bytes."""
    f = netcdf_file(io.BytesIO(data), "r", mmap=False)
    try:
        out = {"attributes": {k: _text(v) for k, v in f._attributes.items()}, "variables": {},
               "variable_attributes": {}}
        for name, var in f.variables.items():
            arr = np.array(var[:], copy=True)
            fill = getattr(var, "_FillValue", None)
            if fill is not None and arr.dtype.kind == "f":
                arr = np.where(arr == fill, np.nan, arr)
            out["variables"][name] = arr
            out["variable_attributes"][name] = {k: _text(v) for k, v in var._attributes.items()}
            out["variable_attributes"][name]["dimensions"] = var.dimensions
        return out
    finally:
        f.close()


def _text(v):
    return v.decode() if isinstance(v, bytes) else v
