"""``cable models [NAME]``: list the membrane models, or show one (a CellML file too)."""

import json

NAME = "models"
HELP = "list membrane models, or show one model's states, parameters, currents and defaults"
ORDER = 5


def add_arguments(p):
    p.add_argument("name", nargs="?", help="model name, or a CellML file (path ending .cellml)")
    p.add_argument("--cellml", metavar="OUT", help="write the model as a CellML 2.0 file OUT (default: none)")


def table(header, rows, indent: str = "  ") -> list[str]:
    """Rows of text cells in columns as wide as their widest cell (the last column left free)."""
    widths = [max(len(str(r[k])) for r in [header, *rows]) for k in range(len(header) - 1)]
    out = []
    for row in [header, *rows]:
        cells = [f"{str(c):<{w}}" for c, w in zip(row, widths)] + [str(row[-1])]
        out.append((indent + "  ".join(cells)).rstrip())
    return out


def _default(p) -> str:
    return p.default if isinstance(p.default, str) else f"{p.default:.6g}"


def describe(m) -> list[str]:
    """The lines of ``cable models NAME``: states, parameters and currents in aligned columns."""
    basis = "membrane area (uA/cm^2)" if m.current_basis == "area" else "capacitance (uA/uF = pA/pF)"
    lines = [f"{m.name}: {m.summary}", f"  reference: {m.citation}",
             f"  currents per {basis}; rest {m.resting_potential:g} mV; activation threshold {m.threshold:g} mV",
             "", "  states"]
    lines += table(("name", "initial", "unit", "meaning"),
                   [(s.name, f"{s.initial:.6g}", s.units or "1", s.meaning) for s in m.states], "    ")
    lines += ["", "  parameters (* scalable in [membrane.scale])"]
    rows = []
    for p in m.parameters:
        star = "*" if p.name in m.conductances else " "
        meaning = p.meaning
        if p.choices and not all(c in meaning for c in p.choices):    # the choices, said once
            meaning += f" (one of {', '.join(p.choices)})"
        rows.append((star + p.name, _default(p), "-" if p.choices else (p.units or "1"), meaning))
    lines += table((" name", "default", "unit", "meaning"), rows, "    ")
    lines += ["", "  currents (`cable traces --currents NAME`; inward negative)"]
    if m.currents is None or not m.current_names:
        lines.append("    (this model does not report its currents separately)")
    else:
        unit = "uA/cm^2" if m.current_basis == "area" else "uA/uF"
        lines.append("    " + ", ".join(m.current_names) + f"  [{unit}]")
    return lines


def run(args):
    from cable.case import CaseError
    from cable.membrane import UnknownModelError, get_model, model_names
    from cable.membrane.equations.registry import cellml_model_name, is_generated_name

    if not args.name:
        if args.cellml:
            raise CaseError("--cellml needs a model name: cable models NAME --cellml OUT.cellml.")
        names = model_names()
        width = max(map(len, names))
        for name in names:
            print(f"{name:<{width}}  {get_model(name).summary}")
        return 0
    name = args.name
    if is_generated_name(name) and not name.startswith("equations:"):
        name = cellml_model_name(name)
    try:
        m = get_model(name)
    except UnknownModelError as exc:
        raise CaseError(str(exc)) from None
    if args.cellml:
        return _export(m, args.cellml)
    lines = describe(m)
    extra = [f"  {line}" for line in getattr(m, "notes", ())]
    schemes = getattr(m, "integration", ())
    if schemes:
        rl = [s.name for s, k in zip(m.states, schemes) if k == "rush-larsen"]
        buffered = [s.name for s, k in zip(m.states, schemes) if k == "rapid-buffer"]
        fe = [s.name for s in m.states if s.name not in rl and s.name not in buffered]
        extra.append(f"  Rush-Larsen (derivative linear in the state; numerics.gating): {', '.join(rl) or '(none)'}; "
                     f"forward Euler: {', '.join(fe) or '(none)'}"
                     + (f"; buffered (total by forward Euler, free from the rapid buffer equilibrium): "
                        f"{', '.join(buffered)}" if buffered else ""))
        if getattr(m, "equations", "") and json.loads(m.equations).get("euler_order") == "after-gates":
            extra.append("  the concentrations of a step take the currents with the gates already updated")
        tabulated = ", ".join(getattr(m.fast, "table_parameters", ()) or ()) if m.fast is not None else ""
        extra.append("  rates: the potential-only subexpressions tabulated (numerics.rates = \"tabulated\", the default; "
                     "\"exact\" evaluates them)" + (f"; the table depends on {tabulated}" if tabulated else ""))
    print("\n".join(lines[:3] + extra + lines[3:]))
    return 0


def _export(model, out):
    from pathlib import Path

    from cable.case import CaseError
    from cable.membrane.equations.cellml_export import equations_of, export

    text = export(equations_of(model))
    try:
        Path(out).write_text(text, encoding="utf-8")
    except OSError as exc:
        raise CaseError(f"--cellml {out!r}: cannot write: {exc.strerror or exc}.") from None
    print(f"wrote {out}")
    return 0
