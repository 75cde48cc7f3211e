"""Code targets: Python (numpy), R, Julia, Octave/MATLAB, C99 and Stata ``nl``.

Every target prints with a sympy code printer (subclassed where the stock printer would
print something a target reads differently) after a whitelist check of the expression:
a construct the target cannot express raises :class:`~duality.errors.DualityError`
naming the target and the construct, before any text is produced.

Parameters, per target (``values=True`` / ``values=False``):

=========  ===============================================  =============================
target     values=True                                      values=False
=========  ===============================================  =============================
python     keyword arguments with the values as defaults    positional arguments
r          arguments with the values as defaults            arguments without defaults
julia      keyword arguments (after ``;``) with defaults    positional arguments
octave     trailing arguments, filled from the values when  positional arguments
           not given (``nargin`` / ``isempty``)
c          ``static const double <name>_<param>`` constants  ``double`` arguments
stata      ``{a=0.3}`` initial values at first occurrence   ``{a}`` without initial values
=========  ===============================================  =============================

Parameters without a value are always required arguments (in Stata, ``{a}``).  Numbers
are written with 17 significant digits at most (the shortest text that reads back as the
same double); exact rationals as quotients (``3/10``), which every target divides in
double precision, giving the correctly rounded double.
"""
from __future__ import annotations

import keyword

import sympy as sp
from sympy.printing.c import C99CodePrinter
from sympy.printing.julia import JuliaCodePrinter
from sympy.printing.numpy import NumPyPrinter
from sympy.printing.octave import OctaveCodePrinter
from sympy.printing.rcode import RCodePrinter
from sympy.printing.str import StrPrinter

from ..._version import __version__
from ...errors import DualityError
from ...texts import CAUTION
from ._collect import (BASE_ALLOWED, CASES_ALLOWED, Collection, Item, check_names,
                       check_supported, condition_text, cse, fmt_float, formula_text)



def _version() -> str:
    return __version__


def _describe(it: Item) -> list[str]:
    """Plain-text lines on one function: formula, route, source, conditions, notes."""
    d = it.derived
    lines = [f"{d.label} {it.head}({', '.join(map(str, it.args))}) = {formula_text(it.expr)}",
             f"route: {d.route} ({d.method})"]
    lines.append(f"source: {d.source}" if d.source else "source: none (derived, not catalogued)")
    for c in d.conditions:
        lines.append(f"valid where: {condition_text(c)}")
    for n in d.notes:
        lines.append(f"note: {n}")
    return lines


def _header(col: Collection, name: str, target: str) -> list[str]:
    lines = [f"{name}: {target} functions exported by duality {_version()}.",
             "Generated text; edit the model and export again instead of editing this.",
             CAUTION]
    if col.model is not None:
        lines.append(f"model: {col.model.describe()}")
    vals = [f"{p.name} = {fmt_float(v)}" for p, v in col.params.items() if v is not None]
    if vals:
        lines.append("parameter values: " + ", ".join(vals))
    for o in col.omitted:
        lines.append(f"not exported: {o}")
    return lines


def _float_text(printer, expr):
    if expr._prec <= 53:
        v = float(expr)
        return fmt_float(v) if v >= 0 else f"({fmt_float(v)})"
    return printer.__class__.__mro__[1]._print_Float(printer, expr)


# =========================================================================== python

class _NumPy(NumPyPrinter):
    """NumPyPrinter writing ``np.`` and binary ``np.minimum``/``np.maximum``."""

    def _module_format(self, fqn, register=True):
        text = super()._module_format(fqn, register)
        return "np." + text[len("numpy."):] if text.startswith("numpy.") else text

    def _print_Float(self, expr):
        return _float_text(self, expr)

    def _nest(self, fn, args):
        out = self._print(args[-1])
        for a in reversed(args[:-1]):
            out = f"{self._module_format('numpy.' + fn)}({self._print(a)}, {out})"
        return out

    def _print_Min(self, expr):
        return self._nest("minimum", expr.args)

    def _print_Max(self, expr):
        return self._nest("maximum", expr.args)


_PY_RESERVED = set(keyword.kwlist) | {"np", "_finish", "FUNCTIONS", "PARAMS", "float"}


def export_python(col: Collection, *, name: str, values: bool = True) -> str:
    """A Python module: ``import numpy as np``, one ``def`` per function, ``FUNCTIONS``."""
    check_names(col.names(), "python", _PY_RESERVED)
    out = ['"""' + "\n".join(_header(col, name, "Python (numpy)")).replace('"""', "'''")
           + "\n\nEvery function takes numpy arrays (broadcast together) or scalars and "
           "returns an\narray (a float for scalar arguments).\n" + '"""',
           "import numpy as np", "", "",
           "def _finish(value, *args):",
           '    """Broadcast ``value`` to the shape of the arguments; float for scalars."""',
           "    out = np.asarray(value, dtype=float) + np.zeros(np.broadcast(*args).shape)",
           "    return float(out) if out.ndim == 0 else out", ""]
    for it in col.items:
        check_supported(it.expr, "python", BASE_ALLOWED + CASES_ALLOWED, it.name)
        p = _NumPy({"fully_qualified_modules": True})
        repl, red = cse(it.expr, col.names())
        body = [f"    {s} = {p.doprint(e)}" for s, e in repl]
        body.append(f"    return _finish({p.doprint(red)}, {', '.join(map(str, it.args))})")
        other = set(p.module_imports) - {"numpy"}
        if other:
            raise DualityError(f"the python export would need module(s) {sorted(other)} for "
                               f"{it.name}; only numpy is allowed")
        sig = [str(a) for a in it.args]
        if values:
            sig += [str(s) for s in it.free] + [f"{s}={fmt_float(it.values[s])}"
                                                for s in it.valued]
        else:
            sig += [str(s) for s in it.params]
        out.append("")
        out.append(f"def {it.name}({', '.join(sig)}):")
        out.extend(_py_doc(it, values))
        out.extend(f"    {a} = np.asarray({a}, dtype=float)" for a in it.args)
        out.extend(body)
        out.append("")
    out.append("")
    out.append("FUNCTIONS = {" + ", ".join(f'"{it.name}": {it.name}' for it in col.items) + "}")
    pv = ", ".join(f'"{p.name}": {fmt_float(v)}' for p, v in col.params.items()
                   if v is not None)
    out.append("PARAMS = {" + pv + "}")
    return "\n".join(out) + "\n"


def _py_doc(it: Item, values: bool) -> list[str]:
    d = it.derived
    lines = [f"{d.label[0].upper()}{d.label[1:]} {it.head}({', '.join(map(str, it.args))}).", ""]
    lines += [f"Formula: ``{it.head} = {formula_text(it.expr)}``", "",
              f"LaTeX: ``{sp.latex(it.expr)}``", "",
              "Parameters", "----------",
              f"{', '.join(map(str, it.args))} : array_like", "    Arguments (broadcast together)."]
    for s in it.free:
        lines += [f"{s} : array_like", "    Parameter without a value in the model."]
    for s in it.valued:
        lines += [f"{s} : float" + (f", default {fmt_float(it.values[s])}" if values else ""),
                  f"    Parameter (model value {fmt_float(it.values[s])})."]
    lines += ["", "Returns", "-------", "numpy.ndarray or float", "", "Notes", "-----"]
    lines += _describe(it)[1:]
    lines.append(CAUTION)
    text = "\n".join(("    " + ln) if ln else "" for ln in lines).replace('"""', "'''")
    return ['    r"""' + text.lstrip(), '    """']


# =========================================================================== R

class _R(RCodePrinter):
    """RCodePrinter with vectorised ``pmin``/``pmax`` and round-trip floats."""

    def _print_Float(self, expr):
        return _float_text(self, expr)

    def _print_Min(self, expr):
        return "pmin(" + ", ".join(self._print(a) for a in expr.args) + ")"

    def _print_Max(self, expr):
        return "pmax(" + ", ".join(self._print(a) for a in expr.args) + ")"

    def _print_Exp1(self, expr):
        return "exp(1)"

    def _print_And(self, expr):
        return " & ".join(f"({self._print(a)})" for a in expr.args)

    def _print_Or(self, expr):
        return " | ".join(f"({self._print(a)})" for a in expr.args)

    def _print_Not(self, expr):
        return f"!({self._print(expr.args[0])})"


_R_RESERVED = {"if", "else", "repeat", "while", "function", "for", "in", "next", "break",
               "TRUE", "FALSE", "NULL", "Inf", "NaN", "NA", "NA_integer_", "NA_real_",
               "NA_character_", "NA_complex_", "exp", "log", "sqrt", "abs", "pmin", "pmax",
               "ifelse", "numeric", "max", "length"}


def export_r(col: Collection, *, name: str, values: bool = True) -> str:
    """R functions (vectorised); parameters with values are defaulted arguments."""
    check_names(col.names(), "r", _R_RESERVED)
    out = ["# " + ln for ln in _header(col, name, "R")]
    out.append("# Every function is vectorised over its arguments (R recycling rules).")
    for it in col.items:
        check_supported(it.expr, "r", BASE_ALLOWED + CASES_ALLOWED, it.name)
        p = _R()
        repl, red = cse(it.expr, col.names())
        sig = [str(a) for a in it.args]
        if values:
            sig += [str(s) for s in it.free] + [f"{s} = {fmt_float(it.values[s])}"
                                                for s in it.valued]
        else:
            sig += [str(s) for s in it.params]
        out.append("")
        out += ["# " + ln for ln in _describe(it)]
        out.append(f"{it.name} <- function({', '.join(sig)}) {{")
        out += [f"  {s} <- {p.doprint(e)}" for s, e in repl]
        lens = ", ".join(f"length({a})" for a in it.args)
        out.append(f"  ({p.doprint(red)}) + numeric(max({lens}))")
        out.append("}")
    return "\n".join(out) + "\n"


# =========================================================================== Julia

class _Julia(JuliaCodePrinter):
    def _print_Float(self, expr):
        return _float_text(self, expr)

    def _print_Rational(self, expr):
        return f"({expr.p}/{expr.q})"

    def _print_Exp1(self, expr):
        return "exp(1.0)"

    def _nest(self, fn, args):
        out = self._print(args[-1])
        for a in reversed(args[:-1]):
            out = f"{fn}({self._print(a)}, {out})"
        return out

    def _print_Min(self, expr):
        return self._nest("min", expr.args)

    def _print_Max(self, expr):
        return self._nest("max", expr.args)


# Julia manual, "Keywords" (reserved words and the two-word keywords' parts that cannot be
# variable names: abstract, mutable, primitive, type only in pairs, so allowed), plus the
# infix keywords in, isa, where, the constants the printer or a reader may rely on, and
# the functions the bodies call (from memory of the Julia 1.x manual).
_JULIA_RESERVED = {"baremodule", "begin", "break", "catch", "const", "continue", "do", "else",
                   "elseif", "end", "export", "false", "finally", "for", "function", "global",
                   "if", "import", "let", "local", "macro", "module", "quote", "return",
                   "struct", "true", "try", "using", "while", "in", "isa", "where", "outer",
                   "public", "exp", "log", "sqrt", "abs", "min", "max", "ifelse", "pi", "im",
                   "Inf", "NaN", "nothing", "missing"}


def export_julia(col: Collection, *, name: str, values: bool = True) -> str:
    """Julia functions; parameters with values are keyword arguments with defaults.

    The bodies use elementwise operators; call with broadcasting (``cost.(w1, w2, y)``)
    for arrays.
    """
    check_names(col.names(), "julia", _JULIA_RESERVED)
    out = ["# " + ln for ln in _header(col, name, "Julia")]
    out.append("# Scalar functions; broadcast over arrays with a dot: cost.(w1, w2, y).")
    for it in col.items:
        check_supported(it.expr, "julia", BASE_ALLOWED + CASES_ALLOWED, it.name)
        p = _Julia({"inline": True})
        repl, red = cse(it.expr, col.names())
        sig = ", ".join([str(a) for a in it.args] + [str(s) for s in
                                                      (it.free if values else it.params)])
        if values and it.valued:
            sig += "; " + ", ".join(f"{s} = {fmt_float(it.values[s])}" for s in it.valued)
        out.append("")
        out += ["# " + ln for ln in _describe(it)]
        out.append(f"function {it.name}({sig})")
        out += [f"    {s} = {p.doprint(e)}" for s, e in repl]
        out.append(f"    return {p.doprint(red)}")
        out.append("end")
    return "\n".join(out) + "\n"


# =========================================================================== Octave

class _Octave(OctaveCodePrinter):
    def _print_Float(self, expr):
        return _float_text(self, expr)

    def _print_Piecewise(self, expr):
        # masks times values (the stock printer) give NaN when an unused branch is
        # infinite; dy_ifelse selects instead
        pieces = list(expr.args)
        if pieces[-1].cond != True:  # noqa: E712 - sympy true
            raise DualityError("the octave export cannot express a Piecewise without a "
                               "final 'otherwise' case")
        out = self._print(pieces[-1].expr)
        for e, c in reversed(pieces[:-1]):
            out = f"dy_ifelse({self._print(c)}, {self._print(e)}, {out})"
        self._used_ifelse = True
        return out

    def _nest(self, fn, args):
        out = self._print(args[-1])
        for a in reversed(args[:-1]):
            out = f"{fn}({self._print(a)}, {out})"
        return out

    def _print_Min(self, expr):
        return self._nest("min", expr.args)

    def _print_Max(self, expr):
        return self._nest("max", expr.args)


# Octave's iskeyword() list and MATLAB's keywords (from memory of Octave 8 and MATLAB
# R2023), plus the functions the generated text calls.
_OCTAVE_RESERVED = {"function", "end", "endfunction", "if", "else", "elseif", "endif", "while",
                    "endwhile", "for", "endfor", "parfor", "endparfor", "do", "until",
                    "switch", "endswitch", "case", "otherwise", "break", "continue",
                    "return", "global", "persistent", "try", "catch", "end_try_catch",
                    "unwind_protect", "unwind_protect_cleanup", "end_unwind_protect",
                    "classdef", "endclassdef", "methods", "endmethods", "properties",
                    "endproperties", "events", "endevents", "enumeration", "endenumeration",
                    "arguments", "endarguments", "spmd", "endspmd",
                    "nargin", "isempty", "dy_ifelse", "zeros", "size", "logical", "exp",
                    "log", "sqrt", "abs", "min", "max", "true", "false"}

_IFELSE = """function r = dy_ifelse(c, a, b)
  % elementwise: a where c holds, else b (selects; never multiplies by a mask)
  z = zeros(size(a + b + c));
  r = b + z; a = a + z; c = logical(c + z);
  r(c) = a(c);
end"""


def export_octave(col: Collection, *, name: str, values: bool = True) -> str:
    """One Octave/MATLAB text holding every function (elementwise ``.^ .* ./``).

    The text starts with ``1;`` so Octave reads it as a script file defining all the
    functions (``source('model.m')``); for MATLAB save each function in its own file
    (or keep them as local functions of a script).  With ``values=True`` the parameters
    with values are trailing arguments that take the model's values when omitted or
    given as ``[]``.
    """
    check_names(col.names(), "octave", _OCTAVE_RESERVED)
    out = ["1;  % script file: defines the functions below", ""]
    out += ["% " + ln for ln in _header(col, name, "Octave/MATLAB")]
    used = False
    for it in col.items:
        check_supported(it.expr, "octave", BASE_ALLOWED + CASES_ALLOWED, it.name)
        p = _Octave({"inline": True})
        p._used_ifelse = False
        repl, red = cse(it.expr, col.names())
        lines = [f"  {s} = {p.doprint(e)};" for s, e in repl]
        taken = {str(s) for s in it.args + it.params} | {str(s) for s, _ in repl}
        res = it.head if (it.head.isidentifier() and it.head not in taken
                          and it.head not in _OCTAVE_RESERVED | {"pi", "e", "i", "j"}) else "out"
        lines.append(f"  {res} = {p.doprint(red)};")
        used |= p._used_ifelse
        sig = [str(s) for s in it.args + it.params]
        out.append("")
        out += ["% " + ln for ln in _describe(it)]
        out.append(f"function {res} = {it.name}({', '.join(sig)})")
        if values:
            for k, s in enumerate(it.valued, start=len(it.args) + len(it.free) + 1):
                out.append(f"  if nargin < {k} || isempty({s}), {s} = "
                           f"{fmt_float(it.values[s])}; end")
        out += lines
        out.append("end")
    if used:
        out += ["", _IFELSE]
    return "\n".join(out) + "\n"


# =========================================================================== C

class _C(C99CodePrinter):
    def _print_Float(self, expr):
        return _float_text(self, expr)

    def _print_Exp1(self, expr):
        return "exp(1.0)"

    def _print_Pow(self, expr):
        # the stock printer writes x**(1/3) as cbrt(x), which is real for x < 0 where
        # numpy gives nan; keep pow
        if expr.exp == sp.Rational(1, 3):
            return f"pow({self._print(expr.base)}, 1.0/3.0)"
        return super()._print_Pow(expr)

    def _print_Piecewise(self, expr):
        pieces = list(expr.args)
        if pieces[-1].cond != True:  # noqa: E712
            raise DualityError("the c export cannot express a Piecewise without a final "
                               "'otherwise' case")
        out = f"({self._print(pieces[-1].expr)})"
        for e, c in reversed(pieces[:-1]):
            out = f"(({self._print(c)}) ? ({self._print(e)}) : {out})"
        return out


# C99 keywords (C99 6.4.1), C++ keywords and alternative operator names (C++20 [lex.key],
# the header must compile as C++ too), the functions and macros of <math.h> (C99 7.12;
# each function also with the suffixes f and l) and the extensions glibc declares there
# (Bessel functions, gamma, signgam, finite, drem, scalb, significand; from memory).
_C_KEYWORDS = {"auto", "break", "case", "char", "const", "continue", "default", "do",
               "double", "else", "enum", "extern", "float", "for", "goto", "if", "inline",
               "int", "long", "register", "restrict", "return", "short", "signed", "sizeof",
               "static", "struct", "switch", "typedef", "union", "unsigned", "void",
               "volatile", "while", "_Bool", "_Complex", "_Imaginary", "main"}
_CPP_KEYWORDS = {"alignas", "alignof", "and", "and_eq", "asm", "bitand", "bitor", "bool",
                 "catch", "char8_t", "char16_t", "char32_t", "class", "compl", "concept",
                 "consteval", "constexpr", "constinit", "const_cast", "co_await",
                 "co_return", "co_yield", "decltype", "delete", "dynamic_cast", "explicit",
                 "export", "false", "friend", "mutable", "namespace", "new", "noexcept",
                 "not", "not_eq", "nullptr", "operator", "or", "or_eq", "private",
                 "protected", "public", "reinterpret_cast", "requires", "static_assert",
                 "static_cast", "template", "this", "thread_local", "throw", "true", "try",
                 "typeid", "typename", "using", "virtual", "wchar_t", "xor", "xor_eq"}
_C_MATH_FUNCTIONS = {"acos", "asin", "atan", "atan2", "cos", "sin", "tan", "acosh", "asinh",
                     "atanh", "cosh", "sinh", "tanh", "exp", "exp2", "expm1", "frexp",
                     "ilogb", "ldexp", "log", "log10", "log1p", "log2", "logb", "modf",
                     "scalbn", "scalbln", "cbrt", "fabs", "hypot", "pow", "sqrt", "erf",
                     "erfc", "lgamma", "tgamma", "ceil", "floor", "nearbyint", "rint",
                     "lrint", "llrint", "round", "lround", "llround", "trunc", "fmod",
                     "remainder", "remquo", "copysign", "nan", "nextafter", "nexttoward",
                     "fdim", "fmax", "fmin", "fma", "y0", "y1", "yn", "j0", "j1", "jn",
                     "gamma", "finite", "drem", "scalb", "significand", "exp10", "pow10",
                     "sincos", "lgamma_r", "gamma_r"}
_C_MATH_MACROS = {"NAN", "INFINITY", "HUGE_VAL", "HUGE_VALF", "HUGE_VALL", "HUGE",
                  "MAXFLOAT", "fpclassify", "isfinite", "isinf", "isnan", "isnormal",
                  "signbit", "isgreater", "isgreaterequal", "isless", "islessequal",
                  "islessgreater", "isunordered", "math_errhandling", "float_t", "double_t",
                  "signgam", "errno", "DOMAIN", "SING", "OVERFLOW", "UNDERFLOW", "TLOSS",
                  "PLOSS", "exception", "matherr"}
_C_RESERVED = (_C_KEYWORDS | _CPP_KEYWORDS | _C_MATH_MACROS | _C_MATH_FUNCTIONS
               | {f + suffix for f in _C_MATH_FUNCTIONS for suffix in "fl"})
#: whole families <math.h> and the C standard reserve: M_PI, M_E, ... FP_NAN, FP_ZERO,
#: ... MATH_ERRNO, identifiers starting with an underscore and a capital or a second
#: underscore (C99 7.1.3), and this export's include guard
_C_PATTERNS = (r"M_\w*", r"FP_\w*", r"MATH_\w*", r"HUGE_\w*", r"_[A-Z_]\w*",
               r"DUALITY_EXPORT_\w*")


def export_c(col: Collection, *, name: str, values: bool = True) -> str:
    """A C99 header of ``static inline`` functions of doubles; ``#include <math.h>``;
    link with ``-lm``.  It compiles as C99 and as C++ (names reserved in either, or by
    ``<math.h>``, are refused), and may be included in several files of one program.

    With ``values=True`` parameters with values are ``static const double <name>_<param>``
    constants (prefixed with the export name so that they cannot clash with <math.h>);
    parameters without values are extra ``double`` arguments.
    """
    check_names(col.names(), "c", _C_RESERVED, patterns=_C_PATTERNS)
    guard = f"DUALITY_EXPORT_{name.upper()}_H"
    out = ["/*"] + [" * " + ln for ln in _header(col, name, "C99")] + [
        " * A header: #include it in any number of C99 or C++ files and link with -lm;",
        " * every function is static inline and every constant static const, so no",
        " * symbol is defined twice.", " */",
        f"#ifndef {guard}", f"#define {guard}", "", "#include <math.h>", ""]
    consts: dict = {}
    if values:
        for p, v in col.params.items():
            if v is None:
                continue
            cname = f"{name}_{p.name}"
            check_names([cname], "c", _C_RESERVED, patterns=_C_PATTERNS)
            if cname in col.names():
                raise DualityError(f"the c export cannot name the constant for parameter "
                                   f"'{p.name}' {cname}: the name is already used")
            consts[p] = sp.Symbol(cname)
            out.append(f"static const double {cname} = {fmt_float(v)};")
        for it in col.items:  # one constant per name: the same value everywhere
            for s in it.valued:
                if col.params[s] != it.values[s]:
                    raise DualityError(
                        f"the c export with values=True needs one value per parameter, but "
                        f"'{s}' has different values in different functions; export them "
                        "separately or use values=False")
        if consts:
            out.append("")
    sigs = []
    for it in col.items:
        check_supported(it.expr, "c", BASE_ALLOWED + CASES_ALLOWED, it.name)
        extra = it.free if values else it.params
        sigs.append(f"static inline double {it.name}("
                    + ", ".join(f"double {s}" for s in it.args + extra) + ")")
    out += [s + ";" for s in sigs] + [""]
    for it, sig in zip(col.items, sigs):
        p = _C()
        expr = it.expr.xreplace({s: consts[s] for s in it.valued}) if values else it.expr
        repl, red = cse(expr, col.names() | {c.name for c in consts.values()})
        out += ["/*"] + [" * " + ln.replace("*/", "* /") for ln in _describe(it)] + [" */"]
        out.append(sig)
        out.append("{")
        out += [f"    const double {s} = {p.doprint(e)};" for s, e in repl]
        out.append(f"    return {p.doprint(red)};")
        out.append("}")
        out.append("")
    out.append(f"#endif /* {guard} */")
    return "\n".join(out) + "\n"


# =========================================================================== Stata

class _Stata(StrPrinter):
    """Stata expressions: ``^`` powers, ``ln``, parameters ``{a}``/``{a=0.3}``."""

    def __init__(self, params, values, settings=None):
        super().__init__(settings or {})
        self.params = params            # Symbol -> value or None
        self.values = values
        self.seen: set = set()

    def _print_Symbol(self, expr):
        if expr in self.params:
            v = self.params[expr]
            if self.values and v is not None and expr not in self.seen:
                self.seen.add(expr)
                return f"{{{expr.name}={fmt_float(v)}}}"
            self.seen.add(expr)
            return f"{{{expr.name}}}"
        return expr.name

    def _print_Float(self, expr):
        return _float_text(self, expr)

    def _print_Rational(self, expr):
        return f"({expr.p}/{expr.q})" if expr.q != 1 else self._print_Integer(expr)

    def _print_Integer(self, expr):
        return str(expr.p) if expr.p >= 0 else f"({expr.p})"

    def _print_Exp1(self, expr):
        return "exp(1)"

    def _print_exp(self, expr):
        return f"exp({self._print(expr.args[0])})"

    def _print_log(self, expr):
        return f"ln({self._print(expr.args[0])})"

    def _print_Abs(self, expr):
        return f"abs({self._print(expr.args[0])})"

    def _atom(self, e) -> str:
        text = self._print(e)
        if (e.is_Symbol or (e.is_Integer and e >= 0)
                or isinstance(e, (sp.exp, sp.log, sp.Abs))):
            return text
        return f"({text})"

    def _print_Pow(self, expr, rational=False):
        b, x = expr.as_base_exp()
        if x == sp.S.Half:
            return f"sqrt({self._print(b)})"
        if x == -1:
            return f"1/{self._atom(b)}"
        return f"{self._atom(b)}^{self._atom(x)}"


# Stata User's Guide, [U] 11.3 "Naming conventions": the reserved names, str# standing for
# str1 ... str2045 (from memory of Stata 17).
_STATA_RESERVED = {"_all", "_b", "byte", "_coef", "_cons", "double", "float", "if", "in",
                   "int", "long", "_n", "_N", "_pi", "_pred", "_rc", "_se", "_skip", "str",
                   "strL", "using", "with"}
_STATA_PATTERNS = (r"str\d+",)


def export_stata(col: Collection, *, name: str, values: bool = True) -> str:
    """One ``nl (<function name> = <expression>)`` line per function.

    Variables are the argument names (rename the data columns to match, or edit); the
    dependent variable is named after the function, or for an estimating equation after
    the observed variable it is fitted to (``c``, ``s_x1``).  Parameters are ``{a}``; with
    ``values=True`` the first occurrence carries the model's value as the initial value
    ``{a=0.3}`` (``nl`` estimates every parameter; values are starting points, not
    constants).  Stata's ``nl`` needs smooth expressions: Piecewise, min and max are
    refused.
    """
    check_names(col.names(), "stata", _STATA_RESERVED, max_len=32, patterns=_STATA_PATTERNS)
    out = ["* " + ln for ln in _header(col, name, "Stata (nl)")]
    for it in col.items:
        check_supported(it.expr, "stata", BASE_ALLOWED, it.name)
        params = {s: None for s in it.free}
        params.update({s: it.values[s] for s in it.valued})
        p = _Stata(params, values)
        out.append("")
        out += ["* " + ln for ln in _describe(it)]
        out.append(f"nl ({it.dependent or it.name} = {p.doprint(it.expr)})")
    return "\n".join(out) + "\n"


__all__ = ["export_python", "export_r", "export_julia", "export_octave", "export_c",
           "export_stata"]
