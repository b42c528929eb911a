"""Searches by rounds (cable/protocols/_rounds.py): several values per round, run together,
against the plain bisection they replace.

Both searches end with a bracket no wider than the tolerance around the same transition,
so their results differ by at most the tolerance (definition of a bracketing search); the
tests ask for exactly that, not for equal values.
"""

import math

import numpy as np
import pytest

import cable
from cable.case import CaseError
from cable.protocols import _rounds
from cable.protocols.critical import find_critical


def test_inside_divides_the_bracket_evenly_and_no_finer_than_needed():
    assert _rounds.inside(0.0, 1.0, 4, 0.01) == pytest.approx([0.2, 0.4, 0.6, 0.8])
    # from the passing end toward the failing end, whichever is larger
    assert _rounds.inside(1.0, 0.0, 3, 0.01) == pytest.approx([0.75, 0.5, 0.25])
    # a bracket 2.5 tolerances wide needs 2 values (3 parts of 0.83 tolerance), not 4
    assert _rounds.inside(0.0, 0.025, 4, 0.01) == pytest.approx([0.025 / 3, 0.05 / 3])
    # geometric with log: the parts have equal ratios
    vals = _rounds.inside(1e-3, 1e-1, 3, 0.01, log=True)
    assert np.diff(np.log([1e-3, *vals, 1e-1])) == pytest.approx([math.log(10.0) / 2] * 4)


def test_narrow_keeps_the_first_failing_value_from_the_passing_end():
    assert _rounds.narrow(0.0, 1.0, [0.2, 0.4, 0.6, 0.8], [True, True, False, False]) == (0.4, 0.6)
    assert _rounds.narrow(0.0, 1.0, [0.2, 0.4], [False, True]) == (0.0, 0.2)
    assert _rounds.narrow(0.0, 1.0, [0.2, 0.4], [True, True]) == (0.4, 1.0)


def test_counts_are_checked():
    for bad in (0, -1, 1.5, True, "2", 65):
        with pytest.raises(CaseError, match="points"):
            _rounds.check_count("find_critical", "points", bad)


def _hh(duration=12.0):
    from tests.protocols.protocol_cases import hh_axon

    return hh_axon(length=2.0, dx=0.02, duration=duration)


@pytest.mark.parametrize("log", [False, True], ids=["linear", "log"])
def test_critical_by_rounds_agrees_with_bisection_within_the_tolerance(log):
    # HH axon, critical fraction of g_Na; bisection (points=1) is the search as it was
    key, lo, hi, tol = "membrane.scale.g_Na", 0.05, 1.0, (0.1 if log else 0.02)
    plain = find_critical(_hh(), key, lo, hi, tolerance=tol, log=log, points=1, workers=1)
    rounds = find_critical(_hh(), key, lo, hi, tolerance=tol, log=log, points=4, workers=2)
    width = (lambda a, b: max(a, b) / min(a, b) - 1.0) if log else (lambda a, b: abs(a - b))
    for ds in (plain, rounds):
        assert width(ds.attrs["passing_value"], ds.attrs["failing_value"]) <= tol
    # both brackets hold the transition and are at most tol wide: their ends lie within tol
    assert width(plain.attrs["critical_value"], rounds.attrs["critical_value"]) <= tol
    assert rounds.attrs["rounds"] < plain.attrs["rounds"]
    assert plain.attrs["rounds"] == plain.attrs["runs"] - 1  # the two ends share the first round
    # every run of a round is the run made alone (the batch is exact): same outcome at the same value
    for value, conducted in zip(rounds.value.values, rounds.conducted.values):
        alone = cable.simulate(cable.load_case(_hh()).with_overrides({key: float(value), "run.stop_when_quiet": True}))
        assert bool(alone.conducted.all()) == bool(conducted)
        break  # one is enough to tie the two paths together (cost)


def test_threshold_by_rounds_agrees_with_bisection_within_the_tolerance():
    from tests.protocols.protocol_cases import hh_axon

    tol = 0.01
    kw = dict(tolerance=tol, mode="cell", observe=10.0)
    plain = cable.strength_duration(hh_axon(), [0.1, 1.0], points=1, workers=1, **kw)
    rounds = cable.strength_duration(hh_axon(), [0.1, 1.0], points=4, workers=2, **kw)
    a, b = plain.threshold.values, rounds.threshold.values
    # each is an amplitude that excites within tol (relative) above the true threshold
    assert np.all(np.abs(a - b) <= tol * np.maximum(a, b)), (a, b)
