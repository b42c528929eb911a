"""Traces: membrane potential (and stored states) against time at chosen positions."""

from __future__ import annotations

import numpy as np

from cable.case import CaseError
from cable.io import schema
from cable.plot import _common


def nodes_at(ds, at) -> list[tuple[float, float]]:
    """``(asked, node position)`` [cm] of the nearest node to each position in ``at``.

    Raises
    ------
    CaseError
        A position outside the fibre (beyond half a grid step from its ends).
    """
    x = ds["x"].values
    half = 0.5 * float(x[1] - x[0]) if x.size > 1 else 0.0
    out = []
    for pos in np.atleast_1d(np.asarray(at, dtype=float)):
        if not (x[0] - half - 1e-12 <= pos <= x[-1] + half + 1e-12):
            raise CaseError(f"at = {pos:g} cm lies outside the fibre ({x[0]:g} to {x[-1]:g} cm).")
        out.append((float(pos), float(x[int(np.argmin(np.abs(x - pos)))])))
    return out


def state_variable(ds, state: str) -> str:
    """The file's variable of a stored state (``"h"`` -> ``"state_h"``).

    Raises
    ------
    CaseError
        The state was not stored (the case's ``output.states``).
    """
    name = state if state.startswith(schema.STATE_PREFIX) else schema.STATE_PREFIX + state
    if name in ds.variables:
        return name
    stored = [str(v)[len(schema.STATE_PREFIX):] for v in ds.data_vars if str(v).startswith(schema.STATE_PREFIX)]
    raise CaseError(f"state {state!r} is not in the result.{_common.nearest_name(state, stored)} Stored states: "
                    f"{', '.join(stored) or '(none)'}; store more with output.states = [...] in the case.")


def traces(ds, at, ax=None, *, states=(), t_window=None, legend: bool = True):
    """Draw vm, and optionally stored states, against time at chosen positions.

    Parameters
    ----------
    ds : xarray.Dataset
        A result with a fibre (``x``) or a single cell (then ``at`` is ignored).
    at : sequence of float
        Positions [cm]; each trace is the nearest node's, labelled with its position.
    ax : matplotlib.axes.Axes or sequence of Axes, optional
        One Axes per panel: vm first, then one per state. Omitted: a new pyplot
        figure with the panels stacked, sharing the time axis.
    states : sequence of str
        Stored states to draw below vm (``"h"`` or ``"state_h"``).
    t_window : (float, float), optional
        Time range [ms].
    legend : bool
        Name the positions in a legend on the first panel.

    Returns
    -------
    list of matplotlib.axes.Axes
        The panels, vm first.

    Raises
    ------
    CaseError
        A position outside the fibre, a state not stored, or too few Axes given.
    """
    states = [states] if isinstance(states, str) else list(states)
    names = ["vm"] + [state_variable(ds, s) for s in states]
    if "vm" not in ds.variables:
        raise CaseError("the result has no 'vm' to draw.")
    if ax is None:
        import matplotlib.pyplot as plt

        fig = plt.figure(figsize=(6.4, 3.2 + 1.6 * len(states)), layout="constrained")
        axes = list(np.atleast_1d(fig.subplots(len(names), 1, sharex=True, squeeze=False)[:, 0]))
    else:
        axes = list(np.atleast_1d(ax))
        if len(axes) < len(names):
            raise CaseError(f"traces of vm and {len(states)} state(s) need {len(names)} Axes; {len(axes)} given.")
    tw = _common.window(ds["t"].values, t_window, "t_window", "ms")
    fibre = "x" in ds["vm"].dims
    points = nodes_at(ds, at) if fibre else [(None, None)]
    for name, axis in zip(names, axes):
        for k, (_, node) in enumerate(points):
            da = ds[name].sel(x=node) if fibre else ds[name]
            if tw is not None:
                da = da.sel(t=slice(*tw))
            style = _common.look(k)
            style.pop("marker")
            axis.plot(da["t"].values, da.values, linewidth=1.4, label=f"x = {node:.3g} cm" if fibre else None,
                      **style)
        if len(names) == 1:
            axis.set_ylabel(_common.label(ds[name], name))
        else:   # stacked panels: a short axis label, the long name inside the panel
            short = name[len(schema.STATE_PREFIX):] if name != "vm" else name
            units = ds[name].attrs.get("units")
            axis.set_ylabel(short if units in (None, "", "1") else f"{short} [{units}]")
            axis.text(0.01, 0.96, ds[name].attrs.get("long_name", short), transform=axis.transAxes,
                      va="top", ha="left", fontsize="small",
                      bbox={"boxstyle": "round,pad=0.15", "facecolor": "white", "edgecolor": "none", "alpha": 0.8})
    for axis in axes[: len(names) - 1]:
        axis.label_outer()
    axes[0].figure.align_ylabels(axes[: len(names)])
    axes[len(names) - 1].set_xlabel(_common.label(ds["t"], "time"))
    if legend and fibre:
        axes[0].legend(fontsize="small", frameon=False)
    return axes[: len(names)]
