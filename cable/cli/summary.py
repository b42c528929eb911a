"""``cable info OUT.nc``: a short human summary of a result (also printed by ``cable run``).

Model, status, fibre, run settings, then one line per beat: onset, capture, conduction
velocity, and at the centre of the CV window APD90, resting potential, maximal upstroke
velocity and the wavelength; where it blocked. A sweep result gets its swept keys and point
counts; a protocol result (threshold, erp, restitution, converge, critical) the table its
command printed.
"""

import numpy as np

NAME = "info"
HELP = "print a short summary of a result file (model, fibre, beats, CV, block)"
ORDER = 20


def _num(value, fmt=".4g", missing="-") -> str:
    try:
        value = float(value)
    except (TypeError, ValueError):
        return missing
    return format(value, fmt) if np.isfinite(value) else missing


def _apd90(ds, b):
    if "apd" not in ds or "level" not in ds.coords or 90.0 not in list(ds["level"].values):
        return np.nan
    return _at_centre(ds, ds["apd"].sel(level=90.0), b)


def _at_centre(ds, a, b):
    """Value of ``a`` (beat[, x]) for beat ``b`` at the node nearest the centre of the CV window."""
    if isinstance(a, str):
        if a not in ds:
            return np.nan
        a = ds[a]
    a = a.isel(beat=b)
    if "x" in a.dims:
        window = ds.attrs.get("cv_window_cm")
        centre = float(np.mean(window)) if window is not None and np.size(window) == 2 else float(ds["x"].mean())
        a = a.sel(x=centre, method="nearest")
    return float(a)


def summarise(ds, path=None) -> str:
    """A few lines describing a result: model, fibre, run, and per beat CV, APD90, block.

    Parameters
    ----------
    ds : xarray.Dataset
        A result (in memory or opened from a file).
    path : str, optional
        The file it came from, named on the first line.
    """
    attrs = ds.attrs
    lines = []
    if path is not None:
        source = str(attrs.get("source", ""))
        version = attrs.get("cable_version") or (source[len("cable "):] if source.startswith("cable ") else "")
        made = f" by cable {version}" if version else ""
        lines.append(f"result: {path} (written{made})")
    protocol = _protocol_summary(ds)
    if protocol is not None:
        return "\n".join(lines + [protocol])
    swept = _swept_dims(ds)
    if swept:
        return "\n".join(lines + _sweep_lines(ds, swept))
    model = attrs.get("model", "?")
    cite = attrs.get("model_citation")
    lines.append(f"model: {model}" + (f" ({cite})" if cite else ""))
    status = attrs.get("status", "?")
    lines.append(f"status: {status}" + (f", completed until {_num(attrs.get('completed_until_ms'))} ms"
                                        if status == "partial" else "")
                 + (f", stopped when quiet at {_num(attrs['stopped_when_quiet_ms'])} ms (run.stop_when_quiet)"
                    if "stopped_when_quiet_ms" in attrs else ""))
    if attrs.get("partial_reason"):
        lines.append(f"PARTIAL: {attrs['partial_reason']}")
    t_end = float(ds["t"][-1]) if ds.sizes.get("t", 0) else float("nan")
    if "x" in ds.dims:
        x = ds["x"].values
        dx = attrs.get("dx_cm", x[1] - x[0] if x.size > 1 else np.nan)
        fibre = f"fibre: {_num(x[-1] - x[0])} cm, {x.size} nodes, dx {_num(dx)} cm"
        if attrs.get("ring_circumference_cm") is not None:
            fibre = f"ring: circumference {_num(attrs['ring_circumference_cm'])} cm, {x.size} nodes, dx {_num(dx)} cm"
        if attrs.get("diffusivity_cm2_per_ms") is not None:
            fibre += f", D {_num(attrs['diffusivity_cm2_per_ms'])} cm^2/ms"
        lines.append(fibre)
    else:
        lines.append("single cell (no fibre)")
    every = float(ds["t"][1] - ds["t"][0]) if ds.sizes.get("t", 0) > 1 else np.nan
    run = f"run: {_num(t_end, '.6g')} ms, dt {_num(attrs.get('dt_ms'))} ms, sampled every {_num(every)} ms"
    if attrs.get("wall_time_s") is not None:
        run += f"; took {_num(attrs['wall_time_s'], '.3g')} s"
    lines.append(run)
    if attrs.get("drug_block"):
        lines.extend(str(attrs["drug_block"]).splitlines())
    from cable.electrodes import summary_lines as ecg_lines
    from cable.ring import summary_lines

    lines.extend(summary_lines(ds))
    lines.extend(ecg_lines(ds))
    nb = ds.sizes.get("beat", 0)
    if not nb:
        lines.append("beats: none (no stimulus starts before the run ends)")
        return "\n".join(lines)
    captured = np.asarray(ds["captured"].values).astype(bool)
    blocked = np.asarray(ds["blocked"].values).astype(bool)
    timed_out = np.asarray(ds["timed_out"].values).astype(bool) if "timed_out" in ds else np.zeros(nb, bool)
    slow = np.asarray(ds["slow_response"].values).astype(bool) if "slow_response" in ds else np.zeros(nb, bool)
    lines.append(f"beats: {nb} ({int(captured.sum())} captured, {int(blocked.sum())} blocked"
                 + (f", {int(timed_out.sum())} still travelling when the run ended (timed out)" if timed_out.any()
                    else "") + ")")
    if nb > 1 and "conducted" in ds:
        from cable.measure.block import conduction_pattern

        lines.append(f"conduction pattern (stimuli : beats through the whole fibre): "
                     f"{conduction_pattern(np.asarray(ds['conducted'].values) == 1)}")
    lines.append("beat  onset_ms  captured   CV_m/s  APD90_ms  rest_mV  dVdt_V/s  wavelength_apd_cm  block")
    cv = ds["conduction_velocity"].values if "conduction_velocity" in ds else np.full(nb, np.nan)
    bx = ds["block_x"].values if "block_x" in ds else np.full(nb, np.nan)
    fx = ds["front_x"].values if "front_x" in ds else np.full(nb, np.nan)
    for b in range(nb):
        block = f"at x = {_num(bx[b])} cm" if blocked[b] else ("-" if captured[b] else "(not captured)")
        if timed_out[b]:
            block = (f"timed out: still travelling at x = {_num(fx[b])} cm when the run ended" if np.isfinite(fx[b])
                     else "timed out: the run ended before the stimulus could capture")
        elif slow[b]:
            block = "- (slow response)"
        lines.append(f"{b:4d}  {_num(ds['beat_onset'][b], '8.2f'):>8}  {'yes' if captured[b] else 'no':>8}  "
                     f"{_num(cv[b]):>7}  {_num(_apd90(ds, b)):>8}  {_num(_at_centre(ds, 'resting_potential', b)):>7}  "
                     f"{_num(_at_centre(ds, 'upstroke_velocity', b)):>8}  "
                     f"{_num(_at_centre(ds, 'wavelength_apd', b)):>17}  {block}")
    if "wavelength_apd" in ds:
        lines.append("wavelength_apd: CV x APD90 at the centre of the CV window (CV x ERP: see `cable erp`); "
                     "dVdt: stimulus current excluded")
    if timed_out.any():
        lines.append("timed out: raise run.duration to see whether the wave conducts or blocks")
    return "\n".join(lines)


def _protocol_summary(ds):
    """The summary a protocol result prints (threshold, erp, restitution, converge, critical), or None."""
    attrs = ds.attrs
    kind = attrs.get("protocol")
    if kind == "strength-duration":
        from cable.protocols.threshold import summary
    elif kind == "S1-S2 refractory period":
        from cable.protocols.refractory import summary
    elif kind in ("s1s2", "dynamic") and "max_slope" in ds:
        from cable.protocols.restitution import summary
    elif kind == "grid convergence":
        from cable.protocols.converge import summary
    elif kind == "calibration":
        from cable.protocols.calibrate import summary
    elif kind == "critical-value search" or str(attrs.get("title", "")).startswith("cable critical-value search"):
        from cable.cli.critical import summarise as summary
    else:
        return None
    return summary(ds)


def _swept_dims(ds) -> list:
    """Dimensions of a sweep result (those of ``captured`` other than ``beat``)."""
    if "captured" not in ds:
        return []
    return [d for d in ds["captured"].dims if d != "beat"]


def _sweep_lines(ds, swept) -> list:
    attrs = ds.attrs
    lines = [f"sweep of model {attrs.get('model', '?')}: {int(np.prod([ds.sizes[d] for d in swept]))} points "
             f"({attrs.get('sweep_mode', 'grid')})"]
    for d in swept:
        values = ds[d].values if d in ds.coords else np.arange(ds.sizes[d])
        key = ds[d].attrs.get("case_key", d) if d in ds.coords else d
        units = ds[d].attrs.get("units", "") if d in ds.coords else ""
        shown = ", ".join(str(v) if not isinstance(v, float) else f"{v:g}" for v in values.tolist()[:8])
        more = ", ..." if values.size > 8 else ""
        lines.append(f"  {key}: {shown}{more}" + (f" [{units}]" if units not in ("", "1") else ""))
    if "status" in ds and "flag_meanings" in ds["status"].attrs:
        names = str(ds["status"].attrs["flag_meanings"]).split()
        codes = list(np.asarray(ds["status"].attrs["flag_values"]).ravel())
        counts = {names[codes.index(c)] if c in codes else str(c): int(n)
                  for c, n in zip(*np.unique(ds["status"].values, return_counts=True))}
        lines.append("points: " + ", ".join(f"{n} {name}" for name, n in counts.items()))
    # flags are 1/0, and -1 where a point has no result (failed, not computed): count only 1
    blocked = int(np.sum(np.asarray(ds["blocked"].values) == 1)) if "blocked" in ds else 0
    flags = np.asarray(ds["captured"].values)
    with_result = int(np.sum(flags >= 0))
    lines.append(f"beats: {int(np.sum(flags == 1))} of {with_result} captured, {blocked} blocked"
                 + (f" ({flags.size - with_result} without a result)" if with_result < flags.size else ""))
    if "conduction_velocity" in ds:
        cv = np.asarray(ds["conduction_velocity"].values, dtype=float)
        if np.isfinite(cv).any():
            lines.append(f"CV: {np.nanmin(cv):.4g} to {np.nanmax(cv):.4g} m/s "
                         f"(plot with: cable plot-sweep FILE --y conduction_velocity --x {swept[0]})")
    return lines


def add_arguments(p):
    p.add_argument("result", help="result file (.nc)")


def run(args):
    from cable.io.netcdf import open_result

    with open_result(args.result) as ds:
        print(summarise(ds, path=args.result))
    return 0
