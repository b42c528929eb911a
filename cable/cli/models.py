"""``cable models [NAME]``: list the membrane models, or show one (a CellML file too)."""

NAME = "models"
HELP = "list membrane models, or show one model's states, parameters and defaults"
ORDER = 5


def add_arguments(p):
    p.add_argument("name", nargs="?", help="model name, or a CellML file (path ending .cellml)")
    p.add_argument("--cellml", metavar="OUT", help="write the model as a CellML 2.0 file OUT")


def run(args):
    from cable.membrane import get_model, model_names
    from cable.case import CaseError
    from cable.membrane import UnknownModelError
    from cable.membrane.equations.registry import cellml_model_name, is_generated_name

    if not args.name:
        if args.cellml:
            raise CaseError("--cellml needs a model name: cable models NAME --cellml OUT.cellml.")
        for name in model_names():
            m = get_model(name)
            print(f"{name:28s} {m.summary}")
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
    print(f"{m.name}: {m.summary}")
    print(f"  reference: {m.citation}")
    print(f"  currents per {'membrane area (uA/cm^2)' if m.current_basis == 'area' else 'capacitance (uA/uF)'}; "
          f"rest {m.resting_potential:g} mV; activation threshold {m.threshold:g} mV")
    for line in getattr(m, "notes", ()):
        print(f"  {line}")
    schemes = getattr(m, "integration", ())
    if schemes:
        rl = [s.name for s, k in zip(m.states, schemes) if k == "rush-larsen"]
        print(f"  Rush-Larsen (derivative linear in the state; numerics.gating): {', '.join(rl) or '(none)'}; "
              f"forward Euler: {', '.join(s.name for s in m.states if s.name not in rl) or '(none)'}")
        print("  rates: evaluated exactly (no tabulated fast path for generated models yet)")
    print("  states (initial value, unit, meaning):")
    for s in m.states:
        print(f"    {s.name:12s} {s.initial:<12.6g} {s.units:8s} {s.meaning}")
    print("  parameters (default, unit, meaning; * = scalable in [membrane.scale]):")
    for p in m.parameters:
        star = "*" if p.name in m.conductances else " "
        default = p.default if isinstance(p.default, str) else f"{p.default:.6g}"
        extra = f" (one of {', '.join(p.choices)})" if p.choices else ""
        print(f"   {star}{p.name:12s} {default:<12s} {p.units:8s} {p.meaning}{extra}")
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
