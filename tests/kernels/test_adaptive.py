"""Adaptive time steps (``numerics.dt_max``, cable/kernels/adaptive.py): the accuracy
contract of issue 15 against the fixed fine step, the steps taken, refusals.

The bounds are the issue's accuracy contract (activation 0.2 ms, CV 0.5%, APD90 1 ms,
rest 0.2 mV, upstroke 2% against the fixed step of 5 us; a cell's APD90 within 0.5 ms),
and each measure no worse than the fixed step of 20 us, the step a user would otherwise
take (its own error is the scheme's first-order time error: common practice, see
DEVELOPERS.md "Reaction schemes").
"""

import numpy as np
import pytest

import cable
from cable.case import CaseError
from cable.kernels import adaptive

SIGMA = 1000.0 / 162.0   # mS/cm: ten Tusscher et al. 2004 tissue settings (D 0.00154 cm^2/ms)
CHI = 2000.0             # 1/cm

#: issue 15's accuracy contract (against the fixed step of 5 us)
CONTRACT = {"activation": 0.2, "cv": 0.005, "apd90": 1.0, "rest": 0.2, "upstroke": 0.02}
#: "no worse than the user's step" is judged down to this fraction of the contract's bound:
#: below it (the rest agrees to ~1 uV in both runs) the comparison resolves nothing the
#: contract asks about
RESOLVED = 0.01
#: the fine step of the reference, the step a user would take, and the adaptive levels [ms]
DT_REF, DT_USER, DT_FINE, DT_MAX = 0.005, 0.02, 0.005, 0.5


def strand(model, dt, dt_max=None, beats=2, cycle=500.0):
    per_area = cable.get_model(model).current_basis == "area"   # LR1: C_m 1, chi doubled, stimulus halved
    cm, chi, stim = (1.0, 2 * CHI, 0.5) if per_area else (2.0, CHI, 1.0)
    case = {"membrane": {"model": model},
            "fiber": {"length": 0.5, "dx": 0.01, "conductivity": SIGMA, "surface_to_volume": chi, "capacitance": cm},
            "stimulus": [{"amplitude": 200.0 * stim, "duration": 1.0, "width": 0.05, "count": beats,
                          "cycle_length": cycle}],
            "numerics": {"dt": dt}, "run": {"duration": beats * cycle}, "output": {"every": 1.0}}
    if dt_max is not None:
        case["numerics"]["dt_max"] = dt_max
    return case


def errors(ds, ref):
    """The contract's measures: largest differences from the reference over beats and nodes
    (upstroke away from the stimulated zone and the sealed ends, 5 nodes each)."""
    inner = slice(5, -5)
    return {"activation": float(np.nanmax(np.abs(ds.activation_time - ref.activation_time))),
            "cv": float(np.max(np.abs(ds.conduction_velocity / ref.conduction_velocity - 1.0))),
            "apd90": float(np.nanmax(np.abs(ds.apd.sel(level=90.0) - ref.apd.sel(level=90.0)))),
            "rest": float(np.nanmax(np.abs(ds.resting_potential - ref.resting_potential))),
            "upstroke": float(np.nanmax(np.abs(ds.upstroke_velocity.isel(x=inner)
                                               / ref.upstroke_velocity.isel(x=inner) - 1.0)))}


@pytest.mark.slow
@pytest.mark.parametrize("model", ["ten-tusscher-panfilov-2006", "luo-rudy-1991"])
def test_strand_meets_the_contract_and_beats_the_user_step(model):
    ref = cable.simulate(strand(model, DT_REF))
    user = cable.simulate(strand(model, DT_USER))
    ada = cable.simulate(strand(model, DT_FINE, DT_MAX))
    assert np.all(ref.conducted == 1) and np.all(ada.conducted == 1)
    e_ada, e_user = errors(ada, ref), errors(user, ref)
    for name, bound in CONTRACT.items():
        assert e_ada[name] <= bound, (name, e_ada[name])
        assert e_ada[name] <= max(e_user[name], RESOLVED * bound), (name, e_ada, e_user)
    # the long steps were taken: most of the run at levels above the fine step
    assert float(np.sum(ada.steps_taken[1:] * ada.step_dt[1:])) > 0.8 * 1000.0


def cell(dt, dt_max=None, beats=10):
    case = {"membrane": {"model": "ten-tusscher-panfilov-2006"},
            "stimulus": [{"amplitude": 52.0, "duration": 1.0, "count": beats, "cycle_length": 1000.0}],
            "numerics": {"dt": dt}, "run": {"duration": beats * 1000.0}, "output": {"every": 1.0}}
    if dt_max is not None:
        case["numerics"]["dt_max"] = dt_max
    return case


def test_paced_cell_apd90_of_the_last_beat():
    fixed = cable.simulate(cell(DT_FINE))
    ada = cable.simulate(cell(DT_FINE, DT_MAX))
    last = lambda ds: float(ds.apd.sel(level=90.0).isel(beat=-1))  # noqa: E731
    assert abs(last(ada) - last(fixed)) <= 0.5
    # steps per level recorded, summing to the run's duration
    assert float(np.sum(ada.steps_taken * ada.step_dt)) == pytest.approx(10_000.0, rel=1e-12)
    assert list(ada.step_dt.values) == list(adaptive.step_levels(DT_FINE, DT_MAX))


def test_blocks_never_cross_an_output_time_or_a_stimulus_edge(monkeypatch):
    seen = []
    init = adaptive.Stepper.__init__

    def spy(self, *args, **kw):
        init(self, *args, **kw)
        self.trace = np.zeros((100_000, 3), dtype=np.int64)   # the driver records every block
        seen.append(self)

    monkeypatch.setattr(adaptive.Stepper, "__init__", spy)
    case = strand("ten-tusscher-panfilov-2006", 0.01, 0.32, beats=2, cycle=1000.0)   # strands: blocks of the loop
    case["fiber"]["length"] = 0.1
    case["stimulus"][0].update(start=100.013, duration=1.003)   # edges off the fine grid
    case["output"]["every"] = 2.5
    ds = cable.simulate(case)
    st = seen[0]
    n_blocks = int(st.ctl[2])
    assert n_blocks < st.trace.shape[0]
    n, m, k = st.trace[:n_blocks].T
    h = np.array(st.levels)[k]
    assert int(m.sum()) == int(ds.steps_taken.sum()) and np.all(m <= adaptive.BLOCK_STEPS)
    _tile_the_run(list(zip(n * 0.01, n * 0.01 + m * h, h)))


def _tile_the_run(steps):
    """The steps (t0, t1, h) tile the 2-beat run, cross no output time (every 2.5 ms), and
    only fine steps (0.01 ms) touch a stimulus edge."""
    edges = [e for k in range(2) for e in (100.013 + 1000.0 * k, 101.016 + 1000.0 * k)]
    outputs = np.arange(0.0, 2000.0 + 1.0, 2.5)
    t = 0.0
    for t0, t1, h in steps:
        assert t0 == pytest.approx(t, abs=1e-9)   # the blocks tile the run
        assert not np.any((outputs > t0 + 1e-9) & (outputs < t1 - 1e-9)), (t0, m, h)
        if h > 0.01:
            assert not any(t0 - 1e-9 < e < t1 + 1e-9 for e in edges), (t0, t1, h)
        t = t1
    assert t == pytest.approx(2000.0)
    assert max(h for _, _, h in steps) == pytest.approx(0.32)   # the long steps were used


def test_cell_steps_never_cross_an_output_time_or_a_stimulus_edge(monkeypatch):
    from cable.kernels import adaptive_cell

    seen = []
    init = adaptive_cell.CellStepper.__init__

    def spy(self, *args, **kw):
        init(self, *args, **kw)
        self.trace = np.zeros((400_000, 2), dtype=np.int64)   # the loop records every step
        seen.append(self)

    monkeypatch.setattr(adaptive_cell.CellStepper, "__init__", spy)
    case = cell(0.01, 0.32, beats=2)
    case["stimulus"][0].update(start=100.013, duration=1.003)
    case["output"]["every"] = 2.5
    ds = cable.simulate(case)
    st = seen[0]
    n_steps = int(st.ctl[2])
    assert n_steps == int(ds.steps_taken.sum()) < st.trace.shape[0]
    n, k = st.trace[:n_steps, 0], st.trace[:n_steps, 1]
    h = st.levels[k]
    _tile_the_run(list(zip(n * 0.01, n * 0.01 + h, h)))


def test_dt_max_equal_to_dt_is_the_fixed_step_bit_for_bit():
    case = strand("ten-tusscher-panfilov-2006", 0.02, beats=1, cycle=50.0)
    same = strand("ten-tusscher-panfilov-2006", 0.02, dt_max=0.02, beats=1, cycle=50.0)
    a, b = cable.simulate(case), cable.simulate(same)
    assert "steps_taken" not in b
    for name in a.data_vars:
        assert np.array_equal(a[name].values, b[name].values, equal_nan=True), name


def test_steps_are_written_to_the_result_file(tmp_path):
    out = tmp_path / "run.nc"
    cable.simulate(cell(0.02, 0.5, beats=1), output=out)
    import xarray as xr

    with xr.open_dataset(out) as ds:
        assert ds.steps_taken.attrs["long_name"].startswith("steps taken")
        assert float((ds.steps_taken * ds.step_dt).sum()) == pytest.approx(1000.0)
        assert ds.attrs["dt_max_ms"] == 0.5
        from cable.cli.summary import summarise

        assert "adaptive steps up to 0.5 ms" in summarise(ds)


def test_batch_runs_adaptive_cases_alone_with_the_same_result():
    from cable.kernels.batch import simulate_batch

    cases = [cell(0.02, 0.5, beats=1), cell(0.02, 0.5, beats=1)]
    cases[1]["stimulus"][0]["amplitude"] = 60.0
    got = simulate_batch(cases)
    for case, ds in zip(cases, got):
        alone = cable.simulate(case)
        assert np.array_equal(ds.apd.values, alone.apd.values, equal_nan=True)
        assert np.array_equal(ds.steps_taken.values, alone.steps_taken.values)


@pytest.mark.parametrize("numerics, word", [
    ({"dt": 0.02, "dt_max": 0.01}, "shorter than numerics.dt"),
    ({"dt": 0.02, "dt_max": 0.5, "gating": "forward-euler"}, "gating"),
    ({"dt": 0.02, "dt_max": 0.5, "reaction": "rush-larsen-2"}, "reaction"),
])
def test_unsafe_or_inconsistent_dt_max_is_refused(numerics, word):
    case = cell(0.02, beats=1)
    case["numerics"] = numerics
    with pytest.raises(CaseError, match="numerics.dt_max") as err:
        cable.load_case(case)
    assert word in str(err.value)


def test_step_levels():
    assert adaptive.step_levels(0.02, 0.5) == (0.02, 0.04, 0.08, 0.16, 0.32)
    assert adaptive.step_levels(0.02, None) == (0.02,)
    assert adaptive.step_levels(0.1, 0.4) == (0.1, 0.2, 0.4)


def test_levels_beyond_the_measured_rush_larsen_limit_are_warned():
    # HH: Rush-Larsen measured stable to 44.5 us for a whole action potential (DEVELOPERS.md,
    # "Reaction schemes", stability table); levels 5-80 us exceed it, 5-40 us do not
    case = {"membrane": {"model": "hodgkin-huxley-1952"}, "stimulus": [{"amplitude": 40.0, "duration": 0.5}],
            "numerics": {"dt": 0.005, "dt_max": 0.1}, "run": {"duration": 10.0}}
    assert any("dt_max = 0.1 ms allows steps of 0.08 ms" in n for n in cable.load_case(case).notes)
    case["numerics"]["dt_max"] = 0.05
    assert not any("dt_max" in n for n in cable.load_case(case).notes)


def test_cell_stopped_when_quiet_keeps_every_measurement():
    # run.stop_when_quiet (cable/quiet.py): the measurements of the beats are those of the
    # whole run, bit for bit, with the cell's compiled loop running many intervals per call
    case = cell(0.02, 0.5, beats=1)
    whole = cable.simulate(case)
    case["run"]["stop_when_quiet"] = True
    quiet = cable.simulate(case)
    assert quiet.attrs["stopped_when_quiet_ms"] < 1000.0 and quiet.t.size < whole.t.size
    for name in ("activation_time", "apd", "upstroke_velocity", "resting_potential", "peak_potential"):
        assert np.array_equal(quiet[name].values, whole[name].values, equal_nan=True), name
    assert np.array_equal(quiet.vm.values, whole.vm.values[:quiet.t.size])


def test_front_window_agrees_with_every_node_at_the_fine_step(monkeypatch):
    """While a front crosses the strand only its nodes react at the fine step, the others
    once per block (``adaptive.window_choice``): the front is that of the run without
    the window to within one fine step (its resolution; measured here 3e-4 ms on 2 cm,
    tools/bench/adaptive.py), the upstroke rate to 0.5 % (the contract's 2 % / 4), and
    the window was used."""
    case = strand("ten-tusscher-panfilov-2006", DT_FINE, DT_MAX, beats=1)
    case["fiber"]["length"] = 1.0
    case["run"]["duration"] = 40.0
    windowed = cable.simulate(case)
    monkeypatch.setattr(adaptive, "WINDOW_MOST", 0.0)     # never a window: every node at the block's level
    plain = cable.simulate(case)
    assert int(windowed.steps_windowed) > 1000 and int(windowed.reactions_saved) > 0
    assert int(plain.steps_windowed) == 0
    assert np.all(windowed.conducted == 1)
    gap = np.nanmax(np.abs(windowed.activation_time - plain.activation_time))
    assert gap <= DT_FINE, gap
    inner = slice(5, -5)
    rel = np.nanmax(np.abs(windowed.upstroke_velocity.isel(x=inner) / plain.upstroke_velocity.isel(x=inner) - 1))
    assert rel <= 0.005, rel
