"""Isobaric cooling paths: equilibrium (closed system) and fractional crystallization.

A path cools a parcel at fixed pressure from a start to a stop temperature on
a regular grid. Every phase boundary inside a step is located by root finding
(:mod:`thermo.saturation`) and inserted as two rows, just above and just below
it, so no step of the path contains a boundary; at an isobaric invariant (a
binary eutectic) the two rows sit at the same temperature (±ε) and the step
between them is the isothermal release of latent heat.

Modes
-----
``equilibrium``
    Closed system: the bulk composition is fixed; every row is the
    equilibrium of the whole parcel.
``fractional``
    At every row the crystals present are removed into a cumulate layer and
    isolated (they no longer react or exchange heat). What a row counts: the
    parcel as it entered the step plus the crystals formed in that step; the
    step is an equilibrium cooling of that closed system, so its energetics
    are exact as in equilibrium mode. Optionally a trapped-melt fraction f
    goes with each layer: the layer is crystals plus melt of mass
    f/(1 − f) × crystal mass (at most all the melt), so f is the layer's
    melt mass fraction. The residual liquid is re-equilibrated at the row's
    temperature (a fresh solve) and becomes the parcel of the next step.
    Energy conservation, tested: H_parcel + Σ H_removed + Σ Q_released = H_initial,
    each H at the temperature where it was counted.

Energetics of a step (from the row above to this row, fixed bulk): heat
released Q = H_above − H_below; sensible part ∫C_frozen dT and ∫S dT by the
end-corrected trapezoid rule with the rows' own path derivatives
(equilibrium mode; no extra states) or by Simpson's rule on sub-step states
(fractional mode, whose refreshed parcel has no derivative on the step's
branch); latent heat = Q − sensible = ∫(cp_eff − cp_frozen) dT; ∫T dS =
[T S] − ∫S dT (tested against Q). cp_eff at each row is exact, by implicit
differentiation of the row's equilibrium (one-sided differences of converged
states next to a boundary; :func:`thermo.energetics.path_derivatives`).

Units: T [K], P [GPa] at the interface; specific quantities per kg of the
material present at the row (``_per_kg``); extensive ones per kg of the
starting parcel (``_per_kg_initial``; equal to per kg in equilibrium mode).
Enthalpy and entropy are referred to the dataset's reference state (elements
at 298.15 K and 1 bar, Holland & Powell 2011).
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from thermo.assemblage import PhaseProperties
from thermo.energetics import (
    Derivatives,
    State,
    StepIntegral,
    integrate_step,
    integrate_step_with_slopes,
    oxide_mass_kg,
    parcel_problem,
    path_derivatives,
    phase_oxide_mol,
    solve_state,
)
from thermo.equilibrium import Problem
from thermo.errors import ConvergenceError, InputError
from thermo.saturation import Boundary, BoundaryFinder, SaturationEvent, all_liquid, has_liquid, saturation_sequence
from thermo.sensitivity import predict
from thermo.validity import check_conditions

MODES = ("equilibrium", "fractional")
#: A progress callback: (units done, units in all).
Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class PathSettings:
    """Numerical settings of :func:`cooling_path`."""

    delta_k: float = 0.02  # finite-difference step of the effective derivatives [K]
    step_quadrature: str = "end_slopes"  # equilibrium steps: "end_slopes" (no extra states) or "simpson"
    simpson_intervals: int = 2  # Simpson sub-intervals per step (fractional steps, or step_quadrature="simpson")
    merge_k: float = 1e-3  # a boundary row closer than this [K] to the previous row is not repeated
    exhausted_fraction: float = 1e-10  # parcel mass [kg per kg initial] below which it is used up


@dataclass(frozen=True)
class PhaseRecord:
    """One phase at a row of a path: its fractions of the material at the row and all its properties."""

    name: str
    is_liquid: bool
    mass_fraction: float  # of the material at the row
    composition_wt_percent: dict[str, float]
    density_kg_per_m3: float
    volume_fraction: float  # of the material at the row
    properties: PhaseProperties  # molar properties, endmember fractions, amount [mol] in the row's material
    system_mass_kg: float  # mass of the material at the row (amount_mol / system_mass_kg = mol per kg)


@dataclass(frozen=True)
class PathPoint:
    """One row of a cooling path; ``step_*`` fields refer to the step ending at this row."""

    temperature_k: float
    kind: str  # "start", "grid", "boundary_above", "boundary_below"
    phases: tuple[PhaseRecord, ...]
    melt_fraction: float
    system_mass_kg_per_kg_initial: float
    specific_enthalpy_j_per_kg: float
    specific_entropy_j_per_kg_k: float
    cp_frozen_j_per_kg_k: float
    cp_effective_j_per_kg_k: float
    latent_heat_rate_j_per_kg_k: float  # cp_effective − cp_frozen
    alpha_frozen_per_k: float
    alpha_effective_per_k: float
    melt_fraction_derivative_per_k: float
    density_kg_per_m3: float
    melt_density_kg_per_m3: float | None
    solid_density_kg_per_m3: float | None
    step_heat_released_j_per_kg_initial: float
    step_latent_heat_j_per_kg_initial: float
    step_sensible_heat_j_per_kg_initial: float
    step_entropy_change_j_per_k_per_kg_initial: float
    step_t_ds_j_per_kg_initial: float
    cumulative_heat_released_j_per_kg_initial: float
    cumulative_latent_heat_j_per_kg_initial: float
    derivative_stencil: str


@dataclass(frozen=True)
class BoundaryRecord:
    """A located boundary as it appears on the path."""

    temperature_k: float
    appearing: tuple[str, ...]
    disappearing: tuple[str, ...]
    variance: int
    isothermal: bool
    specific_enthalpy_above_j_per_kg: float
    specific_enthalpy_below_j_per_kg: float
    heat_released_j_per_kg_initial: float  # across the boundary step (the finite latent heat when isothermal)


@dataclass(frozen=True)
class CumulateLayer:
    """Material removed at one row of a fractional path."""

    temperature_k: float
    mass_kg_per_kg_initial: float
    mineral_proportions: dict[str, float]  # mass fractions of the crystals
    trapped_melt_mass_fraction: float
    density_kg_per_m3: float
    enthalpy_j_per_kg_initial: float


@dataclass(frozen=True)
class CoolingPath:
    """Result of :func:`cooling_path`."""

    mode: str
    pressure_gpa: float
    trapped_melt_fraction: float
    points: tuple[PathPoint, ...]
    boundaries: tuple[BoundaryRecord, ...]
    cumulates: tuple[CumulateLayer, ...]
    liquidus_k: float | None
    solidus_k: float | None
    initial_enthalpy_j_per_kg_initial: float
    final_parcel_mass_kg_per_kg_initial: float
    final_parcel_enthalpy_j_per_kg_initial: float
    notes: tuple[str, ...]
    diagnostics: dict = field(default_factory=dict)

    def saturation_sequence(self) -> list[SaturationEvent]:
        return saturation_sequence(self._boundary_objects)

    _boundary_objects: tuple[Boundary, ...] = ()


# ------------------------------------------------------------------ rows
def _group_density(props, liquid: bool) -> float | None:
    group = [p for p in props.phases if p.is_liquid == liquid and p.mass_kg > 0]
    vol = sum(p.volume_m3 for p in group)
    return sum(p.mass_kg for p in group) / vol if group and vol > 0 else None


def _point(state: State, kind: str, deriv: Derivatives, step: StepIntegral | None, scale: float, totals) -> PathPoint:
    pr = state.props
    sig = set(state.signature)
    phases = tuple(
        PhaseRecord(p.name, p.is_liquid, p.mass_kg / pr.mass_kg, p.composition_wt_percent, p.density_kg_per_m3,
                    pr.volume_fraction(p), p, pr.mass_kg)
        for p in pr.phases if p.name in sig
    )
    z = 0.0
    return PathPoint(
        temperature_k=state.temperature_k, kind=kind, phases=phases, melt_fraction=pr.melt_fraction,
        system_mass_kg_per_kg_initial=pr.mass_kg * scale, specific_enthalpy_j_per_kg=pr.h_j_per_kg,
        specific_entropy_j_per_kg_k=pr.s_j_per_kg_k, cp_frozen_j_per_kg_k=pr.cp_frozen_j_per_kg_k,
        cp_effective_j_per_kg_k=deriv.cp_effective_j_per_kg_k,
        latent_heat_rate_j_per_kg_k=deriv.cp_effective_j_per_kg_k - pr.cp_frozen_j_per_kg_k,
        alpha_frozen_per_k=pr.alpha_frozen_per_k, alpha_effective_per_k=deriv.alpha_effective_per_k,
        melt_fraction_derivative_per_k=deriv.melt_fraction_derivative_per_k, density_kg_per_m3=pr.density_kg_per_m3,
        melt_density_kg_per_m3=_group_density(pr, True), solid_density_kg_per_m3=_group_density(pr, False),
        step_heat_released_j_per_kg_initial=step.heat_released_j * scale if step else z,
        step_latent_heat_j_per_kg_initial=step.latent_heat_j * scale if step else z,
        step_sensible_heat_j_per_kg_initial=step.sensible_heat_j * scale if step else z,
        step_entropy_change_j_per_k_per_kg_initial=step.entropy_change_j_per_k * scale if step else z,
        step_t_ds_j_per_kg_initial=step.t_ds_j * scale if step else z,
        cumulative_heat_released_j_per_kg_initial=totals["heat"],
        cumulative_latent_heat_j_per_kg_initial=totals["latent"], derivative_stencil=deriv.stencil,
    )


def _grid(t_start: float, t_stop: float, step: float) -> np.ndarray:
    n = max(1, int(np.ceil((t_start - t_stop) / step - 1e-9)))
    return np.concatenate([t_start - step * np.arange(n), [t_stop]])


# ------------------------------------------------------------------ runner
class _PathRun:
    """Mutable state of one path computation (parcel, rows, bookkeeping)."""

    def __init__(self, problem: Problem, pressure_gpa: float, mode: str, trapped: float, settings: PathSettings):
        self.p_pa, self.mode, self.trapped, self.cfg = pressure_gpa * 1e9, mode, trapped, settings
        self.finder = BoundaryFinder(self.p_pa)
        self.pb, _ = parcel_problem(problem, problem.bulk.mol_per_kg)  # the starting parcel is 1 kg
        self.scale = 1.0  # kg of starting parcel per kg of the bulk being equilibrated
        self.points: list[PathPoint] = []
        self.boundaries: list[BoundaryRecord] = []
        self.boundary_objects: list[Boundary] = []
        self.cumulates: list[CumulateLayer] = []
        self.totals = {"heat": 0.0, "latent": 0.0, "removed_h": 0.0, "t_ds": 0.0, "refresh": 0.0}
        self.prev: State | None = None
        self.prev_deriv: Derivatives | None = None
        self.prev_names: tuple[str, ...] | None = None
        self.exhausted_at: float | None = None
        self.max_step_residual = 0.0
        self.final_mass = 1.0

    def start(self, t: float) -> None:
        first = solve_state(self.pb, self.p_pa, t, neighbour_step_k=self.cfg.delta_k)
        self.h_initial = first.enthalpy_j * self.scale
        self.first_state = first
        self._record(first, "start", None)

    def advance_to(self, t: float) -> None:
        """Cool the parcel from the last row to ``t``, inserting every boundary met."""
        for _ in range(1000):
            if self.exhausted_at is not None or self.prev.temperature_k <= t:
                return
            low = solve_state(self.pb, self.p_pa, t, warm=self._warm(t), neighbour_step_k=self.cfg.delta_k)
            found = self.finder.locate(self.pb, self.prev, low, self.prev_names)
            if not found:
                self._record(low, "grid", None)
                return
            b = found[0]
            if b.above.temperature_k < self.prev.temperature_k - self.cfg.merge_k:
                self._record(b.above, "boundary_above", None)
                if self.exhausted_at is not None:  # nothing left to cross the boundary
                    self._add_boundary(b, b.above, None)
                    return
                if self.mode == "fractional":
                    continue  # the parcel changed: locate the boundary again for the new parcel
            self._record(b.below, "boundary_below", b)
        raise ConvergenceError(f"path did not advance to T = {t} K", {"temperature_k": t})

    def _warm(self, t: float) -> State:
        """The last row, moved to ``t`` along its branch when its exact rates are known (equilibrium mode)."""
        rates = self.prev_deriv.rates if self.prev_deriv is not None else None
        if self.mode != "equilibrium" or rates is None:
            return self.prev
        return State(predict(self.prev.eq, rates, t), self.prev.props)

    def _record(self, state: State, kind: str, boundary: Boundary | None) -> None:
        step = None
        deriv = path_derivatives(self.pb, state, self.cfg.delta_k, effective_slope=False)
        if self.prev is not None:
            step = self._step(state, deriv)
            self.totals["heat"] += step.heat_released_j * self.scale
            self.totals["latent"] += step.latent_heat_j * self.scale
            self.totals["t_ds"] += step.t_ds_j * self.scale
            self.max_step_residual = max(self.max_step_residual, abs(step.t_ds_j - step.heat_released_j) * self.scale)
        self.points.append(_point(state, kind, deriv, step, self.scale, self.totals))
        self.prev_deriv = deriv
        if boundary is not None:
            self._add_boundary(boundary, state, step)
        if self.mode == "fractional":
            self._fractionate(state)
        else:
            self.prev, self.prev_names = state, None

    def _step(self, state: State, deriv: Derivatives) -> StepIntegral:
        """Integrals over the step from the previous row. The end-slope rule needs the previous row's own
        derivatives on the step's branch: equilibrium mode only (a refreshed fractional parcel has none)."""
        if self.mode == "equilibrium" and self.cfg.step_quadrature == "end_slopes":
            return integrate_step_with_slopes(self.prev, state, self.prev_deriv, deriv)
        return integrate_step(self.pb, self.prev, state, self.cfg.simpson_intervals)

    def _add_boundary(self, b: Boundary, below: State, step: StepIntegral | None) -> None:
        above = self.prev  # the row above the boundary step (in fractional mode: the refreshed parcel)
        self.boundary_objects.append(b)
        self.boundaries.append(BoundaryRecord(
            temperature_k=b.temperature_k, appearing=b.appearing, disappearing=b.disappearing, variance=b.variance,
            isothermal=b.isothermal, specific_enthalpy_above_j_per_kg=above.props.h_j_per_kg,
            specific_enthalpy_below_j_per_kg=below.props.h_j_per_kg,
            heat_released_j_per_kg_initial=(step.heat_released_j if step else 0.0) * self.scale,
        ))

    # ------------------------------------------------------------ fractional
    def _fractionate(self, state: State) -> None:
        eq, props = state.eq, state.props
        solids = [p for p in props.phases if not p.is_liquid and p.mass_kg > 0]
        if not solids:
            self.prev, self.prev_names = state, None
            return
        liquids = [p for p in props.phases if p.is_liquid and p.mass_kg > 0]
        n_ox = len(self.pb.dataset.oxides)
        melt_mol = sum((phase_oxide_mol(eq, p.name, n_ox) for p in liquids), np.zeros(n_ox))
        melt_mass = sum(p.mass_kg for p in liquids)
        crystal_mass = sum(p.mass_kg for p in solids)
        f = self.trapped
        trapped_mass = min(melt_mass, f / (1.0 - f) * crystal_mass) if f > 0 else 0.0
        share = trapped_mass / melt_mass if melt_mass > 0 else 0.0
        layer_h = sum(p.amount_mol * p.h_j_per_mol for p in solids) + share * sum(
            p.amount_mol * p.h_j_per_mol for p in liquids)
        layer_v = sum(p.volume_m3 for p in solids) + share * sum(p.volume_m3 for p in liquids)
        layer_m = crystal_mass + trapped_mass
        self.cumulates.append(CumulateLayer(
            temperature_k=state.temperature_k, mass_kg_per_kg_initial=layer_m * self.scale,
            mineral_proportions={p.name: p.mass_kg / crystal_mass for p in solids},
            trapped_melt_mass_fraction=trapped_mass / layer_m, density_kg_per_m3=layer_m / layer_v,
            enthalpy_j_per_kg_initial=layer_h * self.scale,
        ))
        self.totals["removed_h"] += layer_h * self.scale
        self._refresh_parcel(state, melt_mol * (1.0 - share), state.enthalpy_j - layer_h)

    def _refresh_parcel(self, state: State, parcel_mol, parcel_h_j: float) -> None:
        """Re-equilibrate the residual parcel at the row's temperature (a fresh solve)."""
        mass = oxide_mass_kg(self.pb.dataset.oxides, parcel_mol)
        if mass * self.scale < self.cfg.exhausted_fraction:
            self.exhausted_at, self.final_mass = state.temperature_k, 0.0
            self.prev = state
            return
        new_pb, m = parcel_problem(self.pb, parcel_mol)
        fresh = solve_state(new_pb, self.p_pa, state.temperature_k, warm=state)
        self.totals["refresh"] += (fresh.enthalpy_j * m - parcel_h_j) * self.scale
        self.pb, self.scale = new_pb, self.scale * m
        self.prev, self.prev_names, self.final_mass = fresh, state.signature, self.scale * fresh.mass_kg

    # ---------------------------------------------------------------- result
    def result(self, pressure_gpa: float, wall_s: float) -> CoolingPath:
        final_h = 0.0 if self.exhausted_at is not None else self.prev.enthalpy_j * self.scale
        notes, liquidus, solidus = self._limits()
        diag = {"wall_time_s": wall_s, "restricted_equilibria": self.finder.evaluations}
        heat = self.totals["heat"]
        if self.mode == "equilibrium":
            diag["t_ds_identity_relative_residual"] = abs(self.totals["t_ds"] - heat) / abs(heat) if heat else 0.0
            diag["max_step_t_ds_residual_j_per_kg_initial"] = self.max_step_residual
        else:
            balance = final_h + self.totals["removed_h"] + heat
            diag["energy_conservation_relative_residual"] = abs(balance - self.h_initial) / abs(self.h_initial)
            diag["parcel_refresh_residual_j_per_kg_initial"] = self.totals["refresh"]
        return CoolingPath(
            mode=self.mode, pressure_gpa=pressure_gpa, trapped_melt_fraction=self.trapped, points=tuple(self.points),
            boundaries=tuple(self.boundaries), cumulates=tuple(self.cumulates), liquidus_k=liquidus,
            solidus_k=solidus, initial_enthalpy_j_per_kg_initial=self.h_initial,
            final_parcel_mass_kg_per_kg_initial=self.final_mass, final_parcel_enthalpy_j_per_kg_initial=final_h,
            notes=tuple(notes), diagnostics=diag, _boundary_objects=tuple(self.boundary_objects),
        )

    def _limits(self):
        bs = self.boundary_objects
        liquidus = next((b.temperature_k for b in bs if all_liquid(b.above) and not all_liquid(b.below)), None)
        solidus = next((b.temperature_k for b in bs if has_liquid(b.above) and not has_liquid(b.below)), None)
        notes = []
        if liquidus is None:
            notes.append("start temperature is below the liquidus" if not all_liquid(self.first_state)
                         else "liquidus is below the stop temperature")
        if self.exhausted_at is not None:
            notes.append(
                f"parcel fully crystallized at {self.exhausted_at:.6f} K (fractional solidus; with solid solutions "
                "this depends on the step, since each step crystallizes its parcel at equilibrium)"
            )
            solidus = solidus if solidus is not None else self.exhausted_at
        elif solidus is None and not has_liquid(self.first_state):
            notes.append("start temperature is below the solidus")
        elif solidus is None and self.mode == "fractional":
            notes.append(
                "fractional crystallization: the parcel still holds liquid at the stop temperature "
                f"(parcel {self.final_mass:.4g} kg per kg initial, melt fraction {self.prev.props.melt_fraction:.4g}); "
                "the solidus is not reached"
            )
        elif solidus is None:
            notes.append("solidus is below the stop temperature")
        return notes, liquidus, solidus


def cooling_path(
    problem: Problem,
    pressure_gpa: float,
    start_temperature_k: float,
    stop_temperature_k: float,
    step_k: float,
    mode: str = "equilibrium",
    trapped_melt_fraction: float = 0.0,
    settings: PathSettings | None = None,
    progress: Progress | None = None,
) -> CoolingPath:
    """Isobaric cooling path with exact energetics and root-found phase boundaries.

    Parameters
    ----------
    problem : Problem
        Bulk composition (any scale; the starting parcel is taken as 1 kg) and candidate phases.
    pressure_gpa : float
        Pressure [GPa].
    start_temperature_k, stop_temperature_k : float
        Start (hotter) and stop temperatures [K].
    step_k : float
        Grid step [K]; the last step ends exactly at the stop temperature.
    mode : {"equilibrium", "fractional"}
    trapped_melt_fraction : float
        Fractional mode: melt mass fraction of each cumulate layer, 0 ≤ f < 1.
    settings : PathSettings, optional
    progress : callable, optional
        Called as ``progress(steps_done, steps_total)`` after every grid step; an exception it
        raises (a cancelled job) stops the path.

    Returns
    -------
    CoolingPath
        Rows (grid and boundary rows), located boundaries, cumulate layers,
        liquidus and solidus (None with a note when not reached), and identity
        residuals in ``diagnostics``.

    Raises
    ------
    InputError, OutOfDomainError
        Bad arguments or conditions outside the dataset's validity domain.
    ConvergenceError
        If a state cannot be converged.
    """
    cfg = settings or PathSettings()
    _check_arguments(problem, pressure_gpa, start_temperature_k, stop_temperature_k, step_k, mode,
                     trapped_melt_fraction)
    t0 = time.perf_counter()
    grid = _grid(start_temperature_k, stop_temperature_k, step_k)
    run = _PathRun(problem, pressure_gpa, mode, trapped_melt_fraction, cfg)
    run.start(float(grid[0]))
    for k, t in enumerate(grid[1:], 1):
        run.advance_to(float(t))
        if progress is not None:
            progress(k, len(grid) - 1)
    return run.result(pressure_gpa, time.perf_counter() - t0)


def _check_arguments(problem, pressure_gpa, t_start, t_stop, step, mode, trapped) -> None:
    if mode not in MODES:
        raise InputError("mode", f"must be one of {', '.join(MODES)} (got {mode!r})")
    if not t_start > t_stop:
        raise InputError("stop_temperature_k", "must be below start_temperature_k (a path cools)")
    if not step > 0:
        raise InputError("step_k", "must be positive")
    if not 0.0 <= trapped < 1.0:
        raise InputError("trapped_melt_fraction", "must satisfy 0 <= f < 1")
    check_conditions(problem.dataset, pressure_gpa, [t_start, t_stop])
