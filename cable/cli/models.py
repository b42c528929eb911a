"""``cable models [NAME]``: list the membrane models, or show one."""

NAME = "models"
HELP = "list membrane models, or show one model's states, parameters and defaults"
ORDER = 5


def add_arguments(p):
    p.add_argument("name", nargs="?", help="model name")


def run(args):
    from cable.membrane import get_model, model_names
    from cable.case import CaseError
    from cable.membrane import UnknownModelError

    if not args.name:
        for name in model_names():
            m = get_model(name)
            print(f"{name:28s} {m.summary}")
        return 0
    try:
        m = get_model(args.name)
    except UnknownModelError as exc:
        raise CaseError(str(exc)) from None
    print(f"{m.name}: {m.summary}")
    print(f"  reference: {m.citation}")
    print(f"  currents per {'membrane area (uA/cm^2)' if m.current_basis == 'area' else 'capacitance (uA/uF)'}; "
          f"rest {m.resting_potential:g} mV; activation threshold {m.threshold:g} mV")
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
