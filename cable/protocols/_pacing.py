"""What the protocols share: the stimulus site of a case, modified cases, and reading a beat.

Every protocol runs :func:`cable.simulate` on copies of the user's case with the
stimuli, duration and measurements changed; nothing here touches the solver.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass

import numpy as np

from cable.case import Case, CaseError, load_case


@dataclass(frozen=True)
class Site:
    """Where and how the case stimulates (its first stimulus table), canonical units."""

    x: float            # left edge of the zone [cm]
    width: float        # [cm]
    amplitude: float    # [uA/cm^2]
    duration: float     # [ms]
    count: int
    cycle_length: float | None  # [ms]

    @property
    def centre(self) -> float:
        return self.x + 0.5 * self.width


def as_case(case) -> Case:
    """A loaded case from a path, TOML text, dict or Case."""
    return case if isinstance(case, Case) else load_case(case)


def stimulus_site(case: Case, who: str) -> Site:
    """The first stimulus of ``case``; a CaseError naming ``who`` when there is none."""
    if not case.stimuli:
        raise CaseError(f"{who}: the case has no stimulus; the protocol takes the stimulus site, amplitude "
                        f"and duration from the first one. Add a [stimulus.S1] table.")
    s = case.stimuli[0]
    return Site(s.x, s.width, s.amplitude, s.duration, s.count, s.cycle_length)


def pulse(site: Site, *, amplitude: float, duration: float, start: float = 0.0, count: int = 1,
          cycle_length: float | None = None, x: float | None = None) -> dict:
    """A raw stimulus table (canonical units) at the site; ``start`` is its onset [ms]."""
    entry = {"x": site.x if x is None else x, "width": site.width, "amplitude": float(amplitude),
             "duration": float(duration), "onset": float(start), "count": int(count)}
    if count > 1:
        entry["cycle_length"] = float(cycle_length)
    return entry


def variant(case: Case, *, stimuli: list[dict], duration: float, single_cell: bool = False,
            overrides: dict | None = None) -> Case:
    """A copy of ``case`` with new stimuli and run duration (and APD90 always measured).

    Parameters
    ----------
    stimuli : list of dict
        Raw stimulus tables, named S1, S2, ... in this order.
    duration : float
        run.duration [ms], rounded up to a whole number of time steps.
    single_cell : bool
        Drop the ``[fiber]`` (and the CV window) to run one space-clamped cell.
    overrides : dict, optional
        Further ``{"section.key": value}`` changes.
    """
    raw = copy.deepcopy(case.raw)
    raw["stimulus"] = {f"S{k + 1}": s for k, s in enumerate(stimuli)}
    if case.stop_when_quiet is None:  # the protocols' default: a trial ends when nothing is left to happen
        raw.setdefault("run", {})["stop_when_quiet"] = True
    dt = case.numerics.dt
    every = case.output_every
    steps = int(np.ceil(duration / every - 1e-9))
    raw.setdefault("run", {})["duration"] = max(steps, 1) * every
    meas = raw.setdefault("measure", {})
    levels = list(case.apd_levels)
    if 90.0 not in levels:
        meas["apd_levels"] = sorted(levels + [90.0])
    if single_cell:
        raw.pop("fiber", None)
        meas.pop("cv_window", None)
    if not meas:
        raw.pop("measure")
    if dt > raw["run"]["duration"]:
        raw["run"]["duration"] = dt
    out = load_case(raw)
    return out.with_overrides(overrides) if overrides else out


def node_index(ds, position: float) -> int:
    """Index of the node nearest ``position`` [cm] (0 for a single cell)."""
    if "x" not in ds.dims:
        return 0
    return int(np.argmin(np.abs(ds["x"].values - position)))


def far_node(ds, site: Site) -> int:
    """Index of the fibre end farther from the stimulus zone."""
    x = ds["x"].values
    return 0 if abs(x[0] - site.centre) > abs(x[-1] - site.centre) else x.size - 1


def propagated(ds, beat: int, site: Site) -> bool:
    """The beat captured and its wave reached the far end of the fibre (no block)."""
    if beat >= ds.sizes.get("beat", 0):
        return False
    if not bool(ds["captured"].values[beat]) or bool(ds["blocked"].values[beat]):
        return False
    act = ds["activation_time"].values[beat]
    return bool(np.isfinite(act[far_node(ds, site)]))


def captured(ds, beat: int) -> bool:
    """The beat's stimulus excited the stimulated tissue (crossed the activation threshold)."""
    return beat < ds.sizes.get("beat", 0) and bool(ds["captured"].values[beat])


def apd90(ds, beat: int, node: int) -> float:
    """APD90 [ms] of ``beat`` at ``node`` (NaN when it did not repolarise in the run)."""
    if beat >= ds.sizes.get("beat", 0):
        return float("nan")
    a = ds["apd"].sel(level=90.0).values
    return float(a[beat, node]) if a.ndim == 2 else float(a[beat])


def activation(ds, beat: int, node: int) -> float:
    """Activation time [ms] of ``beat`` at ``node`` (NaN when not reached)."""
    if beat >= ds.sizes.get("beat", 0):
        return float("nan")
    a = ds["activation_time"].values
    return float(a[beat, node]) if a.ndim == 2 else float(a[beat])


def cv_centre(case: Case) -> float | None:
    """Centre of the CV window [cm] (where simulate measures the wavelength's APD90)."""
    if case.fiber is None:
        return None
    lo, hi = case.cv_window or (0.25 * case.fiber.length, 0.75 * case.fiber.length)
    return 0.5 * (lo + hi)


def positive(who: str, name: str, value) -> float:
    """``value`` as a positive float, or a CaseError naming the option."""
    try:
        out = float(value)
    except (TypeError, ValueError):
        raise CaseError(f"{who}: {name} = {value!r} must be a number.") from None
    if not np.isfinite(out) or out <= 0:
        raise CaseError(f"{who}: {name} = {value!r} must be a positive number.")
    return out
