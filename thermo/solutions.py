"""Solution models: ideal mixing plus Margules / van Laar excess terms.

Ideal part
    * ``sites``: ideal mixing on crystallographic sites. Endmember i's ideal
      activity is a_i = k_i · Π_s Π_j x_sj^(m_s·ν_isj), with site fractions
      x_sj = Σ_i p_i ν_isj, site multiplicities m_s and the normalisation k_i
      that gives each pure endmember activity 1 (Powell & Holland 1993,
      Am. Mineral. 78:1174; Holland & Powell 1998, J. Metamorph. Geol. 16:309).
    * ``units``: the liquid model. Each species i counts u_i mixing units
      (a model parameter, "mixing-unit scaling"); units mix ideally, so with
      X_i = u_i p_i / Σ u_k p_k the configurational entropy is
      S = -R Σ u_i p_i ln X_i and the chemical potential is μ_i = G_i + u_i RT ln X_i
      (a_i = X_i^u_i; the cross terms vanish because Σ X_k = 1).

Excess part
    Asymmetric van Laar formalism of Holland & Powell (2003, Contrib. Mineral.
    Petrol. 145:492-501): with φ_i = α_i p_i / Σ α_k p_k,
    G_ex = Σ_{i<j} φ_i φ_j · 2W_ij·(Σ α_k p_k)/(α_i + α_j), and
    RT ln γ_l = -Σ_{i<j} q_i q_j W*_ij with q_i = δ_il - φ_i and
    W*_ij = 2 W_ij α_l/(α_i + α_j). With every α = 1 this is the symmetric
    formalism of Powell & Holland (1993). W = W_H - T·W_S + P·W_V.

All functions accept compositions as arrays of shape (..., n) of endmember
amounts (any positive scale; they are normalised internally, so chemical
potentials are homogeneous of degree 0 in the amounts) and work with complex
inputs, which :mod:`thermo.minimize` uses for exact complex-step derivatives.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
from scipy.constants import R

from thermo.errors import DatasetError


@dataclass(frozen=True)
class SolutionModel:
    """A solution phase described by data (see ``solutions.toml``)."""

    name: str
    endmembers: tuple[str, ...]
    is_liquid: bool
    kind: str  # "sites" or "units"
    # sites model: (n_endmembers, n_site_species) occupancy ν and per-column multiplicity
    occupancy: np.ndarray
    multiplicity: np.ndarray
    site_of_column: np.ndarray
    log_k: np.ndarray  # normalisation ln k_i
    units: np.ndarray  # units model: mixing units per species
    alpha: np.ndarray  # van Laar asymmetry α_i
    w_h: np.ndarray  # (n, n) upper-triangular interaction energies [J/mol]
    w_s: np.ndarray  # [J/(mol K)]
    w_v: np.ndarray  # [m3/mol]
    source: str = ""

    @property
    def size(self) -> int:
        return len(self.endmembers)

    def w(self, temperature_k: float, pressure_pa: float) -> np.ndarray:
        """Interaction energies W = W_H - T·W_S + P·W_V [J/mol]."""
        return self.w_h - temperature_k * self.w_s + pressure_pa * self.w_v

    @property
    def static_kernel_args(self) -> tuple:
        """The parts of the kernel arguments that do not depend on (T, P) (see :meth:`kernel_args`)."""
        return self._static_kernel_args

    @cached_property
    def _static_kernel_args(self) -> tuple:
        c = np.ascontiguousarray
        return (self.kind == "units", c(self.occupancy * self.multiplicity, float), c(self.occupancy, float),
                c(self.log_k, float), c(self.units, float), c(self.alpha, float))

    def kernel_args(self, temperature_k: float, pressure_pa: float) -> tuple:
        """Parameters of :mod:`thermo.kernels` at (T, P): the static arrays, C = B + Bᵀ and a flag.

        B_ij = 2W_ij/(α_i + α_j) for i < j (Holland & Powell 2003, Contrib. Mineral. Petrol. 145:492).
        """
        static, vanlaar = self._static_kernel_args, self._van_laar_factor
        if vanlaar is None:
            return (*static, np.zeros((self.size, self.size)), False)
        b = self.w(temperature_k, pressure_pa) * vanlaar
        return (*static, b + b.T, True)

    @cached_property
    def entropy_volume_kernel_matrices(self) -> tuple[np.ndarray | None, np.ndarray | None]:
        """C = B + Bᵀ of the kernels for W_S and for W_V alone (None where zero): μ_ex of those matrices are
        the excess partial molar entropy [J/(mol K)] and volume [m³/mol] (W = W_H − T·W_S + P·W_V)."""
        out = []
        for w in (self.w_s, self.w_v):
            if not np.any(w):
                out.append(None)
                continue
            b = w * (2.0 / (self.alpha[:, None] + self.alpha[None, :]))
            out.append(np.ascontiguousarray(b + b.T))
        return out[0], out[1]

    @cached_property
    def _van_laar_factor(self) -> np.ndarray | None:
        """2/(α_i + α_j), or None for a model without interaction energies."""
        if not (np.any(self.w_h) or np.any(self.w_s) or np.any(self.w_v)):
            return None
        return 2.0 / (self.alpha[:, None] + self.alpha[None, :])

    def restrict(self, keep: list[str]) -> SolutionModel:
        """The model restricted to the endmembers in ``keep`` (others absent)."""
        idx = [self.endmembers.index(e) for e in keep]
        cols = np.flatnonzero(self.occupancy[idx].sum(axis=0) > 0) if self.kind == "sites" else np.arange(0)
        occ = self.occupancy[np.ix_(idx, cols)] if self.kind == "sites" else self.occupancy
        return SolutionModel(
            self.name, tuple(keep), self.is_liquid, self.kind, occ,
            self.multiplicity[cols] if self.kind == "sites" else self.multiplicity,
            self.site_of_column[cols] if self.kind == "sites" else self.site_of_column,
            self.log_k[idx], self.units[idx], self.alpha[idx],
            self.w_h[np.ix_(idx, idx)], self.w_s[np.ix_(idx, idx)], self.w_v[np.ix_(idx, idx)], self.source,
        )


def _normalise(amounts):
    return amounts / np.sum(amounts, axis=-1, keepdims=True)


def _floored_log(x):
    """ln x with x floored at 1e-300 (absent species: a finite, very negative value; complex-safe)."""
    return np.log(np.where(np.real(x) > 1e-300, x, 1e-300))


def ideal_log_activity(model: SolutionModel, amounts):
    """ln a_i(ideal) of every endmember, shape (..., n)."""
    p = _normalise(amounts)
    if model.kind == "units":
        x = p * model.units
        x = x / np.sum(x, axis=-1, keepdims=True)
        return model.units * _floored_log(x)
    xs = p @ model.occupancy  # site-species fractions (..., n_cols)
    return model.log_k + _floored_log(xs) @ (model.occupancy * model.multiplicity).T


def ideal_entropy(model: SolutionModel, amounts):
    """Configurational entropy per mole of formula units [J/(mol K)]: -R Σ p_i ln a_i."""
    p = _normalise(amounts)
    return -R * np.sum(p * ideal_log_activity(model, amounts), axis=-1)


def _excess_parts(model: SolutionModel, p, w):
    """G_ex per mole and μ_ex of each endmember for an interaction matrix ``w``.

    With B_ij = 2W_ij/(α_i + α_j) (i < j), G_ex = (Σ α_k p_k)·φᵀBφ and, expanding
    q = e_l - φ in Holland & Powell (2003) Eq. 4, μ_ex,l = α_l[((B + Bᵀ)φ)_l - φᵀBφ].
    """
    a = model.alpha
    ap = p * a
    asum = np.sum(ap, axis=-1, keepdims=True)
    phi = ap / asum
    bij = 2.0 * w / (a[:, None] + a[None, :])  # upper-triangular
    quad = np.sum(phi * (phi @ bij.T), axis=-1)
    g_ex = asum[..., 0] * quad
    mu = a * (phi @ (bij + bij.T) - quad[..., None])
    return g_ex, mu


def excess(model: SolutionModel, amounts, temperature_k: float, pressure_pa: float):
    """Excess molar Gibbs energy and excess chemical potentials [J/mol]."""
    p = _normalise(amounts)
    if not np.any(model.w_h) and not np.any(model.w_s) and not np.any(model.w_v):
        z = np.zeros(np.shape(p)[:-1])
        return z, np.zeros(np.shape(p))
    return _excess_parts(model, p, model.w(temperature_k, pressure_pa))


def chemical_potentials(model: SolutionModel, amounts, g0, temperature_k: float, pressure_pa: float):
    """μ_i = G_i° + RT ln a_i(ideal) + μ_i(excess) [J/mol], shape (..., n)."""
    _, mu_ex = excess(model, amounts, temperature_k, pressure_pa)
    return g0 + R * temperature_k * ideal_log_activity(model, amounts) + mu_ex


def molar_gibbs(model: SolutionModel, amounts, g0, temperature_k: float, pressure_pa: float):
    """Gibbs energy per mole of formula units, G = Σ p_i μ_i [J/mol]."""
    p = _normalise(amounts)
    return np.sum(p * chemical_potentials(model, amounts, g0, temperature_k, pressure_pa), axis=-1)


def excess_entropy_volume(model: SolutionModel, amounts):
    """Excess entropy [J/(mol K)] and volume [m3/mol] per mole (from W_S and W_V)."""
    p = _normalise(amounts)
    s_ex, _ = _excess_parts(model, p, model.w_s) if np.any(model.w_s) else (0.0 * p[..., 0], None)
    v_ex, _ = _excess_parts(model, p, model.w_v) if np.any(model.w_v) else (0.0 * p[..., 0], None)
    return s_ex, v_ex


# ---------------------------------------------------------------- data loading
def _upper(n, names, pairs, key, where):
    w = np.zeros((n, n))
    for pair in pairs:
        i, j = (names.index(x) if x in names else -1 for x in pair["pair"])
        if i < 0 or j < 0 or i == j:
            raise DatasetError(f"{where}: interaction pair {pair['pair']} names unknown or identical endmembers")
        i, j = min(i, j), max(i, j)
        w[i, j] = float(pair.get(key, 0.0))
    return w


def _sites(spec, names, where):
    sites = spec.get("sites")
    if not sites:
        raise DatasetError(f"{where}: a 'sites' model needs a [[...sites]] list")
    cols, mult, site_of = [], [], []
    for s_idx, site in enumerate(sites):
        for sp in site["species"]:
            cols.append((site["name"], sp))
            mult.append(float(site["multiplicity"]))
            site_of.append(s_idx)
    occ = np.zeros((len(names), len(cols)))
    for i, name in enumerate(names):
        occ_i = spec["occupancy"].get(name)
        if occ_i is None:
            raise DatasetError(f"{where}: no occupancy for endmember {name!r}")
        for site_name, species in occ_i.items():
            for sp, frac in (species.items() if isinstance(species, dict) else [(species, 1.0)]):
                if (site_name, sp) not in cols:
                    raise DatasetError(f"{where}: endmember {name}: unknown site/species {site_name}/{sp}")
                occ[i, cols.index((site_name, sp))] = float(frac)
    for s_idx in range(len(sites)):
        tot = occ[:, np.array(site_of) == s_idx].sum(axis=1)
        if not np.allclose(tot, 1.0):
            raise DatasetError(f"{where}: site {sites[s_idx]['name']} occupancies must sum to 1 for every endmember")
    mult = np.array(mult)
    with np.errstate(divide="ignore"):
        logocc = np.where(occ > 0, np.log(np.where(occ > 0, occ, 1.0)), 0.0)
    log_k = -np.sum(occ * mult * logocc, axis=1)
    return occ, mult, np.array(site_of), log_k


def solution_from_spec(name: str, spec: dict, where: str) -> SolutionModel:
    """Build a :class:`SolutionModel` from one ``[solution.<name>]`` table."""
    names = tuple(spec["endmembers"])
    n = len(names)
    kind = spec.get("mixing", "sites")
    if kind == "sites":
        occ, mult, site_of, log_k = _sites(spec, names, f"{where} [{name}]")
        units = np.ones(n)
    elif kind == "units":
        occ, mult, site_of, log_k = np.zeros((n, 0)), np.zeros(0), np.zeros(0, int), np.zeros(n)
        units = np.array([float(spec.get("mixing_units", {}).get(e, 1.0)) for e in names])
        if np.any(units <= 0):
            raise DatasetError(f"{where} [{name}]: mixing_units must be positive")
    else:
        raise DatasetError(f"{where} [{name}]: mixing must be 'sites' or 'units' (got {kind!r})")
    alpha = np.array([float(spec.get("asymmetry", {}).get(e, 1.0)) for e in names])
    pairs = spec.get("interactions", [])
    return SolutionModel(
        name=name, endmembers=names, is_liquid=bool(spec.get("liquid", False)), kind=kind,
        occupancy=occ, multiplicity=mult, site_of_column=site_of, log_k=log_k, units=units, alpha=alpha,
        w_h=_upper(n, names, pairs, "w_h_j_per_mol", f"{where} [{name}]"),
        w_s=_upper(n, names, pairs, "w_s_j_per_mol_k", f"{where} [{name}]"),
        w_v=_upper(n, names, pairs, "w_v_m3_per_mol", f"{where} [{name}]"),
        source=str(spec.get("source", "")),
    )
