"""The computing commands of ``heatpath`` (service/commands.py) against a real gunicorn and in-process.

Commands run in this process through ``service.cli.main`` (output captured); the README test
runs the installed ``heatpath`` entry point as a subprocess.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from service.cli import main
from service.client import HeatpathClient, parse_csv
from service.commands import ProgressLine, aligned, oxide_amounts, value_list
from tests.service.live_server import requires_route
from tests.service.test_gunicorn_server import free_port

OXIDES = "SiO2=50,MgO=30,CaO=15,Al2O3=5"
POINT = ["point", "--oxides", OXIDES, "--pressure", "1", "--temperature", "1700", "--quiet"]


def run(capsys, argv: list[str]) -> tuple[int, str, str]:
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def live_json(live_server):
    """The server's JSON answer for POINT, through the client."""
    with HeatpathClient(live_server.url) as hp:
        return hp.post("/v1/equilibrium", {"composition": {"basis": "wt_percent", "oxides": oxide_amounts(OXIDES)},
                                           "pressure_gpa": 1.0, "temperature_k": 1700.0})


def test_point_prints_a_readable_table(capsys, live_server, live_json):
    code, out, err = run(capsys, [*POINT, "--url", live_server.url])
    assert code == 0, err
    assert "Equilibrium at 1 GPa and 1700 K" in out
    for phase in live_json["phases"]:
        assert phase["name"] in out
    assert "melt fraction" in out and "Model estimates" in out
    assert live_json["provenance"]["dataset_id"] in out


def test_point_json_is_the_servers_answer(capsys, live_server, live_json):
    code, out, _ = run(capsys, [*POINT, "--url", live_server.url, "--json"])
    assert code == 0 and json.loads(out) == live_json


def test_point_csv_round_trips_to_the_json_numbers(capsys, live_server, live_json):
    code, out, _ = run(capsys, [*POINT, "--url", live_server.url, "--csv"])
    assert code == 0
    cols = parse_csv(out)["columns"]
    assert list(cols["name"]) == [p["name"] for p in live_json["phases"]]
    np.testing.assert_array_equal(cols["mass_fraction"], [p["mass_fraction"] for p in live_json["phases"]])
    np.testing.assert_array_equal(cols["density_kg_per_m3"], [p["density_kg_per_m3"] for p in live_json["phases"]])


def test_point_in_process_gives_the_servers_numbers(capsys, live_json, monkeypatch):
    monkeypatch.delenv("HEATPATH_URL", raising=False)
    code, out, _ = run(capsys, [*POINT, "--json"])
    assert code == 0
    local = json.loads(out)
    assert local["phases"] == live_json["phases"] and local["provenance"] == live_json["provenance"]


def test_url_and_key_come_from_the_environment(capsys, live_server, live_json, monkeypatch):
    monkeypatch.setenv("HEATPATH_URL", live_server.url)
    code, out, _ = run(capsys, [*POINT, "--json"])
    assert code == 0 and json.loads(out) == live_json


def test_request_file_with_options_over_it(capsys, live_server, live_json, tmp_path):
    request = tmp_path / "req.json"
    body = {"composition": {"basis": "wt_percent", "oxides": oxide_amounts(OXIDES)}, "pressure_gpa": 9.0,
            "temperature_k": 1700.0}
    request.write_text(json.dumps(body))
    code, out, err = run(capsys, ["point", "--request", str(request), "--pressure", "1", "--url", live_server.url,
                                  "--json", "--quiet"])
    assert code == 0, err
    assert json.loads(out) == live_json


def test_job_progress_is_shown_on_stderr(capsys, live_server):
    code, _, err = run(capsys, ["point", "--oxides", OXIDES, "--pressure", "1.5", "--temperature", "1750",
                                "--url", live_server.url, "--job", "--progress"])
    assert code == 0
    assert "job succeeded" in err and "100%" in err and "done in" in err


def test_bad_input_exits_1_and_names_each_field(capsys, live_server):
    code, out, err = run(capsys, ["point", "--oxides", "SiO2=50,Xx=2", "--pressure", "99", "--url", live_server.url])
    assert code == 1 and out == ""
    assert "422 Invalid input" in err
    assert "composition.oxides.Xx" in err and "pressure_gpa" in err and "temperature_k: is required" in err


def test_server_down_exits_1_with_a_clear_message(capsys):
    code, _, err = run(capsys, [*POINT, "--url", f"http://127.0.0.1:{free_port()}"])
    assert code == 1 and "cannot reach the heatpath server" in err


def test_malformed_oxides_are_a_usage_error(capsys):
    with pytest.raises(SystemExit) as info:
        main(["point", "--oxides", "SiO2:50", "--pressure", "1", "--temperature", "1700"])
    assert info.value.code == 2
    assert "is not OXIDE=AMOUNT" in capsys.readouterr().err


def test_plot_is_refused_where_there_is_no_figure():
    with pytest.raises(SystemExit, match="--plot is not available"):
        main([*POINT, "--plot", "x.svg"])


def test_datasets_from_a_server(capsys, live_server):
    code, out, _ = run(capsys, ["datasets", "--url", live_server.url, "--json"])
    assert code == 0
    with HeatpathClient(live_server.url) as hp:
        assert json.loads(out) == hp.datasets()


def test_every_command_has_help_with_an_example(capsys):
    for command in ("point", "cool", "isentrope", "table"):
        with pytest.raises(SystemExit) as info:
            main([command, "--help"])
        assert info.value.code == 0
        out = capsys.readouterr().out
        assert f"heatpath {command} --oxides" in out and "model estimates" in out and "--url" in out


# ------------------------------------------------------------------ helpers
def test_value_lists_and_ranges():
    assert value_list("0,1,2.5") == [0.0, 1.0, 2.5]
    assert value_list("0:10:11") == {"start": 0.0, "stop": 10.0, "count": 11}


def test_aligned_table_pads_columns():
    text = aligned(["name", "value"], [["a", 1.0], ["longer", 22.5]])
    lines = text.splitlines()
    assert len({len(line) for line in lines}) == 1
    assert lines[2].endswith("    1") and lines[3].endswith(" 22.5")


def test_progress_line_draws_a_bar():
    import io

    stream = io.StringIO()
    line = ProgressLine(stream, enabled=True)
    line.job({"state": "running", "progress": {"fraction": 0.5, "points_done": 5, "points_total": 10,
                                               "remaining_estimate_s": 3.0}})
    assert "[##############..............]  50%" in stream.getvalue() and "about 3 s left" in stream.getvalue()


# ------------------------------------------------------------------ issue-7 endpoints (skip until they exist)
@requires_route("/v1/cooling-paths")
def test_cool_prints_steps_and_writes_a_figure(capsys, live_server, tmp_path):
    figure = tmp_path / "path.svg"
    code, out, err = run(capsys, ["cool", "--oxides", OXIDES, "--pressure", "1", "--from", "2000", "--to", "1980",
                                  "--step", "10", "--url", live_server.url, "--plot", str(figure), "--quiet"])
    assert code == 0, err
    assert "Isobaric cooling" in out and "liquidus" in out
    assert figure.read_bytes().lstrip().startswith(b"<?xml")
    code, out, _ = run(capsys, ["cool", "--oxides", OXIDES, "--pressure", "1", "--from", "2000", "--to", "1980",
                                "--step", "10", "--url", live_server.url, "--csv", "--quiet"])
    assert code == 0 and parse_csv(out)["columns"]["temperature_k"][0] == pytest.approx(2000.0)


@requires_route("/v1/tables")
def test_table_writes_netcdf_and_csv(capsys, live_server, tmp_path):
    from service.client import parse_netcdf

    nc = tmp_path / "t.nc"
    args = ["table", "--oxides", OXIDES, "--pressures", "1,2", "--temperatures", "1700:2000:4",
            "--url", live_server.url, "--quiet"]
    code, _, err = run(capsys, [*args, "--netcdf", str(nc)])
    assert code == 0, err
    melt = parse_netcdf(nc.read_bytes())["variables"]["melt_fraction"]
    code, out, _ = run(capsys, [*args, "--csv"])
    np.testing.assert_array_equal(parse_csv(out)["columns"]["melt_fraction"], melt.ravel())


@requires_route("/v1/isentropes")
def test_isentrope_prints_a_table(capsys, live_server):
    code, out, err = run(capsys, ["isentrope", "--oxides", OXIDES, "--pressures", "0.5,1", "--potential-temperature",
                                  "1900", "--url", live_server.url, "--quiet"])
    assert code == 0, err
    assert "Isentrope" in out


# ------------------------------------------------------------------ output of results in the issue-7 shapes
def test_cooling_path_output_for_people_and_as_csv():
    import argparse
    import io

    from service.commands import show_path
    from tests.service.test_plots import synthetic_path

    result = synthetic_path()
    out = io.StringIO()
    show_path(result, argparse.Namespace(csv=False, mode=None, pressure=None), out)
    text = out.getvalue()
    assert "Isobaric cooling, equilibrium crystallization, at 1 GPa" in text
    assert "liquidus: 1900 K" in text and "solidus: not reached" in text
    assert "olivine" in text and "appears" in text and "cp_eff J/(kg K)" in text
    out = io.StringIO()
    show_path(result, argparse.Namespace(csv=True, mode=None, pressure=None), out)
    cols = parse_csv(out.getvalue())["columns"]
    np.testing.assert_array_equal(cols["temperature_k"], [s["temperature_k"] for s in result["steps"]])
    olivine = [next((p["mass_fraction"] for p in s["phases"] if p["name"] == "olivine"), 0.0) for s in result["steps"]]
    np.testing.assert_array_equal(cols["mass_fraction_olivine"], olivine)


def test_table_and_isentrope_output_for_people():
    import argparse
    import io

    from service.commands import show_columns, show_table
    from tests.service.test_plots import synthetic_isentrope, synthetic_table

    out = io.StringIO()
    show_table(synthetic_table(), argparse.Namespace(csv=False), out)
    assert "3 pressures x 4 temperatures (1400-2000 K)" in out.getvalue()
    assert "--netcdf FILE" in out.getvalue()
    out = io.StringIO()
    show_columns(synthetic_isentrope(), argparse.Namespace(csv=False), out, "Isentrope")
    header = out.getvalue().splitlines()
    assert any(line.split() == ["pressure_gpa", "temperature_k", "melt_fraction"] for line in header)
