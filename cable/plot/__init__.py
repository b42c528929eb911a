"""Figures from results; each function takes a Dataset and a matplotlib Axes.

* :func:`space_time` — the space-time map of vm with activation fronts, block and regions;
* :func:`traces` — vm (and stored states) against time at chosen positions;
* :func:`sweep` — a measurement against a swept key, one curve per value of another;
* :func:`strength_duration`, :func:`charge_duration`, :func:`refractory`,
  :func:`restitution`, :func:`cv_restitution`, :func:`convergence` — the protocol
  results (one module per protocol in :mod:`cable.plot.protocol_figures`);
  :func:`protocol_figure` draws the figure of the result's protocol;
* :func:`calibration`, :func:`ring`, :func:`pseudo_ecg` — the runs of ``cable calibrate``,
  a ring's revolutions, the pseudo-ECG of ``[[electrode]]`` (:mod:`cable.plot.studies`).

They draw into the Axes given (or pyplot's current one) and leave the figure to the
caller, so they compose into figures of one's own. The colour map and line looks are
chosen to stay readable in greyscale print (see :mod:`cable.plot._common`).
"""

from cable.plot.protocols import (charge_duration, convergence, cv_restitution, protocol_figure, refractory,
                                  restitution, strength_duration)
from cable.plot.space_time import space_time
from cable.plot.studies import calibration, pseudo_ecg, ring
from cable.plot.sweeps import sweep
from cable.plot.traces import traces

__all__ = ["calibration", "charge_duration", "convergence", "cv_restitution", "protocol_figure", "pseudo_ecg",
           "refractory", "restitution", "ring", "space_time", "strength_duration", "sweep", "traces"]
