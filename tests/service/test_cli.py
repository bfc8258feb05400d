"""The ``heatpath`` command (service/cli.py), run in-process."""

from __future__ import annotations

import json
import shlex

import pytest

from service.cli import build_parser, main
from thermo.dataset import available_datasets, load_dataset


def test_help_lists_both_subcommands(capsys):
    with pytest.raises(SystemExit) as exit_info:
        main(["--help"])
    assert exit_info.value.code == 0
    out = capsys.readouterr().out
    assert "serve" in out and "datasets" in out and "model estimates" in out


def test_a_subcommand_is_required(capsys):
    with pytest.raises(SystemExit) as exit_info:
        main([])
    assert exit_info.value.code == 2
    assert "COMMAND" in capsys.readouterr().err


def test_datasets_prints_a_readable_summary(capsys):
    assert main(["datasets"]) == 0
    out = capsys.readouterr().out
    ds = load_dataset(available_datasets()[0])
    assert ds.id in out and ds.checksum in out
    lo, hi = ds.pressure_range_gpa
    assert f"{lo:g}-{hi:g} GPa" in out


def test_datasets_json_matches_the_http_listing(capsys, client):
    assert main(["datasets", "--json"]) == 0
    assert json.loads(capsys.readouterr().out) == client.get("/v1/datasets").get_json()["datasets"]


def test_serve_dry_run_prints_the_gunicorn_command_with_overrides(capsys, monkeypatch):
    for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        monkeypatch.delenv(name, raising=False)
    assert main(["serve", "--dry-run", "--bind", "127.0.0.1:8123", "--workers", "3"]) == 0
    words = shlex.split(capsys.readouterr().out)
    assert {"HEATPATH_BIND=127.0.0.1:8123", "HEATPATH_WORKERS=3", "OPENBLAS_NUM_THREADS=1", "OMP_NUM_THREADS=1",
            "MKL_NUM_THREADS=1"} <= set(words)
    assert words[-5:-2] == ["-m", "gunicorn", "--config"]
    assert words[-2].endswith("service/gunicorn_conf.py")
    assert words[-1] == "service:create_app()"


def test_serve_refuses_zero_workers():
    with pytest.raises(SystemExit, match="at least 1"):
        main(["serve", "--dry-run", "--workers", "0"])


def test_parser_prog_is_heatpath():
    assert build_parser().prog == "heatpath"
