"""The worker side of a sweep: a chunk's cases are run as the client loaded them."""

import numpy as np
import pytest

import cable
from cable.sweep import store, worker
from conftest import hh_axon_case


def test_a_loaded_case_is_run_as_it_is_not_loaded_again(monkeypatch):
    # issue 14, item 6: each point's case is loaded once, on the client; the worker gets that Case.
    # Its result is the one cable.simulate gives for the case alone, bit for bit (tests/sweep/test_run.py)
    case = cable.load_case(hh_axon_case(length=0.5, dx=0.02, dt=0.01, duration=3.0))
    alone = cable.simulate(case)
    monkeypatch.setattr(worker, "load_case", lambda *a, **k: pytest.fail("the worker loaded the case again"))
    [(ds, meta)] = worker.run_chunk([case], False)
    assert meta["batch_size"] == 1 and store.status_of(ds) == store.STATUS["ok"]
    np.testing.assert_array_equal(ds["conduction_velocity"].values, alone["conduction_velocity"].values)


def test_a_raw_case_is_still_loaded_and_an_invalid_one_fails_alone():
    good = hh_axon_case(length=0.5, dx=0.02, dt=0.01, duration=3.0)
    bad = hh_axon_case(length=0.5, dx=0.02, dt=0.01, duration=3.0, fiber={"dx": 2.0})  # dx longer than the fibre
    (ok, _), (failed, meta) = worker.run_chunk([good, bad], False)
    assert store.status_of(ok) == store.STATUS["ok"]
    assert store.status_of(failed) == store.STATUS["invalid_case"] and meta["batch_size"] == 0
    assert "fiber.dx" in str(failed["failure_reason"].values)
