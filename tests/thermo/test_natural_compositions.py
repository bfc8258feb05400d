"""Subsolidus assemblages of a fertile peridotite with the default dataset, against experiments.

The bulk is KLB-1 (Davis et al. 2009, Am. Mineral. 94:176; checks.csv C04, memory) reduced to
NCFMAS (TiO2, Cr2O3, MnO, K2O, NiO and P2O5 dropped; 1.2 wt% in all). Each case sits well inside
a stability field reported by experiments, at a distance larger than the experimental and
pressure-scale uncertainties, and checks which phases are present and which are absent.

Without Cr2O3 the spinel field shrinks to lower pressure (Cr stabilises spinel; O'Neill 1981,
Contrib. Mineral. Petrol. 77:185, memory), so the spinel-lherzolite case is placed low in the
field. Transition-zone boundaries depend on the pressure scale of the experiment by up to
~2 GPa (reference/checks.md); the cases are placed between the boundaries as measured on the
different scales.
"""

from __future__ import annotations

import math

import pytest

from thermo.equilibrium import prepare, solve_point
from thermo.saturation import melting_interval

#: checks.csv C04: KLB-1 (Davis et al. 2009; original analysis Takahashi 1986), memory.
KLB1_WT_PERCENT = {
    "SiO2": 44.48, "TiO2": 0.16, "Al2O3": 3.59, "Cr2O3": 0.31, "FeO": 8.10, "MnO": 0.12, "MgO": 39.22,
    "CaO": 3.44, "Na2O": 0.30, "K2O": 0.02, "NiO": 0.25, "P2O5": 0.03,
}
PRESENT = 1e-4  # mass fraction counted as present


@pytest.fixture(scope="module")
def klb1():
    return prepare(KLB1_WT_PERCENT, drop_unsupported=True)


def phases_at(problem, pressure_gpa: float, temperature_k: float) -> set[str]:
    _, assemblage = solve_point(problem, pressure_gpa, temperature_k)
    return {p.model for p in assemblage.phases if assemblage.mass_fraction(p) > PRESENT}


CASES = [
    # Plagioclase lherzolite: plagioclase gives way to spinel at ~0.7-0.9 GPa near 1100-1250 C in fertile
    # lherzolite (Borghini G., Fumagalli P. & Rampone E. (2010) J. Petrol. 51:229; memory). 0.4 GPa, 1250 K.
    pytest.param(0.4, 1250.0, {"olivine", "orthopyroxene", "clinopyroxene", "plagioclase"}, {"spinel", "garnet"},
                 id="plagioclase-lherzolite-0.4GPa"),
    # Spinel lherzolite between the plagioclase-out (~0.8 GPa, above) and the garnet-in reaction, which lies at
    # ~1.6-2.1 GPa over 1000-1400 C in CMAS (O'Neill H.St.C. (1981) Contrib. Mineral. Petrol. 77:185; Klemme S. &
    # O'Neill H.St.C. (2000) Contrib. Mineral. Petrol. 138:237; memory). 1.3 GPa, 1250 K.
    pytest.param(1.3, 1250.0, {"olivine", "orthopyroxene", "clinopyroxene", "spinel"}, {"plagioclase", "garnet"},
                 id="spinel-lherzolite-1.3GPa"),
    # Garnet lherzolite well above the spinel-garnet transition (same sources); Takahashi E. (1986) J. Geophys.
    # Res. 91:9367 reports garnet lherzolite below the KLB-1 solidus at 3-5 GPa. 3.5 GPa, 1450 K.
    pytest.param(3.5, 1450.0, {"olivine", "orthopyroxene", "clinopyroxene", "garnet"}, {"plagioclase", "spinel"},
                 id="garnet-lherzolite-3.5GPa"),
    # Olivine below the olivine-wadsleyite transition: Mg2SiO4 at 1900 K transforms at 9.3 + 0.0036*1627 =
    # 15.2 GPa (checks.csv T06, Morishima et al. 1994 Science 265:1202); Fe lowers it in peridotite by ~1 GPa.
    pytest.param(12.0, 1900.0, {"olivine", "garnet"}, {"wadsleyite", "ringwoodite"}, id="olivine-12GPa"),
    # Wadsleyite between T06 (15.2 GPa at 1900 K) and wadsleyite-ringwoodite (~19.8 GPa at 1900 K from
    # checks.csv T07, Inoue et al. 2006 Phys. Chem. Miner. 33:106, 18.9 GPa at 1400 C with ~4 MPa/K).
    pytest.param(16.5, 1900.0, {"wadsleyite", "garnet"}, {"olivine", "ringwoodite", "bridgmanite"},
                 id="wadsleyite-16.5GPa"),
    # Ringwoodite between wadsleyite-ringwoodite (~19.8 GPa, T07) and the post-spinel boundary at 1900 K:
    # 21.1 GPa at 1600 C on the Au scale of Irifune et al. (1998) Science 279:1698 (T08) to 23.0 GPa on the
    # MgO scale of Fei et al. (2004) J. Geophys. Res. 109:B02305 (T09).
    pytest.param(20.5, 1900.0, {"ringwoodite", "garnet"}, {"wadsleyite", "bridgmanite", "olivine"},
                 id="ringwoodite-20.5GPa"),
    # Bridgmanite + ferropericlase above the post-spinel boundary on either scale (T08, T09); Ca-perovskite
    # accompanies them in peridotite at the top of the lower mantle.
    pytest.param(25.0, 1900.0, {"bridgmanite", "ferropericlase", "ca_perovskite"}, {"ringwoodite", "wadsleyite"},
                 id="bridgmanite-ferropericlase-25GPa"),
]


@pytest.mark.parametrize(("pressure_gpa", "temperature_k", "present", "absent"), CASES)
def test_fertile_peridotite_subsolidus_assemblage(klb1, pressure_gpa, temperature_k, present, absent):
    found = phases_at(klb1, pressure_gpa, temperature_k)
    assert present <= found, f"missing {sorted(present - found)}; found {sorted(found)}"
    assert not (absent & found), f"unexpected {sorted(absent & found)}; found {sorted(found)}"
    assert "liquid" not in found


def test_fertile_peridotite_is_solid_below_and_partly_molten_above_its_one_bar_solidus(klb1):
    # checks: Hirschmann M.M. (2000) G3 1:2000GC000070, solidus fit T(C) = 1120.661 + 132.899 P - 5.104 P^2
    # (memory) gives 1393.8 K at 1 bar; the fit's scatter is ~+/-20-30 K, so check 60 K either side.
    assert "liquid" not in phases_at(klb1, 0.0001, 1393.8 - 60.0)
    assert "liquid" in phases_at(klb1, 0.0001, 1393.8 + 60.0)


# ------------------------------------------------------------------ melting at 10-25 GPa (validation, not fitted)
# Herzberg C., Raterron P. & Zhang J. (2000) G3 1:2000GC000089 fit the anhydrous peridotite solidus above ~10 GPa as
# T(C) = 1086 - 5.7 P + 390 ln P (memory), a fit to experiments on KLB-1 and similar fertile peridotites (Zhang &
# Herzberg 1994 J. Geophys. Res. 99:17729; Herzberg & Zhang 1996 J. Geophys. Res. 101:8271; memory). Tolerance
# +/-100 K: the fit's scatter (~+/-50 K), the recollection, and the NCFMAS reduction of the bulk. The liquid
# volumes behind these numbers were fitted to pure-phase melting curves only (docs/liquid-volumes.md).
def _herzberg_2000_solidus_k(pressure_gpa: float) -> float:
    return 1086.0 - 5.7 * pressure_gpa + 390.0 * math.log(pressure_gpa) + 273.15


def _solidus_k(problem, pressure_gpa: float) -> float:
    interval = melting_interval(problem, pressure_gpa, 3000.0, 1900.0, step_k=25.0)
    assert interval.solidus_k is not None, interval.notes
    return interval.solidus_k


# Model: -63, -53, +94 and -5 K at 10, 15, 20, 25 GPa. Above ~20 GPa the model's solidus is where its last sodium
# host (clinopyroxene; its garnet has no Na) breaks down and a sodic melt (mostly NaAlSiO4 species) appears, so the
# agreement at 25 GPa is partly fortuitous (docs/dataset.md, weakness 7).
@pytest.mark.parametrize("pressure_gpa", [10.0, 15.0, 20.0, 25.0])
def test_fertile_peridotite_solidus_at_high_pressure_follows_herzberg_fit(klb1, pressure_gpa):
    assert _solidus_k(klb1, pressure_gpa) == pytest.approx(_herzberg_2000_solidus_k(pressure_gpa), abs=100.0)


@pytest.mark.xfail(strict=True, reason=(
    "at 20 GPa and 3000 K the model keeps ferropericlase beside the liquid: Mg2SiO4 liquid is unstable against "
    "MgSi2O6/2 liquid + periclase above ~11 GPa (docs/dataset.md weaknesses 1 and 7)"))
def test_fertile_peridotite_is_fully_molten_400_k_above_its_20_gpa_liquidus(klb1):
    # Zhang & Herzberg (1994) J. Geophys. Res. 99:17729 (memory): KLB-1 liquidus about 2500-2600 K near 20 GPa,
    # with majoritic garnet as liquidus phase. 3000 K is ~400 K above it, beyond any recollection error.
    assert phases_at(klb1, 20.0, 3000.0) == {"liquid"}


# ------------------------------------------------------------------ liquidus to 10 GPa (validation, not fitted)
# Takahashi (1986) J. Geophys. Res. 91:9367 and Zhang & Herzberg (1994) J. Geophys. Res. 99:17729 (memory): olivine is
# the liquidus phase of KLB-1 up to about 14 GPa, at roughly 2250-2300 K at 5 GPa and 2450-2500 K at 10 GPa.
# Tolerance +/-150 K: the recollection (~+/-100 K) and the NCFMAS reduction of the bulk.
@pytest.mark.parametrize(("pressure_gpa", "liquidus_k"), [(5.0, 2275.0), (10.0, 2475.0)])
def test_fertile_peridotite_liquidus_is_olivine_at_the_experimental_temperature(klb1, pressure_gpa, liquidus_k):
    interval = melting_interval(klb1, pressure_gpa, 3000.0, 1900.0, step_k=25.0)
    first_in = next(b for b in interval.boundaries if b.appearing)  # first solid to appear on cooling
    assert first_in.appearing == ("olivine",)
    assert first_in.temperature_k == pytest.approx(liquidus_k, abs=150.0)


# ------------------------------------------------------------------ olivine-melt density inversion
# Sink/float experiments put the density crossover between a peridotite melt and its equilibrium olivine at about
# 11-13.5 GPa (Agee & Walker 1993, Earth Planet. Sci. Lett. 114:315; Ohtani, Nagata, Suzuki & Kato 1995, Chem. Geol.
# 120:207; memory): olivine sinks in such a melt at shallower depth and floats deeper, which decides whether a
# crystallizing magma ocean stratifies. The checks compare the densities of coexisting olivine and liquid at 6 GPa
# (5 GPa below the lowest recalled crossover) and 14 GPa (0.5 GPa above the highest, the weaker side). The model's
# own crossover along the KLB-1 liquidus is at 9.6 GPa (docs/dataset.md, weakness 7d), below the recalled range.
@pytest.mark.parametrize(("pressure_gpa", "temperature_k", "olivine_denser"), [(6.0, 2230.0, True),
                                                                              (14.0, 2400.0, False)])
def test_olivine_sinks_in_peridotite_melt_at_6_gpa_and_floats_at_14_gpa(klb1, pressure_gpa, temperature_k,
                                                                         olivine_denser):
    _, assemblage = solve_point(klb1, pressure_gpa, temperature_k)
    density = {p.name: p.density_kg_per_m3 for p in assemblage.phases if p.mass_kg / assemblage.mass_kg > 0.05}
    assert {"olivine", "liquid"} <= set(density), density  # both present, >5 wt% each
    assert (density["olivine"] > density["liquid"]) == olivine_denser, density


@pytest.mark.parametrize("pressure_gpa", [1.0, 5.0, 9.0])
def test_fertile_peridotite_melt_holds_all_its_mgo_up_to_the_calibrated_9_gpa(klb1, pressure_gpa):
    # Above its liquidus a peridotite melt is one liquid (the experiments above): no ferropericlase, no second
    # liquid, up to the top of the domain. Guards the liquid volumes (docs/liquid-volumes.md); from 10 GPa the
    # model fails this (docs/dataset.md, weakness 7a), which is why its melt model is declared calibrated to 9 GPa.
    for t in (2600.0, 3000.0, 3500.0):
        assert phases_at(klb1, pressure_gpa, t) == {"liquid"}, t
