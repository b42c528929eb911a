"""Reentry on a closed fibre: the passes of the circulating wave at the reference node.

The measures themselves are :func:`cable.ring.outputs` (revolution times, periods, CV
around the ring, APD90 and excitable gap at node 0); this module registers them for the
runs on a ring (``[fiber] closed``).
"""

from __future__ import annotations

from cable.measure import Inputs, Measurement


def _reentry(inputs: Inputs) -> dict:
    from cable import ring

    setup = inputs.setup
    t_last = inputs.t_end if inputs.t_end is not None else setup.t[-1]
    return ring.outputs(setup.case.fiber.length, inputs.act, inputs.nact, inputs.tracker.repol,
                        setup.case.apd_levels, t_last)


def _on_a_ring(inputs: Inputs) -> bool:
    return inputs.setup.x is not None and bool(getattr(inputs.setup.grid, "closed", False))


OUTPUTS = ("revolution_time", "revolution_period", "revolution_cv", "ring_apd", "excitable_gap", "reentry_sustained",
           "reentry_end")
MEASUREMENT = Measurement("reentry on a ring", OUTPUTS, _reentry, _on_a_ring, order=50)
