"""Feature expressions: a line of arithmetic over column names, parsed into a checked tree.

The language is Python-like arithmetic::

    log(living_area)
    living_area * dist_km
    `Living Area (sq ft)` / 1000
    hinge(age, 60)
    onehot(region, ref='Old Mill')
    poly(age, log(lot_area), degree=2)

Operators ``+ - * / **``, unary minus, parentheses, numbers, names, backquoted names
(for headers with spaces or symbols) and calls of the functions listed in
:data:`appraise.engine.functions.FUNCTIONS`. Quoted text is allowed only where a
function takes it (the reference date of ``months_between``, ``ref=`` of ``onehot``).

How it is read, in stages that are each usable on their own:

1. :func:`protect_backquotes` swaps every backquoted name for a placeholder
   identifier of the same length, outside quoted strings.
2. Python's ``ast.parse(mode="eval")`` builds a syntax tree. Nothing is evaluated.
3. :func:`parse_expression` walks that tree against a whitelist of node types
   (Expression, BinOp with Add/Sub/Mult/Div/Pow, UnaryOp with USub/UAdd, Constant
   int/float -- or str where a function takes text --, Name, Call of a listed
   function with its listed keywords) and builds a tree of the frozen node classes
   below. Anything else raises :class:`ExpressionError` naming the expression and
   the offending piece.
4. :class:`NameScope` resolves names: a column header, else a derived variable
   (whose own expression is parsed and resolved the same way; cycles are an
   error), else a role name mapped to a header. Unknown names raise
   :class:`UnknownNameError` with the closest known names.

Turning a resolved tree into numbers is the job of :mod:`appraise.engine.design`.
"""

from __future__ import annotations

import ast
import datetime as _dt
import difflib
import keyword
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field

from .errors import ExpressionError, UnknownNameError
from .functions import FUNCTIONS, GRADE_NAME, FunctionInfo
from .limits import MAX_DERIVED, MAX_DERIVED_CHAIN, MAX_FEATURE_NODES
from .roles import RoleMap

MAX_LENGTH = 1000
"""Longest expression accepted, in characters."""

MAX_DEPTH = 100
"""Deepest nesting of operators and calls accepted."""


# --- the node tree -------------------------------------------------------------
@dataclass(frozen=True)
class Number:
    """A numeric literal."""

    value: int | float


@dataclass(frozen=True)
class Text:
    """A quoted string; only ever an argument where a function takes text."""

    value: str


@dataclass(frozen=True)
class Name:
    """A name as written (without backquotes), not yet resolved."""

    name: str


@dataclass(frozen=True)
class Column:
    """A resolved name: the frame header it reads, and the name as written."""

    header: str
    label: str


@dataclass(frozen=True)
class DerivedRef:
    """A resolved derived variable: its name and its own resolved expression."""

    name: str
    expr: Node


@dataclass(frozen=True)
class Unary:
    """``-operand`` (unary plus is dropped when parsing)."""

    op: str
    operand: Node


@dataclass(frozen=True)
class Binary:
    """``left op right`` with op one of ``+ - * / **``."""

    op: str
    left: Node
    right: Node


@dataclass(frozen=True)
class Call:
    """A call of a listed function; keywords keep their written order."""

    func: str
    args: tuple[Node, ...]
    keywords: tuple[tuple[str, Node], ...] = ()

    def keyword(self, name: str) -> Node | None:
        for k, v in self.keywords:
            if k == name:
                return v
        return None


Node = Number | Text | Name | Column | DerivedRef | Unary | Binary | Call

_BINOPS: dict[type, str] = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}

# What a disallowed piece of syntax is called in an error message.
_DESCRIBE: dict[type, str] = {
    ast.Attribute: "attribute access",
    ast.Subscript: "indexing",
    ast.Lambda: "a lambda",
    ast.Compare: "a comparison",
    ast.BoolOp: "and/or",
    ast.IfExp: "if/else",
    ast.List: "a list",
    ast.Tuple: "a tuple",
    ast.Set: "a set",
    ast.Dict: "a dictionary",
    ast.ListComp: "a comprehension",
    ast.SetComp: "a comprehension",
    ast.DictComp: "a comprehension",
    ast.GeneratorExp: "a generator",
    ast.JoinedStr: "an f-string",
    ast.NamedExpr: "an assignment (:=)",
    ast.Starred: "unpacking (*)",
    ast.Await: "await",
    ast.Yield: "yield",
    ast.YieldFrom: "yield",
    ast.Slice: "a slice",
}


# --- stage 1: backquotes ---------------------------------------------------------
@dataclass(frozen=True)
class Protected:
    """Expression text with backquoted names swapped for placeholder identifiers."""

    text: str
    names: Mapping[str, str] = field(default_factory=dict)  # placeholder -> name

    def restore(self, piece: str) -> str:
        """Put the backquoted names back into a piece of :attr:`text`."""
        for ph, name in self.names.items():
            piece = piece.replace(ph, f"`{name}`")
        return piece


def protect_backquotes(expr: str) -> Protected:
    """Replace each `` `name` `` outside quoted strings by a same-length identifier.

    Same length keeps the column offsets Python reports pointing at the original
    text. Raises :class:`ExpressionError` for an unclosed or empty backquote.
    """
    out: list[str] = []
    names: dict[str, str] = {}
    by_name: dict[str, str] = {}
    i, n = 0, len(expr)
    while i < n:
        c = expr[i]
        if c in "'\"":
            j = i + 1
            while j < n and expr[j] != c:
                j += 2 if expr[j] == "\\" else 1
            out.append(expr[i : j + 1])
            i = j + 1
        elif c == "`":
            j = expr.find("`", i + 1)
            if j < 0:
                raise ExpressionError(
                    f"in '{expr}': the backquote at position {i + 1} is never closed"
                )
            name = expr[i + 1 : j]
            if not name.strip():
                raise ExpressionError(f"in '{expr}': empty backquoted name at position {i + 1}")
            ph = by_name.get(name)
            if ph is None:
                ph = _placeholder(len(by_name), len(name) + 2, expr)
                by_name[name] = ph
                names[ph] = name
            out.append(ph)
            i = j + 1
        else:
            out.append(c)
            i += 1
    return Protected("".join(out), names)


def _placeholder(k: int, width: int, avoid: str) -> str:
    salt = 0
    while True:
        core = f"_{chr(ord('Q') + salt % 8)}{k}"
        ph = core + "_" * max(0, width - len(core))
        if ph not in avoid:
            return ph
        salt += 1
        if salt % 8 == 0:
            k += 1000  # practically never: the text already holds every candidate


# --- stage 2 and 3: parse and whitelist walk ---------------------------------------
def parse_expression(expr: str, *, allow_expanding: bool = True) -> Node:
    """Parse one expression into a tree of nodes, accepting only whitelisted syntax.

    Parameters
    ----------
    expr:
        The expression text.
    allow_expanding:
        Whether ``onehot(...)`` / ``poly(...)`` may form the whole expression (true
        for a feature, false for a derived variable, which must be one value).
        They are never allowed inside arithmetic or inside another call.

    Raises
    ------
    ExpressionError
        Syntax error, disallowed syntax, wrong argument count or keyword, bad
        literal. :class:`UnknownNameError` for a function that does not exist.
    """
    if not isinstance(expr, str) or not expr.strip():
        raise ExpressionError("an expression must be non-empty text")
    if len(expr) > MAX_LENGTH:
        raise ExpressionError(
            f"expression '{expr[:40]}...' is {len(expr)} characters long; the limit is {MAX_LENGTH}"
        )
    expr = expr.strip()
    prot = protect_backquotes(expr)
    try:
        tree = ast.parse(prot.text, mode="eval")
    except SyntaxError as exc:
        where = f" at position {exc.offset}" if exc.offset else ""
        raise ExpressionError(f"cannot read '{expr}': {exc.msg}{where}") from None
    except (RecursionError, MemoryError):
        raise ExpressionError(f"cannot read '{expr}': nested too deeply") from None
    except ValueError as exc:  # e.g. a NUL character
        raise ExpressionError(f"cannot read '{expr}': {exc}") from None
    if _depth(tree) > MAX_DEPTH:
        raise ExpressionError(f"'{expr}' is nested more than {MAX_DEPTH} levels deep")
    return _Walker(expr, prot, allow_expanding).convert(tree.body, top=True)


def _depth(tree: ast.AST) -> int:
    deepest, stack = 0, [(tree, 1)]
    while stack:
        node, d = stack.pop()
        deepest = max(deepest, d)
        stack.extend((child, d + 1) for child in ast.iter_child_nodes(node))
    return deepest


@dataclass(frozen=True)
class _Walker:
    expr: str
    prot: Protected
    allow_expanding: bool

    def piece(self, node: ast.AST) -> str:
        seg = ast.get_source_segment(self.prot.text, node)
        return self.prot.restore(seg) if seg else type(node).__name__

    def fail(self, node: ast.AST, what: str) -> ExpressionError:
        return ExpressionError(f"in '{self.expr}': {what}: {self.piece(node)}")

    def convert(self, node: ast.AST, *, top: bool = False, text_ok: bool = False) -> Node:
        if isinstance(node, ast.BinOp):
            op = _BINOPS.get(type(node.op))
            if isinstance(node.op, ast.BitXor):  # a ^ b: a power as spreadsheets write it
                left, right = (
                    f"({self.piece(n)})"
                    if isinstance(n, ast.BinOp | ast.UnaryOp)
                    else self.piece(n)
                    for n in (node.left, node.right)
                )
                fixed = f"{left} ** {right}"
                raise ExpressionError(
                    f"in '{self.expr}': use ** for powers: {fixed} (^ is not a power here)"
                )
            if op is None:
                sym = {ast.FloorDiv: "//", ast.Mod: "%", ast.MatMult: "@"}.get(type(node.op))
                name = f"operator {sym}" if sym else "a bitwise operator"
                raise self.fail(node, f"{name} is not allowed (use + - * / **)")
            # ``x * onehot(c)`` (either order) as a whole feature: x times each indicator
            left_top = top and op == "*" and _is_onehot_call(node.left)
            right_top = top and op == "*" and not left_top and _is_onehot_call(node.right)
            out = Binary(
                op, self.convert(node.left, top=left_top), self.convert(node.right, top=right_top)
            )
            factor = out.right if left_top else out.left if right_top else None
            if factor is not None and next(_names(factor), None) is None:
                raise self.fail(
                    node,
                    "onehot(...) expands to several columns; a product with it needs a factor "
                    "that involves a column (x * onehot(c))",
                )
            return out
        if isinstance(node, ast.UnaryOp):
            if isinstance(node.op, ast.USub):
                return Unary("-", self.convert(node.operand))
            if isinstance(node.op, ast.UAdd):
                return self.convert(node.operand)
            raise self.fail(node, "only unary minus and plus are allowed")
        if isinstance(node, ast.Constant):
            return self.constant(node, text_ok)
        if isinstance(node, ast.Name):
            return self.name(node)
        if isinstance(node, ast.Call):
            return self.call(node, top)
        what = _DESCRIBE.get(type(node), f"syntax of type {type(node).__name__}")
        raise self.fail(node, f"{what} is not allowed")

    def constant(self, node: ast.Constant, text_ok: bool) -> Node:
        v = node.value
        if isinstance(v, bool) or v is None or v is Ellipsis:
            raise self.fail(node, "only numbers, names and function calls are allowed")
        if isinstance(v, int | float):
            if not abs(v) < 1e300:  # also catches 1e999, which Python reads as inf
                raise self.fail(node, "number too large")
            return Number(v)
        if isinstance(v, str):
            if not text_ok:
                raise self.fail(node, "quoted text is only allowed as a date or a reference level")
            return Text(v)
        raise self.fail(node, "this kind of number is not allowed")

    def name(self, node: ast.Name) -> Name:
        written = self.prot.names.get(node.id)
        if written is not None:
            return Name(written)
        written = ast.get_source_segment(self.prot.text, node) or node.id
        if written.startswith("__"):
            raise self.fail(node, "names starting with '__' are not allowed")
        return Name(written)

    def call(self, node: ast.Call, top: bool) -> Call:
        if not isinstance(node.func, ast.Name) or node.func.id in self.prot.names:
            raise self.fail(node, "only the listed functions can be called")
        fname = node.func.id
        info = FUNCTIONS.get(fname)
        if info is None:
            close = difflib.get_close_matches(fname, list(FUNCTIONS), n=3, cutoff=0.5)
            hint = f"; did you mean {', '.join(close)}?" if close else ""
            raise UnknownNameError(
                f"in '{self.expr}': unknown function '{fname}'{hint} "
                f"(functions: {', '.join(sorted(FUNCTIONS))})"
            )
        if info.expanding and not (top and self.allow_expanding):
            where = (
                "a derived variable must be a single value"
                if top
                else "it must be a whole feature on its own, not part of arithmetic or a call "
                "(the one exception: a product x * onehot(c), the slope of x in each level)"
            )
            raise self.fail(node, f"{fname}(...) expands to several columns; {where}")
        for a in node.args:
            if isinstance(a, ast.Starred):
                raise self.fail(a, "unpacking (*) is not allowed")
        n = len(node.args)
        if n < info.min_args or (info.max_args is not None and n > info.max_args):
            raise self.fail(node, f"{info.signature} {_arity(info)}, got {n}")
        args = tuple(
            self.convert(a, text_ok=i in info.text_params or info.param_kind(i) == GRADE_NAME)
            for i, a in enumerate(node.args)
        )
        keywords = []
        for kw in node.keywords:
            if kw.arg is None:
                raise self.fail(kw, "unpacking (**) is not allowed")
            if kw.arg not in info.keywords:
                allowed = ", ".join(f"{k}=" for k in info.keywords) or "no keywords"
                raise self.fail(kw, f"{fname}() takes {allowed}; this keyword is not allowed")
            keywords.append((kw.arg, self.convert(kw.value, text_ok=kw.arg == "ref")))
        out = Call(fname, args, tuple(keywords))
        self.check_literals(node, info, out)
        return out

    def check_literals(self, node: ast.Call, info: FunctionInfo, call: Call) -> None:
        for i in info.text_params:
            arg = call.args[i]
            if isinstance(arg, Text) and _iso_date(arg.value) is None:
                raise self.fail(node.args[i], f"'{arg.value}' is not a date written YYYY-MM-DD")
        if info.name == "grade":
            names = call.args[1:]
            if not all(isinstance(a, Text) for a in names):
                raise self.fail(
                    node,
                    "grade(...) lists its levels as quoted text, lowest first: "
                    "grade(condition, 'poor', 'fair', 'good')",
                )
            folded = [a.value.strip().casefold() for a in names]  # type: ignore[union-attr]
            if len(set(folded)) != len(folded):
                raise self.fail(node, "grade(...) lists a level twice")
        if info.name == "onehot":
            ref = call.keyword("ref")
            if ref is not None and not isinstance(ref, Text | Number):
                raise self.fail(node, "ref= must be a quoted level, e.g. ref='Old Mill'")
            mc = call.keyword("min_count")
            if mc is not None and not (
                isinstance(mc, Number) and isinstance(mc.value, int) and mc.value >= 2
            ):
                raise self.fail(
                    node, "min_count= must be a whole number of sales, at least 2, e.g. min_count=5"
                )
        if info.name == "poly":
            deg = call.keyword("degree")
            if deg is None:
                raise self.fail(node, "poly(...) needs degree=m (a whole number >= 1)")
            if not (isinstance(deg, Number) and isinstance(deg.value, int) and deg.value >= 1):
                raise self.fail(node, "degree= must be a whole number >= 1")
            texts = [to_text(a) for a in call.args]
            dup = sorted({t for t in texts if texts.count(t) > 1})
            if dup:
                raise self.fail(node, f"poly lists {', '.join(dup)} more than once")
            if any(next(_names(a), None) is None for a in call.args):
                raise self.fail(node, "every poly(...) input must involve a column")


def _is_onehot_call(node: ast.AST) -> bool:
    return (
        isinstance(node, ast.Call)
        and isinstance(node.func, ast.Name)
        and (node.func.id == "onehot")
    )


def _arity(info: FunctionInfo) -> str:
    if info.max_args is None:
        return f"takes at least {info.min_args} argument(s)"
    if info.min_args == info.max_args:
        return f"takes {info.min_args} argument(s)"
    return f"takes {info.min_args} to {info.max_args} arguments"


def _iso_date(text: str) -> _dt.date | None:
    if len(text) != 10:
        return None
    try:
        return _dt.date.fromisoformat(text)
    except ValueError:
        return None


def iso_date(text: str) -> _dt.date:
    """The date a ``'YYYY-MM-DD'`` literal stands for (already checked when parsing)."""
    d = _iso_date(text)
    if d is None:
        raise ExpressionError(f"'{text}' is not a date written YYYY-MM-DD")
    return d


# --- splitting a feature into its kind -------------------------------------------
@dataclass(frozen=True)
class FeatureShape:
    """A parsed feature: plain (one column), onehot or poly.

    ``args`` holds the single expression of a plain feature, the category
    expression of ``onehot`` or the inputs of ``poly``.
    """

    kind: str
    args: tuple[Node, ...]
    ref: str | float | None = None
    degree: int | None = None
    min_count: int | None = None
    """``onehot(..., min_count=k)``: levels with fewer than k sales are pooled."""


def _onehot_product(node: Node) -> tuple[Call, Node] | None:
    """``(onehot call, factor)`` of a feature ``factor * onehot(c)`` (either order), else None."""
    if not (isinstance(node, Binary) and node.op == "*"):
        return None
    if isinstance(node.right, Call) and node.right.func == "onehot":
        return node.right, node.left
    if isinstance(node.left, Call) and node.left.func == "onehot":
        return node.left, node.right
    return None


def feature_shape(node: Node) -> FeatureShape:
    """Classify a parsed (or resolved) feature tree.

    Kinds: "plain", "onehot", "poly", and "onehot_product" for ``x * onehot(c)``, whose
    ``args`` are ``(c, x)``: the category, then the factor multiplied by each indicator.
    """
    if isinstance(node, Call) and node.func == "onehot":
        ref = node.keyword("ref")
        return FeatureShape(
            "onehot",
            node.args,
            ref=None if ref is None else _literal(ref),
            min_count=_min_count(node),
        )
    product = _onehot_product(node)
    if product is not None:
        call, factor = product
        ref = call.keyword("ref")
        return FeatureShape(
            "onehot_product",
            (*call.args, factor),
            ref=None if ref is None else _literal(ref),
            min_count=_min_count(call),
        )
    if isinstance(node, Call) and node.func == "poly":
        deg = node.keyword("degree")
        assert isinstance(deg, Number)
        return FeatureShape("poly", node.args, degree=int(deg.value))
    return FeatureShape("plain", (node,))


def _min_count(call: Call) -> int | None:
    mc = call.keyword("min_count")
    return None if mc is None else int(mc.value)  # type: ignore[union-attr]


def _literal(node: Node) -> str | float:
    if isinstance(node, Text):
        return node.value
    assert isinstance(node, Number)
    return float(node.value)


# --- stage 4: names -----------------------------------------------------------------
@dataclass(frozen=True)
class NameScope:
    """Where names are looked up: column headers, then derived variables, then roles.

    Parameters
    ----------
    columns:
        Headers of the sales frame.
    derived:
        Named derived variables, name -> expression text. A derived expression may
        use columns, roles and other derived names; a cycle is an error.
    roles:
        Role map: a role name (``living_area``) stands for the column it is mapped to.
    """

    columns: tuple[str, ...]
    derived: Mapping[str, str] = field(default_factory=dict)
    roles: RoleMap | None = None
    _resolved: dict[str, DerivedRef] = field(
        default_factory=dict, init=False, repr=False, compare=False
    )
    """Each derived variable resolved once and shared by every tree that uses it."""

    @classmethod
    def of(
        cls,
        columns: Sequence[str],
        derived: Mapping[str, str] | None = None,
        roles: RoleMap | None = None,
    ) -> NameScope:
        derived = dict(derived or {})
        if len(derived) > MAX_DERIVED:
            raise ExpressionError(
                f"{len(derived):,} derived variables; the limit is {MAX_DERIVED:,}"
            )
        return cls(tuple(str(c) for c in columns), derived, roles)

    def resolve(self, node: Node, expr: str) -> Node:
        """Replace every :class:`Name` by a :class:`Column` or :class:`DerivedRef`.

        Derived variables form a graph, not a tree: each is parsed and resolved once
        (children before parents, without recursion across variables) and the same
        :class:`DerivedRef` object is shared wherever it is used, so ``b2 = b1 + b1``,
        ``b1 = b0 + b0`` costs one node per variable, not ``2**k``. A chain deeper than
        :data:`~appraise.engine.limits.MAX_DERIVED_CHAIN` and a feature of more than
        :data:`~appraise.engine.limits.MAX_FEATURE_NODES` distinct nodes are refused.
        """
        out = self._resolve(node, expr)
        size = sum(1 for _ in walk(out))
        if size > MAX_FEATURE_NODES:
            raise ExpressionError(
                f"'{expr}' expands to {size:,} nodes with its derived variables; "
                f"the limit is {MAX_FEATURE_NODES:,}"
            )
        return out

    def _resolve(self, node: Node, expr: str) -> Node:
        if isinstance(node, Name):
            return self._lookup(node.name, expr)
        if isinstance(node, Unary):
            return Unary(node.op, self._resolve(node.operand, expr))
        if isinstance(node, Binary):
            return Binary(node.op, self._resolve(node.left, expr), self._resolve(node.right, expr))
        if isinstance(node, Call):
            return Call(
                node.func,
                tuple(self._resolve(a, expr) for a in node.args),
                tuple((k, self._resolve(v, expr)) for k, v in node.keywords),
            )
        return node

    def _lookup(self, name: str, expr: str) -> Node:
        if name in self.columns:
            return Column(name, name)
        if name in self.derived:
            done = self._resolved.get(name)
            if done is not None:
                return done
            try:
                return self._resolve_derived(name)
            except ExpressionError as exc:
                raise type(exc)(
                    f"derived variable '{name}' = '{self.derived[name]}': {exc.message}"
                ) from None
        header = self.roles.column(name) if self.roles is not None else None
        if header is not None:
            if header in self.columns:
                return Column(header, name)
            raise UnknownNameError(
                f"in '{expr}': '{name}' is the role of column '{header}', which is not in the sales"
            )
        raise UnknownNameError(f"in '{expr}': unknown name '{name}'{self.suggest(name)}")

    def _resolve_derived(self, top: str) -> DerivedRef:
        """Resolve ``top`` and every derived variable it needs, dependencies first.

        An explicit depth-first stack finds the order (and any cycle) without Python
        recursion across variables; each variable is then resolved when all it uses
        already is, so resolving it recurses only through its own expression.
        """
        parsed: dict[str, Node] = {}

        def uses(name: str) -> list[str]:
            tree = parsed.get(name)
            if tree is None:
                tree = parse_expression(self.derived[name], allow_expanding=False)
                parsed[name] = tree
            wanted = (n.name for n in walk(tree) if isinstance(n, Name))
            return [
                n
                for n in dict.fromkeys(wanted)
                if n not in self.columns and n in self.derived and n not in self._resolved
            ]

        stack: list[tuple[str, list[str]]] = [(top, uses(top))]
        on_stack = {top}
        while stack:
            name, pending = stack[-1]
            if pending:
                nxt = pending.pop(0)
                if nxt in self._resolved:
                    continue
                if nxt in on_stack:
                    chain = [n for n, _ in stack]
                    cycle = " -> ".join((*chain[chain.index(nxt) :], nxt))
                    raise ExpressionError(
                        f"in '{self.derived[top]}': derived variables refer to each other "
                        f"in a cycle: {cycle}"
                    )
                if len(stack) >= MAX_DERIVED_CHAIN:
                    chain = " -> ".join([*(n for n, _ in stack[:3]), "...", nxt])
                    raise ExpressionError(
                        f"derived variables refer to each other more than "
                        f"{MAX_DERIVED_CHAIN} deep ({chain}); the limit is {MAX_DERIVED_CHAIN}"
                    )
                stack.append((nxt, uses(nxt)))
                on_stack.add(nxt)
                continue
            stack.pop()
            on_stack.discard(name)
            text = self.derived[name]
            try:
                ref = DerivedRef(name, self._resolve(parsed[name], text))
            except ExpressionError as exc:
                if name == top:
                    raise
                raise type(exc)(f"derived variable '{name}' = '{text}': {exc.message}") from None
            self._resolved[name] = ref
        return self._resolved[top]

    def known_names(self) -> list[str]:
        """Every name an expression may use: headers, derived names, mapped role names."""
        roles = []
        if self.roles is not None:
            roles = [r for r, c in self.roles.columns.items() if c in self.columns]
        return list(dict.fromkeys([*self.columns, *self.derived, *roles]))

    def suggest(self, name: str) -> str:
        known = self.known_names()
        folded = [k for k in known if k.casefold() == name.casefold()]
        close = difflib.get_close_matches(name, known, n=3, cutoff=0.6)
        picks = list(dict.fromkeys([*folded, *close]))
        if not picks:
            return ""
        return "; did you mean " + ", ".join(quote_name(p) for p in picks) + "?"


# --- text, walking, inputs ----------------------------------------------------------
def quote_name(name: str) -> str:
    """A name as it must be written in an expression: backquoted unless a plain identifier."""
    plain = name.isidentifier() and name.isascii() and not name.startswith("__")
    return name if plain and not keyword.iskeyword(name) else f"`{name}`"


_PREC = {"+": 1, "-": 1, "*": 2, "/": 2, "neg": 3, "**": 4}


def _prec(node: Node) -> int:
    if isinstance(node, Binary):
        return _PREC[node.op]
    if isinstance(node, Unary) or (isinstance(node, Number) and node.value < 0):
        return _PREC["neg"]
    return 5


def to_text(node: Node) -> str:
    """The normalised text of a tree: single spaces around operators, minimal parentheses.

    Names keep the spelling the user wrote (a role name stays a role name) and are
    backquoted when they are not plain identifiers. Parsing the result gives the
    same tree back.
    """
    if isinstance(node, Number):
        return repr(node.value)
    if isinstance(node, Text):
        return "'" + node.value.replace("\\", "\\\\").replace("'", "\\'") + "'"
    if isinstance(node, Name):
        return quote_name(node.name)
    if isinstance(node, Column):
        return quote_name(node.label)
    if isinstance(node, DerivedRef):
        return quote_name(node.name)
    if isinstance(node, Unary):
        inner = to_text(node.operand)
        return f"-({inner})" if _prec(node.operand) < _PREC["neg"] else f"-{inner}"
    if isinstance(node, Binary):
        p = _PREC[node.op]
        left, right = to_text(node.left), to_text(node.right)
        if node.op == "**":  # right-associative; binds tighter than a unary minus on its left
            if _prec(node.left) <= p:
                left = f"({left})"
            if _prec(node.right) < p and not isinstance(node.right, Unary):
                right = f"({right})"
        else:
            if _prec(node.left) < p:
                left = f"({left})"
            if _prec(node.right) <= p:
                right = f"({right})"
        return f"{left} {node.op} {right}"
    if isinstance(node, Call):
        parts = [to_text(a) for a in node.args]
        parts += [f"{k}={to_text(v)}" for k, v in node.keywords]
        return f"{node.func}({', '.join(parts)})"
    raise TypeError(f"not an expression node: {node!r}")


def is_atom(node: Node) -> bool:
    """True when the node's text needs no parentheses as a factor (name, call, number >= 0)."""
    return _prec(node) == 5


def walk(node: Node) -> Iterator[Node]:
    """Every node of a tree, parents first, descending into derived variables.

    A derived variable used several times is descended into once (the resolved tree
    shares it), so the walk is linear in the distinct nodes.
    """
    stack = [node]
    seen: set[int] = set()
    while stack:
        n = stack.pop()
        if isinstance(n, DerivedRef):
            if id(n) in seen:
                continue
            seen.add(id(n))
        yield n
        if isinstance(n, Unary):
            stack.append(n.operand)
        elif isinstance(n, Binary):
            stack.extend((n.right, n.left))
        elif isinstance(n, Call):
            stack.extend(reversed([*n.args, *(v for _, v in n.keywords)]))
        elif isinstance(n, DerivedRef):
            stack.append(n.expr)


def _names(node: Node) -> Iterator[Node]:
    return (n for n in walk(node) if isinstance(n, Name | Column | DerivedRef))


def derived_order(node: Node) -> list[DerivedRef]:
    """The derived variables a resolved tree uses, each once, every one after all it uses.

    Evaluating them in this order (see :mod:`appraise.engine.design`) computes each
    once and never recurses from one variable into another.
    """
    order: list[DerivedRef] = []
    done: set[int] = set()
    stack: list[tuple[DerivedRef, bool]] = [(n, False) for n in _direct_refs(node)]
    while stack:
        ref, expanded = stack.pop()
        if id(ref) in done:
            continue
        if expanded:
            done.add(id(ref))
            order.append(ref)
            continue
        stack.append((ref, True))
        stack.extend((n, False) for n in _direct_refs(ref.expr) if id(n) not in done)
    return order


def _direct_refs(node: Node) -> list[DerivedRef]:
    """The derived variables a tree names itself, without looking inside them."""
    out: list[DerivedRef] = []
    stack = [node]
    while stack:
        n = stack.pop()
        if isinstance(n, DerivedRef):
            out.append(n)
        elif isinstance(n, Unary):
            stack.append(n.operand)
        elif isinstance(n, Binary):
            stack.extend((n.right, n.left))
        elif isinstance(n, Call):
            stack.extend([*n.args, *(v for _, v in n.keywords)])
    return out


def columns_read(node: Node) -> tuple[str, ...]:
    """Frame headers a resolved tree reads, in first-use order."""
    return tuple(dict.fromkeys(n.header for n in walk(node) if isinstance(n, Column)))


def nonfinite_hint(node: Node) -> str | None:
    """Why a value of this tree might come out non-finite, from the operations it uses."""
    hints: list[str] = []
    for n in walk(node):
        if isinstance(n, Call) and FUNCTIONS[n.func].nonfinite_hint:
            hints.append(FUNCTIONS[n.func].nonfinite_hint)
        elif isinstance(n, Binary) and n.op == "/":
            hints.append("division by zero?")
        elif isinstance(n, Binary) and n.op == "**":
            hints.append("power of a negative value, or overflow?")
    return "; ".join(dict.fromkeys(hints)) or None


# --- for the editor -------------------------------------------------------------------
def check_expression(
    expr: str,
    columns: Sequence[str],
    *,
    derived: Mapping[str, str] | None = None,
    roles: RoleMap | None = None,
) -> None:
    """Check a feature expression against the column names alone, without data.

    Parses, walks the whitelist and resolves every name (and every derived variable
    it uses). Meant for validate-as-you-type in the desktop editor. Errors that need
    the data (unknown reference level, dates in a number column...) surface only in
    :func:`appraise.engine.design.learn_design`.

    Raises
    ------
    ExpressionError, UnknownNameError
    """
    try:
        NameScope.of(columns, derived, roles).resolve(parse_expression(expr), expr)
    except ExpressionError as exc:
        fixed = backquote_hint(expr, columns)
        if fixed is None:
            raise
        raise ExpressionError(f"a header with spaces or symbols needs backquotes: {fixed}") from exc


def backquote_hint(expr: str, columns: Sequence[str]) -> str | None:
    """``expr`` with each header that needs backquotes put in them, when that is what
    keeps it from being read; None when no such header is written bare in it.

    ``log(Living Area (sq ft))`` with a column ``Living Area (sq ft)`` gives
    ``log(`Living Area (sq ft)`)``. Longer headers are tried first, so a header that is
    part of another is never quoted inside it.
    """
    if not isinstance(expr, str) or "`" in expr:
        return None
    needy = sorted((c for c in columns if quote_name(c) != c), key=len, reverse=True)
    text, marks = expr, {}
    for k, header in enumerate(needy):
        if header in text:
            mark = f"\x00{k}\x00"
            marks[mark] = quote_name(header)
            text = text.replace(header, mark)
    if not marks:
        return None
    for mark, quoted in marks.items():
        text = text.replace(mark, quoted)
    try:
        parse_expression(text)
    except ExpressionError:
        return None
    return text


def expression_inputs(
    expr: str,
    columns: Sequence[str],
    *,
    derived: Mapping[str, str] | None = None,
    roles: RoleMap | None = None,
) -> tuple[str, ...]:
    """The frame headers a feature expression reads, derived variables followed through,
    in first-use order. Raises like :func:`check_expression`."""
    tree = NameScope.of(columns, derived, roles).resolve(parse_expression(expr), expr)
    return columns_read(tree)
