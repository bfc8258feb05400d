"""Property tables for convection codes: h, s, ρ, cp, α, φ over (P, T) and T(P, h), T(P, s).

For each pressure a row of converged states is computed down a regular
temperature axis (warm-started along T), with the effective derivatives
(:func:`thermo.energetics.path_derivatives`) at every node and every phase
boundary located by root finding (:mod:`thermo.saturation`). The states just
above and below each boundary ("boundary points") are part of the output:
they carry the step of h at an isobaric invariant and the jumps of cp_eff,
α_eff and dφ/dT at the liquidus and solidus, and they are nodes of the
enthalpy- and entropy-indexed forms, so T(h) is flat (at the invariant
temperature) across an invariant's latent heat. This is the refinement of
the T grid near phase boundaries: exact states at T* ± ε instead of extra
grid nodes, so the T axis itself stays regular.

The enthalpy- and entropy-indexed forms use one regular axis for all
pressures, spanning the union of the rows' ranges (h at fixed T grows with P
by ∫v dP, so the rows' ranges need not overlap); outside a row's own range
the values are NaN (missing). They are interpolated, row by row, with
the monotone piecewise-cubic Hermite interpolant (Fritsch & Carlson 1980,
SIAM J. Numer. Anal. 17:238; :class:`scipy.interpolate.PchipInterpolator`),
which keeps T(h) monotone and does not overshoot the data.

Index order: arrays are C-ordered [pressure, temperature] (temperature varies
fastest); likewise [pressure, enthalpy] and [pressure, entropy]. Rows are
computed in parallel, one pressure per task, in a process pool; the numbers
do not depend on the number of processes.
"""

from __future__ import annotations

import itertools
import multiprocessing
import os
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field

import numpy as np
from scipy.interpolate import PchipInterpolator

from thermo.energetics import Derivatives, State, path_derivatives, solve_state
from thermo.equilibrium import Problem
from thermo.errors import InputError
from thermo.saturation import BoundaryFinder, all_liquid, has_liquid
from thermo.sensitivity import predict
from thermo.validity import check_conditions

#: Gridded fields: name → (UDUNITS units, description).
FIELDS: dict[str, tuple[str, str]] = {
    "specific_enthalpy_j_per_kg": ("J kg-1", "specific enthalpy of the equilibrium assemblage"),
    "specific_entropy_j_per_kg_k": ("J kg-1 K-1", "specific entropy of the equilibrium assemblage"),
    "density_kg_per_m3": ("kg m-3", "density of the equilibrium assemblage"),
    "heat_capacity_frozen_j_per_kg_k": (
        "J kg-1 K-1", "intrinsic isobaric heat capacity (phase amounts and compositions fixed)"),
    "heat_capacity_effective_j_per_kg_k": (
        "J kg-1 K-1", "effective isobaric heat capacity dh/dT (latent heat included)"),
    "thermal_expansivity_frozen_per_k": (
        "K-1", "intrinsic thermal expansivity (phase amounts and compositions fixed)"),
    "thermal_expansivity_effective_per_k": (
        "K-1", "effective thermal expansivity (1/v) dv/dT (melting volume change included)"),
    "melt_fraction": ("1", "mass fraction of liquid"),
    "melt_fraction_derivative_per_k": ("K-1", "temperature derivative of the melt fraction along the isobar"),
}
#: Fields of the enthalpy- and entropy-indexed forms (besides the other index).
INDEXED_FIELDS = ("temperature_k", "density_kg_per_m3", "heat_capacity_effective_j_per_kg_k",
                  "heat_capacity_frozen_j_per_kg_k", "melt_fraction")
REFERENCE_STATE = ("specific enthalpy and entropy per kg of the bulk composition, referred to the elements in their "
                   "reference states at 298.15 K and 1 bar (the Holland & Powell 2011 convention of the dataset)")
INDEX_ORDER = ("C order, temperature fastest: by_temperature[i_pressure, i_temperature]; "
               "by_enthalpy[i_pressure, i_enthalpy]; by_entropy[i_pressure, i_entropy]")


@dataclass(frozen=True)
class TableSettings:
    """Numerical settings of :func:`property_table`."""

    delta_k: float = 0.02  # finite-difference step of the effective derivatives [K]
    integral_tolerance: float = 1e-3  # relative tolerance of the ∫cp_eff dT = Δh check (end-corrected trapezoid)
    workers: int | None = None  # processes (None: all cores; 1: serial in this process)


@dataclass(frozen=True)
class PropertyTable:
    """Tables over pressure and temperature, and their h- and s-indexed forms (see module docstring)."""

    pressure_gpa: np.ndarray
    temperature_k: np.ndarray
    by_temperature: dict[str, np.ndarray]
    solidus: dict[str, np.ndarray]  # temperature_k, specific_entropy_j_per_kg_k, specific_enthalpy_j_per_kg
    liquidus: dict[str, np.ndarray]
    enthalpy_axis_j_per_kg: np.ndarray
    by_enthalpy: dict[str, np.ndarray]  # NaN outside the row's enthalpy range
    enthalpy_range_j_per_kg: np.ndarray  # (n_pressures, 2): h at t_min_k and t_max_k of each row
    entropy_axis_j_per_kg_k: np.ndarray
    by_entropy: dict[str, np.ndarray]
    entropy_range_j_per_kg_k: np.ndarray
    boundary_points: dict[str, np.ndarray]
    checks: dict
    metadata: dict = field(default_factory=dict)


# ------------------------------------------------------------------ rows
def _values(state: State, problem: Problem, delta_k: float, d: Derivatives | None = None) -> dict[str, float]:
    d = d if d is not None else path_derivatives(problem, state, delta_k)
    p = state.props
    return {
        "cp_effective_slope": d.cp_effective_slope_j_per_kg_k2,
        "specific_enthalpy_j_per_kg": p.h_j_per_kg, "specific_entropy_j_per_kg_k": p.s_j_per_kg_k,
        "density_kg_per_m3": p.density_kg_per_m3, "heat_capacity_frozen_j_per_kg_k": p.cp_frozen_j_per_kg_k,
        "heat_capacity_effective_j_per_kg_k": d.cp_effective_j_per_kg_k,
        "thermal_expansivity_frozen_per_k": p.alpha_frozen_per_k,
        "thermal_expansivity_effective_per_k": d.alpha_effective_per_k, "melt_fraction": p.melt_fraction,
        "melt_fraction_derivative_per_k": d.melt_fraction_derivative_per_k,
    }


def _limit(boundaries, which: str) -> dict[str, float]:
    """T, s and h of the liquidus (above side) or solidus (below side) of one row, NaN if not met."""
    for b in boundaries:
        if which == "liquidus" and all_liquid(b.above) and not all_liquid(b.below):
            st = b.above
        elif which == "solidus" and has_liquid(b.above) and not has_liquid(b.below):
            st = b.below
        else:
            continue
        return {"temperature_k": b.temperature_k, "specific_entropy_j_per_kg_k": st.props.s_j_per_kg_k,
                "specific_enthalpy_j_per_kg": st.props.h_j_per_kg}
    return dict.fromkeys(("temperature_k", "specific_entropy_j_per_kg_k", "specific_enthalpy_j_per_kg"), np.nan)


def table_row(problem: Problem, pressure_gpa: float, temperatures_k: np.ndarray, delta_k: float) -> dict:
    """One pressure row: values on the T axis (ascending), boundary points, solidus, liquidus, ∫cp check."""
    p_pa = pressure_gpa * 1e9
    finder = BoundaryFinder(p_pa)
    states: list[State] = []
    derivs: list[Derivatives] = []
    for t in temperatures_k[::-1]:
        warm = states[-1] if states else None
        if warm is not None and derivs[-1].rates is not None:  # moved along its branch: fewer Newton steps
            warm = State(predict(warm.eq, derivs[-1].rates, float(t)), warm.props)
        states.append(solve_state(problem, p_pa, float(t), warm=warm, neighbour_step_k=delta_k))
        derivs.append(path_derivatives(problem, states[-1], delta_k))
    bounds = [b for up, low in itertools.pairwise(states) for b in finder.locate(problem, up, low)]
    grid = [_values(s, problem, delta_k, d) for s, d in zip(states[::-1], derivs[::-1], strict=True)]
    points = []
    for k, b in enumerate(bounds):
        for side, st in ((-1, b.below), (1, b.above)):
            points.append({"boundary": k, "side": side, "temperature_k": st.temperature_k,
                           **_values(st, problem, delta_k)})
    return {
        "values": {f: np.array([g[f] for g in grid]) for f in FIELDS},
        "points": points, "liquidus": _limit(bounds, "liquidus"), "solidus": _limit(bounds, "solidus"),
        "integral_residual": _integral_residual(temperatures_k, grid, points),
    }


def _row_task(args) -> dict:
    return table_row(*args)


def _integral_residual(temperatures_k, grid, points) -> float:
    """|∫cp_eff dT + Σ steps across boundaries − Δh| / |Δh| over the row.

    Between consecutive nodes (grid and boundary points, in T) the end-corrected
    trapezoid rule, (ΔT/2)(c0 + c1) − (ΔT²/12)(c1′ − c0′) with c′ = d²h/dT² at the
    nodes (Euler–Maclaurin; Davis & Rabinowitz 1984, Methods of Numerical
    Integration, §2.9); between the two sides of one boundary the exact
    difference of h. The residual thus measures the consistency of cp_eff with h,
    not the coarseness of the grid.
    """
    nodes = [(t, -1, g) for t, g in zip(temperatures_k, grid, strict=True)]
    nodes += [(p["temperature_k"], p["boundary"], p) for p in points]
    nodes.sort(key=lambda n: n[0])
    total = 0.0
    for (t0, b0, v0), (t1, b1, v1) in itertools.pairwise(nodes):
        if b0 >= 0 and b0 == b1:
            total += v1["specific_enthalpy_j_per_kg"] - v0["specific_enthalpy_j_per_kg"]
        else:
            dt = t1 - t0
            total += 0.5 * dt * (v0["heat_capacity_effective_j_per_kg_k"] + v1["heat_capacity_effective_j_per_kg_k"])
            total -= dt * dt / 12.0 * (v1["cp_effective_slope"] - v0["cp_effective_slope"])
    dh = grid[-1]["specific_enthalpy_j_per_kg"] - grid[0]["specific_enthalpy_j_per_kg"]
    return abs(total - dh) / abs(dh)


# ------------------------------------------------------- indexed forms
def _nodes(row: dict, key: str) -> dict[str, np.ndarray]:
    """Grid and boundary-point values of one row sorted by ``key``, strictly increasing in it."""
    cols = {f: list(row["values"][f]) for f in FIELDS}
    cols["temperature_k"] = list(row["temperatures_k"])
    for p in row["points"]:
        for f in cols:
            cols[f].append(p[f])
    order = np.argsort(cols[key], kind="stable")
    out = {f: np.asarray(v, float)[order] for f, v in cols.items()}
    keep = np.concatenate([[True], np.diff(out[key]) > 0])
    return {f: v[keep] for f, v in out.items()}


def _indexed(rows: list[dict], key: str, other: str, n: int):
    """Regular axis over the union of the rows' ``key`` ranges, PCHIP fields (NaN outside a row's range),
    and each row's covered range (n_pressures, 2)."""
    nodes = [_nodes(r, key) for r in rows]
    ranges = np.array([[nd[key][0], nd[key][-1]] for nd in nodes])
    axis = np.linspace(ranges[:, 0].min(), ranges[:, 1].max(), n)
    fields = {f: np.array([PchipInterpolator(nd[key], nd[f], extrapolate=False)(axis) for nd in nodes])
              for f in (*INDEXED_FIELDS, other)}
    return axis, fields, ranges


# ------------------------------------------------------------- checks
def _nan_count(indexed) -> int:
    """NaN inside each row's covered range of the indexed forms (outside it NaN means 'not computed')."""
    count = 0
    for axis, fields, ranges in indexed:
        inside = (axis[None, :] >= ranges[:, :1]) & (axis[None, :] <= ranges[:, 1:])
        count += sum(int(np.count_nonzero(~np.isfinite(a) & inside)) for a in fields.values())
    return count


def check_table(by_temperature: dict, solidus_k, liquidus_k, integral_residuals, indexed: list[tuple],
                tolerance: float) -> dict:
    """Checks a table must pass before it is served; each entry has ``passed`` and the numbers.

    0 ≤ φ ≤ 1; solidus below liquidus where both are found; h strictly increasing
    with T; ∫cp_eff dT (plus the steps across boundaries) equal to Δh within
    ``tolerance`` (relative, per pressure row); no NaN in the T-indexed fields nor
    inside each row's covered range of the indexed forms. ``indexed`` holds
    (axis, fields, ranges) of the h- and s-indexed forms.
    """
    phi = by_temperature["melt_fraction"]
    both = np.isfinite(solidus_k) & np.isfinite(liquidus_k)
    gap = float(np.max(np.asarray(solidus_k)[both] - np.asarray(liquidus_k)[both])) if both.any() else None
    dh = float(np.min(np.diff(by_temperature["specific_enthalpy_j_per_kg"], axis=1)))
    worst = float(np.max(integral_residuals))
    nans = int(sum(np.count_nonzero(~np.isfinite(a)) for a in by_temperature.values())) + _nan_count(indexed)
    checks = {
        "melt_fraction_within_0_1": {"passed": bool(phi.min() >= 0.0 and phi.max() <= 1.0),
                                     "min": float(phi.min()), "max": float(phi.max())},
        "solidus_below_liquidus": {"passed": gap is None or gap <= 0.0, "max_solidus_minus_liquidus_k": gap},
        "enthalpy_increases_with_temperature": {"passed": dh > 0.0, "min_increment_j_per_kg": dh},
        "cp_effective_integrates_to_enthalpy": {"passed": worst <= tolerance, "max_relative_residual": worst,
                                                "tolerance": tolerance},
        "no_nan": {"passed": nans == 0, "nan_count": nans},
    }
    checks["all_passed"] = all(c["passed"] for c in checks.values())
    return checks


# ------------------------------------------------------------------ main
def _rows(problem, pressures, temps, settings, progress=None) -> list[dict]:
    """One row per pressure, in order; ``progress(nodes_done, nodes_total)`` after each finished row."""
    tasks = [(problem, float(p), temps, settings.delta_k) for p in pressures]
    workers = settings.workers or os.cpu_count() or 1
    total = len(tasks) * len(temps)

    def report(rows_done: int) -> None:
        if progress is not None:
            progress(rows_done * len(temps), total)

    if workers == 1 or len(tasks) == 1:
        rows = []
        for t in tasks:
            rows.append(_row_task(t))
            report(len(rows))
    else:
        ctx = multiprocessing.get_context("spawn")
        with ProcessPoolExecutor(max_workers=min(workers, len(tasks)), mp_context=ctx) as pool:
            futures = [pool.submit(_row_task, t) for t in tasks]
            try:
                for done, _ in enumerate(as_completed(futures), 1):
                    report(done)
            except BaseException:  # a cancelled job: rows not started never start (running ones finish)
                pool.shutdown(wait=False, cancel_futures=True)
                raise
            rows = [fut.result() for fut in futures]
    for r in rows:
        r["temperatures_k"] = temps
    return rows


def _points_table(rows: list[dict]) -> dict[str, np.ndarray]:
    keys = ("temperature_k", "side", *FIELDS)
    out = {"pressure_index": np.array([i for i, r in enumerate(rows) for _ in r["points"]], int)}
    for k in keys:
        out[k] = np.array([p[k] for r in rows for p in r["points"]], int if k == "side" else float)
    return out


def property_table(
    problem: Problem,
    pressures_gpa,
    t_min_k: float,
    t_max_k: float,
    n_temperatures: int,
    n_enthalpy: int | None = None,
    n_entropy: int | None = None,
    settings: TableSettings | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> PropertyTable:
    """Tables of h, s, ρ, cp and α (frozen and effective), φ and dφ/dT over (P, T), with T(P, h) and T(P, s).

    Parameters
    ----------
    problem : Problem
        Bulk composition (per kg) and candidate phases.
    pressures_gpa : array_like
        Pressures [GPa] (one row each).
    t_min_k, t_max_k : float
        Temperature range [K] of the regular T axis.
    n_temperatures : int
        Number of T nodes (≥ 2).
    n_enthalpy, n_entropy : int, optional
        Nodes of the regular h and s axes (default: ``n_temperatures``). The axes
        span the range common to all pressures.
    settings : TableSettings, optional
    progress : callable, optional
        Called as ``progress(nodes_done, nodes_total)`` as pressure rows finish; an exception it raises
        (a cancelled job) cancels the rows not started and stops the table.

    Returns
    -------
    PropertyTable
        With ``checks`` (pass/fail and numbers) and ``metadata`` (index order,
        reference state, units, dataset id and checksum, bulk composition).
    """
    cfg = settings or TableSettings()
    pressures = np.atleast_1d(np.asarray(pressures_gpa, float))
    if n_temperatures < 2 or not t_max_k > t_min_k:
        raise InputError("temperature_k", "need t_max_k > t_min_k and at least 2 temperatures")
    check_conditions(problem.dataset, pressures, [t_min_k, t_max_k])
    temps = np.linspace(t_min_k, t_max_k, n_temperatures)
    rows = _rows(problem, pressures, temps, cfg, progress)
    by_t = {f: np.array([r["values"][f] for r in rows]) for f in FIELDS}
    h_form = _indexed(rows, "specific_enthalpy_j_per_kg", "specific_entropy_j_per_kg_k", n_enthalpy or n_temperatures)
    s_form = _indexed(rows, "specific_entropy_j_per_kg_k", "specific_enthalpy_j_per_kg", n_entropy or n_temperatures)
    limits = {w: {k: np.array([r[w][k] for r in rows]) for k in rows[0][w]} for w in ("solidus", "liquidus")}
    checks = check_table(by_t, limits["solidus"]["temperature_k"], limits["liquidus"]["temperature_k"],
                         [r["integral_residual"] for r in rows], [h_form, s_form], cfg.integral_tolerance)
    return PropertyTable(
        pressure_gpa=pressures, temperature_k=temps, by_temperature=by_t, solidus=limits["solidus"],
        liquidus=limits["liquidus"], enthalpy_axis_j_per_kg=h_form[0], by_enthalpy=h_form[1],
        enthalpy_range_j_per_kg=h_form[2], entropy_axis_j_per_kg_k=s_form[0], by_entropy=s_form[1],
        entropy_range_j_per_kg_k=s_form[2], boundary_points=_points_table(rows), checks=checks,
        metadata=_metadata(problem, cfg),
    )


def _metadata(problem: Problem, cfg: TableSettings) -> dict:
    return {
        "index_order": INDEX_ORDER, "reference_state": REFERENCE_STATE,
        "dataset_id": problem.dataset.id, "dataset_checksum": problem.dataset.checksum,
        "bulk_wt_percent": {k: v for k, v in problem.bulk.wt_percent().items() if v > 0},
        "derivative_step_k": cfg.delta_k,
        "boundary_points": "converged states just above (side +1) and below (side -1) each located phase boundary",
        "missing_values": ("NaN: solidus/liquidus not inside the temperature range; h- and s-indexed values "
                           "outside the row's own h (s) range, i.e. outside t_min_k..t_max_k at that pressure"),
    }
