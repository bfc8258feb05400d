"""The candidate phases of a calculation: pure phases and solutions over active components.

A :class:`PhaseSystem` fixes which oxide components are active (those present in
the bulk), which pure phases and solutions can form from them, and the
stoichiometry of every endmember in those components. Endmembers carrying an
absent component are removed, so phases that cannot form from the bulk never
enter the minimization.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from thermo.dataset import Dataset
from thermo.endmembers import EndmemberParameters
from thermo.errors import CompositionError, DatasetError, InputError
from thermo.solutions import SolutionModel, solution_from_spec


@dataclass(frozen=True)
class SolutionPhase:
    """A solution restricted to the active components."""

    model: SolutionModel
    endmember_index: np.ndarray  # positions in PhaseSystem.params
    stoich: np.ndarray  # (m, c) oxide moles per endmember formula unit
    molar_mass: np.ndarray  # (m,) kg/mol

    @property
    def name(self) -> str:
        return self.model.name


@dataclass(frozen=True)
class PhaseSystem:
    """Everything the minimizer needs that does not depend on P and T."""

    components: tuple[str, ...]
    component_index: np.ndarray  # positions of the active components among the dataset oxides
    params: EndmemberParameters  # all endmembers used (pure phases first)
    pure_names: tuple[str, ...]
    pure_stoich: np.ndarray  # (n_pure, c)
    pure_molar_mass: np.ndarray
    pure_is_liquid: np.ndarray
    solutions: tuple[SolutionPhase, ...]
    basis: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))  # (c, r) orthonormal span of phases
    dataset_id: str = ""
    dataset_checksum: str = ""
    notes: list[str] = field(default_factory=list)
    # derived data the minimizer caches per bulk composition (start compositions); not part of identity
    scratch: dict = field(default_factory=dict, compare=False, repr=False)

    @property
    def full_rank(self) -> bool:
        """True when the phases span every active component (chemical potentials are then unique)."""
        return self.basis.shape[1] == len(self.components)

    @property
    def n_pure(self) -> int:
        return len(self.pure_names)


def solution_models(dataset: Dataset) -> dict[str, SolutionModel]:
    """All solution models declared in the dataset's ``solutions.toml``."""
    spec = dataset.extra.get("solutions", {})
    models = {}
    for name, sol in spec.get("solution", {}).items():
        for e in sol.get("endmembers", []):
            if e not in dataset.endmembers.names:
                raise DatasetError(f"solutions.toml [{name}]: unknown endmember {e!r}")
        models[name] = solution_from_spec(name, sol, "solutions.toml")
    return models


def default_phase_names(dataset: Dataset) -> list[str]:
    """The dataset's default candidate phases (solutions and pure phases)."""
    spec = dataset.extra.get("solutions", {})
    return list(spec.get("solution", {})) + list(spec.get("pure_phases", []))


def build_system(
    dataset: Dataset,
    bulk_mol: np.ndarray,
    phases: list[str] | None = None,
    extra_models: list[SolutionModel] | None = None,
) -> PhaseSystem:
    """Assemble the candidate phases for a bulk composition.

    Parameters
    ----------
    dataset : Dataset
    bulk_mol : ndarray, shape (n_oxides,)
        Bulk composition in moles of the dataset's oxides (any scale).
    phases : list of str, optional
        Names of candidate phases: solution names from the dataset, or endmember
        names (used as pure phases). Defaults to the dataset's default list.
    extra_models : list of SolutionModel, optional
        Additional solution models (e.g. calibration or test models).
    """
    bulk_mol = np.asarray(bulk_mol, float)
    active = np.flatnonzero(bulk_mol > 0.0)
    if active.size == 0:
        raise CompositionError("composition.oxides", "bulk composition is empty")
    models = solution_models(dataset)
    for m in extra_models or []:
        models[m.name] = m
    names = phases if phases is not None else default_phase_names(dataset) + [m.name for m in extra_models or []]
    absent = ~np.isin(np.arange(len(dataset.oxides)), active)

    def usable(em: str) -> bool:
        i = dataset.index(em)
        return bool(dataset.in_system[i]) and not np.any(dataset.stoichiometry[i, absent] > 0)

    pure, sols, notes = [], [], []
    for name in names:
        if name in models:
            keep = [e for e in models[name].endmembers if usable(e)]
            if keep:
                sols.append(models[name].restrict(keep))
        elif name in dataset.endmembers.names:
            if usable(name):
                pure.append(name)
        else:
            raise InputError("phases", f"unknown phase {name!r}: not a solution or endmember of {dataset.id}")
    all_em = list(dict.fromkeys(pure + [e for s in sols for e in s.endmembers]))
    idx = [dataset.index(e) for e in all_em]
    stoich = dataset.stoichiometry[np.ix_(idx, active)]
    mass = dataset.molar_mass_kg_per_mol[idx]
    sol_phases = tuple(
        SolutionPhase(m, np.array([all_em.index(e) for e in m.endmembers]),
                      stoich[[all_em.index(e) for e in m.endmembers]], mass[[all_em.index(e) for e in m.endmembers]])
        for m in sols
    )
    n_pure = len(pure)
    basis = span(stoich)
    b = bulk_mol[active]
    if np.abs(b - basis @ (basis.T @ b)).max() > 1e-9 * np.abs(b).max():
        raise CompositionError(
            "composition.oxides",
            "the bulk composition lies outside the chemical system of the candidate phases "
            f"({', '.join(all_em) or 'none'})",
        )
    return PhaseSystem(
        components=tuple(dataset.oxides[i] for i in active), component_index=active,
        params=dataset.endmembers.subset(all_em), pure_names=tuple(pure), pure_stoich=stoich[:n_pure],
        pure_molar_mass=mass[:n_pure], pure_is_liquid=dataset.endmembers.is_liquid[idx][:n_pure],
        solutions=sol_phases, basis=basis, dataset_id=dataset.id, dataset_checksum=dataset.checksum, notes=notes,
    )


def span(stoich: np.ndarray) -> np.ndarray:
    """Orthonormal basis (c, r) of the space spanned by the endmember compositions."""
    if stoich.size == 0:
        return np.zeros((stoich.shape[1], 0))
    _, sv, vt = np.linalg.svd(stoich, full_matrices=False)
    rank = int(np.sum(sv > 1e-10 * sv.max()))
    return vt[:rank].T
