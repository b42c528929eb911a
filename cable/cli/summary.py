"""``cable info OUT.nc``: a short human summary of a result (also printed by ``cable run``).

Model, status, fibre (dx in um), what the case changed from the model's defaults (the
``[membrane]`` scales, parameters and temperature, each region and stimulus, echoed as
the case gives them), run settings, then one line per beat: onset, capture, conduction
velocity, and at the centre of the CV window APD90, resting potential, maximal upstroke
velocity and the wavelength, where it blocked; then where each number was measured (the
threshold, the CV window's positions and nodes, the node of the other columns). Columns
have fixed decimals; a blocked beat shows "-" for CV and wavelength; a single cell has
no CV, wavelength or block columns. A sweep result gets its swept keys, its points'
outcomes apart from failures and, when small, one line per point; a protocol result
the text its command printed (its protocol's ``summary``, :mod:`cable.protocols`).
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
    raw = _case_raw(ds)
    if "x" in ds.dims:
        x = ds["x"].values
        dx = attrs.get("dx_cm", x[1] - x[0] if x.size > 1 else np.nan)
        fibre = f"fibre: {_num(x[-1] - x[0])} cm, {x.size} nodes, dx {_num(10_000 * float(dx))} um"
        if attrs.get("ring_circumference_cm") is not None:
            fibre = (f"ring: circumference {_num(attrs['ring_circumference_cm'])} cm, {x.size} nodes, "
                     f"dx {_num(10_000 * float(dx))} um")
        if attrs.get("diffusivity_cm2_per_ms") is not None:
            fibre += f", D {_num(attrs['diffusivity_cm2_per_ms'])} cm^2/ms"
        lines.append(fibre)
    else:
        lines.append("single cell (no fibre)")
    lines.extend(_changes(raw))
    every = float(ds["t"][1] - ds["t"][0]) if ds.sizes.get("t", 0) > 1 else np.nan
    run = f"run: {_num(t_end, '.6g')} ms, dt {_num(attrs.get('dt_ms'))} ms, sampled every {_num(every)} ms"
    if attrs.get("wall_time_s") is not None:
        run += f"; took {_num(attrs['wall_time_s'], '.3g')} s"
    lines.append(run)
    if "steps_taken" in ds:   # adaptive steps (numerics.dt_max)
        counts = [f"{_num(float(h))} ms x {int(n)}" for h, n in zip(ds["step_dt"].values, ds["steps_taken"].values)]
        lines.append(f"adaptive steps up to {_num(attrs.get('dt_max_ms'))} ms: {int(ds['steps_taken'].sum())} "
                     f"steps ({', '.join(counts)})")
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
    fibre = "x" in ds.dims
    counts = f"{int(captured.sum())} captured" + (f", {int(blocked.sum())} blocked" if fibre else "")
    lines.append(f"beats: {nb} ({counts}"
                 + (f", {int(timed_out.sum())} still travelling when the run ended (timed out)" if timed_out.any()
                    else "") + ")")
    if nb > 1 and "conducted" in ds:
        from cable.measure.block import conduction_pattern

        lines.append(f"conduction pattern (stimuli : beats through the whole fibre): "
                     f"{conduction_pattern(np.asarray(ds['conducted'].values) == 1)}")
    lines.extend(_beat_table(ds, captured, blocked, timed_out) if fibre else _cell_table(ds, captured, timed_out))
    lines.extend(_where_measured(ds, raw))
    if timed_out.any():
        lines.append("timed out: raise run.duration to see whether the wave conducts or blocks")
    return "\n".join(lines)


#: decimals of each column of the beat table (fixed per column, so that the rows align)
DECIMALS = {"onset": 2, "cv": 3, "apd": 2, "rest": 2, "dvdt": 1, "wavelength": 3}


def _fixed(value, column: str, width: int) -> str:
    return f"{_num(value, f'.{DECIMALS[column]}f'):>{width}}"


def _beat_table(ds, captured, blocked, timed_out) -> list:
    nb = captured.size
    slow = np.asarray(ds["slow_response"].values).astype(bool) if "slow_response" in ds else np.zeros(nb, bool)
    cv = ds["conduction_velocity"].values if "conduction_velocity" in ds else np.full(nb, np.nan)
    bx = ds["block_x"].values if "block_x" in ds else np.full(nb, np.nan)
    fx = ds["front_x"].values if "front_x" in ds else np.full(nb, np.nan)
    lines = ["beat  onset_ms  captured   CV_m/s  APD90_ms  rest_mV  dVdt_V/s  wavelength_apd_cm  block"]
    for b in range(nb):
        block = f"at x = {_num(bx[b])} cm" if blocked[b] else ("-" if captured[b] else "(not captured)")
        if timed_out[b]:
            block = (f"timed out: still travelling at x = {_num(fx[b])} cm when the run ended" if np.isfinite(fx[b])
                     else "timed out: the run ended before the stimulus could capture")
        elif slow[b]:
            block = "- (slow response)"
        # a beat that blocked has no CV or wavelength of the fibre (its value upstream is in the file)
        speed = np.nan if blocked[b] else cv[b]
        wavelength = np.nan if blocked[b] else _at_centre(ds, "wavelength_apd", b)
        lines.append(f"{b:4d}  {_fixed(ds['beat_onset'][b], 'onset', 8)}  {'yes' if captured[b] else 'no':>8}  "
                     f"{_fixed(speed, 'cv', 7)}  {_fixed(_apd90(ds, b), 'apd', 8)}  "
                     f"{_fixed(_at_centre(ds, 'resting_potential', b), 'rest', 7)}  "
                     f"{_fixed(_at_centre(ds, 'upstroke_velocity', b), 'dvdt', 8)}  "
                     f"{_fixed(wavelength, 'wavelength', 17)}  {block}")
    return lines


def _cell_table(ds, captured, timed_out) -> list:
    lines = ["beat  onset_ms  captured  APD90_ms  rest_mV  dVdt_V/s"]
    for b in range(captured.size):
        note = "  (timed out: the run ended first)" if timed_out[b] else ""
        lines.append(f"{b:4d}  {_fixed(ds['beat_onset'][b], 'onset', 8)}  {'yes' if captured[b] else 'no':>8}  "
                     f"{_fixed(_apd90(ds, b), 'apd', 8)}  {_fixed(_at_centre(ds, 'resting_potential', b), 'rest', 7)}  "
                     f"{_fixed(_at_centre(ds, 'upstroke_velocity', b), 'dvdt', 8)}{note}")
    return lines


def _where_measured(ds, raw) -> list:
    """Where each number of the table comes from: the CV window, the node, the threshold."""
    attrs = ds.attrs
    lines = []
    threshold = attrs.get("threshold_mV")
    if threshold is not None:
        given = isinstance(raw.get("measure"), dict) and "threshold" in raw["measure"]
        lines.append(f"activation: upward crossing of {_num(threshold)} mV "
                     f"({'measure.threshold' if given else 'the model default'}); APD90 from it to 90% "
                     f"repolarisation; dVdt: stimulus current excluded")
    if "x" not in ds.dims:
        return lines
    x = ds["x"].values
    window = attrs.get("cv_window_cm")
    if window is not None and np.size(window) == 2:
        lo, hi = float(window[0]), float(window[1])
        inside = np.flatnonzero((x >= lo - 1e-9) & (x <= hi + 1e-9))
        if inside.size:
            lines.append(f"CV: straight-line fit of activation time against position over x = {_num(lo)}-"
                         f"{_num(hi)} cm (nodes {inside[0]}-{inside[-1]}, the CV window); '-' for a beat that "
                         f"blocked (its CV upstream of the block is in the file) or did not cross the window")
    centre = float(np.mean(window)) if window is not None and np.size(window) == 2 else float(np.mean(x))
    node = int(np.argmin(np.abs(x - centre)))
    lines.append(f"APD90, rest, dVdt and wavelength_apd at x = {_num(x[node])} cm (node {node}, the centre of the "
                 f"CV window); wavelength_apd = CV x APD90 there (CV x ERP: see `cable erp`)")
    return lines


def _case_raw(ds) -> dict:
    """The case recorded with the result, as given (empty when absent or unreadable)."""
    import tomllib

    try:
        raw = tomllib.loads(str(ds.attrs.get("case", "")))
    except (tomllib.TOMLDecodeError, TypeError):
        return {}
    return raw if isinstance(raw, dict) else {}


def _items(section):
    """(label, table) of a section given as an array of tables or as named tables."""
    if isinstance(section, list):
        return [(str(k), t) for k, t in enumerate(section) if isinstance(t, dict)]
    if isinstance(section, dict):
        if section and all(isinstance(t, dict) for t in section.values()):
            return [(str(k), t) for k, t in section.items()]
        return [("0", section)]
    return []


def _value(v) -> str:
    if isinstance(v, dict):
        return "{" + ", ".join(f"{k} = {_value(x)}" for k, x in v.items()) + "}"
    if isinstance(v, list):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    if isinstance(v, float):
        return f"{v:g}"
    return str(v)


def _changes(raw) -> list:
    """What the case changed from the model's defaults, echoed as given: membrane scales,
    parameters and temperature, regions, and the stimuli."""
    lines = []
    mem = raw.get("membrane", {}) if isinstance(raw.get("membrane"), dict) else {}
    changed = [f"{k} x {_value(v)}" for k, v in (mem.get("scale") or {}).items()]
    changed += [f"{k} = {_value(v)}" for k, v in (mem.get("parameters") or {}).items()]
    if "temperature" in mem:
        changed.append(f"temperature = {_value(mem['temperature'])}")
    lines.append("membrane (whole fibre or cell) changed from the model's defaults: "
                 + (", ".join(changed) if changed else "nothing"))
    for label, table in _items(raw.get("region")):
        lines.append(f"region {label}: " + ", ".join(f"{k} = {_value(v)}" for k, v in table.items()))
    for label, table in _items(raw.get("stimulus")):
        lines.append(f"stimulus {label}: " + ", ".join(f"{k} = {_value(v)}" for k, v in table.items()))
    return lines


def _protocol_summary(ds):
    """The summary a protocol result prints (its protocol's ``summary``), or None for a run or a sweep.

    The protocol is the one the result names (``cable_protocol``); an older result is
    recognised by the rule of its time and gets a ``deprecated:`` note.
    """
    from cable.protocols import legacy_note, protocol_of

    protocol = protocol_of(ds)
    if protocol is None:
        return None
    note = legacy_note(ds)
    return protocol.summary(ds) + (f"\n{note}" if note else "")


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
    if "status" in ds:
        from cable.cli.sweep import counts_line

        lines.append(counts_line(ds["status"].values))
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
    if "status" in ds and "captured" in ds:
        from cable.cli.sweep import summarise as point_table

        lines.extend(point_table(ds).splitlines()[1:])  # one line per point of a small sweep, blocked ones named
    return lines


def add_arguments(p):
    p.add_argument("result", help="result file (.nc)")


def run(args):
    from cable.io.netcdf import open_result

    with open_result(args.result) as ds:
        print(summarise(ds, path=args.result))
    return 0
