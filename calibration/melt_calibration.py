"""Tools for calibrating heatpath's liquid model on experimental saturation data.

The liquid is a ``units`` solution (see :mod:`thermo.solutions`): species i counts
u_i mixing units, X_i = u_i p_i / Σ u_k p_k, and

    μ_i = G_i°(P, T) + ΔH_i − T ΔS_i + u_i RT ln X_i + Σ_{a<b} W_ab (δ_ia p_b + δ_ib p_a − p_a p_b),

the symmetric Margules formalism (Powell & Holland 1993, Am. Mineral. 78:1174) with
W = W_H − T W_S. At fixed species fractions p every μ_i is linear in the ΔH, ΔS, W_H
and W_S; a liquid of known oxide composition saturated with a phase of known
composition therefore gives an affinity equation

    A = G(solid) − Σ_i r_i μ_i(liquid) = 0,

linear in those parameters (r expresses the solid's composition in the liquid species).
The species fractions themselves follow from the homogeneous equilibrium of the
liquid (the species outnumber the oxides), so the fit alternates: speciate every
liquid with the current parameters, solve the linear weighted least-squares problem,
repeat until the parameters stop moving (a Gauss-Newton iteration with the speciation
frozen in each step).

This module is independent of the minimizer; forward checks with the real minimizer
are in :mod:`forward`.
"""

from __future__ import annotations

import csv
import dataclasses
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.constants import R
from scipy.optimize import minimize

from thermo import solutions as sol
from thermo.composition import KNOWN_OXIDES, oxide_molar_mass_g_per_mol, oxide_stoichiometry
from thermo.dataset import Dataset
from thermo.endmembers import standard_state
from thermo.phases import solution_models

HERE = Path(__file__).resolve().parent
EXPERIMENTS_CSV = HERE / "experiments.csv"


# ------------------------------------------------------------------ compositions
def parse_composition(text: str, oxides: tuple[str, ...]) -> np.ndarray:
    """Oxide mass fractions (summing to 1) from ``"CaMgSi2O6=58 CaAl2Si2O8=42"`` or ``"SiO2=61 MgO=39"``.

    Keys are oxides or mineral formulas; values are mass proportions.
    """
    mass = np.zeros(len(oxides))
    for token in text.split():
        key, value = token.split("=")
        amount = float(value)
        if key in KNOWN_OXIDES:
            mass[oxides.index(key)] += amount
            continue
        moles = oxide_stoichiometry(key, oxides)
        masses = moles * np.array([oxide_molar_mass_g_per_mol(o) for o in oxides])
        mass += amount * masses / masses.sum()
    return mass / mass.sum()


def oxide_wt_to_mol(mass_fraction: np.ndarray, oxides: tuple[str, ...]) -> np.ndarray:
    """Moles of oxides per kg from oxide mass fractions."""
    return 1000.0 * mass_fraction / np.array([oxide_molar_mass_g_per_mol(o) for o in oxides])


# ------------------------------------------------------------------ experiments
@dataclass
class Experiment:
    """One row of experiments.csv."""

    id: str
    system: str
    pressure_gpa: float
    observable: str
    observed: float
    uncertainty: float
    unit: str
    temperature_k: float  # condition (rows whose observable is not a temperature)
    bulk: str
    liquid: str
    liquid_uncertainty_wt: float
    saturating: str
    phases: str
    role: str
    source: str
    provenance: str
    notes: str

    @property
    def affinity_temperature_k(self) -> float:
        """Temperature of the affinity equations: the observed one, or the stated condition."""
        return self.observed if self.observable in ("liquidus_t", "solidus_t") else self.temperature_k

    @property
    def temperature_uncertainty_k(self) -> float:
        """Temperature uncertainty behind the affinity equations of the row."""
        return self.uncertainty if self.unit == "K" else 10.0


def _float(text: str) -> float:
    text = (text or "").strip()
    return float(text) if text else float("nan")


def read_experiments(path: Path = EXPERIMENTS_CSV) -> list[Experiment]:
    """Rows of the experiment file (lines starting with '#' are comments)."""
    with path.open(encoding="utf-8", newline="") as fh:
        lines = [ln for ln in fh if not ln.lstrip().startswith("#")]
    rows = []
    for rec in csv.DictReader(lines):
        rows.append(Experiment(
            id=rec["id"].strip(), system=rec["system"].strip(), pressure_gpa=_float(rec["pressure_gpa"]),
            observable=rec["observable"].strip(), observed=_float(rec["observed"]),
            uncertainty=_float(rec["uncertainty"]), unit=rec["unit"].strip(),
            temperature_k=_float(rec["temperature_k"]), bulk=rec["bulk"].strip(), liquid=rec["liquid"].strip(),
            liquid_uncertainty_wt=_float(rec["liquid_uncertainty_wt"]), saturating=rec["saturating"].strip(),
            phases=rec["phases"].strip(), role=rec["role"].strip(), source=rec["source"].strip(),
            provenance=rec["provenance"].strip(), notes=rec["notes"].strip(),
        ))
    return rows


# ------------------------------------------------------------------ liquid model
@dataclass
class LiquidParameters:
    """Adjustable liquid parameters (all in SI units)."""

    units: dict[str, float]
    w_h: dict[tuple[str, str], float] = field(default_factory=dict)
    w_s: dict[tuple[str, str], float] = field(default_factory=dict)
    dh: dict[str, float] = field(default_factory=dict)
    ds: dict[str, float] = field(default_factory=dict)
    asymmetry_from_units: bool = True  # van Laar α_i = u_i: excess energies act between mixing units

    def copy(self) -> LiquidParameters:
        return LiquidParameters(dict(self.units), dict(self.w_h), dict(self.w_s), dict(self.dh), dict(self.ds),
                                self.asymmetry_from_units)


class LiquidModel:
    """The liquid of a dataset with a given parameter set, evaluated by its own speciation solver."""

    def __init__(self, dataset: Dataset, species: list[str], params: LiquidParameters):
        self.ds = dataset
        self.species = list(species)
        self.params = params
        idx = [dataset.index(s) for s in species]
        self.stoich = dataset.stoichiometry[idx]  # (m, c)
        self.endmembers = dataset.endmembers.subset(species)
        m = len(species)
        self.units = np.array([params.units.get(s, 1.0) for s in species])
        self.wh = np.zeros((m, m))
        self.ws = np.zeros((m, m))
        for table, target in ((params.w_h, self.wh), (params.w_s, self.ws)):
            for (a, b), w in table.items():
                i, j = species.index(a), species.index(b)
                target[i, j] = target[j, i] = w
        self.alpha = self.units.copy() if params.asymmetry_from_units else np.ones(m)
        self.dh = np.array([params.dh.get(s, 0.0) for s in species])
        self.ds_ = np.array([params.ds.get(s, 0.0) for s in species])

    def g0(self, pressure_pa: float, temperature_k: float) -> np.ndarray:
        g = standard_state(self.endmembers, pressure_pa, temperature_k).g_j_per_mol
        return g + self.dh - temperature_k * self.ds_

    def s0(self, pressure_pa: float, temperature_k: float) -> np.ndarray:
        return standard_state(self.endmembers, pressure_pa, temperature_k).s_j_per_mol_k + self.ds_

    def _excess_matrix(self, keep: np.ndarray, temperature_k: float):
        """M_ij = α_i α_j 2W_ij/(α_i + α_j) and α of the kept species (van Laar form, see module docstring)."""
        a = self.alpha[keep]
        w = (self.wh - temperature_k * self.ws)[np.ix_(keep, keep)]
        return np.outer(a, a) * 2.0 * w / (a[:, None] + a[None, :]), a

    def mu(self, n: np.ndarray, keep: np.ndarray, g0: np.ndarray, temperature_k: float) -> np.ndarray:
        """Species chemical potentials [J/mol] of the species in ``keep`` at amounts n (same length).

        G_ex = nᵀMn/(2A) with A = Σ α_k n_k: the asymmetric formalism of Holland & Powell
        (2003, Contrib. Mineral. Petrol. 145:492) written for amounts.
        """
        u = self.units[keep]
        m, a = self._excess_matrix(keep, temperature_k)
        big_a = a @ n
        x = u * n / np.dot(u, n)
        mn = m @ n
        mu_ex = mn / big_a - a * (n @ mn) / (2.0 * big_a**2)
        return g0[keep] + R * temperature_k * u * np.log(x) + mu_ex

    def hessian(self, n: np.ndarray, keep: np.ndarray, temperature_k: float) -> np.ndarray:
        u = self.units[keep]
        big_u = np.dot(u, n)
        h = R * temperature_k * (np.diag(u / n) - np.outer(u, u) / big_u)
        m, a = self._excess_matrix(keep, temperature_k)
        big_a = a @ n
        mn = m @ n
        h += m / big_a - (np.outer(mn, a) + np.outer(a, mn)) / big_a**2 + (n @ mn) / big_a**3 * np.outer(a, a)
        return h

    def speciate(self, oxide_mol: np.ndarray, pressure_pa: float, temperature_k: float) -> Speciation:
        """Homogeneous equilibrium of the liquid at fixed oxide amounts (Newton in the null space)."""
        active = oxide_mol > 1e-12 * oxide_mol.max()
        keep = ~np.any(self.stoich[:, ~active] > 0, axis=1)
        s = self.stoich[np.ix_(keep, active)]
        b = oxide_mol[active]
        g0 = self.g0(pressure_pa, temperature_k)
        n = _interior_point(s, b)
        null = _null_space(s.T)
        for _ in range(200):
            mu = self.mu(n, keep, g0, temperature_k)
            if null.shape[1] == 0:
                break
            grad = null.T @ mu
            hess = null.T @ self.hessian(n, keep, temperature_k) @ null
            try:
                step = -np.linalg.solve(hess, grad)
            except np.linalg.LinAlgError:
                step = -grad / np.abs(np.diag(hess)).max()
            if grad @ step > 0:  # not a descent direction (non-convex excess): steepest descent
                step = -grad / max(np.abs(np.diag(hess)).max(), 1.0)
            dn = null @ step
            neg = dn < 0
            alpha = min(1.0, 0.95 * float(np.min(-n[neg] / dn[neg]))) if neg.any() else 1.0
            g_old = float(n @ mu)
            for _ls in range(40):
                trial = n + alpha * dn
                if float(trial @ self.mu(trial, keep, g0, temperature_k)) <= g_old + 1e-12 * abs(g_old):
                    break
                alpha *= 0.5
            n = trial
            if np.abs(grad).max() < 1e-7 and np.abs(alpha * dn).max() < 1e-13 * n.sum():
                break
            if np.abs(grad).max() < 1e-9:
                break
        mu = self.mu(n, keep, g0, temperature_k)
        present = n > 1e-12 * n.sum()
        mu_ox = np.full(len(oxide_mol), np.nan)
        mu_ox[active] = np.linalg.lstsq(s[present], mu[present], rcond=None)[0]
        return Speciation(self, keep, active, n, mu, mu_ox, pressure_pa, temperature_k)


@dataclass
class Speciation:
    """A speciated liquid: species amounts, species and oxide chemical potentials."""

    model: LiquidModel
    keep: np.ndarray  # species allowed by the active oxides
    active: np.ndarray  # oxides present
    n: np.ndarray  # amounts of the kept species
    mu: np.ndarray  # their chemical potentials [J/mol]
    mu_ox: np.ndarray  # oxide chemical potentials [J/mol] (nan for absent oxides)
    pressure_pa: float
    temperature_k: float

    @property
    def fractions(self) -> dict[str, float]:
        names = [s for s, k in zip(self.model.species, self.keep, strict=True) if k]
        p = self.n / self.n.sum()
        return dict(zip(names, p, strict=True))

    def _unit_derivative(self, species: str) -> np.ndarray:
        return _unit_derivative_impl(self, species)

    @property
    def present(self) -> np.ndarray:
        """Kept species with a non-vanishing amount (their μ are finite)."""
        return self.n > 1e-12 * self.n.sum()

    def representation(self, oxide_vector: np.ndarray) -> np.ndarray | None:
        """Coefficients r over kept species (zero for vanishing ones) with Σ r_i a_i = oxide_vector, or None.

        A composition outside the span of the species present has an infinite chemical
        potential in the model (e.g. silica in a liquid exactly on the diopside-anorthite
        join); such compositions are not representable and return None.
        """
        if np.any(oxide_vector[~self.active] > 1e-12):
            return None
        s = self.model.stoich[np.ix_(self.keep, self.active)][self.present]
        r_present, *_ = np.linalg.lstsq(s.T, oxide_vector[self.active], rcond=None)
        if np.abs(s.T @ r_present - oxide_vector[self.active]).max() > 1e-8 * max(1.0, np.abs(oxide_vector).max()):
            return None
        r = np.zeros(len(self.n))
        r[self.present] = r_present
        return r

    def representable(self, oxide_vector: np.ndarray) -> bool:
        return self.representation(oxide_vector) is not None

    def derivatives(self, names: list[str]) -> np.ndarray:
        """∂μ_i/∂θ_k at fixed species fractions for parameters ``names`` ('u:', 'wh:', 'ws:', 'dh:', 'ds:')."""
        m = self.model
        sp = [s for s, k in zip(m.species, self.keep, strict=True) if k]
        p = self.n / self.n.sum()
        t = self.temperature_k
        out = np.zeros((len(sp), len(names)))
        for k, name in enumerate(names):
            kind, _, arg = name.partition(":")
            if kind in ("dh", "ds"):
                if arg in sp:
                    out[sp.index(arg), k] = 1.0 if kind == "dh" else -t
            elif kind == "u":
                if arg in sp:  # numerically: the units also set the van Laar α
                    out[:, k] = self._unit_derivative(arg)
            elif kind in ("wh", "ws"):
                a, b = arg.split("|")
                if a in sp and b in sp:
                    ia, ib = sp.index(a), sp.index(b)
                    alpha = m.alpha[self.keep]
                    abar = float(alpha @ p)
                    coef = 2.0 * alpha[ia] * alpha[ib] / (alpha[ia] + alpha[ib])
                    d = -alpha * p[ia] * p[ib] / abar**2
                    d[ia] += p[ib] / abar
                    d[ib] += p[ia] / abar
                    out[:, k] = coef * d if kind == "wh" else -t * coef * d
            else:
                raise ValueError(f"unknown parameter {name}")
        return out


def _unit_derivative_impl(spc: Speciation, species: str, step: float = 1e-4) -> np.ndarray:
    values = []
    for sign in (1.0, -1.0):
        params = spc.model.params.copy()
        params.units[species] = params.units.get(species, 1.0) + sign * step
        lm = LiquidModel(spc.model.ds, spc.model.species, params)
        g0 = lm.g0(spc.pressure_pa, spc.temperature_k)
        values.append(lm.mu(spc.n, spc.keep, g0, spc.temperature_k))
    return (values[0] - values[1]) / (2.0 * step)


def _null_space(a: np.ndarray) -> np.ndarray:
    if a.size == 0:
        return np.zeros((a.shape[1], 0))
    _, sv, vt = np.linalg.svd(a)
    rank = int(np.sum(sv > 1e-10 * sv.max()))
    return vt[rank:].T


def _interior_point(s: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Species amounts n > 0 with sᵀn = b, as central as a small LP allows."""
    from scipy.optimize import linprog

    m = s.shape[0]
    # maximise t subject to sᵀn = b, n ≥ t (variables n, t)
    c = np.zeros(m + 1)
    c[-1] = -1.0
    a_eq = np.hstack([s.T, np.zeros((s.shape[1], 1))])
    a_ub = np.hstack([-np.eye(m), np.ones((m, 1))])
    res = linprog(c, A_ub=a_ub, b_ub=np.zeros(m), A_eq=a_eq, b_eq=b, bounds=[(0, None)] * m + [(0, None)],
                  method="highs")
    if res.status != 0:
        raise ValueError("the composition lies outside the range of the liquid species")
    return np.maximum(res.x[:m], 1e-14 * b.sum())


# ------------------------------------------------------------------ solid phases
class Solids:
    """Gibbs energies of the dataset's solid phases (pure endmembers and solutions)."""

    def __init__(self, dataset: Dataset):
        self.ds = dataset
        self.models = {k: m for k, m in solution_models(dataset).items() if not m.is_liquid}

    def stoich(self, endmember: str) -> np.ndarray:
        return self.ds.stoichiometry[self.ds.index(endmember)]

    def g(self, names: list[str], pressure_pa: float, temperature_k: float) -> np.ndarray:
        return standard_state(self.ds.endmembers.subset(names), pressure_pa, temperature_k).g_j_per_mol

    def endmember_mu(self, phase: str, fractions: dict[str, float], pressure_pa, temperature_k):
        """(endmember names, μ of each at the given composition) of a solution, or of a pure phase."""
        if phase not in self.models:
            return [phase], self.g([phase], pressure_pa, temperature_k)
        model = self.models[phase]
        keep = [e for e in model.endmembers if fractions.get(e, 0.0) > 0]
        sub = model.restrict(keep)
        x = np.array([fractions[e] for e in keep])
        g0 = self.g(keep, pressure_pa, temperature_k)
        return keep, sol.chemical_potentials(sub, x / x.sum(), g0, temperature_k, pressure_pa)

    def min_driving_force(self, phase: str, spc: Speciation, pressure_pa, temperature_k):
        """Composition minimising the driving force D = G(x) − n(x)·μ per formula unit, and D [J/mol].

        Only endmembers whose composition the liquid's species can represent take part.
        """
        mu = np.nan_to_num(spc.mu_ox)
        if phase not in self.models:
            st = self.stoich(phase)
            if not spc.representable(st):
                return None, np.inf
            return {phase: 1.0}, float(self.g([phase], pressure_pa, temperature_k)[0] - st @ mu)
        model = self.models[phase]
        keep = [e for e in model.endmembers if self.ds.in_system[self.ds.index(e)]
                and spc.representable(self.stoich(e))]
        if not keep:
            return None, np.inf
        sub = model.restrict(keep)
        g0 = self.g(keep, pressure_pa, temperature_k)
        target = np.array([self.stoich(e) @ mu for e in keep])
        if len(keep) == 1:
            return {keep[0]: 1.0}, float(g0[0] - target[0])

        def dforce(z):
            x = np.exp(z - z.max())
            x = np.clip(x / x.sum(), 1e-12, None)
            return float(np.sum(x * (sol.chemical_potentials(sub, x, g0, temperature_k, pressure_pa) - target)))

        best = None
        for start in [*np.eye(len(keep)) * 8.0, np.zeros(len(keep))]:
            res = minimize(dforce, start, method="Nelder-Mead",
                           options={"xatol": 1e-7, "fatol": 1e-4, "maxiter": 4000})
            if best is None or res.fun < best.fun:
                best = res
        x = np.exp(best.x - best.x.max())
        x /= x.sum()
        return dict(zip(keep, x, strict=True)), float(best.fun)


_PHASE_RE = re.compile(r"^(?P<name>[a-z_|]+)(\[(?P<comp>[^\]]*)\])?$")


def parse_saturating(text: str) -> list[tuple[list[str], dict[str, float] | None]]:
    """``"olivine + plagioclase[anorthite:0.85,high_albite:0.15]"`` → [(alternatives, fixed composition)]."""
    out = []
    for item in [t.strip() for t in text.split("+") if t.strip()]:
        mt = _PHASE_RE.match(item)
        if not mt:
            raise ValueError(f"cannot read saturating phase {item!r}")
        comp = None
        if mt.group("comp"):
            comp = {k.strip(): float(v) for k, v in (kv.split(":") for kv in mt.group("comp").split(","))}
        out.append((mt.group("name").split("|"), comp))
    return out


def adjusted_dataset(dataset: Dataset, dh: dict[str, float], ds: dict[str, float]) -> Dataset:
    """A copy of ``dataset`` with liquid endmember H0 and S0 shifted by ``dh`` [J/mol] and ``ds`` [J/(mol K)]."""
    h0 = dataset.endmembers.h0.copy()
    s0 = dataset.endmembers.s0.copy()
    for name, value in dh.items():
        h0[dataset.index(name)] += value
    for name, value in ds.items():
        s0[dataset.index(name)] += value
    return dataclasses.replace(dataset, endmembers=dataclasses.replace(dataset.endmembers, h0=h0, s0=s0))


# ------------------------------------------------------------------ affinity equations
@dataclass
class Equation:
    """One affinity equation A(θ) = 0 of a fit row, with its scale σ [J/mol] and linearisation."""

    row: str
    label: str
    value_j: float  # A at the current parameters
    gradient: np.ndarray  # ∂A/∂θ at fixed speciation and solid composition
    sigma_j: float = 1.0
    per_kelvin: float = float("nan")  # |∂A/∂T|, J/(mol K), to express misfits as temperatures
    solid_mol: np.ndarray | None = None  # oxide moles of the solid (formula unit) the equation refers to


class EquationBuilder:
    """Affinity equations of the fit rows for a given base dataset and liquid species."""

    def __init__(self, dataset: Dataset, species: list[str]):
        self.ds = dataset
        self.species = species
        self.solids = Solids(dataset)

    def model(self, params: LiquidParameters) -> LiquidModel:
        return LiquidModel(self.ds, self.species, params)

    def _liquid(self, exp: Experiment, shift: tuple[np.ndarray, float] | None = None) -> np.ndarray:
        w = parse_composition(exp.liquid, self.ds.oxides)
        if shift is not None:
            direction, amount = shift
            w = (1.0 - amount) * w + amount * direction
        return oxide_wt_to_mol(w, self.ds.oxides)

    def equations(self, exp: Experiment, params: LiquidParameters, names: list[str], temperature_k=None,
                  shift=None, one_sided: bool = True) -> list[Equation]:
        """Equations of one row (empty for rows without a known liquid)."""
        if not exp.liquid or not exp.saturating:
            return []
        lm = self.model(params)
        p = exp.pressure_gpa * 1e9
        t = exp.affinity_temperature_k if temperature_k is None else temperature_k
        spc = lm.speciate(self._liquid(exp, shift), p, t)
        dmu = spc.derivatives(names)
        out = []
        if exp.observable == "kd_fe_mg":
            return [self._kd_equation(exp, spc, dmu, p, t)]
        for alternatives, fixed in parse_saturating(exp.saturating):
            if fixed is not None:
                ems, mu_s = self.solids.endmember_mu(alternatives[0], fixed, p, t)
                for em, mu_j in zip(ems, mu_s, strict=True):
                    r = spc.representation(self.solids.stoich(em))
                    out.append(Equation(exp.id, f"{alternatives[0]}:{em}", float(mu_j - r @ spc.mu), -r @ dmu,
                                        solid_mol=self.solids.stoich(em)))
                continue
            best = None
            for phase in alternatives:
                comp, d = self.solids.min_driving_force(phase, spc, p, t)
                if comp is not None and (best is None or d < best[2]):
                    best = (phase, comp, d)
            if best is None:
                raise ValueError(f"{exp.id}: no saturating phase {alternatives} representable by this liquid")
            phase, comp, d = best
            nu = sum(f * self.solids.stoich(e) for e, f in comp.items())
            r = spc.representation(nu)
            if one_sided and exp.observable == "not_saturated" and d >= 0.0:
                # one-sided: a phase the experiment does not show only constrains the fit when the model
                # would saturate it
                out.append(Equation(exp.id, phase, 0.0, np.zeros(len(names)), solid_mol=nu))
                continue
            out.append(Equation(exp.id, phase, d, -r @ dmu, solid_mol=nu))
        return out

    def _kd_equation(self, exp, spc, dmu, p, t) -> Equation:
        """Fe-Mg exchange between olivine and liquid: (μ_fa − μ_fo)_ol = (μ_fa − μ_fo)_liq."""
        ox = self.ds.oxides
        liq = self._liquid(exp)
        fe_mg = liq[ox.index("FeO")] / liq[ox.index("MgO")]
        ratio = exp.observed * fe_mg  # x_fa / x_fo in olivine
        x_fa = ratio / (1.0 + ratio)
        ems, mu_s = self.solids.endmember_mu("olivine", {"forsterite": 1.0 - x_fa, "fayalite": x_fa}, p, t)
        nu = self.solids.stoich("fayalite") - self.solids.stoich("forsterite")
        r = spc.representation(nu)
        value = float(mu_s[ems.index("fayalite")] - mu_s[ems.index("forsterite")] - r @ spc.mu)
        eq = Equation(exp.id, "olivine:Fe-Mg exchange", value, -r @ dmu)
        eq.sigma_j = R * t * exp.uncertainty / exp.observed  # δ ln KD = δA / RT
        return eq

    def scale(self, exp: Experiment, params: LiquidParameters, names: list[str]) -> list[Equation]:
        """Equations with σ from the row's temperature and composition uncertainties."""
        eqs = self.equations(exp, params, names, one_sided=False)
        if not eqs or exp.observable == "kd_fe_mg":
            return eqs
        t = exp.affinity_temperature_k
        hi = self.equations(exp, params, names, temperature_k=t + 2.0, one_sided=False)
        lo = self.equations(exp, params, names, temperature_k=t - 2.0, one_sided=False)
        slopes = [abs(a.value_j - b.value_j) / 4.0 for a, b in zip(hi, lo, strict=True)]
        comp_terms = np.zeros(len(eqs))
        if exp.liquid_uncertainty_wt > 0:
            for k, eq in enumerate(eqs):
                mass = eq.solid_mol * np.array([oxide_molar_mass_g_per_mol(o) for o in self.ds.oxides])
                moved = self.equations(exp, params, names, shift=(mass / mass.sum(), exp.liquid_uncertainty_wt / 100.0),
                                       one_sided=False)
                comp_terms[k] = abs(moved[k].value_j - eq.value_j)
        for eq, slope, dc in zip(eqs, slopes, comp_terms, strict=True):
            eq.per_kelvin = slope
            eq.sigma_j = float(np.hypot(exp.temperature_uncertainty_k * slope, dc))
        return eqs


# ------------------------------------------------------------------ least squares
def get_parameter(params: LiquidParameters, name: str) -> float:
    """Value of a parameter named 'u:<species>', 'wh:<a>|<b>', 'ws:<a>|<b>', 'dh:<species>' or 'ds:<species>'."""
    kind, _, arg = name.partition(":")
    if kind == "u":
        return params.units.get(arg, 1.0)
    if kind in ("wh", "ws"):
        pair = tuple(arg.split("|"))
        return (params.w_h if kind == "wh" else params.w_s).get(pair, 0.0)
    return getattr(params, kind).get(arg, 0.0)


def set_parameter(params: LiquidParameters, name: str, value: float) -> None:
    kind, _, arg = name.partition(":")
    if kind == "u":
        params.units[arg] = float(value)
    elif kind in ("wh", "ws"):
        (params.w_h if kind == "wh" else params.w_s)[tuple(arg.split("|"))] = float(value)
    else:
        getattr(params, kind)[arg] = float(value)


@dataclass
class FitResult:
    params: LiquidParameters
    names: list[str]
    equations: list[Equation]
    covariance: np.ndarray  # of the fitted parameters (from the last linearisation)
    iterations: int
    objective: float


def fit_parameters(builder: EquationBuilder, rows: list[Experiment], start: LiquidParameters, names: list[str],
                   priors: dict[str, tuple[float, float]], max_iter: int = 60) -> FitResult:
    """Weighted least squares on the affinity equations, with Gaussian priors on every parameter.

    Each step solves the linear least-squares problem of the equations linearised at fixed
    speciation (exact for W, ΔH, ΔS at that speciation) together with the prior rows
    (θ − θ_prior)/σ_prior, damped (Levenberg-Marquardt) until the objective decreases; the
    speciation is recomputed for every trial. σ of each equation comes from the row's uncertainties at the
    starting parameters (:meth:`EquationBuilder.scale`).
    """
    params = start.copy()
    scales = {}
    for row in rows:
        for eq in builder.scale(row, params, names):
            scales[(eq.row, eq.label)] = eq
    mean = np.array([priors[n][0] for n in names])
    width = np.array([priors[n][1] for n in names])

    def system(p):
        if min(p.units.values()) < 0.02:
            raise ValueError("mixing units must stay positive")
        eqs = [e for r in rows for e in builder.equations(r, p, names)]
        for e in eqs:
            e.sigma_j = scales[(e.row, e.label)].sigma_j
            e.per_kelvin = scales[(e.row, e.label)].per_kelvin
        sig = np.array([e.sigma_j for e in eqs])
        res = np.array([e.value_j for e in eqs]) / sig
        jac = np.array([e.gradient for e in eqs]) / sig[:, None]
        theta = np.array([get_parameter(p, n) for n in names])
        return eqs, res, jac, theta, (theta - mean) / width

    eqs, res, jac, theta, prior_res = system(params)
    objective = float(res @ res + prior_res @ prior_res)
    iterations = 0
    damping = 1e-3
    for iterations in range(1, max_iter + 1):  # noqa: B007 (the count is returned)
        a = np.vstack([jac, np.diag(1.0 / width)])
        b = np.concatenate([-res, -prior_res])
        normal, rhs = a.T @ a, a.T @ b
        accepted = False
        for _ in range(16):
            # Levenberg-Marquardt step (Marquardt 1963, J. Soc. Ind. Appl. Math. 11:431)
            step = np.linalg.solve(normal + damping * np.diag(np.diag(normal)), rhs)
            trial = params.copy()
            for n, v in zip(names, theta + step, strict=True):
                set_parameter(trial, n, v)
            try:
                t_eqs, t_res, t_jac, t_theta, t_prior = system(trial)
                t_obj = float(t_res @ t_res + t_prior @ t_prior)
            except (ValueError, np.linalg.LinAlgError):
                t_obj = np.inf
            if t_obj <= objective:
                accepted = True
                damping = max(damping / 10.0, 1e-9)
                break
            damping *= 10.0
        if not accepted:
            break
        converged = objective - t_obj < 1e-7 * max(objective, 1.0)
        params, eqs, res, jac, theta, prior_res, objective = trial, t_eqs, t_res, t_jac, t_theta, t_prior, t_obj
        if converged:
            break
    a = np.vstack([jac, np.diag(1.0 / width)])
    covariance = np.linalg.pinv(a.T @ a)
    return FitResult(params, names, eqs, covariance, iterations, objective)
