"""Reading formulas typed by users, and writing sympy expressions back as text.

The grammar is a small, safe subset of Python expression syntax::

    numbers      2   0.3   1e-3   1_000       (read exactly: 0.3 is 3/10)
    names        x1  alpha  gamma  E  I  pi   (always plain symbols)
    operators    +  -  *  /  **  ^            (^ means power, like **)
    functions    exp log ln sqrt abs          (one argument)
                 min max                      (two or more arguments)

User text never reaches ``eval``, ``sympify`` or any sympy string parser: the text
is read with :func:`ast.parse` and the resulting tree is walked against a whitelist,
building the sympy expression node by node.  Sizes are checked *before* anything
is computed, so that inputs such as ``9**9**9`` are refused at once instead of
exhausting time or memory.

Every problem is reported as a :class:`~duality.errors.FormulaError` whose
``position`` is a 0-based offset into the text exactly as the user typed it.
"""
from __future__ import annotations

import ast
import io
import keyword
import math
import re
import tokenize
import unicodedata
import warnings
from typing import Mapping

import sympy as sp
from sympy.printing.precedence import PRECEDENCE
from sympy.printing.str import StrPrinter

from ..errors import FormulaError

__all__ = ["FUNCTIONS", "parse", "names", "substitute", "to_text", "to_latex"]

#: Function names the grammar knows, with the number of arguments they take
#: (``None`` = two or more).  ``ln`` is another name for ``log``.
FUNCTIONS: dict[str, int | None] = {
    "exp": 1, "log": 1, "ln": 1, "sqrt": 1, "abs": 1, "min": None, "max": None,
}

MAX_LENGTH = 2000          # characters of formula text
MAX_DEPTH = 40             # nesting of brackets and of sub-expressions
MAX_NODES = 5000           # syntax-tree nodes
MAX_DIGITS = 30            # significant digits of a number literal
MAX_DECIMAL_EXPONENT = 400  # |e| in 1e300 beyond which a literal is not even computed
#: every nonzero number, typed or computed, must lie between 2**-1000 and 2**1000 in size
#: (about 1e-301 to 1e301): far enough inside the floating-point range (about 1e-308 to
#: 1.8e308) that sums, products and derivatives of such numbers still evaluate
MAX_BINARY_EXPONENT = 1000
RANGE_TEXT = "numbers must lie between about 1e-301 and 1e301 in size"
MAX_EXPONENT = 1000        # |e| of any numeric exponent
MAX_BITS = 4096            # estimated size of a number computed by a power
MAX_MINMAX_ARGS = 20       # arguments of one min/max (after nested ones merge)
MAX_MINMAX_TOTAL = 60      # arguments of all min/max calls in one formula

_NOT_ALLOWED: dict[type, str] = {
    ast.Attribute: "attribute access (a.b) is not allowed",
    ast.Subscript: "indexing (a[...]) is not allowed",
    ast.Slice: "slices are not allowed",
    ast.Lambda: "lambda expressions are not allowed",
    ast.ListComp: "comprehensions are not allowed",
    ast.SetComp: "comprehensions are not allowed",
    ast.DictComp: "comprehensions are not allowed",
    ast.GeneratorExp: "comprehensions are not allowed",
    ast.IfExp: "conditional expressions (a if b else c) are not allowed",
    ast.JoinedStr: "f-strings are not allowed",
    ast.FormattedValue: "f-strings are not allowed",
    ast.Starred: "starred expressions (*a) are not allowed",
    ast.Compare: "comparisons are not allowed",
    ast.BoolOp: "boolean operators (and, or) are not allowed",
    ast.NamedExpr: "assignment expressions (:=) are not allowed",
    ast.List: "lists are not allowed",
    ast.Tuple: "tuples (a, b) are not allowed",
    ast.Set: "sets are not allowed",
    ast.Dict: "dictionaries are not allowed",
    ast.Await: "await is not allowed",
    ast.Yield: "yield is not allowed",
    ast.YieldFrom: "yield is not allowed",
}

_BINOP_NOT_ALLOWED: dict[type, str] = {
    ast.Mod: "the % operator is not allowed",
    ast.FloorDiv: "the // operator is not allowed",
    ast.MatMult: "the @ operator is not allowed",
    ast.BitAnd: "the bitwise operator & is not allowed",
    ast.BitOr: "the bitwise operator | is not allowed",
    ast.BitXor: "the bitwise operator ^ is not allowed",
    ast.LShift: "the shift operator << is not allowed",
    ast.RShift: "the shift operator >> is not allowed",
}

# operators that chain left to right at one precedence level
_CHAIN = {ast.Add: "add", ast.Sub: "add", ast.Mult: "mul", ast.Div: "mul"}

#: operators after which a formula cannot end
_BINARY_TEXT = {"+", "-", "*", "/", "**", "^", ",", "%", "//", "@", "&", "|", "<<", ">>",
                "<", ">", "<=", ">=", "==", "!=", "."}

#: characters people paste from documents, with what to type instead
_LOOKALIKES = {
    "·": "write * to multiply", "⋅": "write * to multiply", "∙": "write * to multiply",
    "×": "write * to multiply", "∗": "write * to multiply", "÷": "write / to divide",
    "−": "write - (the ASCII minus)", "–": "write - (the ASCII minus)",
    "—": "write - (the ASCII minus)", "‐": "write - (the ASCII minus)",
    "²": "write ^2", "³": "write ^3", "¹": "write ^1", "½": "write 0.5",
    "’": "quotes are not part of the grammar", "‘": "quotes are not part of the grammar",
    "“": "quotes are not part of the grammar", "”": "quotes are not part of the grammar",
    "\ufeff": "remove the invisible byte-order mark", "\u200b": "remove the invisible "
    "zero-width space", "µ": "write the Greek letter μ or a plain name such as mu",
}

_DECIMAL = re.compile(r"(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d+))?\Z")
_NOT_FINITE = (sp.S.ComplexInfinity, sp.S.NaN, sp.S.Infinity, sp.S.NegativeInfinity)


# ----------------------------------------------------------------------------- reading

def _number(src: str) -> sp.Rational:
    """The exact value of a Python int/float literal ``src``; ValueError if refused."""
    s = src.replace("_", "")
    if s[:2].lower() in ("0x", "0o", "0b"):
        value = int(s, 0)
        if value.bit_length() > 100:
            raise ValueError(f"the number has more than {MAX_DIGITS} digits")
        return sp.Integer(value)
    m = _DECIMAL.match(s)
    if m is None or not (m.group(1) or m.group(2)):
        raise ValueError("could not read the number")
    whole, frac, exp_text = m.group(1), (m.group(2) or "").rstrip("0"), m.group(3)
    exponent = 0
    if exp_text is not None:
        if len(exp_text.lstrip("+-").lstrip("0")) > 4 or abs(int(exp_text)) > MAX_DECIMAL_EXPONENT:
            raise ValueError(f"the number's exponent is too large ({RANGE_TEXT})")
        exponent = int(exp_text)
    digits = (whole + frac).lstrip("0")
    if len(digits) > MAX_DIGITS:
        raise ValueError(f"the number has more than {MAX_DIGITS} significant digits")
    if not digits:
        return sp.Integer(0)
    shift = exponent - len(frac)
    mantissa = int(digits)
    value = sp.Integer(mantissa * 10 ** shift) if shift >= 0 else \
        sp.Rational(mantissa, 10 ** -shift)
    problem = _out_of_range(value)
    if problem:
        raise ValueError(f"the number {src} is {problem} ({RANGE_TEXT})")
    return value


def number_problem(value) -> str:
    """Why a plain number is refused as a value ("" when it is usable): not finite, or
    nonzero outside the range every number of a formula keeps to (about 1e-301..1e301)."""
    try:
        x = float(value)
    except OverflowError:
        return f"it is too large ({RANGE_TEXT})"
    if not math.isfinite(x):
        return "a finite number is required"
    if x != 0 and not 2.0 ** -MAX_BINARY_EXPONENT <= abs(x) <= 2.0 ** MAX_BINARY_EXPONENT:
        return f"it is too {'large' if abs(x) > 1 else 'small'} ({RANGE_TEXT})"
    return ""


def _log2(r: sp.Rational) -> float:
    """log2 |r| of a nonzero Rational, for integers of any size."""
    return math.log2(abs(r.p)) - math.log2(r.q)


def _out_of_range(value: sp.Expr) -> str:
    """"too large" or "too small" when a nonzero number is outside the usable range
    (see :data:`MAX_BINARY_EXPONENT`), else ""."""
    if value.is_Rational:
        if value == 0:
            return ""
        size = _log2(value)
    else:
        try:
            a = abs(sp.N(value, 15))
        except (TypeError, ValueError, ArithmeticError, OverflowError):
            return "too large"
        if a.has(sp.oo, sp.zoo, sp.nan):
            return "too large"
        if not a.is_Float:
            return ""       # no numeric value (or an exact zero)
        if a == 0:
            return ""
        size = float(sp.log(a, 2))
    if size > MAX_BINARY_EXPONENT:
        return "too large"
    if size < -MAX_BINARY_EXPONENT:
        return "too small"
    return ""


def _is_chain(node) -> bool:
    """Whether ``node`` is a chain of + - or * / (its numbers combine into one)."""
    return isinstance(node, ast.BinOp) and type(node.op) in _CHAIN


def _bits(expr: sp.Basic) -> int:
    """Size in bits of the largest integer (numerator or denominator) in ``expr``."""
    return max((max(abs(r.p).bit_length(), r.q.bit_length()) for r in expr.atoms(sp.Rational)),
               default=0)


def _magnitude(expr: sp.Expr) -> float | None:
    """|value| of a constant expression (None if it has symbols or no real value)."""
    if expr.is_Rational:
        return abs(float(expr)) if _bits(expr) < 1000 else math.inf
    if expr.free_symbols:
        return None
    try:
        value = complex(sp.N(expr, 15))
    except (TypeError, ValueError, ArithmeticError):
        return math.inf
    return abs(value)


class _Reader:
    """One reading of one formula text."""

    def __init__(self, text, symbols, max_length, max_depth):
        self.text = text
        self.symbols = symbols or {}
        self.max_length = max_length
        self.max_depth = max_depth
        self.names: set[str] = set()
        self.numbers: dict[int, sp.Rational] = {}
        self._cache: dict[str, sp.Symbol] = {}

    # -- errors and positions
    def fail(self, message: str, position: int | None = None):
        raise FormulaError(message, self.text, position)

    def where(self, node) -> int:
        col = getattr(node, "col_offset", 0) or 0
        if self.b2c is not None:
            col = self.b2c[min(max(col, 0), len(self.b2c) - 1)]
        return self.back[min(max(col, 0), len(self.back) - 1)]

    # -- front end: text -> Python syntax tree
    def front(self) -> ast.Expression:
        text = self.text
        if not isinstance(text, str):
            raise FormulaError(f"a formula must be text, not {type(text).__name__}")
        if len(text) > self.max_length:
            self.fail(f"the formula is too long ({len(text)} characters; the limit is "
                      f"{self.max_length})")
        if not text.strip():
            self.fail("the formula is empty")
        nul = text.find("\x00")
        if nul >= 0:
            self.fail("the formula contains a null character", nul)
        self.refuse_lookalikes(text)
        # every whitespace character (newlines included) becomes a plain space, so the
        # text is one line and character offsets are unchanged
        flat = "".join(" " if c.isspace() else c for c in text)
        lead = len(flat) - len(flat.lstrip(" "))
        body = flat[lead:]
        depth = 0
        for i, c in enumerate(body):
            if c in "([{":
                depth += 1
                if depth > self.max_depth:
                    self.fail(f"the formula is nested too deeply (more than {self.max_depth} "
                              "levels of brackets)", lead + i)
            elif c in ")]}":
                depth = max(0, depth - 1)
        carets = self._carets(body, lead)
        parts, back, prev = [], [], 0
        for p in carets:  # '^' -> '**', remembering where each character came from
            parts += [body[prev:p], "**"]
            back += [*range(prev, p), p, p]
            prev = p + 1
        parts.append(body[prev:])
        back += [*range(prev, len(body) + 1)]
        self.source = "".join(parts)
        self.back = [lead + b for b in back]
        encoded = self.source.encode("utf-8")
        self.b2c = None
        if len(encoded) != len(self.source):  # ast offsets count UTF-8 bytes
            self.b2c = [i for i, ch in enumerate(self.source) for _ in ch.encode("utf-8")]
            self.b2c.append(len(self.source))
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # e.g. SyntaxWarning for '1if'
                return ast.parse(self.source, mode="eval")
        except SyntaxError as e:
            trailing = self._trailing_operator(body)
            if trailing is not None:
                op, at = trailing
                self.fail(f"the formula ends with '{op}', which needs something after it",
                          lead + at)
            pos = None
            if e.offset is not None and (e.lineno in (None, 1)):
                pos = self.back[min(max(e.offset - 1, 0), len(self.back) - 1)]
            self.fail(f"could not read the formula: {e.msg}", pos)
        except (ValueError, MemoryError, RecursionError) as e:
            self.fail(f"could not read the formula: {e}")

    def refuse_lookalikes(self, text: str) -> None:
        """Refuse characters outside the grammar that Python would read silently or that
        look like an operator: ``x1·x2`` is one name to Python, ``x²`` is ``x2``."""
        for i, c in enumerate(text):
            if c.isascii() or c.isspace():
                continue
            if unicodedata.category(c).startswith("L") and \
                    unicodedata.normalize("NFKC", c) == c:
                continue  # a letter of a name (α, β, ...)
            hint = _LOOKALIKES.get(c, "")
            try:
                label = unicodedata.name(c)
            except ValueError:
                label = "unnamed"
            self.fail(f"the character '{c}' (U+{ord(c):04X} {label}) is not allowed"
                      + (f"; {hint}" if hint else "; names use letters, digits and '_'"), i)

    @staticmethod
    def _trailing_operator(body: str) -> tuple[str, int] | None:
        """The last token and its offset when the text ends with an operator."""
        last = None
        try:
            for tok in tokenize.generate_tokens(io.StringIO(body).readline):
                if tok.type not in (tokenize.NEWLINE, tokenize.NL, tokenize.ENDMARKER,
                                    tokenize.INDENT, tokenize.DEDENT, tokenize.COMMENT):
                    last = tok
        except (tokenize.TokenError, SyntaxError):
            pass
        if last is not None and last.type == tokenize.OP and last.string in _BINARY_TEXT:
            return last.string, last.start[1]
        return None

    def _carets(self, body: str, lead: int) -> list[int]:
        """Offsets in ``body`` of '^' operator tokens (comments are refused)."""
        found = []
        try:
            for tok in tokenize.generate_tokens(io.StringIO(body).readline):
                if tok.type == tokenize.OP and tok.string == "^":
                    found.append(tok.start[1])
                elif tok.type == tokenize.COMMENT:
                    self.fail("comments (#) are not allowed", lead + tok.start[1])
        except (tokenize.TokenError, SyntaxError):
            # the text is broken anyway; ast.parse reports where
            found = [i for i, c in enumerate(body) if c == "^"]
        return found

    # -- checks on the whole tree before anything is computed
    def check(self, tree: ast.Expression) -> None:
        count = sum(1 for _ in ast.walk(tree))
        if count > MAX_NODES:
            self.fail(f"the formula is too large ({count} parts; the limit is {MAX_NODES})")
        called = {id(n.func) for n in ast.walk(tree) if isinstance(n, ast.Call)}
        problems = []   # (position, order, message): the leftmost one is reported
        minmax_total = 0
        stack = [(tree.body, 1)]
        order = 0
        while stack:
            node, depth = stack.pop()
            order += 1
            if isinstance(node, (ast.expr, ast.keyword)):
                if depth > self.max_depth:
                    problems.append((self.where(node), order,
                                     f"the formula is nested too deeply (more than "
                                     f"{self.max_depth} levels)"))
                    continue
                message = self._check_node(node, called)
                if message:
                    problems.append((self.where(node), order, message))
                if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) \
                        and node.func.id in ("min", "max"):
                    minmax_total += len(node.args)
            for child in ast.iter_child_nodes(node):
                same_chain = (isinstance(node, ast.BinOp) and child is node.left
                              and isinstance(child, ast.BinOp)
                              and _CHAIN.get(type(child.op), 1) == _CHAIN.get(type(node.op), 2))
                stack.append((child, depth if same_chain else depth + 1))
        if problems:
            pos, _, message = min(problems, key=lambda p: (p[0], p[1]))
            self.fail(message, pos)
        if minmax_total > MAX_MINMAX_TOTAL:
            self.fail(f"too many min/max arguments in one formula (limit {MAX_MINMAX_TOTAL})")

    def _check_node(self, node, called) -> str | None:
        t = type(node)
        if t is ast.Name:
            name = node.id
            if "__" in name:
                return f"names containing '__' are not allowed ('{name}')"
            if id(node) in called:
                return None
            if name in FUNCTIONS:
                return f"function '{name}' must be called, e.g. {name}(x)"
            self.names.add(name)
            return None
        if t is ast.Constant:
            v = node.value
            if isinstance(v, bool):
                return "True and False are not allowed"
            if v is None:
                return "None is not allowed"
            if isinstance(v, (str, bytes)):
                return "text strings are not allowed"
            if isinstance(v, complex):
                return "complex numbers (like 1j) are not allowed"
            if isinstance(v, (int, float)):
                src = self.source[self._char(node.col_offset):self._char(node.end_col_offset)]
                try:
                    self.numbers[id(node)] = _number(src)
                except ValueError as e:
                    return str(e)
                return None
            return f"the constant {v!r} is not allowed"
        if t is ast.BinOp:
            return _BINOP_NOT_ALLOWED.get(type(node.op))
        if t is ast.UnaryOp:
            if isinstance(node.op, ast.Not):
                return "'not' is not allowed"
            if isinstance(node.op, ast.Invert):
                return "the bitwise operator ~ is not allowed"
            return None
        if t is ast.keyword:
            return "keyword arguments are not allowed"
        if t is ast.Call:
            if not isinstance(node.func, ast.Name):
                return "only the named functions " + ", ".join(FUNCTIONS) + " can be called"
            name = node.func.id
            if "__" in name:
                return f"names containing '__' are not allowed ('{name}')"
            if name not in FUNCTIONS:
                return f"unknown function '{name}' (known: {', '.join(FUNCTIONS)})"
            if node.keywords:
                return "keyword arguments are not allowed"
            n = len(node.args)
            if FUNCTIONS[name] == 1 and n != 1:
                return f"{name} takes exactly 1 argument ({n} given)"
            if FUNCTIONS[name] is None and n < 2:
                return f"{name} needs at least 2 arguments ({n} given)"
            return None
        return _NOT_ALLOWED.get(t, f"this kind of expression ({t.__name__}) is not allowed")

    def _char(self, col: int) -> int:
        return col if self.b2c is None else self.b2c[min(col, len(self.b2c) - 1)]

    # -- building the sympy expression
    def build(self, node) -> sp.Expr:
        t = type(node)
        if t is ast.Constant:
            return self.numbers[id(node)]
        if t is ast.Name:
            return self.symbol(node.id)
        if t is ast.UnaryOp:
            value = self.build(node.operand)
            result = value if isinstance(node.op, ast.UAdd) else -value
        elif t is ast.BinOp and isinstance(node.op, ast.Pow):
            base = self.build(node.left)
            exponent = self.build(node.right)
            self.check_power(base, exponent, node)
            result = sp.Pow(base, exponent)
        elif t is ast.BinOp:
            result = self.build_chain(node)
        elif t is ast.Call:
            result = self.build_call(node)
        else:  # pragma: no cover - check() refuses everything else
            self.fail("this kind of expression is not allowed", self.where(node))
        if result.has(*_NOT_FINITE):
            self.fail("the formula is not finite (e.g. log(0) or 0**-1)", self.where(node))
        self.check_range(result, node)
        return result

    def check_range(self, value: sp.Expr, node) -> None:
        """Refuse a computed number outside the usable range, naming the term."""
        if not value.is_number:
            if not isinstance(value, (sp.Add, sp.Mul)):
                return
            numeric = [a for a in value.args if a.is_number]
            if len(numeric) < 2 and not (numeric and _is_chain(node)):
                return
            value = value.func(*numeric)
        if isinstance(node, ast.Constant):
            return  # literals are checked as they are read
        problem = _out_of_range(value)
        if problem:
            self.fail(f"the value of {self.span(node)} is {problem} ({RANGE_TEXT})",
                      self.where(node))

    def span(self, node) -> str:
        """The user's text of ``node`` (shortened when long)."""
        start = self.where(node)
        end_col = getattr(node, "end_col_offset", None)
        if end_col is None:
            return "this term"
        if self.b2c is not None:
            end_col = self.b2c[min(max(end_col, 0), len(self.b2c) - 1)]
        end = self.back[min(max(end_col, 0), len(self.back) - 1)]
        piece = self.text[start:end].strip() or "this term"
        return piece if len(piece) <= 60 else piece[:57] + "..."

    def build_chain(self, node: ast.BinOp) -> sp.Expr:
        """a + b - c ... or a * b / c ..., read left to right without deep recursion."""
        kind = _CHAIN[type(node.op)]
        steps = []
        while isinstance(node, ast.BinOp) and _CHAIN.get(type(node.op)) == kind:
            steps.append((node.op, node.right))
            node = node.left
        items = [self.build(node)]
        for op, right in reversed(steps):
            value = self.build(right)
            if isinstance(op, ast.Sub):
                value = -value
            elif isinstance(op, ast.Div):
                if value == 0:
                    self.fail("division by zero", self.where(right))
                value = sp.Pow(value, -1)
            items.append(value)
        return sp.Add(*items) if kind == "add" else sp.Mul(*items)

    def build_call(self, node: ast.Call) -> sp.Expr:
        name = node.func.id
        args = [self.build(a) for a in node.args]
        if name == "exp":
            self.check_exp(args[0], node)
            return sp.exp(args[0])
        if name in ("log", "ln"):
            return sp.log(args[0])
        if name == "sqrt":
            self.check_power(args[0], sp.S.Half, node)
            return sp.sqrt(args[0])
        if name == "abs":
            return sp.Abs(args[0])
        cls = sp.Min if name == "min" else sp.Max
        count = sum(len(a.args) if isinstance(a, (sp.Min, sp.Max)) else 1 for a in args)
        if count > MAX_MINMAX_ARGS:
            self.fail(f"{name} has too many arguments (limit {MAX_MINMAX_ARGS}, nested "
                      "min/max included)", self.where(node))
        return cls(*args)

    def check_power(self, base: sp.Expr, exponent: sp.Expr, node) -> None:
        size = _magnitude(exponent)
        if size is None:
            return
        if size > MAX_EXPONENT:
            self.fail(f"the exponent is too large (the limit is {MAX_EXPONENT})", self.where(node))
        if base == 0 and exponent.is_Rational and exponent < 0:
            self.fail("division by zero (0 to a negative power)", self.where(node))
        bits = _bits(base)
        if exponent.is_Rational and bits * size > MAX_BITS:
            self.fail(f"the number would be too large (about {int(bits * size)} bits; the "
                      f"limit is {MAX_BITS})", self.where(node))

    def check_exp(self, arg: sp.Expr, node) -> None:
        size = _magnitude(arg)
        if size is not None and size > MAX_EXPONENT:
            self.fail(f"the argument of exp is too large (the limit is {MAX_EXPONENT})",
                      self.where(node))
        # sympy turns exp(c*log(b)) into b**c: check it as that power
        for term in sp.Add.make_args(arg):
            coeff, rest = term.as_coeff_Mul()
            if rest.has(sp.log):
                self.check_power(rest, coeff, node)

    def symbol(self, name: str) -> sp.Expr:
        if name in self.symbols:
            return self.symbols[name]
        if name not in self._cache:
            self._cache[name] = sp.Symbol(name)
        return self._cache[name]

    def read(self) -> sp.Expr:
        tree = self.front()
        self.check(tree)
        try:
            return self.build(tree.body)
        except FormulaError:
            raise
        except RecursionError:
            self.fail("the formula is nested too deeply")
        except Exception as e:  # noqa: BLE001 - never let sympy internals escape
            self.fail(f"the formula could not be evaluated ({type(e).__name__}: {e})")


def parse(text: str, *, symbols: Mapping[str, sp.Symbol] | None = None,
          max_length: int = MAX_LENGTH, max_depth: int = MAX_DEPTH) -> sp.Expr:
    """Read a formula such as ``"A*x1^a*x2^b"`` into a sympy expression.

    Parameters
    ----------
    text : str
        The formula (see the module documentation for the grammar).
    symbols : mapping of name to sympy.Symbol, optional
        Symbols to use for these names (so their assumptions are kept); other names
        become plain ``sympy.Symbol(name)``.
    max_length, max_depth : int
        Limits on the length of the text and on its nesting.

    Raises
    ------
    FormulaError
        For anything outside the grammar or over a limit, with the 0-based position
        of the problem in ``text``.
    """
    return _Reader(text, symbols, max_length, max_depth).read()


def names(text: str, *, max_length: int = MAX_LENGTH, max_depth: int = MAX_DEPTH) -> set[str]:
    """Names used as variables in ``text`` (function names excluded).

    The formula is fully checked; names that cancel out (``x - x``) are still listed.
    """
    reader = _Reader(text, None, max_length, max_depth)
    reader.read()
    return set(reader.names)


# ------------------------------------------------------------------ values substituted

def substitute(expr: sp.Expr, values: Mapping[sp.Symbol, float]) -> sp.Expr:
    """``expr`` with ``values`` put in, under the same size rules as typed text.

    A formula such as ``2^max(10^29, a)`` passes :func:`parse` (its exponent is not yet a
    number) but becomes ``2**(10**29)`` once ``a`` has a value, which sympy would compute
    exactly and never finish.  Here every node is rebuilt bottom-up, and before a power,
    ``exp`` or factorial of numbers is formed its size is checked; a term that becomes
    infinite or undefined (a division by zero) is refused too.

    Raises
    ------
    FormulaError
        Naming the term (as written before substitution) and the values, e.g.
        ``with a=0.5, the exponent of 2**max(a, 10**29) is 1e+29 (the limit is 1000)``.
    """
    values = {k: (v if isinstance(v, sp.Basic) else sp.Float(v)) for k, v in values.items()}
    if not values:
        return expr
    keys = set(values)
    memo: dict[sp.Basic, sp.Basic] = {}

    def fail(term, message):
        used = sorted((s for s in term.free_symbols if s in values), key=str)
        given = ", ".join(f"{s}={float(values[s]):g}" for s in used)
        try:
            shown = to_text(term)
        except FormulaError:
            shown = str(term)
        if len(shown) > 60:
            shown = shown[:57] + "..."
        raise FormulaError(f"with {given}, {message.format(term=shown)}")

    def visit(e):
        if e in values:
            return values[e]
        if not e.args or not (e.free_symbols & keys):
            return e
        if e in memo:
            return memo[e]
        args = [visit(a) for a in e.args]
        _guard(e, args, fail)
        try:
            out = e.func(*args)
        except (ArithmeticError, ValueError, TypeError, RecursionError) as exc:
            fail(e, f"{{term}} cannot be evaluated ({exc})")
        if out.has(*_NOT_FINITE) and not any(a.has(*_NOT_FINITE) for a in args):
            fail(e, "{term} is infinite or undefined (a division by zero?)")
        if out.is_number and not any(a.is_number and _out_of_range(a) for a in args):
            problem = _out_of_range(out)
            if problem:
                fail(e, f"the value of {{term}} is {problem} ({RANGE_TEXT})")
        memo[e] = out
        return out

    return visit(expr)


def _guard(e: sp.Basic, args: list, fail) -> None:
    """Refuse a power, exponential or factorial of numbers too large to form."""
    if isinstance(e, sp.Pow):
        base, exponent = args
        if not exponent.is_number:
            return
        size = _magnitude(exponent)
        if size is None:
            return
        # an exact exponent is worked out exactly (2**(10**29) never finishes), so it
        # keeps to the parser's limit; a float exponent (from a parameter value, as in
        # x**(1/rho) with rho near 0) is evaluated in floating point, and a number it
        # makes is range-checked once formed
        if exponent.is_Rational and size > MAX_EXPONENT:
            fail(e, f"the exponent of {{term}} is {size:.4g} (the limit is {MAX_EXPONENT})")
        if base.is_Rational and exponent.is_Rational and _bits(base) * size > MAX_BITS:
            fail(e, f"{{term}} would be a number of about {int(_bits(base) * size)} bits "
                 f"(the limit is {MAX_BITS})")
    elif isinstance(e, sp.exp):
        size = _magnitude(args[0]) if args[0].is_number else None
        if size is not None and size > MAX_EXPONENT:
            fail(e, f"the argument of {{term}} is {size:.4g} (the limit is {MAX_EXPONENT})")
    elif isinstance(e, (sp.factorial, sp.gamma, sp.factorial2, sp.RisingFactorial,
                        sp.FallingFactorial, sp.binomial)):
        sizes = [_magnitude(a) for a in args if a.is_number]
        if any(s is not None and s > 170 for s in sizes):
            fail(e, "{term} grows too large (arguments above 170)")


# ----------------------------------------------------------------------------- writing

def _identifier_ok(name: str) -> bool:
    return (name.isidentifier() and not keyword.iskeyword(name) and "__" not in name
            and name not in FUNCTIONS and unicodedata.normalize("NFKC", name) == name)


class _TextPrinter(StrPrinter):
    """StrPrinter restricted to what :func:`parse` reads back to the same expression."""

    printmethod = "_duality_formula_text"  # ignore objects' own _sympystr
    _allowed = (sp.Add, sp.Mul, sp.Pow, sp.Symbol, sp.Rational, sp.Float, sp.exp, sp.log,
                sp.Abs, sp.Min, sp.Max, type(sp.E))

    def _print(self, expr, **kwargs):
        if isinstance(expr, sp.Basic) and not isinstance(expr, self._allowed):
            self._refuse(expr)
        return super()._print(expr, **kwargs)

    @staticmethod
    def _refuse(expr, why=""):
        raise FormulaError(f"{type(expr).__name__} cannot be written in the formula grammar"
                           + (f" ({why})" if why else ""))

    def _print_Symbol(self, expr):
        if not _identifier_ok(expr.name):
            self._refuse(expr, f"'{expr.name}' is not a usable name")
        return expr.name

    def _print_Dummy(self, expr):
        self._refuse(expr, "dummy symbols do not survive as text")

    _print_Wild = _print_Dummy

    @staticmethod
    def _int(n: int) -> str:
        """Integer text; long ones as sums of 30-digit chunks times powers of ten."""
        digits = str(abs(n))
        if len(digits) <= MAX_DIGITS:
            return str(n)
        if len(digits) > 1000:
            raise FormulaError("an integer with more than 1000 digits cannot be written in "
                               "the formula grammar")
        chunks = []
        while digits:
            chunks.append(digits[-MAX_DIGITS:].lstrip("0") or "0")
            digits = digits[:-MAX_DIGITS]
        terms = [c if k == 0 else f"{c}*10**{MAX_DIGITS * k}"
                 for k, c in enumerate(chunks) if c != "0"]
        return ("-" if n < 0 else "") + "(" + " + ".join(reversed(terms)) + ")"

    def _print_Integer(self, expr):
        return self._int(expr.p)

    def _print_Rational(self, expr):
        if expr.q == 1:
            return self._int(expr.p)
        return f"{self._int(expr.p)}/{self._int(expr.q)}"

    def _print_Zero(self, expr):
        return "0"

    def _print_Float(self, expr):
        value = float(expr)
        if not math.isfinite(value):
            self._refuse(expr, "not finite")
        if expr._prec <= 53:
            return repr(value)
        return sp.mpmath.libmp.to_str(expr._mpf_, min(MAX_DIGITS, sp.mpmath.libmp.prec_to_dps(expr._prec)))

    def _print_Mul(self, expr):
        # Written as n1*n2/d1/d2 with one '/' per denominator factor: StrPrinter's
        # 1/(2*(x + y)) would read back as 1/(2*x + 2*y), as 2*(x + y) distributes.
        coeff, rest = expr.as_coeff_Mul()
        sign = ""
        if coeff.is_negative:
            sign, coeff = "-", -coeff
        numer, denom = [], []
        if coeff.is_Rational:
            if coeff.p != 1:
                numer.append(sp.Integer(coeff.p))
            if coeff.q != 1:
                denom.append(sp.Integer(coeff.q))
        elif coeff != 1:
            numer.append(coeff)
        for f in rest.as_ordered_factors():
            if f.is_Pow and f.exp.is_Rational and f.exp.is_negative:
                denom.append(f.base if f.exp == -1 else sp.Pow(f.base, -f.exp))
            elif f != 1:
                numer.append(f)
        level = PRECEDENCE["Mul"]
        text = "*".join(self.parenthesize(f, level, strict=False) for f in numer) or "1"
        for d in denom:
            text += "/" + self.parenthesize(d, level, strict=False)
        return sign + text

    def _print_Exp1(self, expr):
        return "exp(1)"

    def _print_exp(self, expr):
        return f"exp({self._print(expr.args[0])})"

    def _print_log(self, expr):
        return f"log({self._print(expr.args[0])})"

    def _print_Abs(self, expr):
        return f"abs({self._print(expr.args[0])})"

    def _print_Min(self, expr):
        return "min(" + ", ".join(self._print(a) for a in expr.args) + ")"

    def _print_Max(self, expr):
        return "max(" + ", ".join(self._print(a) for a in expr.args) + ")"


def to_text(expr: sp.Expr) -> str:
    """Write ``expr`` in the formula grammar, so that ``parse(to_text(expr)) == expr``.

    Raises FormulaError for what the grammar cannot express (Piecewise, integrals,
    I, pi, infinities, other functions, names that are not plain identifiers ...).
    """
    if isinstance(expr, bool) or not isinstance(expr, (sp.Basic, int, float)):
        raise FormulaError(f"to_text needs a sympy expression, not {type(expr).__name__}")
    if isinstance(expr, int):
        expr = sp.Integer(expr)
    elif isinstance(expr, float):
        expr = sp.Float(expr)
    return _TextPrinter().doprint(expr)


def to_latex(expr: sp.Expr) -> str:
    """LaTeX for ``expr`` (sympy's own printer)."""
    return sp.latex(expr)
