"""Figures (service/plots.py): valid SVG and PNG with the expected axis labels, and content negotiation.

The results drawn here are small hand-made dicts in the API's shapes (issue 7), not physics:
these tests check the drawing, the image formats and the negotiation, not the numbers.
"""

from __future__ import annotations

import re
import struct
import xml.etree.ElementTree as ET
from typing import Any

import pytest

from service import create_app
from service.jobs import run_or_enqueue
from service.negotiation import produces
from service.plots import OKABE_ITO, PLOT_MEDIA_TYPES, render, render_if_requested

SVG_NS = "{http://www.w3.org/2000/svg}"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def synthetic_path(params: dict[str, Any] | None = None, progress: Any = None) -> dict[str, Any]:
    """A cooling-path result in the API's shape: liquid, then olivine (1900 K), then clinopyroxene (1700 K)."""
    steps = []
    for i in range(11):
        t = 2000.0 - 50.0 * i
        ol = 0.0 if t >= 1900 else min(0.5, (1900 - t) / 500)
        cpx = 0.0 if t >= 1700 else (1700 - t) / 600
        phases = [{"name": "liquid", "is_liquid": True, "mass_fraction": 1 - ol - cpx}]
        phases += [{"name": n, "is_liquid": False, "mass_fraction": x} for n, x in (("olivine", ol),
                                                                                    ("clinopyroxene", cpx)) if x > 0]
        steps.append({"temperature_k": t, "melt_fraction": 1 - ol - cpx, "phases": phases,
                      "specific_enthalpy_j_per_kg": -1.0e7 - 1600.0 * (2000 - t) - 4e5 * (ol + cpx),
                      "heat_capacity_frozen_j_per_kg_k": 1600.0, "heat_capacity_effective_j_per_kg_k": 1600.0 + 800 * (
                          ol > 0), "density_kg_per_m3": 3000.0 + 300 * (ol + cpx)})
    return {"mode": "equilibrium", "pressure_gpa": 1.0, "steps": steps,
            "saturation_sequence": [{"phase": "olivine", "temperature_k": 1900.0, "event": "appears"},
                                    {"phase": "clinopyroxene", "temperature_k": 1700.0, "event": "appears"}],
            "liquidus_k": 1900.0, "solidus_k": None,
            "provenance": {"dataset_id": "test-dataset", "dataset_checksum": "ab" * 32, "code_version": "0.0",
                           "request_hash": "cd" * 32, "warnings": []}}


def synthetic_table() -> dict[str, Any]:
    pressures, temps = [0.0, 1.0, 2.0], [1400.0, 1600.0, 1800.0, 2000.0]
    solidus, liquidus = [1500.0, 1550.0, None], [1850.0, 1900.0, 1950.0]
    melt = [[min(1.0, max(0.0, (t - 1500 - 50 * i) / 400)) for t in temps] for i in range(3)]
    return {"pressure_gpa": pressures, "temperature_k": temps, "by_temperature": {"melt_fraction": melt},
            "solidus": {"temperature_k": solidus}, "liquidus": {"temperature_k": liquidus}, "provenance": {}}


def synthetic_isentrope() -> dict[str, Any]:
    return {"potential_temperature_k": 1900.0, "pressure_gpa": [0.0, 1.0, 2.0, 3.0],
            "temperature_k": [1900.0, 1940.0, 1975.0, 2010.0], "melt_fraction": [1.0, 0.8, 0.5, 0.2]}


def svg_texts(svg: bytes) -> list[str]:
    root = ET.fromstring(svg)
    assert root.tag == f"{SVG_NS}svg"
    return ["".join(el.itertext()).strip() for el in root.iter(f"{SVG_NS}text")]


def png_size(png: bytes) -> tuple[int, int]:
    assert png[:8] == PNG_SIGNATURE
    assert png[12:16] == b"IHDR"
    return struct.unpack(">II", png[16:24])


# ------------------------------------------------------------------ figures
def test_cooling_path_svg_has_labelled_axes_phases_and_events():
    texts = svg_texts(render(synthetic_path(), "cooling_path", "svg"))
    for label in ("temperature [K]  (cooling →)", "phase mass fraction [kg per kg of system]",
                  "specific enthalpy h − h(start) [kJ/kg]", "isobaric heat capacity [J/(kg K)]",
                  "liquid", "olivine", "clinopyroxene", "1  + olivine  1900.0 K", "2  + clinopyroxene  1700.0 K",
                  "liquidus 1900.0 K"):
        assert label in texts, label
    assert any(t.startswith("Model estimate, not a measurement") for t in texts)
    assert any("Isobaric cooling at 1 GPa" in t for t in texts)


def test_cooling_path_uses_the_okabe_ito_colours():
    svg = render(synthetic_path(), "cooling_path", "svg").decode().lower()
    for name in ("sky blue", "orange", "bluish green"):  # liquid, first and second crystal
        assert OKABE_ITO[name].lower() in svg, name


def test_cooling_path_png_is_a_png_of_sane_size():
    width, height = png_size(render(synthetic_path(), "cooling_path", "png"))
    assert 800 <= width <= 2400 and 600 <= height <= 2000


def test_table_svg_shows_melt_fraction_with_solidus_and_liquidus():
    texts = svg_texts(render(synthetic_table(), "table", "svg"))
    for label in ("temperature [K]", "pressure [GPa]", "melt fraction [kg liquid per kg of system]", "solidus",
                  "liquidus", "Melt fraction of the bulk composition"):
        assert label in texts, label


def test_table_png_is_a_png_of_sane_size():
    width, height = png_size(render(synthetic_table(), "table", "png"))
    assert 600 <= width <= 2400 and 400 <= height <= 2000


def test_isentrope_svg_has_labelled_axes():
    texts = svg_texts(render(synthetic_isentrope(), "isentrope", "svg"))
    assert {"temperature [K]", "pressure [GPa]"} <= set(texts)
    assert "Isentrope (potential temperature 1900 K)" in texts


def test_svg_output_is_reproducible():
    assert render(synthetic_path(), "cooling_path") == render(synthetic_path(), "cooling_path")


def test_bad_requests_of_a_figure_are_refused():
    with pytest.raises(ValueError, match="kind must be one of"):
        render(synthetic_path(), "pie")
    with pytest.raises(ValueError, match="svg or png"):
        render(synthetic_path(), "cooling_path", "gif")
    with pytest.raises(ValueError, match="at least two steps"):
        render({"steps": synthetic_path()["steps"][:1]}, "cooling_path")
    with pytest.raises(ValueError, match="melt fraction"):
        render({"pressure_gpa": [1.0], "temperature_k": [1.0]}, "table")


# ------------------------------------------------------------------ content negotiation
@pytest.fixture
def plot_app():
    """The service app plus a route serving the synthetic path through run_or_enqueue, with figures."""
    app = create_app({"TESTING": True, "HEATPATH_CACHE_MAX_BYTES": 1 << 20})

    @app.post("/v1/_test/path")
    @produces("application/json", *PLOT_MEDIA_TYPES)
    def _path():
        response = run_or_enqueue("test/path", {"n": 1}, synthetic_path)
        return render_if_requested(response, "cooling_path") or response

    return app


@pytest.mark.parametrize(("accept", "media_type"), [
    ("image/svg+xml", "image/svg+xml"), ("image/png", "image/png"), ("image/*", "image/svg+xml"),
    ("application/json", "application/json"), ("*/*", "application/json"), (None, "application/json"),
    ("application/json;q=0.5, image/png", "image/png"),
])
def test_accept_header_chooses_json_or_a_figure(plot_app, accept, media_type):
    headers = {"Accept": accept} if accept else {}
    response = plot_app.test_client().post("/v1/_test/path", json={}, headers=headers)
    assert response.status_code == 200 and response.mimetype == media_type
    if media_type.startswith("image/"):
        assert response.headers["Vary"] == "Accept"
        json_etag = plot_app.test_client().post("/v1/_test/path", json={}).get_etag()[0]
        assert response.get_etag()[0] == f"{json_etag}.{'svg' if 'svg' in media_type else 'png'}"


def test_an_unoffered_media_type_is_406_problem(plot_app):
    response = plot_app.test_client().post("/v1/_test/path", json={}, headers={"Accept": "image/gif"})
    assert response.status_code == 406 and response.mimetype == "application/problem+json"
    assert "image/svg+xml" in response.get_json()["detail"]


def test_render_if_requested_passes_a_202_job_on():
    app = create_app({"TESTING": True, "HEATPATH_QUEUE": "memory"})

    @app.post("/v1/_test/path")
    @produces("application/json", *PLOT_MEDIA_TYPES)
    def _path():
        response = run_or_enqueue("test/path", {"n": 2}, synthetic_path)
        return render_if_requested(response, "cooling_path") or response

    response = app.test_client().post("/v1/_test/path", json={"async": True}, headers={"Accept": "image/svg+xml"})
    assert response.status_code == 202 and response.mimetype == "application/json"
    assert re.match(r"^/v1/jobs/[0-9a-f]+$", response.headers["Location"])


def test_client_draws_the_figure_of_a_background_job_itself(tmp_path):
    """An operation that registers no figure renderer has its job result as JSON only; the client draws it."""
    from service.client import HeatpathClient
    from tests.service.team_support import make_app

    app = make_app(tmp_path)  # jobs run at once in this process

    @app.post("/v1/_test/path")
    @produces("application/json", *PLOT_MEDIA_TYPES)
    def _path():
        response = run_or_enqueue("test/cooling_path", {"n": 3}, synthetic_path)
        return render_if_requested(response, "cooling_path") or response

    with HeatpathClient.in_process(app) as hp:
        svg = hp.post("/v1/_test/path", {"async": True}, accept="image/svg+xml")
    assert svg == render(synthetic_path(), "cooling_path", "svg")
