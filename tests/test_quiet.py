"""run.stop_when_quiet (cable/quiet.py): a run that ends once nothing is left to happen
measures its beats exactly as the run to run.duration does.

The check is exact, not approximate: the stop comes only after every APD level was
crossed, every wave ended and no stimulus is left, so the per-beat measurements of the
shortened run are those of the full run bit for bit (``np.array_equal``); the only
tolerance is none. What changes is the t axis (shorter) and the attributes that say so.
"""

import numpy as np
import pytest

import cable
from cable.kernels.batch import simulate_batch
from tests.protocols.protocol_cases import cardiac_strand, hh_axon

MEASURES = ("activation_time", "conduction_velocity", "apd", "outcome", "captured", "blocked", "block_x",
            "upstroke_velocity", "resting_potential", "peak_potential", "wavelength_apd")


def _both(raw):
    case = cable.load_case(raw)
    full = cable.simulate(case.with_overrides({"run.stop_when_quiet": False}))
    quiet = cable.simulate(case.with_overrides({"run.stop_when_quiet": True}))
    return full, quiet


def _same_measures(full, quiet):
    for name in MEASURES:
        if name in full:
            assert np.array_equal(full[name].values, quiet[name].values, equal_nan=True), name


def _hh(duration=40.0, block=False):
    raw = hh_axon(length=1.0, duration=duration)
    if block:  # an inexcitable segment: the wave stops before it (outcome blocked)
        raw["region"] = [{"start": 0.4, "end": 1.0, "scale": {"g_Na": 0.0}}]
    return raw


@pytest.mark.parametrize("block", [False, True], ids=["conducts", "blocks"])
def test_hh_axon_measures_the_same_and_stops_early(block):
    full, quiet = _both(_hh(block=block))
    _same_measures(full, quiet)
    assert int(full.outcome.values[0]) == (2 if block else 1)  # blocked / conducted (cable.io.schema)
    assert quiet.attrs["stop_when_quiet"] == 1 and full.attrs["stop_when_quiet"] == 0
    stop = quiet.attrs["stopped_when_quiet_ms"]
    assert stop < 40.0 and "stopped_when_quiet_ms" not in full.attrs
    assert quiet.sizes["t"] < full.sizes["t"] and float(quiet.t[-1]) == pytest.approx(stop)
    # the fields computed are the full run's, sample for sample
    assert np.array_equal(quiet.vm.values, full.vm.values[: quiet.sizes["t"]])


def test_cardiac_strand_two_beats_measure_the_same():
    # LR1, 0.5 cm, 2 beats at 400 ms, run for 1400 ms: the strand is at rest well before
    raw = cardiac_strand("luo-rudy-1991", length=0.5, count=2, cycle_length=400.0, duration=1400.0)
    full, quiet = _both(raw)
    _same_measures(full, quiet)
    assert np.all(np.isfinite(full.apd.sel(level=90).values))
    assert 400.0 < quiet.attrs["stopped_when_quiet_ms"] < 1400.0
    # not before every node repolarised past the lowest APD level of the last beat
    last_repol = np.nanmax(full.activation_time.values[1] + full.apd.sel(level=90).values[1])
    assert quiet.attrs["stopped_when_quiet_ms"] >= last_repol


def test_a_level_near_rest_keeps_the_run_going_until_it_is_crossed():
    # APD99 lies near rest: the run must wait for it (it is measured in both, and equal)
    raw = cardiac_strand("luo-rudy-1991", length=0.5, count=1, duration=1000.0)
    raw["measure"] = {"apd_levels": [50, 90, 99]}
    full, quiet = _both(raw)
    _same_measures(full, quiet)
    assert np.all(np.isfinite(quiet.apd.sel(level=99).values))


def test_streamed_file_has_the_shorter_t_axis(tmp_path):
    case = cable.load_case(_hh(), ["run.stop_when_quiet=true"])
    ds = cable.simulate(case, output=tmp_path / "q.nc")
    assert ds.sizes["t"] < 401 and np.all(np.isfinite(ds.vm.values))
    assert float(ds.t[-1]) == pytest.approx(ds.attrs["stopped_when_quiet_ms"])
    mem = cable.simulate(case)
    assert np.array_equal(ds.activation_time.values, mem.activation_time.values, equal_nan=True)


def test_batch_stops_when_every_strand_is_quiet():
    base = cable.load_case(_hh(), ["run.stop_when_quiet=true"])
    cases = [base, cable.load_case(_hh(block=True), ["run.stop_when_quiet=true"])]
    batch = simulate_batch(cases)
    assert all(ds.attrs["batch_size"] == 2 for ds in batch)
    for case, ds in zip(cases, batch):
        _same_measures(cable.simulate(case.with_overrides({"run.stop_when_quiet": False})), ds)
    stops = [cable.simulate(c).attrs["stopped_when_quiet_ms"] for c in cases]
    # every strand is quiet at the later of the two stops (the first output time all are)
    assert batch[0].attrs["stopped_when_quiet_ms"] == batch[1].attrs["stopped_when_quiet_ms"] == max(stops)


def test_default_is_off_for_a_run_and_on_for_the_protocols():
    from cable.protocols import _pacing

    case = cable.load_case(_hh())
    assert case.stop_when_quiet is None and cable.simulate(case).attrs["stop_when_quiet"] == 0
    variant = _pacing.variant(case, stimuli=list(case.raw["stimulus"].values()), duration=40.0)
    assert variant.stop_when_quiet is True
    off = _pacing.variant(case.with_overrides({"run.stop_when_quiet": False}),
                          stimuli=list(case.raw["stimulus"].values()),
                          duration=40.0)
    assert off.stop_when_quiet is False


def test_command_line_sets_it_and_the_summary_says_where_it_stopped(tmp_path, capsys):
    from cable.cli import main
    from tests.protocols.protocol_cases import write_case

    path = write_case(tmp_path, _hh())
    import xarray as xr

    rc = main(["run", str(path), "-o", str(tmp_path / "q.nc"), "--set", "run.stop_when_quiet=true",
               "--set", "run.quiet_tolerance=0.5 mV"])
    out = capsys.readouterr().out
    assert rc == 0 and "stopped when quiet at" in out
    with xr.open_dataset(tmp_path / "q.nc") as ds:
        assert ds.attrs["stop_when_quiet"] == 1 and ds.sizes["t"] < 401
    rc = main(["run", str(path), "--set", "run.stop_when_quiet=maybe"])
    assert rc == 2


def test_pseudo_ecg_is_the_same_when_streamed_and_the_safety_factor_runs_to_the_end(tmp_path):
    # the QT interval needs the T wave, which ends before the strand is back at rest
    raw = _hh()
    raw["electrode"] = [{"x": "1.5 cm", "distance": 0}]
    full = cable.simulate(cable.load_case(raw), output=tmp_path / "full.nc")
    quiet = cable.simulate(cable.load_case(raw, ["run.stop_when_quiet=true"]), output=tmp_path / "quiet.nc")
    assert quiet.sizes["t"] < full.sizes["t"] and quiet.pseudo_ecg.shape[1] == quiet.sizes["t"]
    for name in ("qrs_onset", "qt_interval", "t_peak", "activation_time"):
        assert np.array_equal(full[name].values, quiet[name].values, equal_nan=True), name
    assert np.array_equal(full.pseudo_ecg.values[:, : quiet.sizes["t"]], quiet.pseudo_ecg.values)
    # the safety factor's charges run to the end of the run: such a run is not stopped
    raw["measure"] = {"safety_factor": True}
    ds = cable.simulate(cable.load_case(raw, ["run.stop_when_quiet=true"]))
    assert ds.attrs["stop_when_quiet"] == 0 and ds.sizes["t"] == full.sizes["t"]
