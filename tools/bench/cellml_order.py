"""Why cable's CV differs from the CellML driver's: the order of the reaction step, as dt -> 0.

The driver ``../shared/bench/cellml_strand.c`` advances every state of the model by forward
Euler with every derivative, dV/dt included, taken at the start of the step. cable's
generated kernel (``current_states = "gates"``, ``cable.membrane.equations.codegen._body``)
advances the states whose derivative is linear in themselves first and takes I_ion with
their new values (the other states as they were). This compiles a copy of the driver (in a
temporary folder; the shared file is only read) with three switches:

* the step time and number of steps from the command line;
* ``STIMSTEPS``: the model's stimulus seen for that many steps only (the file's
  ``time <= duration`` at t = k dt keeps it on for one step more than cable's pulse);
* ``CABLEORDER``: I_ion (dV/dt) taken after the states cable advances first (their
  indices come from cable's own analysis of the file).

and prints, for each dt, the CV from the -20 mV crossings at nodes int(0.3 (n-1)) and
int(0.7 (n-1)) of the driver in both orders and of ``cable.simulate`` (the case of
``tools/bench/cellml.py``, exact forward Euler and tabulated Rush-Larsen), with the
first-order Richardson extrapolation 2 CV(dt/2) - CV(dt) of the last two.

Run (about a minute on a quiet core)::

    python tools/bench/cellml_order.py
    python tools/bench/cellml_order.py --dt 0.005 0.0025 --duration 30
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
SHARED = HERE.parents[1].parent / "shared"
sys.path.insert(0, str(HERE))
from cellml import DX, NODES, case  # noqa: E402  (the benchmark's case, the same strand)

#: text replacements turning the driver into the switchable copy: (old, new)
PATCHES = (
    ("double dx=0.01, dt=0.005,", "double dx=0.01, dt=argc>3?atof(argv[3]):0.005,"),
    ("double t0=now();",
     'int ss=getenv("STIMSTEPS")?atoi(getenv("STIMSTEPS")):-1, cab=getenv("CABLEORDER")!=NULL;\n'
     "  static const int first[] = {FIRST}; double tmp[STATE_COUNT], r2[STATE_COUNT];\n"
     "  double t0=now();"),
    ("      computeRates(i<nst ? t : 1e12, yi, rates, c, cc, alg);\n"
     "      for(int j=0;j<S;j++) yi[j]+=dt*rates[j];",
     "      double tt=(i<nst && (ss<0 || k<ss)) ? t : 1e12;\n"
     "      computeRates(tt, yi, rates, c, cc, alg);\n"
     "      if(cab){ memcpy(tmp, yi, S*8);\n"
     "        for(size_t q=0;q<sizeof first/sizeof first[0];q++) tmp[first[q]]+=dt*rates[first[q]];\n"
     "        computeRates(tt, tmp, r2, c, cc, alg); rates[0]=r2[0]; }\n"
     "      for(int j=0;j<S;j++) yi[j]+=dt*rates[j];"),
)


def driver_source(first: list[int]) -> str:
    """The driver's text with the switches of the module docstring.

    Parameters
    ----------
    first : list of int
        Indices (in libcellml's state order) of the states cable advances before I_ion.

    Returns
    -------
    str
        C source to compile with libcellml's ``model.c``.
    """
    text = (SHARED / "bench" / "cellml_strand.c").read_text()
    for old, new in PATCHES:
        if old not in text:
            raise RuntimeError(f"cellml_strand.c changed: {old!r} not found; update PATCHES in {__file__}.")
        text = text.replace(old, new)
    return text.replace("{FIRST}", "{" + ", ".join(map(str, first)) + "}")


def generate(model_path: str, folder: Path) -> list[str]:
    """Write libcellml's C code for the model into ``folder`` (as the yardstick does).

    Parameters
    ----------
    model_path : str
        The CellML file.
    folder : Path
        Where ``model.c`` and ``model.h`` go.

    Returns
    -------
    list of str
        The state names in libcellml's order.
    """
    import libcellml as L

    text = Path(model_path).read_text()
    text = re.sub(r"(<cn\b[^>]*>)\s*([-+]?[0-9.]+[eE][-+]?[0-9]+)\s*(?=</cn>)",
                  lambda m: m.group(1) + format(float(m.group(2)), ".17f").rstrip("0").rstrip("."), text)
    analyser = L.Analyser()
    analyser.analyseModel(L.Parser(False).parseModel(text))
    am = analyser.analyserModel()
    profile = L.GeneratorProfile(L.GeneratorProfile.Profile.C)
    profile.setInterfaceFileNameString("model.h")
    gen = L.Generator()
    (folder / "model.h").write_text(gen.interfaceCode(am, profile))
    (folder / "model.c").write_text(gen.implementationCode(am, profile))
    return [am.state(i).variable().name() for i in range(am.stateCount())]


def advanced_first(model_path: str) -> set[str]:
    """Names of the states cable's kernel advances before it takes I_ion.

    Parameters
    ----------
    model_path : str
        The CellML file.

    Returns
    -------
    set of str
        The states whose derivative is linear in themselves (``Analysis.linear``).
    """
    from cable.membrane.equations import analysis
    from cable.membrane.equations.cellml_import import build
    from cable.membrane.equations.description import parse

    eq = build(model_path)
    if eq.current_states != "gates":
        raise RuntimeError(f"{model_path}: current_states = {eq.current_states!r}; this tool reproduces 'gates'.")
    an = analysis.analyse(parse(eq))
    return {s.name for s in eq.states if an.linear[s.name] is not None}


def two_point(a1: float, a2: float) -> float:
    """CV [m/s] from the crossing times [ms] at the driver's two nodes."""
    i1, i2 = int(0.3 * (NODES - 1)), int(0.7 * (NODES - 1))
    return (i2 - i1) * DX / (a2 - a1) * 10.0


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--model", default=str(SHARED / "cellml" / "ohara_rudy_2011.cellml"))
    ap.add_argument("--dt", type=float, nargs="+", default=[0.005, 0.0025, 0.00125, 0.000625], help="[ms]")
    ap.add_argument("--duration", type=float, default=30.0, help="[ms]")
    args = ap.parse_args()

    import cable
    from cable.membrane.equations.registry import cellml_model_name

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        states = generate(args.model, folder)
        first = advanced_first(args.model)
        idx = [k for k, n in enumerate(states) if n in first and k != 0]
        if len(idx) != len(first):
            raise RuntimeError(f"state names differ between libcellml and cable: {sorted(first - set(states))}")
        (folder / "strand.c").write_text(driver_source(idx))
        exe = folder / "strand"
        subprocess.run(["gcc", "-O3", "-march=native", "-ffast-math", "-I", tmp, "-o", str(exe),
                        str(folder / "strand.c"), str(folder / "model.c"), "-lm"], check=True)
        name = cellml_model_name(args.model)
        cols = ("driver, all at the start", "driver, I_ion after gates", "cable exact FE", "cable tabulated RL")
        rows = []
        for dt in args.dt:
            steps = int(round(args.duration / dt))
            row = []
            for order in (False, True):
                env = dict(os.environ, STIMSTEPS=str(int(round(0.5 / dt))))
                env.pop("CABLEORDER", None)
                if order:
                    env["CABLEORDER"] = "1"
                out = subprocess.run([str(exe), str(NODES), str(steps), repr(dt)], env=env, check=True,
                                     capture_output=True, text=True).stdout
                a1, a2 = map(float, re.search(r"activation_ms\s+(\S+)\s+(\S+)", out).groups())
                row.append(two_point(a1, a2))
            for rates, gating in (("exact", "forward-euler"), ("tabulated", "rush-larsen")):
                c = case(name, rates, gating)
                c["numerics"]["dt"] = dt
                c["run"]["duration"] = args.duration
                act = cable.simulate(c).activation_time.squeeze()
                i1, i2 = int(0.3 * (NODES - 1)), int(0.7 * (NODES - 1))
                row.append(two_point(float(act.isel(x=i1)), float(act.isel(x=i2))))
            rows.append(row)
            print(f"dt {dt * 1e3:g} us: " + "  ".join(f"{c_}: {v:.5f}" for c_, v in zip(cols, row)), flush=True)
    print(f"{'dt (us)':>8s} " + " ".join(f"{c_:>26s}" for c_ in cols))
    for dt, row in zip(args.dt, rows):
        print(f"{dt * 1e3:8g} " + " ".join(f"{v:26.5f}" for v in row))
    if len(rows) > 1:
        print(f"{'extrap.':>8s} " + " ".join(f"{2 * b - a:26.5f}" for a, b in zip(rows[-2], rows[-1])))


if __name__ == "__main__":
    main()
