"""Traces: membrane potential (and stored states, ionic currents) against time at chosen positions."""

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


#: longest axis label of a stacked panel kept on one line [characters]: a panel of
#: 3 cm holds about 16 characters of 10 pt text along its height
STACKED_LABEL_WIDTH = 16
#: units of the ionic currents by the model's current basis (cable.membrane.base)
CURRENT_UNITS = {"area": "uA/cm^2", "capacitance": "uA/uF"}


def _panel_label(ds, name: str, units, *, stacked: bool) -> str:
    """A panel's y label: "V [mV]", "h", "I_Na [µA/cm²]" (the short name and the typeset unit)."""
    unit = _common.unit_text(units)
    if not stacked:
        return _common.label(ds[name], name)
    short = name[len(schema.STATE_PREFIX):] if name.startswith(schema.STATE_PREFIX) else name
    short = _common.SHORT_NAMES.get(short, short)
    text = short if not unit else f"{short} [{unit}]"
    # a stacked panel is short: a long label goes on two lines rather than into its neighbours'
    return text if len(text) <= STACKED_LABEL_WIDTH else f"{short}\n[{unit}]"


def ionic_current(ds, name: str, node: float | None):
    """One ionic current of the model against time at a node, from the stored states.

    The currents are not stored; they are recomputed with the model's ``currents``
    kernel from ``vm`` and the stored states (all of them must be stored: the case's
    ``output.states``), with the parameters the node ran with: those the result stores
    (``membrane_parameters``, ``node_parameter_set``: :func:`cable.results.parameter_table`),
    or, for a result written before they were stored, as the case (its ``[membrane]`` and
    ``[region.NAME]`` tables, read from the result's ``case`` attribute) sets them. The
    stored samples are float32, so the currents carry that rounding.

    Parameters
    ----------
    ds : xarray.Dataset
        A result of :func:`cable.simulate` or :func:`cable.open_result`.
    name : str
        A current of the model (``cable models NAME`` lists them), e.g. ``"I_Na"``.
    node : float or None
        Position of the node [cm] (None for a single cell).

    Returns
    -------
    (numpy.ndarray, str, str)
        The current at each sample [its unit], the unit, and a long name.

    Raises
    ------
    CaseError
        The result holds no case, the model has no such current, or a state is not stored.
    """
    stored = _stored_parameters(ds)
    if stored is not None:
        model, rows_of = stored
    else:
        model, rows_of = _parameters_from_case(ds, name)
    if model.currents is None or name not in model.current_names:
        have = ", ".join(model.current_names) or "(none)"
        raise CaseError(f"current {name!r} is not a current of '{model.name}'."
                        f"{_common.nearest_name(name, model.current_names)} Its currents: {have}.")
    missing = [s for s in model.state_names if schema.STATE_PREFIX + s not in ds.variables]
    if missing:
        raise CaseError(f"current {name!r} is computed from every state of '{model.name}', but the result does not "
                        f"store {', '.join(missing)}; run the case with output.states = "
                        f"{list(model.state_names)!r}.")
    fibre = "x" in ds["vm"].dims
    pick = (lambda da: da.sel(x=node)) if fibre else (lambda da: da)
    v = np.ascontiguousarray(pick(ds["vm"]).values, dtype=np.float64)
    columns = [pick(ds[schema.STATE_PREFIX + st]).values for st in model.state_names]
    s = np.ascontiguousarray(np.stack(columns, axis=-1) if columns else np.zeros((v.size, 0)), dtype=np.float64)
    row = rows_of(node if fibre else None)
    p = np.ascontiguousarray(np.tile(row, (v.size, 1)))
    out = np.zeros((v.size, len(model.current_names)))
    model.currents(v, s, p, out)
    units = CURRENT_UNITS[model.current_basis]
    return out[:, model.current_names.index(name)], units, f"{name} (inward negative)"


def _stored_parameters(ds):
    """(model, node -> parameter row) from the parameters a result stores, or None.

    None for a result without them (written before they were stored, or not storing every
    state), or whose model no longer has the parameters they name: then the case is read."""
    from cable.membrane import get_model

    if "membrane_parameters" not in ds.variables or "node_parameter_set" not in ds.variables:
        return None
    try:
        model = get_model(str(ds.attrs.get("model", "")))
    except (CaseError, KeyError, OSError, ValueError):  # a model no longer found by its name: the case says
        return None
    if [str(n) for n in np.ravel(ds["parameter_name"].values)] != list(model.parameter_names):
        return None
    rows = np.asarray(ds["membrane_parameters"].values, dtype=np.float64)
    index = ds["node_parameter_set"]

    def rows_of(node):
        return rows[int(index.sel(x=node, method="nearest").values if node is not None else index.values)]

    return model, rows_of


def _parameters_from_case(ds, name: str):
    """(model, node -> parameter row) rebuilt from the case a result stores (its text)."""
    from cable.case import load_case
    from cable.membrane import get_model
    from cable.preparation import node_fields_of

    text = ds.attrs.get("case")
    if not text:
        raise CaseError(f"current {name!r}: the result has no 'case' attribute, so the model and its parameters "
                        "are unknown; draw currents from files written by cable.")
    case = load_case(text=str(text))
    model = get_model(case.membrane.model)
    x, p_all, _ = node_fields_of(case, model)  # the run's parameters, without preparing the run again

    def rows_of(node):
        return p_all[int(np.argmin(np.abs(x - node)))] if node is not None else p_all[0]

    return model, rows_of


def traces(ds, at, ax=None, *, states=(), currents=(), t_window=None, legend: bool = True):
    """Draw vm, and optionally stored states and ionic currents, against time at chosen positions.

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
    currents : sequence of str
        Ionic currents of the model to draw below the states (``"I_Na"``), recomputed
        from the stored states (see :func:`ionic_current`; needs every state stored).
    t_window : (float, float), optional
        Time range [ms].
    legend : bool
        Name the positions (and say that inward currents are negative) in a row above
        the first panel.

    Returns
    -------
    list of matplotlib.axes.Axes
        The panels, vm first.

    Raises
    ------
    CaseError
        A position outside the fibre, a state not stored, an unknown current, or too
        few Axes given.
    """
    states = [states] if isinstance(states, str) else list(states)
    currents = [currents] if isinstance(currents, str) else list(currents)
    if "vm" not in ds.variables:
        raise CaseError("the result has no 'vm' to draw.")
    names = ["vm"] + [state_variable(ds, s) for s in states]
    n_fields = len(names)
    names += list(currents)
    if ax is None:
        import matplotlib.pyplot as plt

        fig = plt.figure(figsize=(6.4, 3.2 + 1.6 * (len(names) - 1)), layout="constrained")
        axes = list(np.atleast_1d(fig.subplots(len(names), 1, sharex=True, squeeze=False)[:, 0]))
    else:
        axes = list(np.atleast_1d(ax))
        if len(axes) < len(names):
            raise CaseError(f"traces of vm, {len(states)} state(s) and {len(currents)} current(s) need "
                            f"{len(names)} Axes; {len(axes)} given.")
    tw = _common.window(ds["t"].values, t_window, "t_window", "ms")
    fibre = "x" in ds["vm"].dims
    points = nodes_at(ds, at) if fibre else [(None, None)]
    t_all = ds["t"].values
    keep = np.ones(t_all.size, dtype=bool) if tw is None else (t_all >= tw[0]) & (t_all <= tw[1])
    # computed before anything is drawn, so that an unknown current fails cleanly
    computed = {(name, node): ionic_current(ds, name, node) for name in currents for _, node in points}
    for j, (name, axis) in enumerate(zip(names, axes)):
        is_current = j >= n_fields
        for k, (_, node) in enumerate(points):
            if is_current:
                values, units, long_name = computed[(name, node)]
                t, y = t_all[keep], values[keep]
            else:
                da = ds[name].sel(x=node) if fibre else ds[name]
                if tw is not None:
                    da = da.sel(t=slice(*tw))
                t, y = da["t"].values, da.values
            style = _common.look(k)
            style.pop("marker")
            axis.plot(t, y, linewidth=1.4, label=f"x = {node:.3g} cm" if fibre else None, **style)
        if not is_current:
            units = ds[name].attrs.get("units")
        axis.set_ylabel(_panel_label(ds, name, units, stacked=len(names) > 1))
    for axis in axes[: len(names) - 1]:
        axis.label_outer()
    axes[0].figure.align_ylabels(axes[: len(names)])
    axes[len(names) - 1].set_xlabel(_common.label(ds["t"], "time"))
    handles = axes[0].get_lines()[: len(points)] if legend and fibre else []
    if currents and legend:
        from matplotlib.lines import Line2D

        handles = list(handles) + [Line2D([], [], linestyle="none", label="currents: inward negative")]
    if handles:
        # in a row above the panels, where it hides no trace
        _common.legend_above(axes[0], list(handles), max_cols=4)
    return axes[: len(names)]
