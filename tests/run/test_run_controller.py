"""The controller wiring: exact output times, the interrupt flag, the series, restart records."""

import os
import signal

import numpy as np

from convsim import api
from convsim.config import Config
from convsim.files.reader import read_run
from convsim.model import diagnostics
from convsim.run.build import build_model
from convsim.run.interrupt import DeferredInterrupt
from convsim.run.records import Series
from convsim.run.restart import state_from_record, state_record


def test_snapshots_and_the_end_land_on_exact_times(tmp_path):
    """Output times are decimal multiples of the interval (0.3, not 3 * 0.1 =
    0.30000000000000004), and the last step is cut to land on the end time."""
    cfg = Config().replace(domain__nx=8, domain__nz=8, stop__steady=False, stop__end_time=0.75,
                           output__snapshot_interval=0.1, numerics__max_dt=0.03)
    result = api.run(cfg, tmp_path / "run.h5")
    times = read_run(tmp_path / "run.h5").times
    assert result.status == "end-time" and result.time == 0.75
    assert list(times) == [0.0, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.75]


def test_the_interrupt_flag_and_the_previous_handler():
    before = signal.getsignal(signal.SIGINT)
    with DeferredInterrupt() as flag:
        os.kill(os.getpid(), signal.SIGINT)
        assert flag.requested and flag.signum == signal.SIGINT
    assert signal.getsignal(signal.SIGINT) is before


def test_series_records_every_nth_step_and_hands_out_new_rows_once():
    series = Series(every=2)
    for step in range(1, 6):
        values = {name: 1.0 for name in diagnostics.DIAGNOSTICS}
        report = type("R", (), dict(values, time=0.1 * step, step=step, dt=0.1))
        series.record(report, 1e4)
    assert list(series.take_new()["series_step"]) == [2, 4]
    assert len(series.take_new()["series_step"]) == 0
    assert list(series.all_columns()["series_step"]) == [2, 4]


def test_series_rows_survive_the_buffer_growing_and_keep_integer_columns():
    """Common practice (a doubling buffer): 1,000 rows through a 256-row start come back exact."""
    series = Series(every=1)
    for step in range(1, 1001):
        values = {name: step * 0.5 for name in diagnostics.DIAGNOSTICS}
        report = type("R", (), dict(values, time=0.001 * step, step=step, dt=0.001))
        series.record(report, 1e4)
    cols = series.all_columns()
    assert cols["series_step"].dtype.kind == "i" and list(cols["series_step"]) == list(range(1, 1001))
    assert np.array_equal(cols["vrms"], 0.5 * np.arange(1, 1001))
    assert len(series.take_new()["series_time"]) == 1000


def test_a_run_with_a_file_streams_its_series_and_reads_it_back(tmp_path):
    """A run that writes a file keeps no rows in memory (keep_series=False); its result's
    series is the file's, row for row the steps it took (series_every = 1)."""
    from convsim.run.controller import Simulation
    cfg = Config().replace(domain__nx=8, domain__nz=8, stop__steady=False, stop__max_steps=40,
                           output__snapshot_steps=15)
    result = api.run(cfg, tmp_path / "run.h5")
    assert list(result.series["series_step"]) == list(range(1, 41))
    assert np.array_equal(result.series["vrms"], read_run(tmp_path / "run.h5").series["vrms"])
    held = Simulation(cfg, build_model(cfg), keep_series=False).run()
    assert held.series == {} and held.steps == 40


def test_restart_record_round_trip_is_exact():
    model = build_model(Config().replace(domain__nx=8, domain__nz=8))
    X, Z = model.grid.cell_mesh()
    state = model.initial_state(1.0 - Z + 0.01 * np.cos(np.pi * X) * np.sin(np.pi * Z))
    state, _ = model.step(state)
    state, _ = model.step(state)
    back = state_from_record(model, state_record(state))
    for part in ("fields", "previous", "previous_explicit"):
        for name, values in getattr(state, part).items():
            assert np.array_equal(getattr(back, part)[name], values)
    assert np.array_equal(back.psi, state.psi)
    assert (back.time, back.step, back.previous_dt) == (state.time, state.step, state.previous_dt)
