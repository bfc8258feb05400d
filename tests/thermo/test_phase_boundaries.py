"""Solid-solid phase boundaries of pure phases against experiments (checks.csv T-rows).

A boundary is the pressure where ΔG = Σν·G(P, T) of the reaction is zero
(products ν > 0, reactants ν < 0), found with :func:`scipy.optimize.brentq`
on the standard-state Gibbs energies of the dataset.

Tolerances are the rows' stated uncertainties. Above 10 GPa, boundaries
measured in different laboratories differ by the pressure scale used
(reference/checks.md: 0.5-1.5 GPa); that allowance is added to the row's own
uncertainty and stated with each case.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq

from thermo.dataset import load_dataset
from thermo.endmembers import standard_state

CELSIUS_K = 273.15
GPA = 1.0e9

QUARTZ_COESITE = {"coesite": 1.0, "quartz": -1.0}
COESITE_STISHOVITE = {"stishovite": 1.0, "coesite": -1.0}
OLIVINE_WADSLEYITE = {"mg_wadsleyite": 1.0, "forsterite": -1.0}
WADSLEYITE_RINGWOODITE = {"mg_ringwoodite": 1.0, "mg_wadsleyite": -1.0}
POST_SPINEL = {"mg_bridgmanite": 1.0, "periclase": 1.0, "mg_ringwoodite": -1.0}
ALBITE_BREAKDOWN = {"jadeite": 1.0, "quartz": 1.0, "high_albite": -1.0}
KYANITE_SILLIMANITE = {"sillimanite": 1.0, "kyanite": -1.0}
ANDALUSITE_SILLIMANITE = {"sillimanite": 1.0, "andalusite": -1.0}


def reaction_g(reaction: dict[str, float], pressure_pa: float, temperature_k: float) -> float:
    """ΔG [J] of a reaction between pure phases."""
    params = load_dataset().endmembers.subset(list(reaction))
    g = standard_state(params, pressure_pa, temperature_k).g_j_per_mol
    return float(np.dot(g, list(reaction.values())))


def boundary_gpa(reaction: dict[str, float], temperature_k: float, low_gpa: float = 0.0, high_gpa: float = 40.0):
    """Pressure [GPa] of ΔG = 0 at ``temperature_k`` (brentq, 1e-9 GPa)."""
    return brentq(lambda p: reaction_g(reaction, p * GPA, temperature_k), low_gpa, high_gpa, xtol=1e-9)


def clapeyron_slope_mpa_per_k(reaction: dict[str, float], temperature_k: float, low_gpa: float, high_gpa: float):
    """dP/dT [MPa/K] of a boundary by a central difference over ±50 K."""
    p_hi = boundary_gpa(reaction, temperature_k + 50.0, low_gpa, high_gpa)
    p_lo = boundary_gpa(reaction, temperature_k - 50.0, low_gpa, high_gpa)
    return (p_hi - p_lo) * 1000.0 / 100.0


def test_quartz_coesite_boundary_at_1000c():
    # checks.csv T01: Bohlen & Boettcher (1982) J. Geophys. Res. 87:7073; 2.9 +/- 0.15 GPa
    # at 1000 degC; memory.
    assert boundary_gpa(QUARTZ_COESITE, 1000.0 + CELSIUS_K) == pytest.approx(2.9, abs=0.15)


@pytest.mark.xfail(strict=True, reason="dataset coesite=stishovite slope is 3.26 MPa/K over 1000-2000 K vs 2.5 +/- 0.3")
def test_coesite_stishovite_clapeyron_slope():
    # checks.csv T05: Akaogi et al. (1995) J. Geophys. Res. 100:22337 (calculated, consistent with
    # in situ data of Zhang et al. 1996, Phys. Chem. Miner. 23:1); 2.5 +/- 0.3 MPa/K over
    # ~1000-2000 K; single-source.
    slope = (boundary_gpa(COESITE_STISHOVITE, 2000.0) - boundary_gpa(COESITE_STISHOVITE, 1000.0)) * 1000.0 / 1000.0
    assert slope == pytest.approx(2.5, abs=0.3)


@pytest.mark.parametrize(
    ("temperature_k", "bracket_gpa"), [(1273.0, (8.5, 9.5)), (1773.0, (10.0, 11.0))], ids=["1273K", "1773K"]
)
def test_coesite_stishovite_boundary_location(temperature_k, bracket_gpa):
    # Approximate experimental brackets as compiled in reference/endmembers_hp2011.md (memory, no
    # single source; in situ and quench studies differ), widened by the 0.5 GPa minimum
    # pressure-scale allowance of reference/checks.md for boundaries near 10 GPa.
    allowance = 0.5
    pressure = boundary_gpa(COESITE_STISHOVITE, temperature_k)
    assert bracket_gpa[0] - allowance <= pressure <= bracket_gpa[1] + allowance, f"{pressure:.2f} GPa"


def test_forsterite_wadsleyite_boundary_at_1400c():
    # checks.csv T06: Morishima et al. (1994) Science 265:1202, P = 9.3 + 0.0036 T(degC)
    # = 14.34 GPa at 1400 degC, +/- 0.3 GPa; single-source. In situ on the older NaCl scale:
    # + 0.5 GPa pressure-scale allowance (checks.md, low end of 0.5-1.5 GPa).
    reference = 9.3 + 0.0036 * 1400.0
    pressure = boundary_gpa(OLIVINE_WADSLEYITE, 1400.0 + CELSIUS_K, 5.0, 25.0)
    assert pressure == pytest.approx(reference, abs=0.3 + 0.5)


@pytest.mark.xfail(strict=True, reason="dataset forsterite=wadsleyite slope is 1.57 MPa/K at 1400 degC vs 3.6 +/- 0.2")
def test_forsterite_wadsleyite_clapeyron_slope():
    # checks.csv T06: slope 3.6 +/- 0.2 MPa/K (Morishima et al. 1994); single-source.
    slope = clapeyron_slope_mpa_per_k(OLIVINE_WADSLEYITE, 1400.0 + CELSIUS_K, 5.0, 25.0)
    assert slope == pytest.approx(3.6, abs=0.2)


def test_wadsleyite_ringwoodite_boundary_at_1400c():
    # checks.csv T07: Inoue et al. (2006) Phys. Chem. Miner. 33:106; 18.9 +/- 0.4 GPa at 1400 degC;
    # single-source. The row's formula P = 13.1 + 4.11e-3 T reproduces the authors' 18.9 GPa only
    # with T in degC (with T in K it gives 20.0): evaluated in degC, as the row advises.
    reference = 13.1 + 4.11e-3 * 1400.0
    assert reference == pytest.approx(18.9, abs=0.05)
    # The row notes this Au-scale boundary is ~0.8 GPa below the quench data of Katsura & Ito
    # (1989): that spread is the pressure-scale allowance here (0.4 + 0.8 GPa).
    pressure = boundary_gpa(WADSLEYITE_RINGWOODITE, 1400.0 + CELSIUS_K, 10.0, 30.0)
    assert pressure == pytest.approx(reference, abs=0.4 + 0.8)


def test_post_spinel_boundary_at_1600c_mgo_scale():
    # checks.csv T09: Fei et al. (2004) J. Geophys. Res. 109:B02305, P = 25.12 - 0.0013 T(degC)
    # = 23.04 GPa at 1600 degC (MgO pressure scale); single-source. Tolerance: the +/- 1.5 GPa
    # overall pressure-scale uncertainty of the post-spinel boundary (rows T08/T09, checks.md).
    reference = 25.12 - 0.0013 * 1600.0
    pressure = boundary_gpa(POST_SPINEL, 1600.0 + CELSIUS_K, 15.0, 35.0)
    assert pressure == pytest.approx(reference, abs=1.5)


@pytest.mark.xfail(
    strict=True,
    reason="dataset post-spinel boundary is 23.40 GPa at 1600 degC vs 21.1 +/- 1.5 (Anderson Au scale, "
    "which reads ~2 GPa below quench and MgO-scale data; T09 agrees)",
)
def test_post_spinel_boundary_at_1600c_gold_scale():
    # checks.csv T08: Irifune et al. (1998) Science 279:1698, 21.1 GPa at 1600 degC, +/- 0.2 GPa
    # (scale-dependent, +/- 1.5 GPa overall); single-source.
    pressure = boundary_gpa(POST_SPINEL, 1600.0 + CELSIUS_K, 15.0, 35.0)
    assert pressure == pytest.approx(21.1, abs=1.5)


@pytest.mark.parametrize("celsius", [600.0, 1000.0, 1200.0])
def test_albite_jadeite_quartz_boundary(celsius):
    # checks.csv T10: Holland (1980) Am. Mineral. 65:129, P(kbar) = 0.35 + 0.0265 T(degC) for
    # high albite = jadeite + quartz, stated uncertainty +/- 0.5 kbar; single-source. High albite is
    # the form Holland's experiments equilibrated at 600-1200 degC (the row names it).
    reference = (0.35 + 0.0265 * celsius) / 10.0
    assert boundary_gpa(ALBITE_BREAKDOWN, celsius + CELSIUS_K) == pytest.approx(reference, abs=0.05)


def al2sio5_triple_point() -> tuple[float, float]:
    """(T [K], P [GPa]) where kyanite, andalusite and sillimanite have equal G."""

    def gap(t_k: float) -> float:
        return boundary_gpa(KYANITE_SILLIMANITE, t_k, -2.0, 3.0) - boundary_gpa(ANDALUSITE_SILLIMANITE, t_k, -2.0, 3.0)

    t_k = brentq(gap, 650.0, 1000.0, xtol=1e-6)
    return t_k, boundary_gpa(KYANITE_SILLIMANITE, t_k, -2.0, 3.0)


@pytest.mark.xfail(
    strict=True,
    reason="dataset Al2SiO5 triple point is 557 degC, 0.474 GPa vs 501 degC/0.376 GPa (T11) and "
    "530 degC/0.42 GPa (T12), each +/- 20 degC, +/- 0.03 GPa (andalusite H0 is low-confidence)",
)
def test_al2sio5_triple_point():
    # checks.csv T11: Holdaway (1971) Am. J. Sci. 271:97, 501 degC, 0.376 GPa; T12: Bohlen, Montana &
    # Kerrick (1991) Am. Mineral. 76:677, 530 degC, 0.42 GPa; both +/- 20 degC and +/- 0.03 GPa,
    # single-source. The literature disagrees; matching either is acceptable (row T12).
    t_k, p_gpa = al2sio5_triple_point()
    celsius = t_k - CELSIUS_K
    near_t11 = abs(celsius - 501.0) <= 20.0 and abs(p_gpa - 0.376) <= 0.03
    near_t12 = abs(celsius - 530.0) <= 20.0 and abs(p_gpa - 0.42) <= 0.03
    assert near_t11 or near_t12, f"triple point {celsius:.0f} degC, {p_gpa:.3f} GPa"


def _bracket_case(celsius, bracket, xfail=""):
    marks = pytest.mark.xfail(strict=True, reason=xfail) if xfail else ()
    return pytest.param(celsius, bracket, marks=marks, id=f"{celsius:.0f}C")


@pytest.mark.parametrize(
    ("celsius", "bracket_gpa"),
    [
        _bracket_case(600.0, (0.60, 0.65), "dataset kyanite=sillimanite is 0.563 GPa at 600 degC, below 0.60-0.65"),
        _bracket_case(800.0, (0.95, 1.00)),
        _bracket_case(1000.0, (1.43, 1.46), "dataset kyanite=sillimanite is 1.416 GPa at 1000 degC, below 1.43-1.46"),
    ],
)
def test_kyanite_sillimanite_boundary_within_reversed_brackets(celsius, bracket_gpa):
    # checks.csv T13: Bohlen, Montana & Kerrick (1991) Am. Mineral. 76:677, reversed brackets
    # 6.0-6.5 kbar (600 degC), 9.5-10.0 kbar (800 degC), 14.3-14.6 kbar (1000 degC); single-source.
    pressure = boundary_gpa(KYANITE_SILLIMANITE, celsius + CELSIUS_K, -2.0, 3.0)
    assert bracket_gpa[0] <= pressure <= bracket_gpa[1], f"{pressure:.3f} GPa"
