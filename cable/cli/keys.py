"""``cable keys [SECTION]``: the case-file keys, their units, defaults and meanings."""

NAME = "keys"
HELP = "list the case-file sections and keys with their units, defaults and meanings"
ORDER = 6

#: units shown for keys whose canonical quantity is a plain number but which are read in one
UNIT_SHOWN = {("measure", "apd_levels"): "%"}


def add_arguments(p):
    p.add_argument("section", nargs="?", help="only this section, e.g. fibre (or fiber), stimulus, region "
                                             "(default: every section)")


def toml_value(value, unit: str = "") -> str:
    """A default as it would be written in a case file: ``"0.01 cm"``, ``true``, ``[90]``, ``"strang"``."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    if isinstance(value, float):
        text = f"{value:g}"
        return f'"{text} {unit}"' if unit and unit != "%" else text
    return str(value)


def plain(doc: str) -> str:
    """A docstring without its reStructuredText markup (``code``, roles, ``::``)."""
    import re
    import textwrap

    text = textwrap.dedent(doc).strip("\n")
    text = re.sub(r":[a-z]+:`~?([^`]+)`", r"\1", text)
    text = re.sub(r"``([^`]+)``", r"\1", text)
    text = re.sub(r"::\n", ":\n", text)
    return text


def rows(name, keys):
    from cable import units

    out = []
    for key, spec in keys.items():
        unit = units.CANONICAL.get(spec.quantity, "") if spec.kind in ("quantity", "list_quantity") else ""
        unit = UNIT_SHOWN.get((name, key), "" if unit == "1" else unit)
        if spec.required:
            default = "(required)"
        elif spec.default is None:
            default = "-"
        else:
            default = toml_value(spec.default, unit)
        meaning = spec.meaning
        if spec.kind == "choice":
            meaning += "; one of " + ", ".join(f'"{c}"' for c in spec.choices)
        kind = {"quantity": "number", "list_quantity": "list", "list_str": "list", "table": "table",
                "str": "text", "choice": "text"}.get(spec.kind, spec.kind)
        out.append((key, kind, unit or "-", default, meaning))
    return out


def run(args):
    from cable.case import CaseError
    from cable.case.load import PREPACE_KEYS
    from cable.case.values import nearest as _nearest
    from cable.case.names import section_name
    from cable.case.schema import LIST_SECTIONS, NAMED_SECTIONS, SECTIONS
    from cable.cli.models import table
    from cable.drugs import BLOCK_KEYS, DRUG_KEYS
    from cable.electrodes import ELECTRODE_KEYS
    from cable.regions import REGION_KEYS

    sections = dict(SECTIONS)
    sections["membrane.prepace"] = PREPACE_KEYS
    sections["region"] = REGION_KEYS
    sections["drug.NAME"] = DRUG_KEYS
    sections["drug.NAME.block.CONDUCTANCE"] = BLOCK_KEYS
    sections["electrode"] = ELECTRODE_KEYS
    if args.section:
        args.section = section_name(args.section)  # fibre: the [fiber] section
    if args.section and args.section not in sections and args.section != "sweep":
        raise CaseError(f"unknown section '{args.section}'.{_nearest(args.section, [*sections, 'sweep'])} "
                        f"Sections: {', '.join(sections)}, sweep.")
    if args.section == "sweep":
        from cable.sweep import spec

        print(plain(spec.__doc__))
        return 0
    chosen = [(n, k) for n, k in sections.items() if not args.section or n == args.section]
    body = [r for name, keys in chosen for r in rows(name, keys)]
    header = ("key", "type", "unit", "default", "meaning")
    widths = [max(len(r[k]) for r in [header, *body]) for k in range(4)]
    first = True
    for name, keys in chosen:
        shown = f"[{NAMED_SECTIONS[name]}]" if name in NAMED_SECTIONS else \
            f"[[{name}]]" if name in LIST_SECTIONS or name == "electrode" else f"[{name}]"
        print(("" if first else "\n") + shown + ("\n(also spelt [fibre])" if name == "fiber" else ""))
        lines = table(header, [tuple(f"{c:<{w}}" for c, w in zip(r[:4], widths)) + r[4:] for r in rows(name, keys)])
        print("\n".join(lines if first else lines[1:]))
        first = False
    if not args.section:
        print("\n[sweep]: `cable keys sweep`")
    return 0
