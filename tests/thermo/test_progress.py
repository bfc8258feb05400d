"""Long computations report progress and stop when the callback raises (a cancelled job)."""

import numpy as np
import pytest

from tests.thermo.binary_systems import di_an, fo_fa
from thermo.isentropes import isentrope
from thermo.paths import cooling_path
from thermo.tables import TableSettings, property_table


class StopError(Exception):
    """What a cancelled job's progress callback raises."""


def _recorder(stop_at: int | None = None):
    calls = []

    def progress(done: int, total: int) -> None:
        calls.append((done, total))
        if stop_at is not None and done >= stop_at:
            raise StopError

    return calls, progress


def test_cooling_path_reports_every_step_and_ends_at_the_total():
    calls, progress = _recorder()
    path = cooling_path(di_an(60.0), 1e-4, 1700.0, 1600.0, 20.0, progress=progress)
    assert calls == [(k, 5) for k in range(1, 6)]
    assert path.points[-1].temperature_k == 1600.0


def test_cooling_path_stops_when_the_callback_raises():
    calls, progress = _recorder(stop_at=2)
    with pytest.raises(StopError):
        cooling_path(di_an(60.0), 1e-4, 1700.0, 1600.0, 20.0, progress=progress)
    assert calls == [(1, 5), (2, 5)]


def test_isentrope_reports_every_pressure():
    calls, progress = _recorder()
    isentrope(fo_fa(50.0), [1e-4, 0.5, 1.0], potential_temperature_k=1800.0, progress=progress)
    assert calls == [(1, 3), (2, 3), (3, 3)]


@pytest.mark.parametrize("workers", [1, 2])
def test_table_reports_nodes_as_rows_finish(workers):
    calls, progress = _recorder()
    property_table(di_an(60.0), [1e-4, 0.5, 1.0], 1500.0, 1700.0, 6, settings=TableSettings(workers=workers),
                   progress=progress)
    assert [c[1] for c in calls] == [18, 18, 18]
    assert [c[0] for c in calls] == [6, 12, 18]


def test_table_stops_when_the_callback_raises():
    calls, progress = _recorder(stop_at=6)
    with pytest.raises(StopError):
        property_table(di_an(60.0), np.linspace(1e-4, 1.0, 4), 1500.0, 1700.0, 6,
                       settings=TableSettings(workers=2), progress=progress)
    assert calls[-1][0] == 6
