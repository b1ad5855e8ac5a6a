"""Safe arithmetic formulas for potentials, gate voltages and other project values.

A formula is a short piece of text such as ``"0.5*k*(x**2 + y**2)"`` or
``"VP + 0.1*eps"``.  It is read with :func:`ast.parse` (expression mode only),
checked node by node against a whitelist and turned into a tree of small
Python closures that evaluate with numpy.  The text is never executed: the
only things a formula can do are the operations listed below.

Language
--------
* numbers (always converted to float64), the constants ``pi`` and ``e``;
* ``+ - * / **``, unary ``-`` and ``+``, parentheses;
* comparisons ``< <= > >= == !=`` (chains such as ``0 < x < 1`` allowed); a
  comparison gives 1.0 where it holds and 0.0 elsewhere, so ``V0*(x > 0)``
  is a step of height ``V0``;
* ``and``, ``or``, ``not``: elementwise logic on the same 0/1 convention
  (any nonzero value, NaN included, counts as true);
* ``where(c, a, b)``: ``a`` where ``c`` is nonzero (NaN counts as nonzero),
  else ``b``;
* the functions in :data:`FUNCTIONS`:

  ``sqrt exp log sin cos tan sinh cosh tanh arctan abs erf`` (one argument),
  ``atan2(y, x)`` (two arguments), ``min``/``max`` (elementwise, two or more
  arguments), ``step(u)`` (Heaviside step, with ``step(0) = 0.5``) and
  ``gauss(u) = exp(-u**2/2)`` (an unnormalised Gaussian of unit width);
* names: the coordinates (by default ``x, y, z, r``) and the parameters the
  caller declares.  A parameter may not reuse a reserved name
  (:data:`RESERVED_NAMES`: functions, constants and coordinates).

All arithmetic is done in numpy float64 under ``np.errstate(all="ignore")``:
``1/0`` gives ``inf``, ``log(-1)`` gives ``nan`` and a huge power such as
``9**9**9`` gives ``inf`` instead of building a giant integer.  Use
:func:`nonfinite_report` to turn such values into a readable message.

Limits: at most :data:`MAX_LENGTH` characters, :data:`MAX_TOKENS` tokens,
:data:`MAX_NODES` expression nodes and a nesting depth of :data:`MAX_DEPTH`
(a long sum ``a + b + c + ...`` or product counts as one level).

Line breaks and tabs count as spaces.  Error columns are 1-based and count
characters from the start of the text.
"""
from __future__ import annotations

import ast
import difflib
import functools
import keyword
import operator
import re
import unicodedata
import warnings
from collections.abc import Callable, Iterable, Mapping

import numpy as np
import scipy.special

from core.errors import FormulaError, InputError

__all__ = [
    "CONSTANTS",
    "MATERIAL_NAMES",
    "COORDINATES",
    "FUNCTIONS",
    "MAX_DEPTH",
    "MAX_LENGTH",
    "MAX_NODES",
    "MAX_TOKENS",
    "RESERVED_NAMES",
    "Formula",
    "evaluate_formula",
    "is_formula_text",
    "nonfinite_report",
    "parse_formula",
]

MAX_LENGTH = 2000
MAX_TOKENS = 1000
MAX_NODES = 1000
MAX_DEPTH = 100

COORDINATES: tuple[str, ...] = ("x", "y", "z", "r")

CONSTANTS: dict[str, float] = {"pi": float(np.pi), "e": float(np.e)}


def _step(u):
    return np.heaviside(u, 0.5)


def _gauss(u):
    return np.exp(-0.5 * (u * u))


def _min(*args):
    return functools.reduce(np.minimum, args)


def _max(*args):
    return functools.reduce(np.maximum, args)


def _where(cond, a, b):
    return np.where(cond != 0, a, b)


# name -> (callable, minimum number of arguments, maximum number or None for "no limit")
_FUNCTION_TABLE: dict[str, tuple[Callable, int, int | None]] = {
    "sqrt": (np.sqrt, 1, 1),
    "exp": (np.exp, 1, 1),
    "log": (np.log, 1, 1),
    "sin": (np.sin, 1, 1),
    "cos": (np.cos, 1, 1),
    "tan": (np.tan, 1, 1),
    "sinh": (np.sinh, 1, 1),
    "cosh": (np.cosh, 1, 1),
    "tanh": (np.tanh, 1, 1),
    "arctan": (np.arctan, 1, 1),
    "atan2": (np.arctan2, 2, 2),
    "abs": (np.abs, 1, 1),
    "min": (_min, 2, None),
    "max": (_max, 2, None),
    "step": (_step, 1, 1),
    "gauss": (_gauss, 1, 1),
    "erf": (scipy.special.erf, 1, 1),
    "where": (_where, 3, 3),
}

FUNCTIONS: frozenset[str] = frozenset(_FUNCTION_TABLE)

#: names a project's potential formulas may use for its material's kinetic prefactor hbar^2/(2 m*),
#: in the project's energy unit times length unit squared: ``hbar2_over_2m`` for the mass along x,
#: and one per axis.  Their values come from the material (see core.potentials.material_names), so a
#: formula such as ``0.25*hw**2*x**2/hbar2_over_2m`` stays right when the material changes.
MATERIAL_NAMES: tuple[str, ...] = ("hbar2_over_2m", "hbar2_over_2m_x", "hbar2_over_2m_y", "hbar2_over_2m_z")

#: names a project parameter may not take (the material names are refused in core.project: formulas
#: receive them as values, like parameters)
RESERVED_NAMES: frozenset[str] = FUNCTIONS | frozenset(CONSTANTS) | frozenset(COORDINATES)

_BIN_OPS: dict[type, Callable] = {
    ast.Add: operator.add,
    ast.Sub: operator.sub,
    ast.Mult: operator.mul,
    ast.Div: operator.truediv,
    ast.Pow: operator.pow,
}
_BIN_SYMBOLS = {
    ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**",
    ast.FloorDiv: "//", ast.Mod: "%", ast.MatMult: "@", ast.LShift: "<<",
    ast.RShift: ">>", ast.BitOr: "|", ast.BitXor: "^", ast.BitAnd: "&",
}
# Operators of one precedence level that chain to the left (a + b - c + ...).
_CHAIN_GROUP = {ast.Add: 0, ast.Sub: 0, ast.Mult: 1, ast.Div: 1}

_CMP_OPS: dict[type, Callable] = {
    ast.Lt: np.less,
    ast.LtE: np.less_equal,
    ast.Gt: np.greater,
    ast.GtE: np.greater_equal,
    ast.Eq: np.equal,
    ast.NotEq: np.not_equal,
}
_CMP_SYMBOLS = {ast.Is: "is", ast.IsNot: "is not", ast.In: "in", ast.NotIn: "not in"}

_CONSTRUCTS: dict[type, str] = {
    ast.Attribute: "attribute access ('.') is not allowed {where}",
    ast.Subscript: "indexing ('[...]') is not allowed {where}",
    ast.Slice: "slices are not allowed {where}",
    ast.Lambda: "lambda expressions are not allowed {where}",
    ast.ListComp: "comprehensions are not allowed {where}",
    ast.SetComp: "comprehensions are not allowed {where}",
    ast.DictComp: "comprehensions are not allowed {where}",
    ast.GeneratorExp: "generator expressions are not allowed {where}",
    ast.List: "lists are not allowed {where}",
    ast.Tuple: "tuples (a comma outside a function call) are not allowed {where}",
    ast.Set: "sets are not allowed {where}",
    ast.Dict: "dictionaries are not allowed {where}",
    ast.Starred: "starred arguments ('*') are not allowed {where}",
    ast.NamedExpr: "assignment expressions (':=') are not allowed {where}",
    ast.JoinedStr: "f-strings are not allowed {where}",
    ast.FormattedValue: "f-strings are not allowed {where}",
    ast.IfExp: "conditional expressions ('a if c else b') are not allowed {where}; "
               "use where(c, a, b)",
    ast.Await: "'await' is not allowed {where}",
    ast.Yield: "'yield' is not allowed {where}",
    ast.YieldFrom: "'yield' is not allowed {where}",
}

# Rough upper bound on Python tokens; used to refuse text before parsing it.
_TOKEN_RE = re.compile(r"(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?|\w+|\*\*|//|<<|>>|[<>=!]=|\S")
_SPACE_TABLE = {ord(c): " " for c in "\t\n\r\f\v"}

_Env = dict
_Node = Callable[[_Env], object]


# --------------------------------------------------------------------------- helpers


def _plural(n: int, word: str) -> str:
    return f"{n} {word}" if n == 1 else f"{n} {word}s"


def _suggest(name: str, candidates: Iterable[str]) -> str | None:
    candidates = sorted(set(candidates))
    for cand in candidates:
        if cand.lower() == name.lower():
            return cand
    close = difflib.get_close_matches(name, candidates, n=1, cutoff=0.6)
    return close[0] if close else None


def _check_identifier(name: object, what: str) -> str:
    if not isinstance(name, str):
        raise FormulaError(f"{what} names must be strings, got {type(name).__name__}")
    if not name.isidentifier() or keyword.iskeyword(name):
        raise FormulaError(f"{what} name {name!r} is not a valid name")
    if unicodedata.normalize("NFKC", name) != name:
        raise FormulaError(
            f"{what} name {name!r} must be written in normalised form "
            f"{unicodedata.normalize('NFKC', name)!r}"
        )
    return name


class _Checker:
    """Validates a parsed tree and builds the closure tree from it."""

    def __init__(self, text: str, src: str, lead: int, parameters: frozenset[str],
                 coordinates: tuple[str, ...]):
        self.text = text
        self.src = src          # the stripped, single-line text that was parsed
        self.lead = lead        # characters stripped from the front of the text
        self.raw = src.encode("utf-8")
        self.parameters = parameters
        self.coordinates = coordinates
        self.variables = parameters | frozenset(coordinates)
        self.used: set[str] = set()

    # ---- positions

    def char_index(self, byte_offset: int) -> int:
        """0-based character index in ``src`` of a UTF-8 byte offset from the AST."""
        return len(self.raw[:byte_offset].decode("utf-8", errors="ignore"))

    def column(self, node: ast.AST) -> int:
        return self.lead + self.char_index(node.col_offset) + 1

    def column_after(self, node: ast.AST, skip: str = " )") -> int:
        """Column of the first character after ``node`` that is not in ``skip``."""
        i = self.char_index(node.end_col_offset)
        while i < len(self.src) and self.src[i] in skip:
            i += 1
        return self.lead + i + 1

    def error(self, message: str, column: int) -> FormulaError:
        """``message`` holds ``{where}`` where the column belongs."""
        text = message.replace("{where}", f"at column {column}")
        return FormulaError(text, formula=self.text, column=column)

    # ---- pass 1: iterative structure check (no recursion, so deep trees are safe)

    def check(self, tree: ast.Expression) -> None:
        problems: list[tuple[int, str]] = []
        deepest_depth, deepest_node = 0, tree.body
        nodes = 0
        stack: list[tuple[ast.AST, int]] = [(tree.body, 1)]
        while stack:
            node, depth = stack.pop()
            if not isinstance(node, ast.expr):
                continue  # operators and contexts are checked with their parents
            nodes += 1
            if depth > deepest_depth:
                deepest_depth, deepest_node = depth, node
            problem = self.problem(node)
            if problem is not None:
                problems.append(problem)
            for child in ast.iter_child_nodes(node):
                if isinstance(node, ast.Call) and child is node.func and isinstance(child, ast.Name):
                    continue  # the function name is checked by call_problem
                same_chain = (
                    isinstance(node, ast.BinOp)
                    and child is node.left
                    and isinstance(child, ast.BinOp)
                    and _CHAIN_GROUP.get(type(node.op), -1) == _CHAIN_GROUP.get(type(child.op), -2)
                )
                stack.append((child, depth if same_chain else depth + 1))
        if problems:
            column, message = min(problems, key=lambda p: p[0])
            raise self.error(message, column)
        if nodes > MAX_NODES:
            raise FormulaError(
                f"formula is too large ({nodes} parts; the limit is {MAX_NODES})",
                formula=self.text,
            )
        if deepest_depth > MAX_DEPTH:
            raise self.error(
                f"formula is nested too deeply {{where}} (more than {MAX_DEPTH} levels)",
                self.column(deepest_node),
            )

    def problem(self, node: ast.expr) -> tuple[int, str] | None:
        """Return (column, message) if ``node`` itself is not allowed."""
        if isinstance(node, ast.Constant):
            value = node.value
            if isinstance(value, bool) or value is None or value is Ellipsis:
                return self.column(node), f"{value!r} is not allowed {{where}}; use a number"
            if isinstance(value, (int, float)):
                return None
            what = {str: "strings are", bytes: "bytes literals are",
                    complex: "complex numbers are"}.get(type(value), "this constant is")
            return self.column(node), f"{what} not allowed {{where}}"
        if isinstance(node, ast.Name):
            return self.name_problem(node)
        if isinstance(node, ast.BinOp):
            if type(node.op) in _BIN_OPS:
                return None
            symbol = _BIN_SYMBOLS.get(type(node.op), type(node.op).__name__)
            return self.column_after(node.left), f"operator '{symbol}' is not allowed {{where}}"
        if isinstance(node, ast.UnaryOp):
            if isinstance(node.op, (ast.USub, ast.UAdd, ast.Not)):
                return None
            return self.column(node), "operator '~' is not allowed {where}"
        if isinstance(node, ast.Compare):
            for op, left in zip(node.ops, [node.left, *node.comparators]):
                if type(op) not in _CMP_OPS:
                    symbol = _CMP_SYMBOLS.get(type(op), type(op).__name__)
                    return self.column_after(left), f"comparison '{symbol}' is not allowed {{where}}"
            return None
        if isinstance(node, ast.BoolOp):
            return None
        if isinstance(node, ast.Call):
            return self.call_problem(node)
        if isinstance(node, (ast.Attribute, ast.Subscript)):
            column = self.column_after(node.value)
        else:
            column = self.column(node)
        default = f"'{type(node).__name__}' expressions are not allowed {{where}}"
        return column, _CONSTRUCTS.get(type(node), default)

    def name_problem(self, node: ast.Name) -> tuple[int, str] | None:
        name = node.id
        column = self.column(node)
        written = self.src[self.char_index(node.col_offset):self.char_index(node.end_col_offset)]
        if written != name:
            return column, f"name {written!r} {{where}} must be written as {name!r}"
        if name in self.variables:
            self.used.add(name)
            return None
        if name in CONSTANTS:
            return None
        if name in FUNCTIONS:
            return column, f"'{name}' {{where}} is a function; call it as {name}(...)"
        known = [*sorted(self.parameters), *self.coordinates, *sorted(CONSTANTS)]
        suggestion = _suggest(name, known)
        hint = f"; did you mean '{suggestion}'?" if suggestion else "."
        return column, f"unknown name '{name}' {{where}}{hint} Known names: {', '.join(known)}"

    def call_problem(self, node: ast.Call) -> tuple[int, str] | None:
        column = self.column(node)
        if node.keywords:
            kw = node.keywords[0]
            label = "'**' arguments are" if kw.arg is None else f"keyword argument '{kw.arg}=' is"
            return self.column(kw), f"{label} not allowed {{where}}"
        if not isinstance(node.func, ast.Name):
            return column, "calling anything but a function name is not allowed {where}"
        name = node.func.id
        if name not in _FUNCTION_TABLE:
            if name in self.variables or name in CONSTANTS:
                return column, f"'{name}' {{where}} is not a function"
            suggestion = _suggest(name, FUNCTIONS)
            hint = f"; did you mean '{suggestion}'?" if suggestion else "."
            known = ", ".join(sorted(FUNCTIONS))
            return column, f"unknown function '{name}' {{where}}{hint} Known functions: {known}"
        _, low, high = _FUNCTION_TABLE[name]
        n = len(node.args)
        if n < low or (high is not None and n > high):
            need = f"at least {_plural(low, 'argument')}" if high is None else _plural(low, "argument")
            return column, f"{name}() {{where}} takes {need}, got {n}"
        return None

    # ---- pass 2: build closures (the tree is already known to be valid and shallow)

    def build(self, node: ast.expr) -> tuple[_Node, object | None]:
        """Return (closure, constant value or None)."""
        if isinstance(node, ast.Constant):
            try:
                value = np.float64(float(node.value))
            except OverflowError:
                value = np.float64(np.inf)
            return _constant(value), value
        if isinstance(node, ast.Name):
            if node.id in CONSTANTS:
                value = np.float64(CONSTANTS[node.id])
                return _constant(value), value
            name = node.id
            return (lambda env: env[name]), None
        if isinstance(node, ast.BinOp) and type(node.op) in _CHAIN_GROUP:
            return self.build_chain(node)
        if isinstance(node, ast.BinOp):
            fn = _BIN_OPS[type(node.op)]
            (left, right), all_const = self.build_all([node.left, node.right])
            return self.fold(_binary(fn, left, right), all_const)
        if isinstance(node, ast.UnaryOp):
            arg, const = self.build(node.operand)
            if isinstance(node.op, ast.UAdd):
                return arg, const
            if isinstance(node.op, ast.USub):
                return self.fold(_unary(operator.neg, arg), const is not None)
            return self.fold(_unary(_logical_not, arg), const is not None)
        if isinstance(node, ast.Compare):
            parts = self.build_all([node.left, *node.comparators])
            ops = [_CMP_OPS[type(op)] for op in node.ops]
            return self.fold(_compare(ops, parts[0]), parts[1])
        if isinstance(node, ast.BoolOp):
            parts = self.build_all(node.values)
            combine = np.logical_and if isinstance(node.op, ast.And) else np.logical_or
            return self.fold(_boolean(combine, parts[0]), parts[1])
        if isinstance(node, ast.Call):
            fn = _FUNCTION_TABLE[node.func.id][0]
            args, all_const = self.build_all(node.args)
            return self.fold(_call(fn, args), all_const)
        raise self.error(f"'{type(node).__name__}' is not allowed {{where}}", self.column(node))

    def build_all(self, nodes: list[ast.expr]) -> tuple[list[_Node], bool]:
        built = [self.build(n) for n in nodes]
        return [b[0] for b in built], all(b[1] is not None for b in built)

    def build_chain(self, node: ast.BinOp) -> tuple[_Node, object | None]:
        group = _CHAIN_GROUP[type(node.op)]
        rights: list[tuple[Callable, ast.expr]] = []
        while isinstance(node, ast.BinOp) and _CHAIN_GROUP.get(type(node.op), -1) == group:
            rights.append((_BIN_OPS[type(node.op)], node.right))
            node = node.left
        rights.reverse()
        first, first_const = self.build(node)
        ops = [op for op, _ in rights]
        fns, all_const = self.build_all([r for _, r in rights])
        return self.fold(_chain(first, list(zip(ops, fns))), all_const and first_const is not None)

    @staticmethod
    def fold(fn: _Node, constant: bool) -> tuple[_Node, object | None]:
        if not constant:
            return fn, None
        with np.errstate(all="ignore"):
            value = fn({})
        return _constant(value), value


# ---- closure factories (kept at module level so each closure captures only what it needs)


def _constant(value) -> _Node:
    return lambda env: value


def _unary(fn, arg) -> _Node:
    return lambda env: fn(arg(env))


def _binary(fn, left, right) -> _Node:
    return lambda env: fn(left(env), right(env))


def _chain(first, rest) -> _Node:
    def run(env):
        acc = first(env)
        for fn, arg in rest:
            acc = fn(acc, arg(env))
        return acc
    return run


def _as_float(mask):
    return np.asarray(mask, dtype=np.float64)[()]


def _logical_not(value):
    return _as_float(np.equal(value, 0.0))


def _compare(ops, parts) -> _Node:
    if len(ops) == 1:
        op, left, right = ops[0], parts[0], parts[1]
        return lambda env: _as_float(op(left(env), right(env)))

    def run(env):
        values = [p(env) for p in parts]
        result = ops[0](values[0], values[1])
        for op, a, b in zip(ops[1:], values[1:], values[2:]):
            result = np.logical_and(result, op(a, b))
        return _as_float(result)
    return run


def _boolean(combine, parts) -> _Node:
    def run(env):
        result = np.not_equal(parts[0](env), 0.0)
        for p in parts[1:]:
            result = combine(result, np.not_equal(p(env), 0.0))
        return _as_float(result)
    return run


def _call(fn, args) -> _Node:
    if len(args) == 1:
        (a,) = args
        return lambda env: fn(a(env))
    return lambda env: fn(*[a(env) for a in args])


# --------------------------------------------------------------------------- public API


class Formula:
    """A parsed, validated formula.  Immutable; create it with :func:`parse_formula`.

    Attributes
    ----------
    text : str
        The formula as written.
    names : frozenset[str]
        The parameters and coordinates the formula uses.
    parameters : frozenset[str]
        The parameter names that were declared when parsing.
    coordinates : tuple[str, ...]
        The coordinate names that were allowed when parsing.
    uses_coordinates : bool
        True when the formula depends on at least one coordinate.
    """

    __slots__ = ("text", "names", "parameters", "coordinates", "uses_coordinates", "_root",
                 "_constant")

    def __init__(self, text: str, names: frozenset[str], parameters: frozenset[str],
                 coordinates: tuple[str, ...], root: _Node, constant):
        set_ = object.__setattr__
        set_(self, "text", text)
        set_(self, "names", names)
        set_(self, "parameters", parameters)
        set_(self, "coordinates", coordinates)
        set_(self, "uses_coordinates", any(c in names for c in coordinates))
        set_(self, "_root", root)
        set_(self, "_constant", constant)

    def __setattr__(self, name, value):
        raise AttributeError("Formula objects are immutable")

    def __delattr__(self, name):
        raise AttributeError("Formula objects are immutable")

    def __repr__(self) -> str:
        return f"Formula({self.text!r})"

    def __eq__(self, other) -> bool:
        if not isinstance(other, Formula):
            return NotImplemented
        return (self.text, self.parameters, self.coordinates) == (
            other.text, other.parameters, other.coordinates)

    def __hash__(self) -> int:
        return hash((self.text, self.parameters, self.coordinates))

    @property
    def is_constant(self) -> bool:
        """True when the formula uses no names at all (its value is known after parsing)."""
        return self._constant is not None

    def evaluate(self, env: Mapping[str, float | np.ndarray]) -> np.ndarray | float:
        """Evaluate with values for every name in :attr:`names`.

        Values may be numbers or real arrays; arrays broadcast with numpy rules
        (e.g. ``x`` of shape (n, 1) and ``y`` of shape (1, m) give an (n, m)
        result).  Returns a float when the result is a scalar, otherwise a new
        float64 array.  A formula that uses no coordinates returns a float
        even when coordinate arrays are passed.
        """
        if not isinstance(env, Mapping):
            raise FormulaError(f"values must be given as a mapping, got {type(env).__name__}",
                               formula=self.text)
        missing = sorted(n for n in self.names if n not in env)
        if missing:
            raise FormulaError(
                f"formula {self.text!r} needs a value for "
                + ", ".join(f"'{n}'" for n in missing),
                formula=self.text,
            )
        values = {name: _real_value(name, env[name], self.text) for name in self.names}
        try:
            with np.errstate(all="ignore"):
                result = self._root(values)
        except RecursionError:  # only when the caller's own stack is already very deep
            raise FormulaError(f"formula {self.text!r} is nested too deeply to evaluate here",
                               formula=self.text) from None
        except ValueError as exc:  # arrays that do not broadcast together
            shapes = ", ".join(f"{n}: {np.shape(v)}" for n, v in sorted(values.items()))
            raise FormulaError(
                f"cannot evaluate {self.text!r}: the values do not fit together ({shapes}): {exc}",
                formula=self.text,
            ) from None
        if np.ndim(result) == 0:
            return float(result)
        if any(result is v for v in values.values()):
            result = result.copy()
        return np.asarray(result, dtype=np.float64)


def _real_value(name: str, value, text: str):
    try:
        arr = np.asarray(value)
    except Exception as exc:  # ragged lists and other things numpy cannot read
        raise FormulaError(f"value of '{name}' is not a number or array: {exc}",
                           formula=text) from None
    if arr.dtype.kind not in "biuf":
        raise FormulaError(
            f"value of '{name}' must be real numbers, got {arr.dtype} "
            f"({type(value).__name__})",
            formula=text,
        )
    arr = arr.astype(np.float64, copy=False)
    return arr[()] if arr.ndim == 0 else arr


def _prepare_text(text: object) -> tuple[str, str, int]:
    """Check length and characters; return (text, stripped single-line text, lead)."""
    if not isinstance(text, str):
        raise FormulaError(f"a formula must be text, got {type(text).__name__}")
    if len(text) > MAX_LENGTH:
        raise FormulaError(
            f"formula is too long ({len(text)} characters; the limit is {MAX_LENGTH})",
            formula=text[:100], column=MAX_LENGTH + 1,
        )
    flat = text.translate(_SPACE_TABLE)
    for i, ch in enumerate(flat):
        if ch == "#":
            raise FormulaError(f"comments ('#') are not allowed at column {i + 1}",
                               formula=text, column=i + 1)
        if unicodedata.category(ch) in ("Cc", "Cf", "Cs", "Co", "Cn") or ch in "\u2028\u2029":
            raise FormulaError(
                f"invalid character U+{ord(ch):04X} at column {i + 1}", formula=text, column=i + 1
            )
    stripped = flat.lstrip(" ")
    if not stripped.strip():
        raise FormulaError("formula is empty", formula=text, column=1)
    tokens = sum(1 for _ in _TOKEN_RE.finditer(stripped))
    if tokens > MAX_TOKENS:
        raise FormulaError(
            f"formula is too long ({tokens} tokens; the limit is {MAX_TOKENS})", formula=text
        )
    return text, stripped, len(flat) - len(stripped)


def _syntax_error(text: str, src: str, lead: int, exc: SyntaxError) -> FormulaError:
    offset = exc.offset or 0
    if offset < 1 or offset > len(src) or (exc.lineno or 1) > 1:
        column = len(text.rstrip()) + 1
        message = f"formula ends unexpectedly ({exc.msg}) at column {column}"
    else:
        column = lead + offset
        message = f"syntax error at column {column}: {exc.msg}"
    return FormulaError(message, formula=text, column=column)


@functools.lru_cache(maxsize=512)
def _parse_cached(text: str, parameters: frozenset[str], coordinates: tuple[str, ...]) -> Formula:
    text, src, lead = _prepare_text(text)
    try:
        with warnings.catch_warnings():  # e.g. escape sequences in (rejected) strings
            warnings.simplefilter("ignore")
            tree = ast.parse(src, mode="eval")
    except SyntaxError as exc:
        raise _syntax_error(text, src, lead, exc) from None
    except (RecursionError, MemoryError, ValueError):
        raise FormulaError("formula is nested too deeply or is too complex to read",
                           formula=text) from None
    checker = _Checker(text, src, lead, parameters, coordinates)
    checker.check(tree)
    try:
        root, constant = checker.build(tree.body)
    except RecursionError:  # only when the caller's own stack is already very deep
        raise FormulaError("formula is nested too deeply to read here", formula=text) from None
    return Formula(text, frozenset(checker.used), parameters, coordinates, root, constant)


def parse_formula(text: str, *, parameters: Iterable[str] = (),
                  coordinates: Iterable[str] = COORDINATES) -> Formula:
    """Parse and validate ``text``.

    ``parameters`` are the names the caller will supply values for;
    ``coordinates`` the allowed coordinate names.  Raises
    :class:`~core.errors.FormulaError` for any problem, with ``column`` set
    when the problem has a place in the text.
    """
    if isinstance(parameters, str) or isinstance(coordinates, str):
        raise FormulaError("parameters and coordinates must be collections of names, not a string")
    coords = tuple(dict.fromkeys(_check_identifier(c, "coordinate") for c in coordinates))
    for c in coords:
        if c in FUNCTIONS or c in CONSTANTS:
            raise FormulaError(f"coordinate name '{c}' is reserved")
    params = frozenset(_check_identifier(p, "parameter") for p in parameters)
    for p in sorted(params):
        if p in RESERVED_NAMES or p in coords:
            kind = ("a function" if p in FUNCTIONS else "a constant" if p in CONSTANTS
                    else "a coordinate")
            raise FormulaError(f"parameter name '{p}' is reserved ({kind}); choose another name")
    if not isinstance(text, str):
        raise FormulaError(f"a formula must be text, got {type(text).__name__}")
    return _parse_cached(text, params, coords)


def evaluate_formula(text: str, env: Mapping[str, float | np.ndarray], *,
                     parameters: Iterable[str] | None = None) -> np.ndarray | float:
    """Parse ``text`` and evaluate it with ``env``.

    Without ``parameters``, every name in ``env`` that is not a coordinate
    (``x, y, z, r``) is taken as a parameter.
    """
    if not isinstance(env, Mapping):
        raise FormulaError(f"values must be given as a mapping, got {type(env).__name__}")
    if parameters is None:
        parameters = [k for k in env if k not in COORDINATES]
    return parse_formula(text, parameters=parameters).evaluate(env)


def is_formula_text(value: object) -> bool:
    """True when a project value is a formula (text) rather than a plain number."""
    return isinstance(value, str)


def nonfinite_report(values: np.ndarray, coordinates: Mapping[str, np.ndarray]) -> str | None:
    """Describe NaN/inf entries of ``values`` on a grid, or return None if all are finite.

    ``coordinates`` maps names to arrays that broadcast against ``values``
    (indexed ``[x, y(, z)]``, e.g. shapes (n, 1) and (1, m)).  Points are
    counted on the broadcast grid.  Example result:
    ``"gives inf at 3 grid points, first at x=0, y=0"``.
    """
    vals = np.asarray(values)
    if vals.dtype.kind not in "biufc":
        raise InputError(f"values must be numeric, got {vals.dtype}")
    if vals.dtype.kind in "biu":
        return None
    coords = {name: np.asarray(c) for name, c in coordinates.items()}
    try:
        shape = np.broadcast_shapes(vals.shape, *(c.shape for c in coords.values()))
    except ValueError:
        shapes = ", ".join(f"{n}: {c.shape}" for n, c in coords.items())
        raise InputError(
            f"values of shape {vals.shape} do not fit the coordinates ({shapes})"
        ) from None
    bad = ~np.isfinite(vals)
    if not bad.any():
        return None
    bad_full = np.broadcast_to(bad, shape)
    count = int(np.count_nonzero(bad_full))
    first = np.unravel_index(int(np.flatnonzero(bad_full)[0]), shape) if shape else ()
    bad_vals = vals[bad]
    nan = np.isnan(bad_vals)
    if nan.all():
        kind = "NaN"
    elif not nan.any() and np.all(np.real(bad_vals) > 0):
        kind = "inf"
    elif not nan.any() and np.all(np.real(bad_vals) < 0):
        kind = "-inf"
    else:
        kind = "NaN or inf"
    where = ", ".join(
        f"{name}={float(np.real(np.broadcast_to(c, shape)[first])):.6g}"
        for name, c in coords.items()
    )
    if not where:
        where = f"index {tuple(int(i) for i in first)}"
    return f"gives {kind} at {_plural(count, 'grid point')}, first at {where}"
