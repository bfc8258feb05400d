"""Problems on binary joins for the path, saturation, table and format tests.

The liquid models and the anorthite-liquid adjustment are those of
``tests/thermo/binary_models.py`` (documented there): Di–An with the liquid
fitted to the eutectic 1274 °C (checks.csv D01) and the An60 liquidus
1389 °C (D03), anorthite_liquid H0 moved so that anorthite melts at 1826 K
(M11); Fo–Fa with an ideal two-unit liquid and the dataset's olivine.
"""

from __future__ import annotations

from functools import lru_cache

from tests.thermo import binary_models as bm
from thermo.composition import Bulk
from thermo.dataset import load_dataset
from thermo.equilibrium import Problem
from thermo.phases import build_system

CELSIUS_K = 273.15


@lru_cache(maxsize=1)
def _di_an_dataset():
    return bm.dataset_with_anorthite_liquid_at_observed_melting()


def _problem(ds, bulk_per_100_g, phases, model) -> Problem:
    bulk = bulk_per_100_g * 10.0  # mol per kg
    system = build_system(ds, bulk, phases=[*phases, "liquid"], extra_models=[model])
    return Problem(ds, Bulk(ds.oxides, bulk, []), system)


def di_an(anorthite_wt_percent: float) -> Problem:
    """1 kg of the Di–An join with the given anorthite mass percentage."""
    ds = _di_an_dataset()
    bulk = bm.join_bulk(ds, "anorthite", "diopside", anorthite_wt_percent)
    return _problem(ds, bulk, ["diopside", "anorthite"], bm.diopside_anorthite_liquid())


def fo_fa(forsterite_wt_percent: float) -> Problem:
    """1 kg of the Fo–Fa join with the given forsterite mass percentage."""
    ds = bm.recalled_liquid_parameters(load_dataset())
    bulk = bm.join_bulk(ds, "forsterite", "fayalite", forsterite_wt_percent)
    return _problem(ds, bulk, ["olivine"], bm.forsterite_fayalite_liquid())
