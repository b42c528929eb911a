"""cable.check_case: what a run implies, before it runs (issue 16, item 1).

The node counts, node ranges and limits are checked against closed forms of the grid
(vertex-centred, x_i = i dx), not against the program's own output.
"""

import math

import pytest

import cable
from cable.case import CaseError
from cable.check import check_case
from tests.conftest import hh_axon_case

#: positions are compared to a rounding of the unit conversions [cm]
X_TOL = 1e-9


def small_case(**extra):
    # 1 cm at dx 0.01 cm: 101 nodes; 4 ms at dt 0.005 ms: 800 steps, stored every 0.5 ms: 9 samples
    return hh_axon_case(length=1.0, dx=0.01, duration=4.0, **extra)


def test_counts_and_stimulated_nodes_follow_the_grid():
    report = check_case(small_case(), timed_steps=0)
    assert report.n_nodes == 101 and report.n_steps == 800 and report.n_samples == 9
    # the stimulus zone [0, 0.1] cm holds the nodes x = 0, 0.01, ..., 0.1: nodes 0-10
    label, nodes, onsets = report.stimuli[0]
    assert (nodes.first, nodes.last) == (0, 10) and onsets == [0.0]
    # the default CV window is the middle half, [0.25, 0.75] cm: nodes 25-75
    assert (report.cv_nodes.first, report.cv_nodes.last) == (25, 75)
    assert report.seconds is None and report.timed_steps == 0


def test_diffusivity_and_forward_euler_limit_closed_form():
    report = check_case(small_case(), timed_steps=0)
    # D = a / (2 R_i C_m) (Hodgkin & Huxley 1952): 0.0238 cm / (2 * 35.4 ohm cm * 1 uF/cm^2), 1 ohm uF = 1 us
    d = 0.0238 / (2 * 35.4 * 1.0) * 1e3
    assert report.diffusivity == pytest.approx(d, rel=1e-12)
    # explicit diffusion on a uniform grid is stable for dt <= dx^2 / (2 D) (von Neumann analysis of the
    # FTCS scheme; e.g. Press et al. 2007, Numerical Recipes, 3rd ed., section 20.2)
    assert report.dt_limit == pytest.approx(0.01 ** 2 / (2 * d), rel=1e-9)
    assert "unconditionally stable" in "\n".join(report.lines())


def test_region_core_and_border_ramp_nodes():
    case = small_case()
    case["region"] = [{"start": 0.4, "end": 0.6, "border": 0.05, "scale": {"g_Na": 0.5}}]
    report = check_case(case, timed_steps=0)
    label, core, ramps = report.regions[0]
    # weight 1 on [0.4, 0.6] cm: nodes 40-60; the linear ramp is strictly between 0 and 1 for
    # 0 < distance < 0.05 cm: nodes 36-39 and 61-64 (nodes 35 and 65 sit at weight 0)
    assert (core.first, core.last) == (40, 60)
    assert [(r.first, r.last) for r in ramps] == [(36, 39), (61, 64)]
    assert abs(core.x_first - 0.4) < X_TOL and abs(ramps[1].x_last - 0.64) < X_TOL


def test_memory_and_disk_from_the_stored_fields():
    from cable.preparation import probe_bytes

    fields = 9 * 101 * 8     # samples x nodes x float64, vm only
    probes = probe_bytes(101, 1, 1)
    in_memory = check_case(small_case(), timed_steps=0)
    assert in_memory.memory_bytes == fields + probes and in_memory.disk_bytes is None
    streamed = check_case(small_case(), output="unused.nc", timed_steps=0)
    assert streamed.memory_bytes == probes and streamed.disk_bytes == fields // 2   # float32 on file


def test_time_estimate_from_a_timed_run():
    report = check_case(small_case(), timed_steps=100)
    # 100 steps in 4 output intervals (the run samples every 100 steps, too few intervals to time)
    assert report.timed_steps == 100
    assert report.seconds is not None and report.seconds > 0 and math.isfinite(report.seconds)


def test_coarse_grid_warning_is_reported():
    # 0.05 cm is coarse for a tissue-form TP06 strand (upstroke extent ~0.04 cm; cable/grid_check.py)
    case = {"membrane": {"model": "ten-tusscher-panfilov-2006"},
            "fiber": {"length": 1.0, "dx": 0.05, "conductivity": "6.17 mS/cm", "surface_to_volume": "0.2 /um",
                      "capacitance": "2 uF/cm^2"},
            "stimulus": [{"amplitude": 100.0, "duration": 2.0, "width": 0.1}],
            "numerics": {"dt": 0.02}, "run": {"duration": 5.0}, "output": {"every": 1.0}}
    report = check_case(case, timed_steps=0)
    assert any("coarse for this upstroke" in w for w in report.warnings)
    assert report.upstroke_extent is not None and report.upstroke_extent / report.dx < 2


@pytest.mark.parametrize("extra, key", [
    ({"numerics": {"dt": 0.005, "diffusion": "forward-euler"}}, "stability limit"),   # limit 1.5e-4 ms
    ({"measure": {"cv_window": [0.5, 0.51]}}, "measure.cv_window"),                   # 2 nodes
    ({"measure": {"threshold": -90.0}}, "measure.threshold"),                         # below rest, -65 mV
])
def test_refuses_what_the_run_refuses(extra, key):
    case = small_case(**extra)
    with pytest.raises(CaseError, match=key):
        check_case(case, timed_steps=0)
    with pytest.raises(CaseError, match=key):
        cable.simulate(case)


def test_single_cell_has_no_fibre_quantities():
    case = {"membrane": {"model": "hodgkin-huxley-1952"},
            "stimulus": [{"amplitude": 20.0, "duration": 0.5}], "run": {"duration": 5.0}}
    report = check_case(case, timed_steps=0)
    assert report.n_nodes == 1 and report.dx is None and report.cv_nodes is None
    assert "single cell" in "\n".join(report.lines())


def test_public():
    assert cable.check_case is check_case
