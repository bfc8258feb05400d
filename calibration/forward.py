"""Forward calculations with heatpath's minimizer: liquidus, solidus, saturation order, melt fractions.

Temperatures of phase appearance are located by a coarse scan followed by bisection
(to ``tol_k``), warm-starting the minimizer from the neighbouring state. A phase is
"present" when its mass fraction exceeds ``PRESENT``.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass, field

import numpy as np

from thermo.assemblage import assemblage_properties
from thermo.dataset import Dataset
from thermo.errors import CompositionError, ConvergenceError
from thermo.minimize import Equilibrium, equilibrate
from thermo.phases import PhaseSystem, build_system, default_phase_names
from thermo.solutions import SolutionModel, solution_from_spec

PRESENT = 1e-7  # mass fraction above which a phase counts as present


def liquid_model_from_parameters(dataset: Dataset, params) -> SolutionModel:
    """A liquid :class:`SolutionModel` for a :class:`melt_calibration.LiquidParameters` set."""
    spec = copy.deepcopy(dataset.extra["solutions"]["solution"]["liquid"])
    spec["endmembers"] = list(params.units)
    spec["mixing_units"] = dict(params.units)
    spec["asymmetry"] = dict(params.units) if params.asymmetry_from_units else {}
    pairs = sorted(set(params.w_h) | set(params.w_s))
    spec["interactions"] = [
        {"pair": list(k), "w_h_j_per_mol": params.w_h.get(k, 0.0), "w_s_j_per_mol_k": params.w_s.get(k, 0.0)}
        for k in pairs
    ]
    return solution_from_spec("liquid", spec, "calibration")


@dataclass
class Calculator:
    """Equilibria of one bulk composition with a dataset (and optionally a replacement liquid model)."""

    dataset: Dataset
    bulk_mol: np.ndarray  # moles of the dataset oxides
    phases: list[str] | None = None
    liquid: SolutionModel | None = None
    failures: list[str] = field(default_factory=list)

    def __post_init__(self):
        # a replacement liquid keeps the name "liquid", so it takes the place of the dataset's model
        phases = self.phases if self.phases is not None else default_phase_names(self.dataset)
        extra = [self.liquid] if self.liquid is not None else None
        self.system: PhaseSystem = build_system(self.dataset, self.bulk_mol, phases, extra_models=extra)
        self.b = self.bulk_mol[self.system.component_index]
        self._cache: dict[tuple[float, float], Equilibrium] = {}

    def solve(self, pressure_gpa: float, temperature_k: float, warm: Equilibrium | None = None) -> Equilibrium:
        """Equilibrium at (P, T); on a minimizer failure, retry cold and then at T ± 0.01-0.02 K.

        Every failure is recorded in ``failures`` (state and message) for reporting.
        """
        key = (round(pressure_gpa, 9), round(temperature_k, 6))
        if key in self._cache:
            return self._cache[key]
        last = None
        for dt, use_warm in ((0.0, True), (0.0, False), (0.013, False), (-0.017, False)):
            if use_warm and warm is None:
                continue
            try:
                eq = equilibrate(self.system, pressure_gpa * 1e9, temperature_k + dt, self.b,
                                 warm=warm if use_warm else None)
                break
            except (ConvergenceError, CompositionError) as exc:
                last = exc
                self.failures.append(f"P={pressure_gpa:g} GPa T={temperature_k + dt:.3f} K "
                                     f"{'warm' if use_warm else 'cold'}: {type(exc).__name__}: {exc}")
        else:
            raise last
        self._cache[key] = eq
        return eq

    def fractions(self, eq: Equilibrium) -> dict[str, float]:
        """Mass fraction of each phase (instances of one solution are reported separately)."""
        a = assemblage_properties(eq)
        return {p.name: p.mass_kg / a.mass_kg for p in a.phases}

    def melt_fraction(self, eq: Equilibrium) -> float:
        a = assemblage_properties(eq)
        return sum(p.mass_kg for p in a.phases if p.is_liquid) / a.mass_kg

    def solids_present(self, eq: Equilibrium) -> list[str]:
        return [n for n, f in self.fractions(eq).items() if f > PRESENT and not n.startswith("liquid")]

    def liquid_present(self, eq: Equilibrium) -> bool:
        return self.melt_fraction(eq) > PRESENT

    # ------------------------------------------------------------ boundaries
    def _bisect(self, p, t_lo, t_hi, eq_lo, eq_hi, test, tol_k):
        """Narrow [t_lo, t_hi] where test(eq) changes from test(eq_lo) to test(eq_hi)."""
        want_lo = test(eq_lo)
        while t_hi - t_lo > tol_k:
            t_mid = 0.5 * (t_lo + t_hi)
            eq_mid = self.solve(p, t_mid, warm=eq_hi)
            if test(eq_mid) == want_lo:
                t_lo, eq_lo = t_mid, eq_mid
            else:
                t_hi, eq_hi = t_mid, eq_mid
        return 0.5 * (t_lo + t_hi), eq_lo, eq_hi

    def liquidus(self, pressure_gpa: float, t_start: float, t_stop: float, step: float = 25.0, tol_k: float = 0.1):
        """Highest temperature [K] with a solid present (scanning down from ``t_start``, all liquid there).

        Returns (T, names of the solids that appear, equilibrium just below) or (nan, [], None).
        """
        eq_hi = self.solve(pressure_gpa, t_start)
        if self.solids_present(eq_hi):
            return float("nan"), [], None
        t = t_start
        while t - step >= t_stop:
            eq = self.solve(pressure_gpa, t - step, warm=eq_hi)
            if self.solids_present(eq):
                tl, eq_lo, _ = self._bisect(pressure_gpa, t - step, t, eq, eq_hi,
                                            lambda e: bool(self.solids_present(e)), tol_k)
                return tl, self.solids_present(eq_lo), eq_lo
            t, eq_hi = t - step, eq
        return float("nan"), [], None

    def appearance(self, pressure_gpa: float, phase: str, t_start: float, t_stop: float, step: float = 25.0,
                   tol_k: float = 0.1):
        """Highest temperature [K] at which ``phase`` (a solution or pure-phase name; "a|b" either) is present.

        Returns (T, equilibrium just below) or (nan, None).
        """

        names = phase.split("|")

        def test(e):
            return any(ph.model in names and f > PRESENT for ph, f in zip(e.phases, self._mass_fractions(e),
                                                                          strict=True))

        eq_hi = self.solve(pressure_gpa, t_start)
        if test(eq_hi):
            return float("nan"), None
        t = t_start
        while t - step >= t_stop:
            eq = self.solve(pressure_gpa, t - step, warm=eq_hi)
            if test(eq):
                ta, eq_lo, _ = self._bisect(pressure_gpa, t - step, t, eq, eq_hi, test, tol_k)
                return ta, eq_lo
            t, eq_hi = t - step, eq
        return float("nan"), None

    def _mass_fractions(self, eq: Equilibrium) -> list[float]:
        a = assemblage_properties(eq)
        return [p.mass_kg / a.mass_kg for p in a.phases]

    def solidus(self, pressure_gpa: float, t_start: float, t_stop: float, step: float = 25.0, tol_k: float = 0.1):
        """Lowest temperature [K] with liquid present (scanning up from ``t_start``, no liquid there)."""
        eq_lo = self.solve(pressure_gpa, t_start)
        if self.liquid_present(eq_lo):
            return float("nan"), None
        t = t_start
        while t + step <= t_stop:
            eq = self.solve(pressure_gpa, t + step, warm=eq_lo)
            if self.liquid_present(eq):
                ts, _, eq_hi = self._bisect(pressure_gpa, t, t + step, eq_lo, eq, self.liquid_present, tol_k)
                return ts, eq_hi
            t, eq_lo = t + step, eq
        return float("nan"), None

    def saturation_sequence(self, pressure_gpa: float, t_liquidus: float, t_solidus: float, step: float = 10.0,
                            tol_k: float = 0.5):
        """Appearance (and disappearance) temperatures of solids between liquidus and solidus, scanning down.

        Returns a list of (T, phase name, 'in' | 'out').
        """
        events = []
        t = t_liquidus + 0.05
        eq_prev = self.solve(pressure_gpa, t)
        before = set(self.solids_present(eq_prev))
        while t - step > t_solidus:
            eq = self.solve(pressure_gpa, t - step, warm=eq_prev)
            now = set(self.solids_present(eq))
            for name in sorted(now ^ before):
                kind = "in" if name in now else "out"

                def test(e, name=name):
                    return name in self.solids_present(e)

                te, _, _ = self._bisect(pressure_gpa, t - step, t, eq, eq_prev, test, tol_k)
                events.append((te, name, kind))
            before, eq_prev, t = now, eq, t - step
        return sorted(events, key=lambda ev: -ev[0])


# ------------------------------------------------------------------ experiment rows
def _olivine_first_composition(calc: Calculator, eq: Equilibrium) -> float:
    """Fayalite fraction of the olivine with the smallest driving force at the equilibrium's μ."""
    from scipy.optimize import minimize_scalar

    from thermo import solutions as sol

    system = calc.system
    idx = next(k for k, s in enumerate(system.solutions) if s.name == "olivine")
    phase = system.solutions[idx]
    g0 = eq.standard.g_j_per_mol[phase.endmember_index]
    target = phase.stoich @ eq.mu
    names = list(phase.model.endmembers)

    def dforce(x_fa):
        x = np.zeros(len(names))
        x[names.index("fayalite")] = x_fa
        x[names.index("forsterite")] = 1.0 - x_fa
        mu = sol.chemical_potentials(phase.model, x, g0, eq.temperature_k, eq.pressure_pa)
        return float(np.sum(x * (mu - target)))

    res = minimize_scalar(dforce, bounds=(1e-6, 1.0 - 1e-6), method="bounded", options={"xatol": 1e-9})
    return float(res.x)


def check_row(row, calc: Calculator, window_k: float = 450.0) -> tuple[float, str]:
    """The model's value of a row's observable, and a note (phases found, problems)."""
    p = row.pressure_gpa
    obs = row.observable
    if obs in ("liquidus_t", "first_solid_anorthite"):
        first = row.saturating.split("+")[0].split("[")[0].strip() if row.saturating else ""
        t_obs = row.observed if obs == "liquidus_t" else 1800.0
        t_start = min(t_obs + window_k, 3490.0)
        if first:
            tl, eq = calc.appearance(p, first, t_start, max(t_obs - window_k - 200.0, 600.0))
        else:
            tl, _, eq = calc.liquidus(p, t_start, max(t_obs - window_k - 200.0, 600.0))
        if eq is None:
            return float("nan"), f"no {first or 'solid'} between {t_start:.0f} and the scan end"
        note = "phases below: " + ", ".join(sorted(n for n, f in calc.fractions(eq).items() if f > PRESENT))
        if obs == "first_solid_anorthite":
            plag = next(ph for ph in eq.phases if ph.model == "plagioclase")
            names = calc.system.solutions[plag.solution_index].model.endmembers
            x = plag.amount_mol / plag.amount_mol.sum()
            return float(x[list(names).index("anorthite")]), note
        return tl, note
    if obs == "solidus_t":
        ts, eq = calc.solidus(p, max(row.observed - window_k, 600.0), min(row.observed + window_k + 200.0, 3490.0))
        if eq is None:
            return float("nan"), "no solidus in the scanned range"
        return ts, "phases above: " + ", ".join(sorted(n for n, f in calc.fractions(eq).items() if f > PRESENT))
    if obs == "not_saturated":
        eq = calc.solve(p, row.temperature_k)
        name = row.saturating.split("[")[0].strip()
        amount = sum(f for ph, f in zip(eq.phases, calc._mass_fractions(eq), strict=True) if ph.model == name)
        return amount, "phases: " + ", ".join(sorted(calc.fractions(eq)))
    if obs == "melt_fraction":
        eq = calc.solve(p, row.temperature_k)
        return calc.melt_fraction(eq), "phases: " + ", ".join(sorted(calc.fractions(eq)))
    if obs == "kd_fe_mg":
        eq = calc.solve(p, row.temperature_k)
        liquid = [ph for ph in eq.phases if ph.model == "liquid"]
        if len(eq.phases) != 1 or not liquid:
            return float("nan"), "the liquid is not alone at this temperature"
        comps = calc.system.components
        bulk = dict(zip(comps, calc.b, strict=True))
        x_fa = _olivine_first_composition(calc, eq)
        return (x_fa / (1.0 - x_fa)) / (bulk["FeO"] / bulk["MgO"]), f"first olivine Fo{100 * (1 - x_fa):.1f}"
    raise ValueError(f"unknown observable {obs!r}")
