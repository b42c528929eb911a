"""A short human summary of a result (used by ``cable run`` and ``cable info``)."""

import numpy as np

NAME = "info"
HELP = "print a short summary of a result file (model, fibre, beats, CV, block)"
ORDER = 20


def summarise(ds) -> str:
    lines = [f"model: {ds.attrs.get('model', '?')}   status: {ds.attrs.get('status', '?')}"]
    if "x" in ds.dims:
        x = ds["x"].values
        lines.append(f"fibre: {x[-1]:.4g} cm, {x.size} nodes, dx {x[1] - x[0]:.4g} cm; "
                     f"run {float(ds['t'][-1]):.6g} ms")
    else:
        lines.append(f"single cell; run {float(ds['t'][-1]):.6g} ms")
    if ds.attrs.get("partial_reason"):
        lines.append(f"PARTIAL: {ds.attrs['partial_reason']}")
    nb = ds.sizes.get("beat", 0)
    if nb:
        lines.append("beat  onset_ms  captured  blocked  block_x_cm  CV_m/s   APD90_ms")
    for b in range(nb):
        onset = float(ds["beat_onset"][b])
        cap = bool(ds["captured"][b])
        blk = bool(ds["blocked"][b])
        bx = float(ds["block_x"][b])
        cv = float(ds["conduction_velocity"][b]) if "conduction_velocity" in ds else np.nan
        apd = np.nan
        if "apd" in ds and 90.0 in list(ds["level"].values):
            a = ds["apd"].sel(level=90.0).isel(beat=b)
            if "x" in a.dims:
                a = a.isel(x=a.sizes["x"] // 2)
            apd = float(a)
        lines.append(f"{b:4d}  {onset:8.2f}  {'yes' if cap else 'no':>8}  {'yes' if blk else 'no':>7}  "
                     f"{bx:10.4g}  {cv:7.4g}  {apd:8.4g}")
    return "\n".join(lines)


def add_arguments(p):
    p.add_argument("result", help="result file (.nc)")


def run(args):
    from cable.io.netcdf import open_result

    with open_result(args.result) as ds:
        print(summarise(ds))
    return 0
