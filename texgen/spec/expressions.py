"""Safe parsing of the mathematical expressions written in spacetime files.

User text is never evaluated as Python: it is parsed with :mod:`ast` and the tree
is walked against a whitelist, building sympy objects from declared names only.
Pathological input (exponent towers, huge integers, deep nesting, very long text)
is refused before sympy sees it.
"""
from __future__ import annotations

import ast
import difflib
import io
import keyword
import sys
import tokenize
import warnings
from dataclasses import dataclass, field
from typing import Callable, Mapping

import sympy as sp
from sympy.printing.str import StrPrinter

from ..errors import ExpressionError

MAX_LENGTH = 20_000
"""Longest expression text accepted, in characters."""
MAX_NODES = 20_000
"""Most syntax-tree nodes in one expression."""
MAX_DEPTH = 60
"""Deepest nesting of operations accepted."""
MAX_INT_DIGITS = 60
"""Longest integer literal accepted."""
MAX_EXPONENT = 64
"""Largest absolute numeric exponent accepted."""
MAX_NUMBER_BITS = 20_000
"""Largest exact number a numeric power may produce (about 6000 digits)."""

MATH_FUNCTIONS: dict[str, Callable[..., sp.Expr]] = {
    "sin": sp.sin, "cos": sp.cos, "tan": sp.tan, "sec": sp.sec, "csc": sp.csc, "cot": sp.cot,
    "sinh": sp.sinh, "cosh": sp.cosh, "tanh": sp.tanh,
    "exp": sp.exp, "log": sp.log, "sqrt": sp.sqrt, "Abs": sp.Abs,
}
"""The fixed list of mathematical functions an expression may call."""

CONSTANTS: dict[str, sp.Expr] = {"pi": sp.pi}
"""Named constants every expression may use."""

RESERVED = frozenset(MATH_FUNCTIONS) | frozenset(CONSTANTS)


@dataclass(frozen=True)
class Namespace:
    """The names an expression may use: symbols, free functions, definitions."""

    symbols: Mapping[str, sp.Symbol] = field(default_factory=dict)
    """Coordinates, parameters, definition symbols and extra symbols (differentials)."""
    functions: Mapping[str, tuple[object, tuple[sp.Symbol, ...]]] = field(default_factory=dict)
    """Free function name -> (sympy function class, declared argument symbols)."""

    def known_names(self) -> list[str]:
        return sorted(set(self.symbols) | set(self.functions) | RESERVED)


def _error(message: str, text: str, col: int | None = None, hint: str | None = None) -> ExpressionError:
    err = ExpressionError(message, hint=hint)
    err.fragment = text  # type: ignore[attr-defined]
    err.column = col  # type: ignore[attr-defined]
    return err


def _suggest(name: str, names: list[str]) -> str | None:
    close = difflib.get_close_matches(name, names, n=1, cutoff=0.6)
    return f"did you mean '{close[0]}'?" if close else None


def _prepare(text: str, *, juxtapose: bool = False,
             callables: frozenset[str] = frozenset()) -> tuple[str, list[int]]:
    """Tokenise, turn ``^`` into ``**`` and, for line elements, make juxtaposition a product.

    Tokenising (rather than replacing characters) keeps string literals intact
    so that they are refused, not silently altered; the original spacing is kept
    so that fragments quoted in errors look like what the user wrote. Returns the
    prepared text and, for each of its characters, the column it came from.
    """
    if len(text) > MAX_LENGTH:
        raise _error(f"Expression is too long ({len(text)} characters; at most {MAX_LENGTH})",
                     text[:40] + "...")
    if "\x00" in text:
        raise _error("Expression contains a NUL character", text)
    line = " ".join(text.splitlines())
    try:
        toks = list(tokenize.generate_tokens(io.StringIO(line).readline))
    except (tokenize.TokenError, IndentationError, SyntaxError) as exc:
        problem = _bracket_problem(line)
        if problem is not None:
            at, what = problem
            raise _error(f"{what}: '{line[at:at + 12].strip()}'", text, at, "check the parentheses") from None
        raise _error(f"Expression is not well formed: {exc.args[0]}", text) from None
    out: list[str] = []
    origin: list[int] = []  # original column of every character of the prepared text
    pos = 0
    prev = None
    for tok in toks:
        if tok.type == tokenize.COMMENT:
            raise _error("Comments ('#') are not allowed inside an expression", text, tok.start[1])
        if tok.type == tokenize.NAME and tok.string.startswith("_"):
            # Checked here, before anything else, so that __import__('os') is named as such.
            raise _error(f"Names starting with '_' are not allowed: '{tok.string}'", text, tok.start[1],
                         "only declared names and the listed functions are accepted")
        if tok.type == tokenize.STRING:
            raise _error(f"Quoted text (strings, f-strings) is not allowed in an expression: '{tok.string[:40]}'",
                         text, tok.start[1], "write the expression itself, without quotes")
        if tok.type in (tokenize.NEWLINE, tokenize.NL, tokenize.ENDMARKER, tokenize.INDENT, tokenize.DEDENT):
            continue
        if tok.type == tokenize.ERRORTOKEN and not tok.string.strip():
            continue
        start, end = tok.start[1], tok.end[1]
        gap = line[pos:start]
        string = "**" if tok.type == tokenize.OP and tok.string == "^" else tok.string
        if juxtapose and prev is not None:
            # Python keywords (lambda, for, in, if ...) are never factors: leaving them
            # alone lets the whitelist name the construct instead of a syntax error.
            left_ends = (prev.type == tokenize.NUMBER or prev.string in (")", "]", "}")
                         or (prev.type == tokenize.NAME and prev.string not in callables
                             and not keyword.iskeyword(prev.string)))
            right_starts = ((tok.type == tokenize.NAME and not keyword.iskeyword(tok.string))
                            or tok.type == tokenize.NUMBER or tok.string == "(")
            if left_ends and right_starts:
                gap = gap + "*"
        piece = gap + string
        out.append(piece)
        origin.extend([pos + k if k < len(line[pos:start]) else start for k in range(len(gap))])
        origin.extend([start + min(k, end - start - 1) for k in range(len(string))])
        pos = end
        prev = tok
    return "".join(out), origin


def _bracket_problem(line: str) -> tuple[int, str] | None:
    """Column and description of the first unbalanced bracket, if any."""
    stack: list[int] = []
    for i, ch in enumerate(line):
        if ch in "([{":
            stack.append(i)
        elif ch in ")]}":
            if not stack:
                return i, "A closing bracket has no opening bracket"
            stack.pop()
    return (stack[0], "A bracket is never closed") if stack else None


class _Builder:
    """Walks a whitelisted syntax tree and builds the sympy expression."""

    def __init__(self, text: str, prepared: str, origin: list[int], ns: Namespace):
        self.text = text
        self.source = prepared
        self.origin = origin
        self.ns = ns
        self.count = 0

    def fail(self, node: ast.AST | None, message: str, hint: str | None = None) -> ExpressionError:
        frag, col = self.text, None
        if node is not None and hasattr(node, "col_offset"):
            line = " ".join(self.text.splitlines())
            start = self.origin[node.col_offset] if node.col_offset < len(self.origin) else 0
            end_off = (node.end_col_offset or len(self.source)) - 1
            end = self.origin[end_off] + 1 if 0 <= end_off < len(self.origin) else len(line)
            frag = line[start:end].strip() or self.text
            col = start
        return _error(f"{message}: '{frag}'", self.text, col, hint)

    def build(self, node: ast.AST, depth: int = 0) -> sp.Expr:
        self.count += 1
        if self.count > MAX_NODES:
            raise self.fail(None, f"Expression has more than {MAX_NODES} parts")
        if depth > MAX_DEPTH:
            raise self.fail(node, f"Expression is nested more than {MAX_DEPTH} levels deep")
        method = getattr(self, "_" + type(node).__name__, None)
        if method is None:
            raise self.fail(node, f"Not allowed in an expression ({_describe(node)})",
                            "only numbers, declared names, + - * / ^ and the listed functions are accepted")
        return method(node, depth)

    def _Constant(self, node: ast.Constant, depth: int) -> sp.Expr:
        v = node.value
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            raise self.fail(node, "Only numbers are allowed as literals")
        # Slice the one-line source directly: get_source_segment re-splits the whole
        # text on every call, which made long expressions quadratic in their length.
        literal = self.source[node.col_offset:node.end_col_offset] or repr(v)
        digits = sum(ch.isdigit() for ch in literal)
        if digits > MAX_INT_DIGITS:
            raise self.fail(node, f"Number literal has more than {MAX_INT_DIGITS} digits")
        if isinstance(v, int):
            return sp.Integer(v)
        clean = literal.replace("_", "")
        if "e" in clean.lower():
            mant, exp = clean.lower().split("e")
            if abs(int(exp)) > 300:
                raise self.fail(node, "Number literal exponent is out of range")
        return sp.Rational(clean)

    def _Name(self, node: ast.Name, depth: int) -> sp.Expr:
        name = node.id
        if name.startswith("__") or name.startswith("_"):
            raise self.fail(node, "Names starting with '_' are not allowed")
        if name in self.ns.symbols:
            return self.ns.symbols[name]
        if name in CONSTANTS:
            return CONSTANTS[name]
        if name in self.ns.functions:
            fn, args = self.ns.functions[name]
            return fn(*args)
        if name in MATH_FUNCTIONS:
            raise self.fail(node, f"'{name}' is a function and needs an argument", f"write {name}(...)")
        raise self.fail(node, f"Unknown name '{name}'", _suggest(name, self.ns.known_names())
                        or "declare it under coordinates, parameters, functions or definitions")

    def _UnaryOp(self, node: ast.UnaryOp, depth: int) -> sp.Expr:
        operand = self.build(node.operand, depth + 1)
        if isinstance(node.op, ast.USub):
            return -operand
        if isinstance(node.op, ast.UAdd):
            return operand
        raise self.fail(node, "Operator not allowed", "use + - * / ^ only")

    def _BinOp(self, node: ast.BinOp, depth: int) -> sp.Expr:
        if isinstance(node.op, ast.Pow):
            return self._power(node, depth)
        family = _FAMILY.get(type(node.op))
        if family is None:
            raise self.fail(node, f"Operator not allowed ({type(node.op).__name__})", "use + - * / ^ only")
        parts = self._chain(node, family, depth)
        return sp.Add(*parts) if family == "add" else sp.Mul(*parts)

    def _chain(self, node: ast.BinOp, family: str, depth: int) -> list[sp.Expr]:
        """The terms of a sum or the factors of a product, not yet combined."""
        # Walk the left spine of a chain such as a + b - c + ... iteratively: long sums
        # are legitimate and must not count as deep nesting or recurse in Python.
        chain: list[tuple[ast.operator, ast.AST]] = []
        cur: ast.AST = node
        while isinstance(cur, ast.BinOp) and _FAMILY.get(type(cur.op)) == family:
            chain.append((cur.op, cur.right))
            cur = cur.left
            self.count += 1
        if family == "mul" and isinstance(cur, ast.UnaryOp) and isinstance(cur.op, ast.USub):
            # Python reads -a*b as (-a)*b, and sympy then distributes -(r + theta)
            # into -r - theta; on paper -a*b is -(a*b), which keeps the grouping.
            parts = [sp.S.NegativeOne, self.build(cur.operand, depth + 2)]
        else:
            parts = [self.build(cur, depth + 1)]
        for op, right_node in reversed(chain):
            if isinstance(op, ast.Div):
                # a/(2*(t + r)) is a * 1/2 * 1/(t + r): dividing by each factor keeps the
                # grouping that 2*(t + r) on its own would lose to distribution.
                if (isinstance(right_node, ast.BinOp) and _FAMILY.get(type(right_node.op)) == "mul"):
                    factors = self._chain(right_node, "mul", depth + 1)
                else:
                    factors = [self.build(right_node, depth + 1)]
                if any(f == 0 for f in factors):
                    raise self.fail(node, "Division by zero")
                parts.extend(1 / f for f in factors)
                continue
            right = self.build(right_node, depth + 1)
            parts.append(-right if isinstance(op, ast.Sub) else right)
        return parts

    def _power(self, node: ast.BinOp, depth: int) -> sp.Expr:
        if any(isinstance(n, ast.BinOp) and isinstance(n.op, ast.Pow) for n in ast.walk(node.right)):
            raise self.fail(node, "Exponent towers such as a^b^c are not accepted",
                            "introduce a definition for the inner power")
        base = self.build(node.left, depth + 1)
        exponent = self.build(node.right, depth + 1)
        if exponent.is_Number:
            if abs(exponent) > MAX_EXPONENT:
                raise self.fail(node, f"Exponent larger than {MAX_EXPONENT} in absolute value")
            if base == 0 and exponent.is_negative:
                raise self.fail(node, "Division by zero")
            if base.is_Rational and exponent.is_Rational:
                # Nested powers such as ((2^64)^64)^64 each stay within MAX_EXPONENT but
                # their value doubles in length at every level: refuse before computing it.
                size = max(abs(base.p).bit_length(), abs(base.q).bit_length())
                if size * abs(exponent) > MAX_NUMBER_BITS:
                    raise self.fail(node, f"Numeric power is too large (more than {MAX_NUMBER_BITS} bits)",
                                    "keep numbers small or use a parameter")
        elif base.is_Number and base != 0 and abs(base) != 1 and not exponent.free_symbols:
            raise self.fail(node, "Numeric powers with non-numeric exponents are not accepted")
        return base ** exponent

    def _Call(self, node: ast.Call, depth: int) -> sp.Expr:
        if not isinstance(node.func, ast.Name):
            raise self.fail(node, "Only declared functions and the listed mathematical functions can be called")
        name = node.func.id
        if node.keywords or any(isinstance(a, ast.Starred) for a in node.args):
            raise self.fail(node, "Keyword or starred arguments are not allowed")
        if name == "diff":
            return self._derivative(node, depth)
        if name in MATH_FUNCTIONS:
            if len(node.args) != 1:
                raise self.fail(node, f"'{name}' takes exactly one argument")
            return MATH_FUNCTIONS[name](self.build(node.args[0], depth + 1))
        if name in self.ns.functions:
            fn, declared = self.ns.functions[name]
            args = tuple(self.build(a, depth + 1) for a in node.args)
            if args != tuple(declared):
                want = ", ".join(str(d) for d in declared)
                raise self.fail(node, f"Function '{name}' is declared as {name}({want})",
                                f"write {name}({want}) or declare other arguments")
            return fn(*args)
        if name in self.ns.symbols:
            raise self.fail(node, f"'{name}' is not a function", f"write {name}*(...) for a product")
        raise self.fail(node, f"Unknown function '{name}'",
                        _suggest(name, sorted(set(MATH_FUNCTIONS) | set(self.ns.functions)))
                        or "allowed: " + ", ".join(sorted(MATH_FUNCTIONS)) + " and declared functions")


    def _derivative(self, node: ast.Call, depth: int) -> sp.Expr:
        """``diff(f(r), r)``, ``diff(f(r), r, 2)``, ``diff(h(r, theta), r, theta)``: of declared functions only."""
        if len(node.args) < 2 or not (isinstance(node.args[0], ast.Call) and isinstance(node.args[0].func, ast.Name)
                                      and node.args[0].func.id in self.ns.functions):
            raise self.fail(node, "diff(...) takes a declared function and the coordinates to differentiate by",
                            "write e.g. diff(f(r), r) or diff(f(r), r, 2)")
        target = self.build(node.args[0], depth + 1)
        variables: list = []
        for arg in node.args[1:]:
            if isinstance(arg, ast.Constant) and isinstance(arg.value, int) and not isinstance(arg.value, bool):
                if not variables or not 1 <= arg.value <= 8:
                    raise self.fail(arg, "A derivative order must follow a coordinate and lie between 1 and 8")
                variables[-1] = (variables[-1][0], variables[-1][1] + arg.value - 1)
                continue
            sym = self.build(arg, depth + 1)
            if sym not in target.args:
                raise self.fail(arg, "Can only differentiate by an argument of the function")
            variables.append((sym, 1))
        return sp.Derivative(target, *variables)


_FAMILY = {ast.Add: "add", ast.Sub: "add", ast.Mult: "mul", ast.Div: "mul"}


def _describe(node: ast.AST) -> str:
    names = {
        "Attribute": "attribute access", "Lambda": "lambda", "ListComp": "comprehension",
        "SetComp": "comprehension", "DictComp": "comprehension", "GeneratorExp": "comprehension",
        "JoinedStr": "f-string", "NamedExpr": "assignment expression", "Subscript": "subscript",
        "Compare": "comparison", "BoolOp": "boolean operator", "IfExp": "conditional expression",
        "Tuple": "tuple", "List": "list", "Dict": "dict", "Set": "set", "Await": "await",
        "Starred": "starred expression", "Slice": "slice", "Yield": "yield",
    }
    return names.get(type(node).__name__, type(node).__name__)


def _parse_tree(text: str, prepared: str, origin: list[int]) -> ast.Expression:
    if not prepared:
        raise _error("Expression is empty", text)
    limit = sys.getrecursionlimit()
    try:
        # Python builds the tree recursively; a long but flat sum (thousands of
        # terms, within MAX_LENGTH) needs more than the default limit.
        sys.setrecursionlimit(max(limit, 2 * MAX_LENGTH))
        with warnings.catch_warnings():
            # Python warns about text such as "1if" or "\d" while parsing; the tree
            # is judged by the whitelist below, and a warning must not reach the user.
            warnings.simplefilter("ignore")
            tree = ast.parse(prepared, mode="eval")
    except SyntaxError as exc:
        msg = exc.msg or "invalid syntax"
        frag = text
        hint = None
        col = None
        if exc.offset:
            # Quote and point at what the user wrote ('^', not the '**' it became).
            at = min(max(0, exc.offset - 1), len(origin) - 1)
            col = origin[at] if origin else at
            line = " ".join(text.splitlines())
            frag = line[col: col + 12].strip() or text
        if "invalid decimal literal" in msg or "invalid syntax" in msg:
            hint = "multiplication must be written with '*', e.g. 2*M"
        raise _error(f"Expression is not well formed ({msg}) near '{frag}'", text,
                     col, hint) from None
    except (RecursionError, MemoryError, ValueError):
        raise _error("Expression is nested too deeply or is too large", text[:40]) from None
    finally:
        sys.setrecursionlimit(limit)
    return tree


def parse_expression(text: str | int | float, ns: Namespace, *, juxtapose: bool = False) -> sp.Expr:
    """Parse ``text`` into a sympy expression using only the names in ``ns``.

    Parameters
    ----------
    text:
        The expression (``"1 - 2*M/r"``); YAML numbers are accepted too.
    ns:
        Declared names.
    juxtapose:
        Line-element mode: factors written side by side (``r^2 dtheta^2``,
        ``2 dt dphi``) are multiplied.

    Raises :class:`~texgen.errors.ExpressionError` with the offending fragment.
    """
    if isinstance(text, bool):
        raise _error("Expected an expression but received a boolean", str(text))
    if isinstance(text, (int, float)):
        text = repr(text)
    if not isinstance(text, str):
        raise _error(f"Expected an expression but received {type(text).__name__}", str(text)[:40])
    callables = frozenset(MATH_FUNCTIONS) | frozenset(ns.functions) | {"diff"}
    prepared, origin = _prepare(text, juxtapose=juxtapose, callables=callables)
    tree = _parse_tree(text, prepared, origin)
    builder = _Builder(text, prepared, origin, ns)
    try:
        result = builder.build(tree.body)
    except RecursionError:
        raise _error("Expression is nested too deeply", text[:40]) from None
    if result.has(sp.zoo, sp.nan, sp.oo, -sp.oo):
        raise _error(f"Expression is undefined (division by zero): '{text}'", text)
    return result


def parse_relation(text: str, ns: Namespace) -> list[tuple[sp.Expr, str, sp.Expr]]:
    """Parse a chained comparison such as ``0 <= a < M`` into (left, op, right) links."""
    if not isinstance(text, str):
        raise _error(f"Expected a range such as '0 < r' but received {text!r}", str(text))
    prepared, origin = _prepare(text)
    tree = _parse_tree(text, prepared, origin)
    node = tree.body
    if not isinstance(node, ast.Compare):
        raise _error(f"Expected a range such as '0 < theta < pi' but received: '{text}'", text)
    builder = _Builder(text, prepared, origin, ns)
    ops = {ast.Lt: "<", ast.LtE: "<=", ast.Gt: ">", ast.GtE: ">="}
    parts = [builder.build(node.left)] + [builder.build(c) for c in node.comparators]
    links = []
    for i, op in enumerate(node.ops):
        if type(op) not in ops:
            raise _error(f"Only <, <=, > and >= are allowed in a range: '{text}'", text)
        links.append((parts[i], ops[type(op)], parts[i + 1]))
    return links


class _TextPrinter(StrPrinter):
    """sympy's string printer, adjusted so that the safe parser reads every output back."""

    def _print_Derivative(self, expr: sp.Derivative) -> str:
        parts = [self._print(expr.expr)]
        for var, count in expr.variable_count:
            parts.append(self._print(var))
            if count != 1:
                parts.append(str(count))
        return "diff(" + ", ".join(parts) + ")"

    def _print_Exp1(self, expr: sp.Expr) -> str:
        return "exp(1)"

    def _print_ImaginaryUnit(self, expr: sp.Expr) -> str:
        raise ExpressionError("The imaginary unit cannot be written as a texgen expression")


def expression_to_text(expr: sp.Expr) -> str:
    """Write ``expr`` as text that :func:`parse_expression` reads back exactly."""
    return _TextPrinter({"order": "none"}).doprint(expr)
