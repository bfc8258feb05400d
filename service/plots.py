"""Figures of results: a cooling path, a property table's melt-fraction map, an isentrope.

The functions take the JSON-ready result dicts the API serves (``POST /v1/cooling-paths``,
``/v1/tables``, ``/v1/isentropes``; shapes in openapi.yaml) and return SVG or PNG bytes, so
the same figure comes from the server (content negotiation: ``Accept: image/svg+xml`` or
``image/png``), from ``heatpath ... --plot FILE`` and from a notebook.

The heatpath endpoints register their figure once, so that it is served both on the endpoint
and on ``GET /v1/jobs/<id>/result`` (service/cooling_paths.py)::

    register_figures(OPERATION, "cooling_path")

    @produces(*offered(OPERATION))
    def cooling_paths():
        ...
        return negotiate(OPERATION, run_or_enqueue(OPERATION, req, compute_cooling_path, size=n_steps))

:func:`render_if_requested` does the same for a single view (no job results).

Style (heatpath's own): one typeface, thin lines, no box around the plot, light dotted grid,
a footer that says the figure shows model estimates and names the dataset and code version.
Colours are the colour-blind-safe palette of Okabe & Ito (2008, "Color Universal Design",
https://jfly.uni-koeln.de/color/) for categories and the ``cividis`` map (Nuñez, Anderton &
Renslow 2018, PLoS ONE 13:e0199239), designed to read the same with colour-vision
deficiency, for the melt-fraction field. Every axis label states its unit. Text stays text in
SVG (``svg.fonttype: none``) and output is reproducible (fixed hash salt, no date stamp).

matplotlib is imported when a figure is made (not with the service), with the Agg backend.
"""

from __future__ import annotations

import io
import math
from collections.abc import Mapping, Sequence
from typing import Any

__all__ = [
    "IMAGE_FORMATS", "PLOT_KINDS", "PLOT_MEDIA_TYPES", "cooling_path_figure", "isentrope_figure", "register_figures",
    "render", "render_if_requested", "table_figure", "wanted_image_format",
]

#: Okabe & Ito (2008) colours: liquid first, then crystals in order of appearance.
OKABE_ITO = {
    "sky blue": "#56B4E9", "orange": "#E69F00", "bluish green": "#009E73", "vermillion": "#D55E00",
    "reddish purple": "#CC79A7", "blue": "#0072B2", "yellow": "#F0E442", "black": "#000000",
}
LIQUID_COLOUR = OKABE_ITO["sky blue"]
CRYSTAL_COLOURS = ("#E69F00", "#009E73", "#D55E00", "#CC79A7", "#0072B2", "#F0E442")
HATCHES = ("", "//", "..", "xx")  # a second round of colours gets a hatch, so no two phases look alike
PLOT_MEDIA_TYPES = ("image/svg+xml", "image/png")
IMAGE_FORMATS = {"image/svg+xml": "svg", "image/png": "png"}
PLOT_KINDS = ("cooling_path", "table", "isentrope")
PNG_DPI = 150
STYLE = {
    "font.family": "DejaVu Sans", "font.size": 9.0, "axes.titlesize": 10.5, "axes.titleweight": "bold",
    "axes.titlelocation": "left", "axes.labelsize": 9.0, "axes.spines.top": False, "axes.spines.right": False,
    "axes.edgecolor": "#4d4d4d", "axes.linewidth": 0.8, "axes.grid": True, "grid.color": "#d0d0d0",
    "grid.linestyle": ":", "grid.linewidth": 0.7, "xtick.color": "#4d4d4d", "ytick.color": "#4d4d4d",
    "xtick.direction": "out", "ytick.direction": "out", "legend.frameon": False, "legend.fontsize": 8.0,
    "lines.linewidth": 1.4, "svg.fonttype": "none", "svg.hashsalt": "heatpath", "figure.dpi": 100,
}


# --------------------------------------------------------------------------- helpers
def _figure(width_in: float, height_in: float) -> Any:
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure
    from matplotlib.layout_engine import ConstrainedLayoutEngine

    fig = Figure(figsize=(width_in, height_in))
    fig.set_layout_engine(ConstrainedLayoutEngine(rect=(0.0, 0.05, 1.0, 0.95)))  # room for the footer
    return fig


def _footer(fig: Any, result: Mapping[str, Any]) -> None:
    prov = result.get("provenance") or {}
    parts = ["Model estimate, not a measurement"]
    if prov.get("dataset_id"):
        checksum = str(prov.get("dataset_checksum") or "")[:12]
        parts.append(f"dataset {prov['dataset_id']}" + (f" (sha256 {checksum}…)" if checksum else ""))
    if prov.get("code_version"):
        parts.append(f"heatpath {prov['code_version']}")
    fig.text(0.01, 0.003, " · ".join(parts), fontsize=7, color="#666666", ha="left", va="bottom")


def _finite(values: Sequence[Any]) -> list[float]:
    return [math.nan if v is None else float(v) for v in values]


def _columns(result: Mapping[str, Any], names: Sequence[str], rows_key: str = "points") -> dict[str, list[float]]:
    """Columns ``names`` of a result given either as parallel lists or as a list of row dicts."""
    rows = result.get(rows_key)
    if isinstance(rows, list) and rows and isinstance(rows[0], Mapping):
        return {n: _finite([r.get(n) for r in rows]) for n in names if n in rows[0]}
    return {n: _finite(result[n]) for n in names if isinstance(result.get(n), list)}


def _save(fig: Any, fmt: str) -> bytes:
    buf = io.BytesIO()
    if fmt == "svg":
        fig.savefig(buf, format="svg", metadata={"Date": None})
    elif fmt == "png":
        fig.savefig(buf, format="png", dpi=PNG_DPI, metadata={"Software": None})
    else:
        raise ValueError(f"image format must be svg or png (got {fmt!r})")
    return buf.getvalue()


# --------------------------------------------------------------------------- cooling path
def _phase_order(steps: Sequence[Mapping[str, Any]], sequence: Sequence[Mapping[str, Any]]) -> list[str]:
    """Liquid phases first, then the others in order of first appearance along the path."""
    seen: list[str] = []
    liquids: set[str] = set()
    for step in steps:
        for ph in step.get("phases") or []:
            if ph["name"] not in seen:
                seen.append(ph["name"])
            if ph.get("is_liquid") or ph["name"].split("#")[0] == "liquid":
                liquids.add(ph["name"])
    first = {e["phase"]: i for i, e in reversed(list(enumerate(sequence))) if e.get("event") == "appears"}
    crystals = sorted((n for n in seen if n not in liquids), key=lambda n: (first.get(n, len(first)), seen.index(n)))
    return [n for n in seen if n in liquids] + crystals


def _mass_fractions(steps: Sequence[Mapping[str, Any]], names: Sequence[str]) -> list[list[float]]:
    table = []
    for name in names:
        table.append([next((float(p["mass_fraction"]) for p in s.get("phases") or [] if p["name"] == name), 0.0)
                      for s in steps])
    return table


def _mark_events(ax: Any, sequence: Sequence[Mapping[str, Any]]) -> list[str]:
    """Dotted lines at saturation events, numbered at the top of ``ax``; the numbered list of events.

    Numbers of events closer than 3 % of the axis width are staggered downwards so they stay legible.
    """
    lo, hi = sorted(ax.get_xlim())
    span = (hi - lo) or 1.0
    lines, placed = [], []
    for i, event in enumerate(sequence, start=1):
        t = float(event["temperature_k"])
        level = sum(1 for x in placed if abs(x - t) < 0.03 * span)
        placed.append(t)
        sign = "+" if event.get("event") == "appears" else "−"
        ax.axvline(t, color="#333333", linestyle=(0, (1, 2)), linewidth=0.9, zorder=3)
        ax.annotate(str(i), xy=(t, 1.0), xycoords=("data", "axes fraction"), xytext=(0, -3 - 11 * level),
                    textcoords="offset points", fontsize=7, ha="center", va="top", color="#222222", zorder=4,
                    bbox={"boxstyle": "circle,pad=0.2", "fc": "white", "ec": "#333333", "lw": 0.6})
        lines.append(f"{i}  {sign} {event['phase']}  {t:.1f} K")
    return lines


def _phase_styles(steps: Sequence[Mapping[str, Any]], names: Sequence[str]) -> tuple[list[str], list[str]]:
    """Colour and hatch of each phase: liquids sky blue (a second liquid hatched), crystals in palette order."""
    liquid = {p["name"] for s in steps for p in s.get("phases") or [] if p.get("is_liquid")}
    colours, hatches, n_liquid, n_crystal = [], [], 0, 0
    for name in names:
        if name in liquid or name.split("#")[0] == "liquid":
            colours.append(LIQUID_COLOUR)
            hatches.append(HATCHES[n_liquid % len(HATCHES)])
            n_liquid += 1
        else:
            colours.append(CRYSTAL_COLOURS[n_crystal % len(CRYSTAL_COLOURS)])
            hatches.append(HATCHES[(n_crystal // len(CRYSTAL_COLOURS)) % len(HATCHES)])
            n_crystal += 1
    return colours, hatches


def cooling_path_figure(result: Mapping[str, Any]) -> Any:
    """Figure of a cooling path: stacked phase mass fractions over T with saturation events; h(T) and cp_eff.

    ``result`` is the body of ``POST /v1/cooling-paths``: ``steps`` (each with
    ``temperature_k``, ``phases`` [{``name``, ``mass_fraction``}], ``specific_enthalpy_j_per_kg``,
    ``heat_capacity_effective_j_per_kg_k``, ``heat_capacity_frozen_j_per_kg_k``),
    ``saturation_sequence``, ``liquidus_k``, ``solidus_k``, ``provenance``. Temperature runs
    from hot (left) to cold (right), the direction of cooling.
    """
    import matplotlib

    steps = list(result.get("steps") or [])
    if len(steps) < 2:
        raise ValueError("a cooling-path figure needs at least two steps")
    sequence = list(result.get("saturation_sequence") or [])
    with matplotlib.rc_context(STYLE):
        fig = _figure(7.2, 6.4)
        top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
        temps = [float(s["temperature_k"]) for s in steps]
        names = _phase_order(steps, sequence)
        colours, hatches = _phase_styles(steps, names)
        layers = top.stackplot(temps, _mass_fractions(steps, names), labels=names, colors=colours, linewidth=0.4,
                               edgecolor="white")
        for layer, hatch in zip(layers, hatches, strict=True):
            layer.set_hatch(hatch)
        top.set_ylim(0.0, 1.0)
        top.set_xlim(max(temps), min(temps))
        top.set_ylabel("phase mass fraction [kg per kg of system]")
        mode = result.get("mode") or "equilibrium"
        pressure = result.get("pressure_gpa")
        where = f" at {float(pressure):g} GPa" if pressure is not None else ""
        top.set_title(f"Isobaric cooling{where} ({mode} crystallization)")
        events = _mark_events(top, sequence)
        lines = _enthalpy_panel(bottom, steps, temps, result)
        from matplotlib.patches import Patch

        handles, labels = top.get_legend_handles_labels()
        if events:
            handles += [Patch(visible=False) for _ in range(len(events) + 1)]
            labels += ["saturation events:", *events]
        handles += [Patch(visible=False), *lines]
        labels += ["curves below:", *[ln.get_label() for ln in lines]]
        fig.legend(handles, labels, loc="outside right upper", title="phase", title_fontsize=8, handlelength=1.6)
        bottom.set_xlabel("temperature [K]  (cooling →)")
        _footer(fig, result)
    return fig


def _enthalpy_panel(ax: Any, steps: Sequence[Mapping[str, Any]], temps: list[float],
                    result: Mapping[str, Any]) -> list[Any]:
    """h − h(start) on ``ax``, cp_eff and cp_frozen on a twin axis, liquidus and solidus marked; the lines."""
    h0 = float(steps[0]["specific_enthalpy_j_per_kg"])
    dh = [(float(s["specific_enthalpy_j_per_kg"]) - h0) / 1e3 for s in steps]
    ax.plot(temps, dh, color=OKABE_ITO["black"], label="h − h(start)")
    ax.set_ylabel("specific enthalpy h − h(start) [kJ/kg]")
    twin = ax.twinx()
    twin.grid(False)
    twin.spines["right"].set_visible(True)
    cp_eff = _finite([s.get("heat_capacity_effective_j_per_kg_k") for s in steps])
    cp_frozen = _finite([s.get("heat_capacity_frozen_j_per_kg_k") for s in steps])
    twin.plot(temps, cp_eff, color=OKABE_ITO["vermillion"], label="cp_eff (latent heat included)")
    twin.plot(temps, cp_frozen, color=OKABE_ITO["blue"], linestyle="--", label="cp_frozen (phases fixed)")
    positive = [v for v in cp_eff + cp_frozen if v > 0 and math.isfinite(v)]
    if positive and len(positive) == len([v for v in cp_eff + cp_frozen if math.isfinite(v)]) \
            and max(positive) / min(positive) > 20:
        twin.set_yscale("log")
    twin.set_ylabel("isobaric heat capacity [J/(kg K)]")
    for key, label in (("liquidus_k", "liquidus"), ("solidus_k", "solidus")):
        if result.get(key) is not None:
            ax.axvline(float(result[key]), color="#555555", linewidth=0.8, linestyle="-.")
            ax.annotate(f"{label} {float(result[key]):.1f} K", xy=(float(result[key]), 0.98),
                        xycoords=("data", "axes fraction"), xytext=(-3, 0), textcoords="offset points",
                        fontsize=7.5, rotation=90, ha="right", va="top", color="#333333",
                        bbox={"boxstyle": "round,pad=0.1", "fc": "white", "ec": "none", "alpha": 0.75})
    return ax.get_lines()[:1] + twin.get_lines()


# --------------------------------------------------------------------------- table
def table_figure(result: Mapping[str, Any]) -> Any:
    """Melt-fraction map over (T, P) with the solidus and liquidus, from the body of ``POST /v1/tables``.

    Needs ``pressure_gpa`` [nP], ``temperature_k`` [nT], ``by_temperature.melt_fraction``
    [nP][nT], and ``solidus`` / ``liquidus`` with ``temperature_k`` [nP] (null where not found).
    """
    import matplotlib
    import numpy as np

    grid = result.get("by_temperature") or {}
    if "melt_fraction" not in grid:
        raise ValueError("the table has no temperature-indexed melt fraction (by_temperature.melt_fraction)")
    p = np.asarray(_finite(result["pressure_gpa"]))
    t = np.asarray(_finite(result["temperature_k"]))
    phi = np.array([_finite(row) for row in grid["melt_fraction"]], dtype=float).reshape(len(p), len(t))
    with matplotlib.rc_context(STYLE):
        fig = _figure(6.8, 4.8)
        ax = fig.subplots()
        ax.grid(False)
        mesh = ax.pcolormesh(t, p, phi, cmap="cividis", vmin=0.0, vmax=1.0, shading="nearest", rasterized=True)
        bar = fig.colorbar(mesh, ax=ax, pad=0.02)
        bar.set_label("melt fraction [kg liquid per kg of system]")
        if len(p) > 1 and len(t) > 1:
            lines = ax.contour(t, p, phi, levels=[0.25, 0.5, 0.75], colors="white", linewidths=0.6)
            ax.clabel(lines, fmt="%.2f", fontsize=7)
        for key, colour, marker, label in (("solidus", OKABE_ITO["blue"], "o", "solidus"),
                                           ("liquidus", OKABE_ITO["vermillion"], "s", "liquidus")):
            curve = np.asarray(_finite((result.get(key) or {}).get("temperature_k") or [math.nan] * len(p)))
            ok = np.isfinite(curve)
            if ok.any():
                ax.plot(curve[ok], p[ok], color=colour, marker=marker, markersize=3.5, linewidth=1.6, label=label)
        ax.set_xlabel("temperature [K]")
        ax.set_ylabel("pressure [GPa]")
        ax.set_title("Melt fraction of the bulk composition")
        if ax.get_legend_handles_labels()[0]:
            ax.legend(loc="lower right", frameon=True, facecolor="white", framealpha=0.85, edgecolor="none")
        _footer(fig, result)
    return fig


# --------------------------------------------------------------------------- isentrope
def isentrope_figure(result: Mapping[str, Any]) -> Any:
    """Temperature against pressure along an isentrope, coloured by melt fraction.

    ``result`` holds ``pressure_gpa``, ``temperature_k`` and ``melt_fraction`` as parallel
    lists, or a list ``points`` of rows with those fields.
    """
    import matplotlib
    import numpy as np

    cols = _columns(result, ("pressure_gpa", "temperature_k", "melt_fraction"))
    if "pressure_gpa" not in cols or "temperature_k" not in cols:
        raise ValueError("an isentrope figure needs pressure_gpa and temperature_k")
    p, t = np.asarray(cols["pressure_gpa"]), np.asarray(cols["temperature_k"])
    with matplotlib.rc_context(STYLE):
        fig = _figure(5.6, 4.6)
        ax = fig.subplots()
        ax.plot(t, p, color="#555555", linewidth=1.0, zorder=1)
        if "melt_fraction" in cols:
            dots = ax.scatter(t, p, c=cols["melt_fraction"], cmap="cividis", vmin=0.0, vmax=1.0, s=18, zorder=2,
                              edgecolors="#333333", linewidths=0.3)
            fig.colorbar(dots, ax=ax, pad=0.02).set_label("melt fraction [kg liquid per kg of system]")
        ax.invert_yaxis()  # pressure grows downwards, like depth
        ax.set_xlabel("temperature [K]")
        ax.set_ylabel("pressure [GPa]")
        s0 = result.get("specific_entropy_j_per_kg_k")
        tp = result.get("potential_temperature_k")
        label = f"potential temperature {float(tp):g} K" if tp is not None else (
            f"s = {float(s0):.1f} J/(kg K)" if s0 is not None else "constant specific entropy")
        ax.set_title(f"Isentrope ({label})")
        _footer(fig, result)
    return fig


# --------------------------------------------------------------------------- output
FIGURES = {"cooling_path": cooling_path_figure, "table": table_figure, "isentrope": isentrope_figure}


def render(result: Mapping[str, Any], kind: str, fmt: str = "svg") -> bytes:
    """SVG or PNG bytes of the figure of ``result`` (``kind``: ``cooling_path``, ``table`` or ``isentrope``)."""
    if kind not in FIGURES:
        raise ValueError(f"kind must be one of {', '.join(PLOT_KINDS)} (got {kind!r})")
    import matplotlib

    with matplotlib.rc_context(STYLE):
        return _save(FIGURES[kind](result), fmt)


def register_figures(operation: str, kind: str) -> None:
    """Offer the figure of ``operation``'s results as SVG and PNG (see :func:`service.jobs.negotiate`).

    The figure is then served on the operation's own endpoint and on ``GET /v1/jobs/<id>/result``
    of its jobs, with the JSON result's ETag plus ``.svg`` / ``.png``.
    """
    from functools import partial

    from service.jobs import register_renderer

    for media, fmt in IMAGE_FORMATS.items():
        register_renderer(operation, media, fmt, partial(render, kind=kind, fmt=fmt))


def wanted_image_format() -> str | None:
    """``"svg"`` or ``"png"`` when the current request's Accept header prefers a figure the view offers, else None."""
    from flask import request

    from service.negotiation import offered_media_types

    offered = offered_media_types()
    best = request.accept_mimetypes.best_match(offered) if request.accept_mimetypes else None
    return IMAGE_FORMATS.get(best or "")


def render_if_requested(result: Any, kind: str) -> Any:
    """A figure response when the request asks for one, else None (serve ``result`` as usual).

    ``result`` is the result dict or the 200 JSON response of
    :func:`service.jobs.run_or_enqueue`; any other response (``202`` job, ``304``) gives None
    so that it is passed on unchanged. The figure carries ``Vary: Accept`` and an ``ETag``
    derived from the JSON result's (``<etag>.svg``), so caches keep the two apart. The view
    must declare the image types: ``@produces("application/json", *PLOT_MEDIA_TYPES)``.
    """
    from flask import Response, current_app

    fmt = wanted_image_format()
    if fmt is None:
        return None
    etag = None
    if isinstance(result, Response):
        if result.status_code != 200 or result.mimetype != "application/json":
            return None
        etag = result.get_etag()[0]
        result = result.get_json()
    media = next(m for m, f in IMAGE_FORMATS.items() if f == fmt)
    response = current_app.response_class(render(result, kind, fmt), mimetype=media)
    response.headers["Vary"] = "Accept"
    if etag:
        response.set_etag(f"{etag}.{fmt}")
    return response
