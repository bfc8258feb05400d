"""Standard thermochemistry of the endmembers against handbook and calorimetric values.

Rows S01-S27, T02 and T04 of reference/checks.csv; each case cites the row, its
source and its provenance word (single-source, memory, cross-checked). The
tolerance of every case is the row's ``tolerance_suggested`` (the authors'
stated uncertainty where there is one). "JANAF" below is Chase M.W. Jr (1998)
NIST-JANAF Thermochemical Tables, 4th ed., J. Phys. Chem. Ref. Data Monograph 9.

Where the dataset misses a row's tolerance the case is a strict xfail whose
reason gives the measured numbers; rows where JANAF is known to disagree with
calorimetry say so (checks.md, "Known disagreements").

H0 in the dataset is the enthalpy of formation from the elements at 298.15 K
and 1 bar, so it is compared directly with the dfH298 of the rows.
"""

from __future__ import annotations

from collections.abc import Callable

import pytest

from thermo.dataset import load_dataset
from thermo.endmembers import T_REF_K, standard_state

ONE_BAR_PA = 1.0e5
#: Slack for values that sit exactly on a tolerance edge in the printed digits (float round-off only).
ROUND_OFF = 1e-9


def _state(name: str, temperature_k: float):
    return standard_state(load_dataset().endmembers.subset([name]), ONE_BAR_PA, temperature_k)


def s_at(name: str, temperature_k: float = T_REF_K) -> float:
    """Entropy [J/(mol K)] at 1 bar."""
    return float(_state(name, temperature_k).s_j_per_mol_k[0])


def cp_at(name: str, temperature_k: float = T_REF_K) -> float:
    """Heat capacity [J/(mol K)] at 1 bar."""
    return float(_state(name, temperature_k).cp_j_per_mol_k[0])


def h_at_kj(name: str, temperature_k: float = T_REF_K) -> float:
    """Enthalpy of formation from the elements plus heat content [kJ/mol] at 1 bar."""
    return float(_state(name, temperature_k).h_j_per_mol[0]) / 1000.0


def heat_content_kj(name: str, temperature_k: float) -> float:
    """H(T) − H(298.15 K) [kJ/mol] at 1 bar."""
    return h_at_kj(name, temperature_k) - h_at_kj(name, T_REF_K)


def reaction_h_kj(terms: dict[str, float], temperature_k: float) -> float:
    """Σ ν·H [kJ] of a reaction at 1 bar (products positive, reactants negative)."""
    return sum(nu * h_at_kj(name, temperature_k) for name, nu in terms.items())


def _case(row: str, what: str, model: Callable[[], float], reference: float, tolerance: float, xfail: str = ""):
    marks = pytest.mark.xfail(strict=True, reason=xfail) if xfail else ()
    return pytest.param(model, reference, tolerance, marks=marks, id=f"{row}-{what}")


def _pct(reference: float, percent: float) -> float:
    return abs(reference) * percent / 100.0


FO_OXIDES = {"forsterite": 1.0, "periclase": -2.0, "quartz": -1.0}
EN_OXIDES_PER_MGSIO3 = {"enstatite": 0.5, "periclase": -1.0, "quartz": -1.0}

CASES = [
    # S01: Robie, Hemingway & Takei (1982) Am. Mineral. 67:470, adiabatic calorimetry; single-source.
    _case("S01", "forsterite-S298", lambda: s_at("forsterite"), 94.11, 0.10,
          "dataset S0 95.1 J/(mol K) follows JANAF (95.14), 0.99 above calorimetry 94.11 +/- 0.10"),
    # S02: Robie, Hemingway & Takei (1982); JANAF 118.69; cross-checked.
    _case("S02", "forsterite-Cp298", lambda: cp_at("forsterite"), 118.6, 0.3),
    # S03: Robie & Hemingway (1995) USGS Bull. 2131; memory.
    _case("S03", "forsterite-dfH298", lambda: h_at_kj("forsterite"), -2173.0, 2.0),
    # S04: Robie, Finch & Hemingway (1982) Am. Mineral. 67:463; single-source.
    _case("S04", "fayalite-S298", lambda: s_at("fayalite"), 151.0, 0.2),
    # S05: JANAF; single-source (Robie & Hemingway 1995 from memory: 26.94, agrees).
    _case("S05", "periclase-S298", lambda: s_at("periclase"), 26.924, 0.15,
          "dataset S0 26.50 J/(mol K) is 0.42 below JANAF 26.924 +/- 0.15"),
    _case("S05", "periclase-dfH298", lambda: h_at_kj("periclase"), -601.241, 0.3),
    # S06-S08: JANAF; single-source.
    _case("S06", "quartz-S298", lambda: s_at("quartz"), 41.463, 0.2),
    _case("S06", "quartz-dfH298", lambda: h_at_kj("quartz"), -910.857, 1.0),
    _case("S07", "corundum-S298", lambda: s_at("corundum"), 50.950, 0.1),
    _case("S07", "corundum-dfH298", lambda: h_at_kj("corundum"), -1675.692, 1.3),
    _case("S08", "lime-S298", lambda: s_at("lime"), 38.212, 0.4),
    _case("S08", "lime-dfH298", lambda: h_at_kj("lime"), -635.089, 0.9),
    # S09: JANAF; single-source. JANAF's spinel includes Mg-Al cation disorder in S298
    # (known disagreement); there is no calorimetric row for ordered spinel to test instead.
    _case("S09", "spinel-S298", lambda: s_at("spinel"), 88.692, 0.5,
          "dataset S0 82.0 J/(mol K) vs JANAF 88.692 +/- 0.5 (JANAF counts cation disorder)"),
    _case("S09", "spinel-dfH298", lambda: h_at_kj("spinel"), -2299.108, 2.0,
          "dataset H0 -2301.19 kJ/mol is 2.08 below JANAF -2299.108 +/- 2"),
    _case("S09", "spinel-Cp298", lambda: cp_at("spinel"), 116.198, 1.0,
          "dataset Cp(298) 117.34 J/(mol K) is 1.15 above JANAF 116.198 +/- 1"),
    # S10: Krupka et al. (1985) Am. Mineral. 70:261, per MgSiO3 (dataset unit is Mg2Si2O6); memory.
    _case("S10", "enstatite-S298", lambda: s_at("enstatite") / 2.0, 66.27, 0.15),
    # S11: Krupka et al. (1985); Robie & Hemingway (1995); memory. 142.9 vs 142.7 sits on the edge.
    _case("S11", "diopside-S298", lambda: s_at("diopside"), 142.7, 0.2 + ROUND_OFF),
    # S12: Robie, Hemingway & Wilson (1978) Am. Mineral. 63:109; memory.
    _case("S12", "anorthite-S298", lambda: s_at("anorthite"), 199.3, 0.3,
          "dataset S0 200.5 J/(mol K) is 1.2 above calorimetry 199.3 +/- 0.3"),
    # S13: Robie & Hemingway (1995); memory.
    _case("S13", "albite-S298", lambda: s_at("albite"), 207.4, 0.4),
    # S14: Holland (1980) Am. Mineral. 65:129, from phase equilibria; single-source.
    _case("S14", "high_albite-S298", lambda: s_at("high_albite"), 221.6, 2.5,
          "dataset S0 224.3 J/(mol K) is 2.7 above Holland (1980) 221.6 +/- 2.5"),
    _case("S14", "high_albite-dfH298", lambda: h_at_kj("high_albite"), -3922.17, 4.3),
    # S15: Haselton & Westrum (1980) Geochim. Cosmochim. Acta 44:701; memory.
    _case("S15", "pyrope-S298", lambda: s_at("pyrope"), 266.3, 0.8,
          "dataset S0 269.5 J/(mol K) is 3.2 above calorimetry 266.3 +/- 0.8"),
    # S16: JANAF; single-source (the row notes 1-2 J/(mol K) spread between compilations).
    _case("S16", "kyanite-S298", lambda: s_at("kyanite"), 83.815, 0.5),
    _case("S16", "andalusite-S298", lambda: s_at("andalusite"), 93.221, 0.5,
          "dataset S0 92.7 J/(mol K) is 0.52 below JANAF 93.221 +/- 0.5"),
    _case("S16", "sillimanite-S298", lambda: s_at("sillimanite"), 96.179, 0.5,
          "dataset S0 95.4 J/(mol K) is 0.78 below JANAF 96.179 +/- 0.5"),
    # S17: Anovitz et al. (1985) Geochim. Cosmochim. Acta 49:2027; single-source.
    _case("S17", "ilmenite-S298", lambda: s_at("ilmenite"), 108.9, 0.3,
          "dataset S0 109.5 J/(mol K) is 0.6 above calorimetry 108.9 +/- 0.3"),
    # S18: Brousse, Newton & Kleppa (1984) Geochim. Cosmochim. Acta 48:1081, solution
    # calorimetry at 1073 K; single-source. (JANAF-derived values, rows J10, are 4-6 kJ more
    # negative; the row flags the disagreement and the dataset sides with calorimetry.)
    _case("S18", "forsterite-from-oxides-1073K", lambda: reaction_h_kj(FO_OXIDES, 1073.0), -59.5, 1.9),
    # S19: Brousse, Newton & Kleppa (1984), -8.10 +/- 0.42 kcal = -33.9 kJ; single-source. The row
    # says "per Mg2Si2O6", but the number is per MgSiO3: it equals the kcal value, and JANAF's
    # MgSiO3 gives -36.8 kJ per MgSiO3 at 298 K. Tested per MgSiO3.
    _case("S19", "enstatite-from-oxides-1073K", lambda: reaction_h_kj(EN_OXIDES_PER_MGSIO3, 1073.0), -33.9, 1.8),
    # S20-S22: JANAF (S22 also Navrotsky 1995, AGU Ref. Shelf 2); single-source / cross-checked.
    # JANAF's forsterite S is ~1 J/(mol K) above calorimetry at 298 K and the offset propagates;
    # the dataset shares it (see S01).
    _case("S20", "forsterite-dH-1000K", lambda: heat_content_kj("forsterite", 1000.0), 109.392, _pct(109.392, 0.5)),
    _case("S21", "forsterite-dH-2000K", lambda: heat_content_kj("forsterite", 2000.0), 297.248, _pct(297.248, 1.0)),
    _case("S21", "forsterite-S-2000K", lambda: s_at("forsterite", 2000.0), 406.660, _pct(406.660, 1.0)),
    _case("S22", "forsterite-Cp-1500K", lambda: cp_at("forsterite", 1500.0), 188.3, _pct(188.3, 1.0)),
    # S23: JANAF 198.5 vs Navrotsky (1995) 191 (4 % apart: disorder at high T); single-source.
    _case("S23", "spinel-Cp-1500K-janaf", lambda: cp_at("spinel", 1500.0), 198.5, _pct(198.5, 4.0)),
    _case("S23", "spinel-Cp-1500K-navrotsky", lambda: cp_at("spinel", 1500.0), 191.0, _pct(191.0, 4.0)),
    # S24-S27: JANAF; single-source.
    _case("S24", "periclase-dH-1000K", lambda: heat_content_kj("periclase", 1000.0), 33.001, _pct(33.001, 0.5),
          "dataset 32.775 kJ/mol is 0.68 % below JANAF 33.001 +/- 0.5 %"),
    _case("S24", "periclase-S-1000K", lambda: s_at("periclase", 1000.0), 82.262, _pct(82.262, 0.5),
          "dataset 81.49 J/(mol K) is 0.94 % below JANAF 82.262 +/- 0.5 % (0.42 of it from S298)"),
    _case("S24", "periclase-dH-2000K", lambda: heat_content_kj("periclase", 2000.0), 86.613, _pct(86.613, 0.5),
          "dataset 85.71 kJ/mol is 1.04 % below JANAF 86.613 +/- 0.5 %"),
    _case("S24", "periclase-S-2000K", lambda: s_at("periclase", 2000.0), 119.249, _pct(119.249, 0.5),
          "dataset 118.04 J/(mol K) is 1.01 % below JANAF 119.249 +/- 0.5 %"),
    _case("S25", "corundum-dH-1000K", lambda: heat_content_kj("corundum", 1000.0), 77.965, _pct(77.965, 0.5)),
    _case("S25", "corundum-S-1000K", lambda: s_at("corundum", 1000.0), 180.210, _pct(180.210, 0.5)),
    _case("S25", "corundum-dH-2000K", lambda: heat_content_kj("corundum", 2000.0), 209.710, _pct(209.710, 0.5)),
    _case("S25", "corundum-S-2000K", lambda: s_at("corundum", 2000.0), 271.056, _pct(271.056, 0.5)),
    # S26: includes the alpha-beta transition at 847 K.
    _case("S26", "quartz-dH-1000K", lambda: heat_content_kj("quartz", 1000.0), 45.357, _pct(45.357, 0.5)),
    _case("S26", "quartz-S-1000K", lambda: s_at("quartz", 1000.0), 116.018, _pct(116.018, 0.5)),
    _case("S27", "spinel-dH-2000K", lambda: heat_content_kj("spinel", 2000.0), 308.826, _pct(308.826, 1.0)),
    _case("S27", "spinel-S-2000K", lambda: s_at("spinel", 2000.0), 408.322, _pct(408.322, 1.0),
          "dataset 404.18 J/(mol K) is 1.02 % below JANAF 408.322 +/- 1 % (JANAF counts cation disorder)"),
    # T02, T04: Akaogi, Yusa, Shiraishi & Suzuki (1995) J. Geophys. Res. 100:22337, solution
    # calorimetry at 298 K; single-source. T04 revises Akaogi & Navrotsky (1984) down by 15 kJ.
    _case("T02", "quartz-to-coesite-dH298", lambda: reaction_h_kj({"coesite": 1.0, "quartz": -1.0}, T_REF_K),
          3.40, 0.56),
    _case("T04", "coesite-to-stishovite-dH298", lambda: reaction_h_kj({"stishovite": 1.0, "coesite": -1.0}, T_REF_K),
          33.62, 1.01, "dataset gives 30.27 kJ/mol, 3.35 below calorimetry 33.62 +/- 1.01"),
]


@pytest.mark.parametrize(("model", "reference", "tolerance"), CASES)
def test_standard_thermo_matches_published_value(model, reference, tolerance):
    value = model()
    assert abs(value - reference) <= tolerance, f"model {value:.4f} vs {reference} +/- {tolerance:.4g}"
