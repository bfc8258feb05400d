"""Derive the nepheline-composition liquid endmember (``nepheline_liquid``, NaAlSiO4) of the default dataset.

Run from the project root::

    .venv/bin/python calibration/nepheline_liquid.py

It prints the values that go into ``endmembers.csv`` and ``liquid_volumes.toml`` (copied by hand, with
their sources) and, once the row is in the dataset, checks it. No fitting: every number follows from the
data below. The Holland & Powell (2011) nepheline liquid could not be recovered
(``../shared/reference/endmembers_hp2011.md``); without a low-silica sodium species the liquid can hold Na
only as NaAlSi3O8, so silica-poor melts push jadeite-rich clinopyroxene and nepheline onto their liquidus
(docs/dataset.md, weaknesses 1 and 7).

Thermodynamic part (1 bar). Stebbins, Carmichael & Weill (1983, Am. Mineral. 68:717) measured the
enthalpy of fusion of (metastable) nepheline, ΔH_fus = 49.0 ± 2.1 kJ/mol, quoted at 1750 K
(``reference/checks.csv`` M19). We take 1750 K as the metastable congruent melting point Tm (nepheline
inverts to carnegieite near 1525 K, which melts near 1799 K; memory), so ΔS_fus = ΔH_fus/Tm. The liquid is
anchored to the dataset's own nepheline at Tm:

    H_liq(Tm) = H_ne(Tm) + ΔH_fus,   S_liq(Tm) = S_ne(Tm) + ΔH_fus/Tm,
    H0 = H_liq(Tm) − Cp·(Tm − 298.15 K),   S0 = S_liq(Tm) − Cp·ln(Tm/298.15 K),

with the constant liquid heat capacity of the additive oxide model, Cp = ½ Cp(Na2O) + ½ Cp(Al2O3) +
Cp(SiO2) = ½·102.3 + ½·157.6 + 80.0 J/(mol K) (Stebbins, Carmichael & Moret 1984, Contrib. Mineral.
Petrol. 86:131; Lange & Navrotsky 1992, Contrib. Mineral. Petrol. 110:311; checks.csv L01, L02, L05).
The same model gives the albite liquid 370.0 against the measured 369.0 J/(mol K) (L08).

Volume (thermo/liquid_eos.py form). V(1673 K) = ½ V(Na2O) + ½ V(Al2O3) + V(SiO2) = ½·29.0 + ½·37.1 + 26.9
cm³/mol, the partial molar volumes of Lange & Carmichael (1987, Geochim. Cosmochim. Acta 51:2931;
checks.csv L14, memory). The thermal expansivity α0 is taken as the dataset's albite liquid's (the same
Na–Al–Si framework). The bulk modulus at 1673 K comes from the partial molar dV/dP of Kress & Carmichael
(1991, Contrib. Mineral. Petrol. 108:82; memory, as calibration/fit_liquid_volumes.py): K = −V/(dV/dP) with
dV/dP = ½(−2.40) + ½(−2.26) − 1.89 [1e-4 cm³/bar]. K′ = 6, the centre of the prior of the fitted liquids
(4–8 from shock-wave and sink–float data; fit_liquid_volumes.K_PRIME_PRIOR). No melting curve of
nepheline composition is at hand to fit them.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from scipy.optimize import brentq  # noqa: E402

from thermo.dataset import load_dataset  # noqa: E402
from thermo.endmembers import standard_state  # noqa: E402

ONE_BAR_PA = 1.0e5
T0 = 298.15
TM_K = 1750.0  # temperature of the Stebbins et al. (1983) fusion enthalpy, taken as the metastable melting point
DH_FUS_J = 49.0e3  # checks.csv M19
CP_J = 0.5 * 102.3 + 0.5 * 157.6 + 80.0  # additive liquid Cp (checks.csv L05, L02, L01)
V_1673_CM3 = 0.5 * 29.0 + 0.5 * 37.1 + 26.9  # Lange & Carmichael (1987) partial molar volumes (L14, memory)
DVDP_1E4_CM3_PER_BAR = 0.5 * 2.40 + 0.5 * 2.26 + 1.89  # Kress & Carmichael (1991), -dV/dP (memory)
K_PRIME = 6.0
REFERENCE_T_K = 1673.0


def derived_values(ds) -> dict[str, float]:
    """H0, S0, Cp, α0 and the 1673 K volume and bulk modulus of the nepheline-composition liquid."""
    ne = standard_state(ds.endmembers.subset(["nepheline"]), ONE_BAR_PA, TM_K)
    h_ne, s_ne = float(ne.h_j_per_mol[0]), float(ne.s_j_per_mol_k[0])
    h0 = h_ne + DH_FUS_J - CP_J * (TM_K - T0)
    s0 = s_ne + DH_FUS_J / TM_K - CP_J * math.log(TM_K / T0)
    alpha0 = float(ds.endmembers.alpha0[ds.index("albite_liquid")])
    v0 = V_1673_CM3 * math.exp(-alpha0 * (REFERENCE_T_K - T0))
    k_1673 = V_1673_CM3 / DVDP_1E4_CM3_PER_BAR  # [1e4 bar] = [GPa]
    return {"h0": h0, "s0": s0, "cp": CP_J, "alpha0": alpha0, "v0_cm3": v0, "v_1673_cm3": V_1673_CM3,
            "k_1673_gpa": k_1673, "h_ne": h_ne, "s_ne": s_ne}


def main() -> int:
    ds = load_dataset()
    d = derived_values(ds)
    print(f"dataset nepheline at {TM_K:.0f} K: H {d['h_ne'] / 1e3:.3f} kJ/mol, S {d['s_ne']:.3f} J/(mol K)")
    print(f"fusion: dH {DH_FUS_J / 1e3:.1f} kJ/mol, dS {DH_FUS_J / TM_K:.3f} J/(mol K); liquid Cp {CP_J:.2f}")
    print(f"endmembers.csv: h0 {d['h0']:.0f}, s0 {d['s0']:.3f}, v0 {d['v0_cm3'] * 1e-6:.5e}, cp_a {CP_J:.2f}, "
          f"alpha0 {d['alpha0']:.3e}")
    print(f"liquid_volumes.toml: reference_temperature_k = {REFERENCE_T_K:.0f}, volume_cm3_per_mol = "
          f"{d['v_1673_cm3']:.2f}, bulk_modulus_gpa = {d['k_1673_gpa']:.2f}, k_prime = {K_PRIME}")

    if "nepheline_liquid" in ds.endmembers.names:
        sub = ds.endmembers.subset(["nepheline", "nepheline_liquid"])

        def gap(t: float, p: float = ONE_BAR_PA) -> float:
            g = standard_state(sub, p, t).g_j_per_mol
            return float(g[1] - g[0])

        tm = brentq(gap, 1200.0, 2500.0)
        st = standard_state(sub, ONE_BAR_PA, tm)
        print(f"dataset as loaded: Tm {tm:.2f} K, dH_fus {(st.h_j_per_mol[1] - st.h_j_per_mol[0]) / 1e3:.3f} kJ/mol, "
              f"V_liq {st.v_m3_per_mol[1] * 1e6:.3f} cm3/mol at Tm")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
