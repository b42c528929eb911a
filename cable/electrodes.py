"""The pseudo-ECG of a strand: the ``[[electrode]]`` case section.

The extracellular potential of a thin fibre in a large uniform volume conductor, in
the far-field (line-source) approximation (Plonsey & Barr, Bioelectricity: A
Quantitative Approach; used for 1D transmural strands by Gima & Rudy 2002, Circ Res
90:889)::

    phi_e(t) = (a^2 sigma_i / (4 sigma_e)) * integral of (-dV/dx) d/dx(1/r) dx

with a the fibre radius, sigma_i its axial conductivity, sigma_e the conductivity of
the volume conductor and r the distance from the point x of the axis to the
electrode. An electrode sits at axial position ``x`` (it may lie beyond the strand's
ends) and ``distance`` off the axis (0: on it), so r = sqrt((x' - x)^2 + distance^2).

Discretisation: V is taken piecewise linear between nodes, so on each edge dV/dx is
constant and the integral of d/dx(1/r) over the edge is exact, 1/r_{i+1} - 1/r_i:

    phi_e = -K / dx * sum_i (V_{i+1} - V_i) (1/r_{i+1} - 1/r_i),   K = a^2 sigma_i / (4 sigma_e)

a fixed weight per node, so phi_e is one dot product per stored sample (computed in
the run, from the full profile at each output time, also when the field is streamed).

Per beat: QRS onset (the first activation of the strand in the beat), the T-wave peak
(the largest deviation of phi_e from its value at the beat's onset, after the
depolarisation has ended: :data:`T_WINDOW_DELAY` after the last activation), the end
of the T wave (where phi_e has returned to within :data:`T_END_FRACTION` of the peak's
deviation from that baseline; a threshold method, common practice) and the QT
interval (QRS onset to the end of the T wave).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from cable.case.sections import Section
from cable.case.values import CaseError, Key, read_section

#: the keys of one [[electrode]] entry
ELECTRODE_KEYS = {
    "x": Key("quantity", "length", required=True, meaning="axial position of the electrode [cm]; may lie beyond "
                                                          "the ends (e.g. length + 2 cm)"),
    "distance": Key("quantity", "length", default=0.0, minimum=0.0,
                    meaning="distance of the electrode from the strand's axis [cm] (0: on the axis)"),
    "radius": Key("quantity", "length", minimum=0.0, exclusive_minimum=True,
                  meaning="fibre radius a of the line source [cm]; default: fiber.radius (axon form), "
                          "needed in the tissue form"),
    # a bath of about 50 ohm*cm (from memory: physiological saline is of that order)
    "extracellular_conductivity": Key("quantity", "conductivity", default=20.0, minimum=0.0, exclusive_minimum=True,
                                      meaning="conductivity sigma_e of the volume conductor [mS/cm] "
                                              "(default 20, about 50 ohm*cm)"),
}

#: the T wave is sought from this long after the last activation of the beat [ms]: the
#: upstrokes are over (they last 1-2 ms in ventricular models; common practice)
T_WINDOW_DELAY = 10.0
#: the T wave ends where phi_e is back within this fraction of its peak deviation
T_END_FRACTION = 0.05


@dataclass(frozen=True)
class Electrode:
    """One electrode: position on and off the axis [cm], radius [cm], sigma_e [mS/cm]."""

    x: float
    distance: float
    radius: float
    extracellular_conductivity: float


def validate(raw, case) -> tuple[Electrode, ...]:
    """Check the ``[[electrode]]`` entries against the case's fibre."""
    from cable.fiber import node_positions

    if isinstance(raw, dict):
        raw = [raw]
    if not isinstance(raw, list) or not all(isinstance(r, dict) for r in raw):
        raise CaseError("[[electrode]] must be a list of tables (write each entry as [[electrode]]).")
    fiber = case.fiber
    if raw and fiber is None:
        raise CaseError("[[electrode]] needs a [fiber]: the pseudo-ECG is that of a strand.")
    if raw and fiber.closed:
        raise CaseError("[[electrode]] on a ring (fiber.closed = true) is not supported: the line-source formula "
                        "is that of a straight strand.")
    out = []
    x = node_positions(fiber) if fiber is not None else np.zeros(0)
    for k, table in enumerate(raw):
        e = read_section(f"electrode.{k}", table, ELECTRODE_KEYS)
        if e["radius"] is None:
            if fiber.radius is None:
                raise CaseError(f"electrode.{k}.radius is needed in the tissue form of [fiber] (no fiber.radius): "
                                f"give the radius of the strand, e.g. radius = \"11 um\".")
            e["radius"] = fiber.radius
        r_min = float(np.min(np.hypot(x - e["x"], e["distance"])))
        if r_min < fiber.dx:
            raise CaseError(f"electrode.{k}: at x = {e['x']:g} cm, distance = {e['distance']:g} cm it lies within "
                            f"dx = {fiber.dx:g} cm of the strand (nearest node {r_min:.3g} cm away), where the "
                            f"far-field formula does not hold; move it off the axis or beyond an end.")
        out.append(Electrode(**e))
    return tuple(out)


def weights(x: np.ndarray, electrodes, sigma_i: float) -> np.ndarray:
    """Weights W (n_electrode, n) with phi_e = W @ V [mV] (see the module docstring).

    Parameters
    ----------
    x : ndarray
        Node positions [cm], uniform.
    electrodes : sequence of Electrode
    sigma_i : float
        Axial (intracellular) conductivity [mS/cm].
    """
    n = x.size
    w = np.zeros((len(electrodes), n))
    if n < 2:
        return w
    dx = x[1] - x[0]
    for j, e in enumerate(electrodes):
        k = e.radius ** 2 * sigma_i / (4.0 * e.extracellular_conductivity)
        g = np.diff(1.0 / np.hypot(x - e.x, e.distance))   # per edge: integral of d/dx(1/r)
        # phi = -k/dx sum_e g_e (V_{e+1} - V_e): node i gets +g_i (edge i) and -g_{i-1} (edge i-1)
        w[j, :-1] += k / dx * g
        w[j, 1:] -= k / dx * g
    return w


def of_case(case, x: np.ndarray) -> np.ndarray | None:
    """The weights of a case's electrodes (None without ``[[electrode]]``)."""
    electrodes = case.extra.get("electrode", ())
    if not electrodes:
        return None
    from cable.fiber import axial_conductivity

    return weights(x, electrodes, axial_conductivity(case.fiber))


def beat_measures(t: np.ndarray, phi: np.ndarray, onsets: np.ndarray, activation: np.ndarray) -> dict:
    """QRS onset, QT interval, T-peak time and amplitude per electrode and beat.

    Parameters
    ----------
    t : ndarray
        Sample times [ms].
    phi : ndarray, shape (n_electrode, n_t)
        The pseudo-ECG [mV].
    onsets : ndarray
        Beat onsets [ms].
    activation : ndarray, shape (n_beat, n)
        Activation times per beat and node [ms].
    """
    ne, nb = phi.shape[0], onsets.size
    out = {name: np.full((ne, nb), np.nan) for name in ("qrs_onset", "qt_interval", "t_peak", "t_amplitude")}
    for b in range(nb):
        act = activation[b]
        if not np.isfinite(act).any():
            continue
        first, last = np.nanmin(act), np.nanmax(act)
        stop = onsets[b + 1] if b + 1 < nb else t[-1] + 1e-9
        base_k = int(np.searchsorted(t, onsets[b], side="left"))
        window = (t >= last + T_WINDOW_DELAY) & (t < stop)
        if base_k >= t.size or window.sum() < 3:
            continue
        idx = np.flatnonzero(window)
        for j in range(ne):
            dev = phi[j, idx] - phi[j, base_k]
            kp = int(np.argmax(np.abs(dev)))
            peak = dev[kp]
            out["qrs_onset"][j, b] = first
            out["t_peak"][j, b] = t[idx[kp]]
            out["t_amplitude"][j, b] = peak
            after = np.flatnonzero(np.abs(dev[kp:]) <= T_END_FRACTION * abs(peak))
            if after.size and peak != 0:
                k_end = kp + int(after[0])
                # linear interpolation of the crossing of the 5% level between samples
                d0, d1 = abs(dev[k_end - 1]), abs(dev[k_end])
                level = T_END_FRACTION * abs(peak)
                frac = (d0 - level) / (d0 - d1) if d0 != d1 else 1.0
                t_end = t[idx[k_end - 1]] + frac * (t[idx[k_end]] - t[idx[k_end - 1]])
                out["qt_interval"][j, b] = t_end - first
    return out


def outputs(case, t: np.ndarray, phi: np.ndarray, onsets: np.ndarray, activation: np.ndarray, *,
            t_steps: np.ndarray | None = None, phi_steps: np.ndarray | None = None) -> dict:
    """The pseudo-ECG variables as ``{name: (dims, array)}``.

    ``phi`` is stored at the output times ``t``; the beat measures (QRS onset, T peak,
    QT) are read from ``phi_steps`` at every step (``t_steps``) when given.
    """
    electrodes = case.extra["electrode"]
    out = {
        "pseudo_ecg": (("electrode", "t"), phi),
        "electrode_x": (("electrode",), np.array([e.x for e in electrodes])),
        "electrode_distance": (("electrode",), np.array([e.distance for e in electrodes])),
    }
    if phi_steps is not None:
        t, phi = t_steps, phi_steps
    n = min(t.size, phi.shape[1])
    for name, arr in beat_measures(t[:n], phi[:, :n], onsets, activation).items():
        out[name] = (("electrode", "beat"), arr)
    return out


def summary_lines(ds) -> list:
    """One line per electrode and beat: QRS onset, QT, T peak (empty without electrodes)."""
    if "pseudo_ecg" not in ds:
        return []
    lines = []
    for j in range(ds.sizes["electrode"]):
        head = (f"electrode {j} (x {float(ds.electrode_x[j]):.4g} cm, {float(ds.electrode_distance[j]):.4g} cm off "
                f"the axis):")
        for b in range(ds.sizes.get("beat", 0)):
            amp = float(ds.t_amplitude[j, b])
            lines.append(f"{head} beat {b}: QRS onset {float(ds.qrs_onset[j, b]):.4g} ms, QT "
                         f"{float(ds.qt_interval[j, b]):.4g} ms, T peak {float(ds.t_peak[j, b]):.4g} ms "
                         f"({'upright' if amp > 0 else 'inverted'}, {amp:.3g} mV)")
    return lines


#: the [[electrode]] section, as the loader reads it (see cable.case.sections)
SECTION = Section("electrode", is_list=True, validate=validate, keys=ELECTRODE_KEYS)
