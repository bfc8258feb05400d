"""Fit the liquid model of heatpath's default dataset and check it against experiments.

Run from the project root::

    .venv/bin/python calibration/fit_liquid.py [--no-forward]

Steps
1. Read ``calibration/experiments.csv``. Rows with role ``fit`` and a known liquid
   composition give affinity equations (see :mod:`melt_calibration`); rows with role
   ``validation`` are held out of the fit.
2. Fit the parameters listed in ``MODEL`` below (mixing units of some liquid species, a
   handful of Margules W_H, and the H0 of liquid endmembers whose own melting point demands
   it) by weighted linear least squares on those equations, iterated on the liquid
   speciation, with a Gaussian prior on every parameter.
3. Recompute every row forward with heatpath's minimizer (liquidus and solidus by
   temperature scans, melt fractions, Fe-Mg exchange).
4. Write ``thermo/data/heatpath-ncfmas-2026a/liquid_calibration.toml`` (read by
   ``thermo.dataset.apply_liquid_calibration``) and ``calibration/residuals.csv``, and
   print the residual statistics.

The fit starts from the dataset as it is loaded, with the adjustments of an existing
liquid_calibration.toml removed, so it reruns cleanly after changes elsewhere in the
dataset (e.g. liquid volumes).
"""

from __future__ import annotations

import argparse
import csv
import math
import sys
import time
import tomllib
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(ROOT))

from forward import Calculator, check_row, liquid_model_from_parameters  # noqa: E402
from melt_calibration import (  # noqa: E402
    EquationBuilder,
    Experiment,
    FitResult,
    LiquidParameters,
    adjusted_dataset,
    fit_parameters,
    get_parameter,
    oxide_wt_to_mol,
    parse_composition,
    read_experiments,
)

from thermo import dataset as dataset_module  # noqa: E402
from thermo.dataset import DEFAULT_DATASET_ID, load_dataset  # noqa: E402
from thermo.errors import HeatpathError  # noqa: E402
from thermo.phases import default_phase_names  # noqa: E402

DATA_DIR = ROOT / "thermo" / "data" / DEFAULT_DATASET_ID
OUTPUT_TOML = DATA_DIR / "liquid_calibration.toml"
RESIDUALS_CSV = HERE / "residuals.csv"
DOC = ROOT / "docs" / "dataset.md"

FO, FA, EN, DI, AN, AB, Q, COR, NE = (
    "forsterite_liquid", "fayalite_liquid", "enstatite_liquid", "diopside_liquid",
    "anorthite_liquid", "albite_liquid", "silica_liquid", "corundum_liquid", "nepheline_liquid",
)

#: Why a fixed mixing-unit count departs from the one-unit-per-eight-oxygens rule.
_UNIT_BASIS = {
    FO: "two octahedral cations (constant Fe-Mg KD with olivine)",
    FA: "two octahedral cations (constant Fe-Mg KD with olivine)",
    COR: "2 instead of the rule's 0.375, which makes aluminous spinel the 1-bar liquidus phase of a "
         "peridotite-like melt near 2200 K",
}

#: The model: which parameters are fixed, which are fitted, and their priors (mean, width).
MODEL = {
    # Mixing units. Prior rule: one unit per eight oxygens (albite and anorthite 1, pyroxenes
    # 0.75, silica 0.25), except forsterite and fayalite, which count their two octahedral
    # cations: with the same two units as the olivine's M sites the Fe-Mg exchange coefficient
    # with olivine does not depend on the liquid's Fe/Mg (Roeder & Emslie 1970); and corundum,
    # set to 2: the rule's 0.375 makes aluminous spinel the 1-bar liquidus phase of a
    # peridotite-like melt near 2200 K.
    "fixed_units": {FO: 2.0, FA: 2.0, AN: 1.0, AB: 1.0, DI: 0.75, EN: 0.75, NE: 0.5, Q: 0.25, COR: 2.0},
    "fitted_units": {},
    # Margules W_H [J/mol] between mixing units (van Laar asymmetry = units): (species, species, prior width).
    # Prior mean 0; width 20 kJ, except where the data demand a strong interaction (stated).
    "interactions": [
        (DI, AN, 20000.0),  # Di-An eutectic and anorthite liquidus (D01, D03, OT52)
        (FO, DI, 20000.0),  # forsterite saturation in Fo-Di-An liquids (OT52)
        (AB, AN, 20000.0),  # plagioclase loop (D11)
        (FO, EN, 20000.0), (EN, Q, 20000.0), (FO, Q, 20000.0),  # MgO-SiO2 liquidus (M06, D14)
        (FO, AN, 20000.0),  # forsterite saturation in Fo-Di-An liquids (OT52)
        (FA, DI, 20000.0),  # Fe-Mg exchange with olivine in basaltic liquid (D13, RE70)
        # pyrope (M20): 1.5 enstatite liquid + corundum liquid lie 62 kJ above pyrope at its metastable
        # melting point; Al-Si association needs a strongly negative W, hence the wide prior
        (EN, COR, 150000.0),
    ],
    # S0 shifts [J/(mol K)] of liquid endmembers whose 1-bar melting point is off by more than its tolerance.
    # An S0 (not H0) shift: the dataset's fusion enthalpy of anorthite (138.6 kJ/mol at 1830 K) already
    # agrees with calorimetry (135.5 +/- 6, checks.csv M13), while its fusion entropy (75.5 J/(mol K))
    # may move within the calorimetric 74.1 +/- 4 (M12).
    "entropy_shifts": {AN: (0.0, 5.0)},  # M11: the dataset's anorthite liquid melts 60 K low
    # H0 shifts [J/mol]. Silica liquid: with cristobalite derived from NIST-JANAF (calibration/
    # cristobalite_from_janaf.py) the recalled silica liquid melts cristobalite at 1907 K against 1999 K
    # (M22; Richet et al. 1982); the shift fixes its enthalpy on that point (fusion enthalpy then
    # compared with M23 in the tests).
    "enthalpy_shifts": {Q: (0.0, 3000.0)},
}


# ------------------------------------------------------------------ set-up
def base_dataset():
    """The dataset as loaded, minus the H0/S0 shifts of the current liquid_calibration.toml."""
    ds = load_dataset()
    cal = ds.extra.get("liquid_calibration", {})
    dh = {a["endmember"]: -float(a.get("dh0_j_per_mol", 0.0)) for a in cal.get("endmember_adjustments", [])}
    dsh = {a["endmember"]: -float(a.get("ds0_j_per_mol_k", 0.0)) for a in cal.get("endmember_adjustments", [])}
    return adjusted_dataset(ds, dh, dsh)


def species_of(ds) -> list[str]:
    return list(ds.extra["solutions"]["solution"]["liquid"]["endmembers"])


def starting_parameters(species: list[str]) -> tuple[LiquidParameters, list[str], dict]:
    units = dict(MODEL["fixed_units"])
    units.update({s: prior[0] for s, prior in MODEL["fitted_units"].items()})
    missing = [s for s in species if s not in units]
    if missing:
        raise SystemExit(f"no mixing-unit rule for liquid species {missing}")
    params = LiquidParameters(units={s: units[s] for s in species})
    names, priors = [], {}
    for s, prior in MODEL["fitted_units"].items():
        names.append(f"u:{s}")
        priors[f"u:{s}"] = prior
    for a, b, width in MODEL["interactions"]:
        names.append(f"wh:{a}|{b}")
        priors[f"wh:{a}|{b}"] = (0.0, width)
        params.w_h[(a, b)] = 0.0
    for kind, key in (("ds", "entropy_shifts"), ("dh", "enthalpy_shifts")):
        for s, prior in MODEL[key].items():
            names.append(f"{kind}:{s}")
            priors[f"{kind}:{s}"] = prior
            getattr(params, kind)[s] = prior[0]
    return params, names, priors


# ------------------------------------------------------------------ forward checks
def candidate_phases(ds, text: str) -> list[str] | None:
    """Phases of a row: a list, "default", or "default -a -b" (the dataset's list without a and b)."""
    words = text.split()
    if not words or words[0] != "default":
        return words
    drop = {w[1:] for w in words[1:] if w.startswith("-")}
    return None if not drop else [n for n in default_phase_names(ds) if n not in drop]


def forward_checks(rows: list[Experiment], ds, liquid) -> list[dict]:
    """Every row recomputed with the minimizer."""
    out = []
    for row in rows:
        t0 = time.perf_counter()
        bulk = oxide_wt_to_mol(parse_composition(row.bulk, ds.oxides), ds.oxides)
        phases = candidate_phases(ds, row.phases)
        calc = None
        try:
            calc = Calculator(ds, bulk, phases, liquid)
            value, note = check_row(row, calc)
        except HeatpathError as exc:
            value, note = float("nan"), f"minimizer failed: {exc}"
        failures = calc.failures if calc is not None else []
        if failures:
            note += f"; {len(failures)} minimizer failures recovered, first: {failures[0]}"
        out.append({"row": row, "computed": value, "note": note, "seconds": time.perf_counter() - t0,
                    "failures": failures})
        print(f"  {row.id:7s} {row.observable:22s} observed {row.observed:9.3f} computed {value:9.3f}"
              f"  ({time.perf_counter() - t0:4.1f} s) {note}", flush=True)
    return out


# ------------------------------------------------------------------ output
def _fitted_to(fit: FitResult, name: str) -> list[str]:
    """Rows whose equations depend on parameter ``name``."""
    k = fit.names.index(name)
    return sorted({e.row for e in fit.equations if abs(e.gradient[k]) > 1e-9})


def _prior_width(a: str, b: str) -> float:
    return next(w for x, y, w in MODEL["interactions"] if (x, y) == (a, b))


def _toml_list(items) -> str:
    return "[" + ", ".join(f'"{x}"' for x in items) + "]"


def write_calibration(fit: FitResult, species: list[str], stats: dict[str, str]) -> None:
    p = fit.params
    sd = np.sqrt(np.clip(np.diag(fit.covariance), 0.0, None))
    err = dict(zip(fit.names, sd, strict=True))
    lines = [
        "# heatpath liquid calibration (format: heatpath-liquid-calibration/1)",
        "# Written by calibration/fit_liquid.py from calibration/experiments.csv: do not edit by hand, rerun",
        "# the script. Read by thermo.dataset.apply_liquid_calibration at load time: the endmember shifts",
        "# change H0/S0 of liquid endmembers; mixing units, asymmetry and interactions replace those of the",
        "# [solution.liquid] table of solutions.toml. Method and residuals: docs/dataset.md.",
        'format = "heatpath-liquid-calibration/1"',
        'solution = "liquid"',
        'asymmetry = "units"  # van Laar asymmetry parameters equal to the mixing units',
        'data = "calibration/experiments.csv"',
        "",
        "[statistics]",
        *[f'{k} = "{v}"' for k, v in stats.items()],
        "",
    ]
    for s in species:
        name = f"u:{s}"
        if name in fit.names:
            prior = MODEL["fitted_units"][s]
            basis = (f"fitted (prior {prior[0]} +/- {prior[1]}, one unit per eight oxygens); "
                     f"standard error {err[name]:.2f}")
            rows = _toml_list(_fitted_to(fit, name))
        else:
            basis = "fixed: " + _UNIT_BASIS.get(s, "one unit per eight oxygens (sets the scale)")
            rows = "[]"
        lines += [f"[mixing_units.{s}]", f"value = {p.units[s]:.4f}", f'basis = "{basis}"', f"fitted_to = {rows}", ""]
    for (a, b), w in p.w_h.items():
        name = f"wh:{a}|{b}"
        if not _fitted_to(fit, name):
            print(f"warning: no fit equation depends on W({a}, {b}); left out of the calibration file")
            continue
        lines += [
            "[[interactions]]", f'pair = ["{a}", "{b}"]', f"w_h_j_per_mol = {w:.1f}",
            f"standard_error_j_per_mol = {err[name]:.1f}",
            f'prior = "0 +/- {_prior_width(a, b):.0f} J/mol"',
            f"fitted_to = {_toml_list(_fitted_to(fit, name))}", "",
        ]
    for s in sorted(set(p.dh) | set(p.ds)):
        fitted = sorted(set(_fitted_to(fit, f"dh:{s}") if f"dh:{s}" in fit.names else [])
                        | set(_fitted_to(fit, f"ds:{s}") if f"ds:{s}" in fit.names else []))
        lines += [
            "[[endmember_adjustments]]", f'endmember = "{s}"', f"dh0_j_per_mol = {p.dh.get(s, 0.0):.1f}",
            f"ds0_j_per_mol_k = {p.ds.get(s, 0.0):.4f}",
        ]
        if f"dh:{s}" in err:
            lines.append(f"dh0_standard_error_j_per_mol = {err[f'dh:{s}']:.1f}")
        if f"ds:{s}" in err:
            lines.append(f"ds0_standard_error_j_per_mol_k = {err[f'ds:{s}']:.4f}")
        lines += [f"fitted_to = {_toml_list(fitted)}", ""]
    OUTPUT_TOML.write_text("\n".join(lines), encoding="utf-8")


def write_residuals(fit: FitResult, checks: list[dict]) -> list[dict]:
    records = []
    for c in checks:
        row = c["row"]
        resid = c["computed"] - row.observed
        records.append({
            "id": row.id, "kind": "forward", "quantity": row.observable, "pressure_gpa": row.pressure_gpa,
            "unit": row.unit, "observed": row.observed, "computed": c["computed"], "residual": resid,
            "uncertainty": row.uncertainty, "misfit_sigma": resid / row.uncertainty, "role": row.role,
            "provenance": row.provenance, "note": c["note"],
        })
    for e in fit.equations:
        in_k = e.value_j / e.per_kelvin if math.isfinite(e.per_kelvin) and e.per_kelvin > 0 else float("nan")
        records.append({
            "id": e.row, "kind": "affinity", "quantity": f"affinity {e.label}", "pressure_gpa": "", "unit": "J/mol",
            "observed": 0.0, "computed": e.value_j, "residual": e.value_j, "uncertainty": e.sigma_j,
            "misfit_sigma": e.value_j / e.sigma_j, "role": "fit",
            "provenance": "", "note": f"as temperature: {in_k:+.1f} K (positive: model saturates too low)",
        })
    with RESIDUALS_CSV.open("w", encoding="utf-8", newline="") as fh:
        fh.write("# heatpath liquid calibration residuals, written by calibration/fit_liquid.py\n")
        fh.write("# kind=forward: the row recomputed with the minimizer (residual = computed - observed);\n")
        fh.write("# kind=affinity: the fit equations at the fitted parameters (J/mol; uncertainty = weight sigma)\n")
        writer = csv.DictWriter(fh, fieldnames=list(records[0]))
        writer.writeheader()
        for r in records:
            writer.writerow({k: (f"{v:.6g}" if isinstance(v, float) else v) for k, v in r.items()})
    return records


def statistics(records: list[dict]) -> dict[str, str]:
    out = {}
    for role in ("fit", "validation"):
        sel = [r for r in records if r["kind"] == "forward" and r["role"] == role and r["unit"] == "K"]
        good = [r["residual"] for r in sel if math.isfinite(r["residual"])]
        within = sum(abs(r["misfit_sigma"]) <= 1.0 for r in sel if math.isfinite(r["residual"]))
        if good:
            rms = math.sqrt(sum(x * x for x in good) / len(good))
            out[f"{role}_temperatures"] = (
                f"{len(good)} of {len(sel)} computed; rms {rms:.1f} K; mean {np.mean(good):+.1f} K; "
                f"max |residual| {max(abs(x) for x in good):.1f} K; {within} within their uncertainty"
            )
    return out


# ------------------------------------------------------------------ documentation tables
def _short(species: str) -> str:
    return species.replace("_liquid", "")


def parameter_table(fit: FitResult, species: list[str]) -> str:
    sd = dict(zip(fit.names, np.sqrt(np.clip(np.diag(fit.covariance), 0.0, None)), strict=True))
    p = fit.params
    lines = ["| parameter | value | standard error | prior | fitted to |", "| --- | --- | --- | --- | --- |"]
    lines.append("| mixing units | " + ", ".join(f"{_short(s)} {p.units[s]:g}" for s in species)
                 + " | fixed | – | rule (see text) |")
    for (a, b), w in p.w_h.items():
        name = f"wh:{a}|{b}"
        lines.append(f"| W_H({_short(a)}, {_short(b)}) | {w / 1000:+.1f} kJ/mol | {sd[name] / 1000:.1f} | "
                     f"0 ± {_prior_width(a, b) / 1000:.0f} | {', '.join(_fitted_to(fit, name))} |")
    for sp, ds0 in p.ds.items():
        name = f"ds:{sp}"
        prior = MODEL["entropy_shifts"][sp]
        lines.append(f"| ΔS0({_short(sp)} liquid) | {ds0:+.2f} J/(mol K) | {sd[name]:.2f} | "
                     f"{prior[0]:g} ± {prior[1]:g} | {', '.join(_fitted_to(fit, name))} |")
    for sp, dh0 in p.dh.items():
        name = f"dh:{sp}"
        prior = MODEL["enthalpy_shifts"][sp]
        lines.append(f"| ΔH0({_short(sp)} liquid) | {dh0 / 1000:+.2f} kJ/mol | {sd[name] / 1000:.2f} | "
                     f"{prior[0]:g} ± {prior[1] / 1000:g} kJ | {', '.join(_fitted_to(fit, name))} |")
    return "\n".join(lines)


def residual_table(records: list[dict], stats: dict[str, str]) -> str:
    lines = ["| row | system | P (GPa) | quantity | observed | computed | residual | uncertainty | role | provenance |",
             "| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |"]
    systems = {r.id: r.system for r in read_experiments()}
    for r in records:
        if r["kind"] != "forward":
            continue
        fmt = "{:.0f}" if r["unit"] == "K" else "{:.3f}"
        comp = fmt.format(r["computed"]) if math.isfinite(r["computed"]) else "failed"
        res = (fmt.format(r["residual"]) if r["unit"] == "K" else f"{r['residual']:+.3f}") \
            if math.isfinite(r["residual"]) else "–"
        if r["unit"] == "K" and math.isfinite(r["residual"]):
            res = f"{r['residual']:+.0f}"
        p = "0" if r["pressure_gpa"] < 0.01 else f"{r['pressure_gpa']:g}"
        lines.append(f"| {r['id']} | {systems[r['id']]} | {p} | {r['quantity']} ({r['unit']}) | "
                     f"{fmt.format(r['observed'])} | {comp} | {res} | {r['uncertainty']:g} | {r['role']} | "
                     f"{r['provenance']} |")
    lines += ["", *[f"- {k.replace('_', ' ')}: {v}" for k, v in stats.items()]]
    return "\n".join(lines)


def update_doc(marker: str, text: str) -> None:
    start, end = f"<!-- {marker}:start -->", f"<!-- {marker}:end -->"
    if not DOC.is_file():
        return
    doc = DOC.read_text(encoding="utf-8")
    if start in doc and end in doc:
        head, rest = doc.split(start, 1)
        _, tail = rest.split(end, 1)
        DOC.write_text(f"{head}{start}\n{text}\n{end}{tail}", encoding="utf-8")


# ------------------------------------------------------------------ main
def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--no-forward", action="store_true", help="fit only (skip the minimizer checks)")
    parser.add_argument("--rows", help="comma-separated row ids: forward-check only these (exploration)")
    args = parser.parse_args(argv)
    t0 = time.perf_counter()
    ds = base_dataset()
    species = species_of(ds)
    rows = read_experiments()
    fit_rows = [r for r in rows if r.role == "fit"]
    builder = EquationBuilder(ds, species)
    start, names, priors = starting_parameters(species)
    print(f"fitting {len(names)} parameters to {len(fit_rows)} rows ...", flush=True)
    fit = fit_parameters(builder, fit_rows, start, names, priors)
    print(f"  {fit.iterations} iterations, objective {fit.objective:.2f}")
    for k, n in enumerate(names):
        print(f"  {n:45s} {get_parameter(fit.params, n):12.4f}  +/- {math.sqrt(max(fit.covariance[k, k], 0.0)):.4f}")
    for e in fit.equations:
        print(f"  {e.row:7s} {e.label:32s} {e.value_j / e.sigma_j:+6.2f} sigma  ({e.value_j / e.per_kelvin:+7.1f} K)")
    calibrated = adjusted_dataset(ds, fit.params.dh, fit.params.ds)
    liquid = liquid_model_from_parameters(calibrated, fit.params)
    chosen = [r for r in rows if not args.rows or r.id in args.rows.split(",")]
    checks = [] if args.no_forward else forward_checks(chosen, calibrated, liquid)
    records = write_residuals(fit, checks) if checks else []
    stats = statistics(records)
    write_calibration(fit, species, stats)
    _verify_loader(fit, ds)
    update_doc("calibration-parameters", parameter_table(fit, species))
    if checks and not args.rows:
        update_doc("calibration-residuals", residual_table(records, stats))
    for k, v in stats.items():
        print(f"{k}: {v}")
    print(f"wrote {OUTPUT_TOML.relative_to(ROOT)} and {RESIDUALS_CSV.relative_to(ROOT)} "
          f"in {time.perf_counter() - t0:.0f} s")
    return 0


def _verify_loader(fit: FitResult, base) -> None:
    """The written file, read back through the dataset loader, must give the fitted liquid exactly."""
    from thermo.phases import solution_models

    dataset_module.load_dataset.cache_clear()
    ds = load_dataset()
    loaded = solution_models(ds)["liquid"]
    fitted = liquid_model_from_parameters(adjusted_dataset(base, fit.params.dh, fit.params.ds), fit.params)
    same = all(np.allclose(getattr(loaded, k), getattr(fitted, k), rtol=1e-4, atol=0.05)
               for k in ("units", "alpha", "w_h", "w_s"))
    for s in set(fit.params.dh) | set(fit.params.ds):
        i = ds.index(s)
        same = same and abs(ds.endmembers.h0[i] - base.endmembers.h0[i] - fit.params.dh.get(s, 0.0)) < 0.1
        same = same and abs(ds.endmembers.s0[i] - base.endmembers.s0[i] - fit.params.ds.get(s, 0.0)) < 1e-3
    listed = OUTPUT_TOML.name in tomllib.loads((DATA_DIR / "manifest.toml").read_text(encoding="utf-8"))["files"]
    if not (same and listed):
        raise SystemExit("loader check failed: load_dataset() does not reproduce the fitted liquid "
                         "(is liquid_calibration.toml listed in manifest.toml 'files'?)")
    print("loader check: load_dataset() reproduces the fitted liquid parameters")


if __name__ == "__main__":
    raise SystemExit(main())
