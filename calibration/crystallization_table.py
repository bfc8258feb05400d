"""Crystallization sequences of three demo bulks with heatpath's default dataset.

Run from the project root::

    .venv/bin/python calibration/crystallization_table.py [--jobs 2] [--pressures 0,1,3]

For each bulk and pressure it finds, with the minimizer and the dataset as shipped, the
liquidus (scanning down from 3450 K in 25 K steps, then bisection to 0.1 K), the solidus
(scanning up from 900 K) and the temperatures at which solids appear and disappear in
between (10 K scan, bisection to 0.5 K). It writes ``calibration/crystallization_sequences.csv``
and replaces the table between the ``crystallization-table`` markers in ``docs/dataset.md``.

The bulk compositions are invented for the demonstration (the magma ocean of the fictional
planet Kestrel IV and its moon Wren); they stand for no real rock or sample.
"""

from __future__ import annotations

import argparse
import csv
import math
import sys
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(ROOT))

from forward import Calculator  # noqa: E402
from melt_calibration import oxide_wt_to_mol  # noqa: E402

from thermo.dataset import load_dataset  # noqa: E402
from thermo.errors import HeatpathError  # noqa: E402

#: Invented demo bulks [wt%]. The first and the last are the Kestrel IV and Wren compositions of examples/. An
#: earlier Wren bulk (45 SiO2, 28 Al2O3) was nepheline-normative, beyond what the liquid species could hold before
#: the nepheline liquid was added (it precipitated spurious nepheline above its liquidus), hence this silica-richer
#: invented one.
BULKS = {
    "Kestrel IV mantle (peridotite-like)": {"SiO2": 45.5, "Al2O3": 4.5, "FeO": 8.5, "MgO": 37.5, "CaO": 3.5,
                                            "Na2O": 0.5},
    "Kestrel IV crust (basalt-like)": {"SiO2": 50.5, "Al2O3": 15.2, "FeO": 10.3, "MgO": 9.2, "CaO": 12.2,
                                       "Na2O": 2.6},
    "Wren highlands (anorthositic)": {"SiO2": 48.0, "Al2O3": 27.0, "FeO": 4.0, "MgO": 4.0, "CaO": 15.5,
                                      "Na2O": 1.5},
}
PRESSURES_GPA = [0.0001, 1.0, 3.0, 5.0, 10.0, 15.0, 20.0, 25.0]
T_TOP_K, T_BOTTOM_K = 3450.0, 900.0
CSV_OUT = HERE / "crystallization_sequences.csv"
DOC = ROOT / "docs" / "dataset.md"
START, END = "<!-- crystallization-table:start -->", "<!-- crystallization-table:end -->"


def _bulk_mol(ds, oxides: dict[str, float]):
    import numpy as np

    w = np.array([oxides.get(o, 0.0) for o in ds.oxides])
    return oxide_wt_to_mol(w / w.sum(), ds.oxides)


def one_case(args: tuple[str, float]) -> dict:
    """Liquidus, solidus and saturation sequence of one bulk at one pressure."""
    name, p = args
    t0 = time.perf_counter()
    ds = load_dataset()
    calc = Calculator(ds, _bulk_mol(ds, BULKS[name]))
    out = {"bulk": name, "pressure_gpa": p, "liquidus_k": math.nan, "liquidus_phases": "", "solidus_k": math.nan,
           "solidus_assemblage": "", "sequence": "", "note": ""}
    try:
        tl, first, _ = calc.liquidus(p, T_TOP_K, T_BOTTOM_K)
        ts, eq_s = calc.solidus(p, T_BOTTOM_K, min(tl, T_TOP_K) if math.isfinite(tl) else T_TOP_K)
        out.update(liquidus_k=tl, liquidus_phases=" + ".join(first), solidus_k=ts)
        if eq_s is not None:
            eq_below = calc.solve(p, ts - 0.5, warm=eq_s)
            out["solidus_assemblage"] = " + ".join(sorted(calc.solids_present(eq_below)))
        top = T_TOP_K if not math.isfinite(tl) else tl
        if not math.isfinite(tl):
            stuck = calc.solids_present(calc.solve(p, T_TOP_K))
            out["note"] = f"{' + '.join(stuck)} present up to {T_TOP_K:.0f} K"
        if math.isfinite(ts):
            events = calc.saturation_sequence(p, top, ts)
            out["sequence"] = "; ".join(f"{n} {'in' if k == 'in' else 'out'} {t:.0f}" for t, n, k in events)
            if not math.isfinite(tl) and events:
                # the liquidus of the phases that do appear on cooling
                out["liquidus_k"], out["liquidus_phases"] = events[0][0], events[0][1] + " (*)"
        else:
            out["note"] = (out["note"] + "; " if out["note"] else "") + (
                f"liquid present at {T_BOTTOM_K:.0f} K" if calc.liquid_present(calc.solve(p, T_BOTTOM_K))
                else "no solidus found")
    except HeatpathError as exc:
        out["note"] = f"minimizer failed: {exc}"
    if calc.failures:
        out["note"] = (out["note"] + "; " if out["note"] else "") + (
            f"{len(calc.failures)} minimizer failures recovered (first: {calc.failures[0]})")
    out["seconds"] = time.perf_counter() - t0
    print(f"{name:38s} {p:7.4g} GPa  liquidus {out['liquidus_k']:7.1f} K ({out['liquidus_phases']})  "
          f"solidus {out['solidus_k']:7.1f} K  "
          f"[{out['seconds']:.0f} s]", flush=True)
    return out


def _fmt_t(t: float) -> str:
    return f"{t:.0f}" if math.isfinite(t) else "–"


def markdown(rows: list[dict]) -> str:
    lines = [
        "| bulk | P (GPa) | liquidus (K) | liquidus phase | order of saturation on cooling (K) | solidus (K) |"
        " assemblage below the solidus |",
        "| --- | --- | --- | --- | --- | --- | --- |",
    ]
    for r in rows:
        seq = r["sequence"].replace("; ", ", ")
        if r["note"]:
            seq = f"{seq} ({r['note']})" if seq else r["note"]
        p = "0" if r["pressure_gpa"] < 0.01 else f"{r['pressure_gpa']:g}"
        lines.append(f"| {r['bulk']} | {p} | {_fmt_t(r['liquidus_k'])} | {r['liquidus_phases']} | {seq} | "
                     f"{_fmt_t(r['solidus_k'])} | {r['solidus_assemblage']} |")
    return "\n".join(lines)


def update_doc(table: str) -> None:
    if not DOC.is_file():
        return
    text = DOC.read_text(encoding="utf-8")
    if START in text and END in text:
        head, rest = text.split(START, 1)
        _, tail = rest.split(END, 1)
        DOC.write_text(f"{head}{START}\n{table}\n{END}{tail}", encoding="utf-8")
        print(f"updated the table in {DOC.relative_to(ROOT)}")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--pressures", help="comma-separated pressures [GPa] (default: the table's eight)")
    args = parser.parse_args(argv)
    pressures = [float(x) for x in args.pressures.split(",")] if args.pressures else PRESSURES_GPA
    cases = [(name, p) for name in BULKS for p in pressures]
    with ProcessPoolExecutor(max_workers=args.jobs) as pool:
        rows = list(pool.map(one_case, cases))
    with CSV_OUT.open("w", encoding="utf-8", newline="") as fh:
        fh.write("# crystallization sequences of the invented demo bulks (calibration/crystallization_table.py)\n")
        fh.write(f"# dataset checksum {load_dataset().checksum}\n")
        writer = csv.DictWriter(fh, fieldnames=[k for k in rows[0] if k != "seconds"], extrasaction="ignore")
        writer.writeheader()
        for r in rows:
            writer.writerow({k: (f"{v:.1f}" if isinstance(v, float) and k.endswith("_k") else v) for k, v in r.items()})
    table = markdown(rows)
    print(table)
    if not args.pressures:
        update_doc(table)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
