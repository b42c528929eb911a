"""``cable keys [SECTION]``: the case-file keys, their units, defaults and meanings."""

NAME = "keys"
HELP = "list the case-file sections and keys with their units, defaults and meanings"
ORDER = 6


def add_arguments(p):
    p.add_argument("section", nargs="?", help="only this section, e.g. fiber")


def run(args):
    from cable import units
    from cable.case import CaseError
    from cable.case.load import PREPACE_KEYS, _nearest
    from cable.case.schema import LIST_SECTIONS, SECTIONS

    from cable.drugs import BLOCK_KEYS, DRUG_KEYS
    from cable.electrodes import ELECTRODE_KEYS
    from cable.regions import REGION_KEYS

    sections = dict(SECTIONS)
    sections["membrane.prepace"] = PREPACE_KEYS
    sections["region"] = REGION_KEYS
    sections["drug.NAME"] = DRUG_KEYS
    sections["drug.NAME.block.CONDUCTANCE"] = BLOCK_KEYS
    sections["electrode"] = ELECTRODE_KEYS
    if args.section and args.section not in sections and args.section != "sweep":
        raise CaseError(f"unknown section '{args.section}'.{_nearest(args.section, [*sections, 'sweep'])} "
                        f"Sections: {', '.join(sections)}, sweep.")
    if args.section == "sweep":
        from cable.sweep import spec

        print(spec.__doc__)
        return 0
    for name, keys in sections.items():
        if args.section and name != args.section:
            continue
        header = f"[[{name}]]" if name in LIST_SECTIONS or name in ("region", "electrode") else f"[{name}]"
        print(header)
        for key, spec in keys.items():
            unit = units.CANONICAL.get(spec.quantity, "") if spec.kind in ("quantity", "list_quantity") else ""
            unit = "" if unit == "1" else unit
            if spec.required:
                default = "required"
            elif spec.default is None or spec.default == ():
                default = "-"
            else:
                default = str(spec.default)
            kind = "/".join(spec.choices) if spec.kind == "choice" else spec.kind
            print(f"  {key:26s} {kind:32s} {unit:9s} {default:10s} {spec.meaning}")
        print()
    if not args.section:
        print("[sweep]: `cable keys sweep`")
    return 0
