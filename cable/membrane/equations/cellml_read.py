"""Read a CellML file through libcellml: parse, validate, flatten, analyse, and turn the
equations libcellml's analyser ordered into sympy.

libcellml (Apache-2.0) parses CellML 2.0 (and 1.0/1.1 with its non-strict parser),
validates the model, resolves and flattens imports, and its analyser classifies the
model (an ODE system is required) and orders the equations, inserting the scaling
factors between connected variables of different units. Its Python code generator
writes those equations as assignments to the arrays ``states``, ``rates``,
``constants``, ``computed_constants`` and ``algebraic_variables``; this module reads
that code back with Python's ``ast`` into sympy expressions, and runs it as it is for
the initial values (and for the scipy cross-checks in the tests).
"""

from __future__ import annotations

import ast
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import sympy

from cable.membrane.equations.errors import EquationError

_ENOTATION = re.compile(r"(<cn\b[^>]*>)\s*([-+]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)[eE][-+]?[0-9]+)\s*(?=</cn>)")
#: issues shown before "and N more"
_SHOWN = 5


def plain_numbers(text: str) -> str:
    """``<cn>1.5e-4</cn>`` rewritten as a plain decimal (CellML 2.0 wants one; files
    converted from CellML 1.0 often carry e-notation anyway, see the CellML 2.0
    specification, section on ``cn`` elements)."""
    return _ENOTATION.sub(lambda m: m.group(1) + _decimal(float(m.group(2))), text)


def _decimal(x: float) -> str:
    """The shortest plain decimal that reads back as ``x``."""
    return np.format_float_positional(x, unique=True, trim="-")


def _refuse(path, what, messages):
    shown = "; ".join(messages[:_SHOWN])
    more = f" (and {len(messages) - _SHOWN} more)" if len(messages) > _SHOWN else ""
    raise EquationError(f"CellML file '{path}': {what}: {shown}{more}.")


@dataclass
class CellMLCode:
    """The analysed model: variable information, the generated Python code, its namespace."""

    path: Path
    model: object  # libcellml.Model (flattened)
    code: str
    namespace: dict
    voi: dict
    info: dict  # array name -> list of {"name", "units", "component"}


def read(path) -> CellMLCode:
    """Parse, validate, flatten and analyse ``path``; refuse what cannot be simulated."""
    import libcellml as L

    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise EquationError(f"CellML file '{path}' cannot be read: {exc}.") from None
    if "<model" not in text or "cellml" not in text:
        raise EquationError(f"CellML file '{path}' is not a CellML file (no CellML <model> element).")
    text = plain_numbers(text)
    parser = L.Parser()
    model = parser.parseModel(text)
    if parser.errorCount() or model is None:
        parser = L.Parser(False)  # CellML 1.0 and 1.1
        model = parser.parseModel(text)
    errors = [parser.error(i).description() for i in range(parser.errorCount())]
    if errors or model is None or not model.name():
        _refuse(path, "libcellml cannot parse it", errors or ["no model found"])
    if model.hasUnresolvedImports():
        importer = L.Importer()
        importer.resolveImports(model, str(path.parent) + "/")
        if importer.errorCount():
            _refuse(path, "its imports cannot be resolved",
                    [importer.error(i).description() for i in range(importer.errorCount())])
        model = importer.flattenModel(model)
    validator = L.Validator()
    validator.validateModel(model)
    if validator.errorCount():
        _refuse(path, "the libcellml validator finds it invalid",
                [validator.error(i).description() for i in range(validator.errorCount())])
    analyser = L.Analyser()
    analyser.analyseModel(model)
    am = analyser.analyserModel()
    kind = L.AnalyserModel.typeAsString(am.type())
    if kind != "ode":
        plain = {"algebraic": "an algebraic model (no differential equations)",
                 "dae": "a differential-algebraic system (DAE)",
                 "nla": "a model with algebraic loops (nonlinear algebraic equations)",
                 "unknown": "a model whose equations do not determine every variable",
                 "invalid": "an invalid model",
                 "underconstrained": "underconstrained (some variables have no equation)",
                 "overconstrained": "overconstrained (some variables have several equations)",
                 "unsuitably_constrained": "unsuitably constrained"}.get(kind, kind)
        msgs = [analyser.error(i).description() for i in range(analyser.errorCount())]
        detail = f" ({'; '.join(msgs[:_SHOWN])})" if msgs else ""
        raise EquationError(f"CellML file '{path}': libcellml classes it as {plain}; only systems of "
                            f"ordinary differential equations can be simulated{detail}.")
    profile = L.GeneratorProfile(L.GeneratorProfile.Profile.PYTHON)
    code = L.Generator().implementationCode(am, profile)
    namespace: dict = {}
    exec(compile(code, f"<libcellml python of {path.name}>", "exec"), namespace)  # noqa: S102 (our generated text)
    info = {"states": namespace["STATE_INFO"], "constants": namespace["CONSTANT_INFO"],
            "computed_constants": namespace["COMPUTED_CONSTANT_INFO"],
            "algebraic_variables": namespace["ALGEBRAIC_VARIABLE_INFO"]}
    if namespace.get("EXTERNAL_VARIABLE_INFO"):
        raise EquationError(f"CellML file '{path}': it has external variables, which cannot be simulated.")
    return CellMLCode(path, model, code, namespace, namespace["VOI_INFO"], info)


def initial_values(code: CellMLCode) -> dict:
    """Numeric arrays after ``initialise_arrays`` and ``compute_computed_constants``."""
    ns = ieee_namespace(code)
    arrays = {"states": ns["create_states_array"](), "rates": ns["create_states_array"](),
              "constants": ns["create_constants_array"](),
              "computed_constants": ns["create_computed_constants_array"](),
              "algebraic_variables": ns["create_algebraic_variables_array"]()}
    arrays = {k: np.array(v, dtype=float) for k, v in arrays.items()}
    with np.errstate(all="ignore"):
        ns["initialise_arrays"](arrays["states"], arrays["rates"], arrays["constants"],
                                arrays["computed_constants"], arrays["algebraic_variables"])
        ns["compute_computed_constants"](0.0, arrays["states"], arrays["rates"], arrays["constants"],
                                         arrays["computed_constants"], arrays["algebraic_variables"])
    return arrays


def ieee_namespace(code: CellMLCode) -> dict:
    """libcellml's Python code with numpy's functions: inf and NaN as in C, no exceptions
    (with arrays of float64, a division by zero gives inf as well)."""
    ns = dict(code.namespace)
    ns.update(exp=np.exp, log=np.log, pow=np.power, sqrt=np.sqrt, fabs=np.fabs, log10=np.log10)
    for name in ("initialise_arrays", "compute_computed_constants", "compute_rates", "compute_variables"):
        f = code.namespace[name]
        ns[name] = type(f)(f.__code__, ns, name)
    return ns


# ----------------------------------------------------------------------------- code -> sympy
_FUNCS = {"exp": sympy.exp, "sqrt": sympy.sqrt, "fabs": sympy.Abs, "floor": sympy.floor,
          "ceil": sympy.ceiling, "sin": sympy.sin, "cos": sympy.cos, "tan": sympy.tan,
          "asin": sympy.asin, "acos": sympy.acos, "atan": sympy.atan, "sinh": sympy.sinh,
          "cosh": sympy.cosh, "tanh": sympy.tanh, "atan2": sympy.atan2, "pow": lambda a, b: a ** b,
          "log10": lambda x: sympy.log(x, 10), "min": sympy.Min, "max": sympy.Max}
_RELATIONS = {"eq_func": sympy.Eq, "neq_func": sympy.Ne, "lt_func": sympy.Lt, "leq_func": sympy.Le,
              "gt_func": sympy.Gt, "geq_func": sympy.Ge}
_LOGIC = {"and_func": sympy.And, "or_func": sympy.Or, "xor_func": sympy.Xor}


def _is_bool(e) -> bool:
    # (a sympy Symbol is a Boolean too: only relations and logic count here)
    return isinstance(e, sympy.logic.boolalg.Boolean) and not isinstance(e, sympy.Expr)


def _num(e):
    return sympy.Piecewise((1, e), (0, True)) if _is_bool(e) else e


def _bool(e):
    if _is_bool(e):
        return e
    return sympy.Ne(e, 0)


class _ToSympy:
    def __init__(self, where, symbols, voi):
        self.where, self.symbols, self.voi = where, symbols, voi

    def fail(self, node):
        raise EquationError(f"CellML file '{self.where}': cannot read the expression "
                            f"{ast.unparse(node)!r} of libcellml's code (unsupported construct).")

    def __call__(self, node):
        if isinstance(node, ast.Constant):
            return sympy.Float(node.value) if isinstance(node.value, float) else sympy.Integer(node.value)
        if isinstance(node, ast.Name):
            if node.id == "voi":
                return self.voi
            consts = {"pi": sympy.pi, "e": sympy.E, "inf": sympy.oo, "nan": sympy.nan}
            if node.id in consts:
                return consts[node.id]
            self.fail(node)
        if isinstance(node, ast.Subscript):
            return self.symbols[(node.value.id, node.slice.value)]
        if isinstance(node, ast.UnaryOp):
            x = self(node.operand)
            if isinstance(node.op, ast.USub):
                return -_num(x)
            if isinstance(node.op, ast.UAdd):
                return _num(x)
            if isinstance(node.op, ast.Not):
                return sympy.Not(_bool(x))
            self.fail(node)
        if isinstance(node, ast.BinOp):
            a, b = _num(self(node.left)), _num(self(node.right))
            ops = {ast.Add: lambda: a + b, ast.Sub: lambda: a - b, ast.Mult: lambda: a * b,
                   ast.Div: lambda: a / b, ast.Pow: lambda: a ** b, ast.Mod: lambda: sympy.Mod(a, b)}
            for op, fn in ops.items():
                if isinstance(node.op, op):
                    return fn()
            self.fail(node)
        if isinstance(node, ast.IfExp):
            return sympy.Piecewise((_num(self(node.body)), _bool(self(node.test))),
                                   (_num(self(node.orelse)), True))
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
            name, args = node.func.id, [self(a) for a in node.args]
            if name in _RELATIONS:
                return _RELATIONS[name](*[_num(a) for a in args])
            if name in _LOGIC:
                return _LOGIC[name](*[_bool(a) for a in args])
            if name == "not_func":
                return sympy.Not(_bool(args[0]))
            if name == "bool":
                return _bool(args[0])
            if name == "log":
                return sympy.log(*[_num(a) for a in args])
            if name in _FUNCS:
                return _FUNCS[name](*[_num(a) for a in args])
        self.fail(node)


def equations(code: CellMLCode, symbols: dict, voi) -> dict:
    """``{(array, index): sympy expression}`` for every computed constant, algebraic variable
    and rate, from the generated functions (first definition of each)."""
    tree = ast.parse(code.code)
    conv = _ToSympy(code.path, symbols, voi)
    out: dict = {}
    for fn in tree.body:
        if not isinstance(fn, ast.FunctionDef) or fn.name not in (
                "initialise_arrays", "compute_computed_constants", "compute_rates", "compute_variables"):
            continue
        for stmt in fn.body:
            if isinstance(stmt, (ast.Pass, ast.Expr)):
                continue
            if not isinstance(stmt, ast.Assign) or not isinstance(stmt.targets[0], ast.Subscript):
                conv.fail(stmt)
            t = stmt.targets[0]
            key = (t.value.id, t.slice.value)
            if fn.name == "initialise_arrays" and key[0] in ("states", "constants", "rates"):
                continue  # initial values and constants: numbers (see initial_values)
            if key not in out:
                out[key] = conv(stmt.value)
    return out
