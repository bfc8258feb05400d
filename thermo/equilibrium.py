"""One-call equilibrium: oxide composition, P and T in; assemblage properties out."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from thermo.assemblage import Assemblage, assemblage_properties
from thermo.composition import Bulk, bulk_from_oxides
from thermo.dataset import DEFAULT_DATASET_ID, Dataset, load_dataset
from thermo.minimize import Equilibrium, SolverOptions, equilibrate
from thermo.phases import PhaseSystem, build_system
from thermo.validity import check_conditions


@dataclass(frozen=True)
class Problem:
    """A prepared calculation: dataset, bulk composition and candidate phases."""

    dataset: Dataset
    bulk: Bulk
    system: PhaseSystem

    @property
    def bulk_mol(self):
        return self.bulk.mol_per_kg[self.system.component_index]


def prepare(
    oxides: Mapping[str, float],
    basis: str = "wt_percent",
    dataset_id: str = DEFAULT_DATASET_ID,
    phases: list[str] | None = None,
    drop_unsupported: bool = False,
) -> Problem:
    """Read a composition and build the candidate phase system for it."""
    ds = load_dataset(dataset_id)
    bulk = bulk_from_oxides(oxides, basis, supported=ds.oxides, drop_unsupported=drop_unsupported)
    return Problem(ds, bulk, build_system(ds, bulk.mol_per_kg, phases))


def solve_point(
    problem: Problem,
    pressure_gpa: float,
    temperature_k: float,
    warm: Equilibrium | None = None,
    options: SolverOptions | None = None,
) -> tuple[Equilibrium, Assemblage]:
    """Equilibrium at one (P, T) within the dataset's validity domain."""
    check_conditions(problem.dataset, pressure_gpa, temperature_k)
    eq = equilibrate(problem.system, pressure_gpa * 1e9, temperature_k, problem.bulk_mol, warm=warm, options=options)
    return eq, assemblage_properties(eq)
