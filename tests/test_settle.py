"""The coupled strand starts at rest: regions settled together before the first beat."""

import numpy as np

import cable

#: a strand at rest drifts by less than this over 100 ms [mV] (common practice: a steady
#: state; the settling stops below 1e-4 mV/ms, 0.01 mV per 100 ms)
DRIFT = 0.1


def _kor_strand(stimulus=True, duration=100.0):
    # LR1 strand with a region of raised K_o (9 mM against 5.4): its cells rest ~12 mV
    # higher (Luo & Rudy 1991: E_K1 follows K_o), so current flows across its edges
    case = {"membrane": {"model": "luo-rudy-1991"},
            "fiber": {"length": 1.0, "dx": 0.01, "radius": "11 um", "axial_resistivity": "300 ohm*cm"},
            "region": [{"start": 0.4, "end": 0.6, "parameters": {"K_o": 9.0}}],
            "numerics": {"dt": 0.01}, "run": {"duration": duration}, "output": {"every": duration}}
    if stimulus:
        case["stimulus"] = [{"amplitude": 100.0, "duration": 1.0, "width": 0.03}]
    return case


def test_heterogeneous_strand_starts_at_its_coupled_rest():
    ds = cable.simulate(_kor_strand(stimulus=False))
    drift = np.abs(ds.vm.isel(t=-1).values - ds.vm.isel(t=0).values)
    assert drift.max() < DRIFT
    assert "settled the coupled strand" in ds.attrs["notes"]
    # the region is still depolarised against the rest of the strand (settling couples, it does not flatten)
    vm0 = ds.vm.isel(t=0)
    assert float(vm0.sel(x=0.5)) - float(vm0.sel(x=0.05)) > 5.0


def test_homogeneous_strand_is_not_settled():
    case = _kor_strand(stimulus=False)
    del case["region"]
    ds = cable.simulate(case)
    assert "settled the coupled strand" not in ds.attrs["notes"]
