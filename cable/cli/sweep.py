"""``cable sweep CASE -o OUT.nc``: run every point of a case's ``[sweep]`` on Dask."""

import argparse
import importlib
import logging

import numpy as np

from cable.cli import add_set_option, say

NAME = "sweep"
HELP = "run a parameter sweep (the case's [sweep] section) on a local Dask cluster or a scheduler"
ORDER = 5

#: points listed one per line in the summary; more are counted only
LIST_MAX = 40


def add_arguments(p):
    p.add_argument("case", help="case file (TOML) with a [sweep] section")
    p.add_argument("-o", "--output", help="result file (.nc); points are stored in OUT.nc.points/ as they finish, "
                                          "and running again with the same output computes only what is missing "
                                          "(default: none, the result is summarised only)")
    p.add_argument("--workers", type=int, metavar="N",
                   help="worker processes of the local cluster (default: one per core); with --scheduler, "
                        "wait for N workers")
    p.add_argument("--scheduler", metavar="ADDRESS", help="address of a running Dask scheduler, e.g. tcp://host:8786 "
                                                           "(default: start a local cluster)")
    p.add_argument("--over", dest="vary", action="append", default=[], metavar="KEY=VALUES",
                   help="sweep over the values of a case key: a list, e.g. --over membrane.scale.g_Na=[1,0.5,0.25], "
                        "or a range, e.g. --over 'stimulus.S1.amplitude={start=\"100 uA/cm^2\", stop=\"500 uA/cm^2\", "
                        "num=3}' (repeatable; adds to or replaces the case's [sweep]; default: the case's [sweep])")
    # --vary KEY=VALUES, the earlier spelling (critical and calibrate's --vary takes one KEY)
    p.add_argument("--vary", dest="vary_earlier", action="append", default=[], help=argparse.SUPPRESS)
    p.add_argument("--batch", type=int, metavar="N",
                   help="most points per task (default 16): points that share a time loop run as the strands of "
                        "one kernel call, with the same results bit for bit; 1 runs each point alone")
    p.add_argument("--overwrite", action="store_true",
                   help="discard an existing result and points of a different sweep (the finished points of this "
                        "same sweep are always kept and reused)")
    add_set_option(p)
    p.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors (no progress bar)")


def run(args):
    from cable import load_case
    from cable.case import parse_assignment
    from cable.sweep.run import sweep

    _check_workers(args)
    # a lost scheduler makes the Dask client log each reconnection attempt with a traceback;
    # what failed is said once, by the ClusterError (exit 5)
    importlib.import_module("distributed")  # configures its loggers, each with its own level

    for name in [n for n in logging.root.manager.loggerDict if n == "distributed" or n.startswith("distributed.")]:
        logging.getLogger(name).setLevel(logging.CRITICAL)
    from pathlib import Path

    case = load_case(Path(args.case), args.overrides)
    swept = [(text, "--over") for text in args.vary] + [(text, "--vary") for text in args.vary_earlier]
    if swept:
        raw = case.raw
        table = dict(raw.get("sweep", {}))
        for text, option in swept:
            key, value = parse_assignment(text, option=option)  # the message names the option given
            _drop_nested(table, key)
            table[key] = value
        raw = dict(raw, sweep=table)
        case = load_case(raw)
    ds = sweep(case, output=args.output, workers=args.workers, scheduler=args.scheduler,
               progress=not args.quiet, overwrite=args.overwrite, batch=args.batch, info=lambda m: say(args, m),
               case_path=args.case)
    if not args.quiet:
        print(summarise(ds))
    return 0


def _check_workers(args) -> None:
    """--workers: at least 1; on the local cluster at most one per usable core."""
    from cable.case import CaseError

    if args.workers is None:
        return
    if args.workers < 1:
        raise CaseError(f"--workers {args.workers}: must be a whole number of at least 1.")
    from cable.machine import usable_cores

    cores = usable_cores()
    if args.scheduler is None and args.workers > cores:
        raise CaseError(f"--workers {args.workers}: the local cluster runs one process per core and this machine "
                        f"has {cores}; give at most {cores}, or start a Dask scheduler with workers elsewhere and "
                        f"pass --scheduler ADDRESS.")


def _drop_nested(table: dict, key: str) -> None:
    """Remove ``key`` spelt as nested tables (``{"membrane": {"scale": {"g_Na": ...}}}``)."""
    parts = key.split(".")
    node = table
    for part in parts[:-1]:
        node = node.get(part) if isinstance(node, dict) else None
        if not isinstance(node, dict):
            return
    if isinstance(node, dict):
        node.pop(parts[-1], None)


def counts_line(status) -> str:
    """``N points: a ok, b blocked, c no_capture; d failed (...)``: outcomes apart from failures."""
    from cable.sweep.store import FAILURES, OUTCOMES, STATUS

    status = np.asarray(status).ravel()
    count = {name: int(np.sum(status == code)) for name, code in STATUS.items()}
    outcomes = [f"{count[name]} {name}" for name in OUTCOMES if count[name] or name == "ok"]
    failed = sum(count[name] for name in FAILURES)
    text = f"{status.size} points: " + ", ".join(outcomes)
    text += (f"; {failed} failed (" + ", ".join(f"{count[n]} {n}" for n in FAILURES if count[n]) + ")") if failed \
        else "; none failed"
    if count["not_computed"]:
        text += f"; {count['not_computed']} not computed"
    return text


def column_label(ds, coord: str) -> str:
    """A swept coordinate's column heading with its unit: "g_Na scale", "temperature [degC]"."""
    attrs = ds[coord].attrs
    units = str(attrs.get("units", ""))
    if ".scale." in str(attrs.get("case_key", "")):
        return f"{coord} scale"
    return coord if units in ("", "1") else f"{coord} [{units}]"


def summarise(ds) -> str:
    """Counts of the sweep's outcomes and, for small sweeps, one line per point."""
    from cable.sweep.store import STATUS

    names = {v: k for k, v in STATUS.items()}
    status = ds["status"].values.ravel()
    n = status.size
    lines = [counts_line(status)]
    if n > LIST_MAX:
        return "\n".join(lines)
    dims = list(ds["status"].dims)
    coords = [c for c in ds.coords if "case_key" in ds[c].attrs]
    labels = [column_label(ds, c) for c in coords]
    widths = [max(12, len(label)) for label in labels]
    lines.append("  ".join(f"{label:>{w}}" for label, w in zip(labels, widths)) + "  " + f"{'CV [m/s]':>9}  outcome")
    for i in range(n):
        sel = {d: int(j) for d, j in zip(dims, np.unravel_index(i, ds["status"].shape))}
        point = ds.isel(sel)
        vals = "  ".join(f"{_fmt(point[c].values):>{w}}" for c, w in zip(coords, widths))
        code = int(point["status"])
        cv = float(point["conduction_velocity"].isel(beat=0)) if "conduction_velocity" in ds and "beat" in ds.dims \
            else np.nan
        shown = f"{cv:9.3f}" if code == STATUS["ok"] and np.isfinite(cv) else f"{'-':>9}"
        text = names[code] + ("" if code == STATUS["ok"] else f": {point['failure_reason'].values}")
        lines.append(f"{vals}  {shown}  {text}")
    return "\n".join(lines)


def _fmt(value) -> str:
    value = value.item() if hasattr(value, "item") else value
    return f"{value:.6g}" if isinstance(value, float) else str(value)
