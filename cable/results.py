"""The result of a run: per-beat measurements from the probes, attributes, the Dataset.

:func:`measurements` follows each beat through the kernel's probes (activation, APD,
upstroke) and adds the registered measurements of :mod:`cable.measure` (CV, wavelength,
block, safety factor, reentry); :func:`provenance` and :func:`assemble` make the
``xarray.Dataset`` of :mod:`cable.io.schema`'s variables.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from cable.io import schema
from cable.measure import Inputs, measure_all
from cable.measure.activation import assign_beats, per_beat
from cable.measure.apd import ApdProbe
from cable.membrane import MembraneModel
from cable.preparation import Setup


def measurements(setup: Setup, act, nact, upstroke, tracker: ApdProbe, t_end=None) -> dict:
    """Per-beat measurements as ``{name: (dims, array)}`` (with the x dimension).

    ``tracker``: the repolarisation probe of the run (its ``rest``, ``peak`` and
    ``repol`` arrays, peaks stored by :meth:`cable.measure.apd.ApdProbe.finish`).

    ``t_end`` [ms]: the time computed (a partial run counts only the beats begun by then).
    """
    x = setup.x if setup.x is not None else np.zeros(1)
    pulses = setup.pulses if t_end is None else setup.pulses[setup.pulses[:, 0] < t_end]
    beats = assign_beats(act, nact, x, pulses, t_end=t_end)
    out = {
        "beat_onset": (("beat",), beats.onset),
        "activation_time": (("beat", "x"), beats.activation),
        "captured": (("beat",), beats.captured.astype(np.int8)),
        "blocked": (("beat",), beats.blocked.astype(np.int8)),
        "block_x": (("beat",), beats.block_x),
        "upstroke_velocity": (("beat", "x"), per_beat(upstroke, beats.index)),
        "resting_potential": (("beat", "x"), per_beat(tracker.rest, beats.index)),
        "peak_potential": (("beat", "x"), per_beat(tracker.peak, beats.index)),
    }
    repol = per_beat(tracker.repol, beats.index)          # (nbeat, n, nlev)
    apd = np.moveaxis(repol, 2, 0) - beats.activation[None, :, :]
    out["apd"] = (("level", "beat", "x"), apd)
    # the rest: every registered measurement that applies (cable/measure/, in order)
    out = measure_all(Inputs(setup, beats, act, nact, tracker, t_end, out))
    out.update(parameter_table(setup))
    return out


def parameter_table(setup: Setup) -> dict:
    """The nodes' membrane parameters as ``{name: (dims, array)}`` when the currents can be recomputed.

    Stored only when the model has currents and every state is stored (what
    :func:`cable.plot.traces.ionic_current` needs); as the distinct rows of ``setup.p``
    and each node's row index, since a strand has few distinct rows (one per region).
    """
    model = setup.model
    if model.currents is None or set(setup.case.output_states) < set(model.state_names):
        return {}
    rows, index = np.unique(setup.p, axis=0, return_inverse=True)
    return {
        "membrane_parameters": (("parameter_set", "parameter"), rows),
        "parameter_name": (("parameter",), np.array(model.parameter_names, dtype=object)),
        "node_parameter_set": (("x",), np.ravel(index).astype(np.int32)),
    }


def grid_closed(setup: Setup) -> bool:
    """Whether the strand is a ring (``[fiber] closed``)."""
    return bool(getattr(setup.grid, "closed", False))


def provenance(setup: Setup, command: str | None) -> dict:
    """Run facts recorded with the result (CF global attributes)."""
    case = setup.case
    num = case.numerics
    attrs = {
        **schema.provenance(f"cable run: {setup.model.name}", case, model=setup.model),
        "command": command or "",
        "dt_ms": num.dt,
        "splitting": num.splitting,
        "diffusion": num.diffusion,
        "gating": num.gating,
        "reaction": num.reaction,
        "merge_half_steps": int(num.merge_half_steps and not (setup.x is not None and case.extra.get("electrode"))),
        "threshold_mV": setup.threshold,
        "notes": "\n".join(setup.notes),
        "drug_block": _drug_text(case),
    }
    if setup.x is not None:
        attrs.update(dx_cm=float(case.fiber.dx), diffusivity_cm2_per_ms=case.fiber.diffusivity,
                     cv_window_cm=list(setup.cv_window))
        if case.fiber.closed:
            attrs["ring_circumference_cm"] = float(case.fiber.length)
    if setup.prepace is not None:
        attrs["prepace"] = setup.prepace["summary"]
        attrs["prepace_last_beat_change"] = setup.prepace["last_beat_change"]
        attrs["prepace_beats"] = int(setup.prepace["beats"])
    return attrs


def _drug_text(case) -> str:
    from cable.drugs import describe

    return describe(case)


def assemble(setup: Setup, fields: dict, meas: dict, attrs: dict, model: MembraneModel) -> xr.Dataset:
    """Build the in-memory result Dataset (single cells lose the x dimension)."""
    t = setup.t[: next(iter(fields.values())).shape[0]]
    data = {}
    for name, arr in fields.items():
        data[name] = (("t", "x"), arr, _field_attrs(name, model))
    for name, (dims, arr) in meas.items():
        data[name] = (dims, arr, schema.attrs(name))
    coords = {
        "t": ("t", t, schema.attrs("t")),
        "beat": ("beat", np.arange(len(meas["beat_onset"][1])), schema.attrs("beat")),
        "level": ("level", np.array(setup.case.apd_levels), schema.attrs("level")),
    }
    x = setup.x if setup.x is not None else np.zeros(1)
    coords["x"] = ("x", x, schema.attrs("x"))
    ds = xr.Dataset(data, coords=coords, attrs=attrs)
    if setup.x is None:
        ds = ds.isel(x=0, drop=True)
    return ds


def _field_attrs(name: str, model: MembraneModel) -> dict:
    if name == "vm":
        return schema.attrs("vm")
    state = model.states[model.state_names.index(name[len(schema.STATE_PREFIX):])]
    return {"units": state.units, "long_name": state.meaning}
