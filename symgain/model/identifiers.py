"""The one rule for names: what a model, parameter, state, input or output may be called.

A name is plain ASCII: a letter, then letters, digits and underscores, at
most :data:`MAX_NAME_LENGTH` characters, matched over the whole text (a
trailing newline does not pass). Lookalike letters from other alphabets
(Cyrillic ``а``, fullwidth ``ｍ``) are refused, never folded into ASCII.

>>> is_identifier("m_c"), is_identifier("cart\\n"), is_identifier("m\\u0430ss"), is_identifier("_x")
(True, False, False, False)

The reserved words of the languages symgain writes are listed here too, so
that every emitter mangles or refuses the same names:

>>> "HUGE_VAL" in C_RESERVED and "sinf" in C_RESERVED and "int" in C_RESERVED
True
>>> "lambda" in PYTHON_KEYWORDS
True
"""
from __future__ import annotations

import keyword
import re

__all__ = ["IDENTIFIER", "MAX_NAME_LENGTH", "is_identifier", "describe_name", "PYTHON_KEYWORDS",
           "C_KEYWORDS", "C_MATH_NAMES", "C_RESERVED"]

IDENTIFIER = re.compile(r"[A-Za-z][A-Za-z0-9_]*")
MAX_NAME_LENGTH = 64  # characters

PYTHON_KEYWORDS = frozenset(keyword.kwlist) | frozenset(keyword.softkwlist)

C_KEYWORDS = frozenset("""auto break case char const continue default do double else enum extern float for
goto if inline int long register restrict return short signed sizeof static struct switch typedef union
unsigned void volatile while _Bool _Complex _Imaginary bool true false complex imaginary asm fortran
alignas alignof noreturn static_assert thread_local""".split())

_MATH_FUNCTIONS = """acos asin atan atan2 cos sin tan acosh asinh atanh cosh sinh tanh exp exp2 expm1 frexp
ldexp log log10 log1p log2 logb ilogb modf scalbn scalbln cbrt fabs hypot pow sqrt erf erfc lgamma tgamma
ceil floor nearbyint rint lrint llrint round lround llround trunc fmod remainder remquo copysign nan
nextafter nexttoward fdim fmax fmin fma""".split()

#: Names of <math.h>: its functions (with the ``f`` and ``l`` variants), its macros and types.
C_MATH_NAMES = frozenset(
    _MATH_FUNCTIONS + [f + "f" for f in _MATH_FUNCTIONS] + [f + "l" for f in _MATH_FUNCTIONS]
    + """HUGE_VAL HUGE_VALF HUGE_VALL INFINITY NAN FP_INFINITE FP_NAN FP_NORMAL FP_SUBNORMAL FP_ZERO
FP_FAST_FMA FP_FAST_FMAF FP_FAST_FMAL FP_ILOGB0 FP_ILOGBNAN MATH_ERRNO MATH_ERREXCEPT math_errhandling
fpclassify isfinite isinf isnan isnormal signbit isgreater isgreaterequal isless islessequal
islessgreater isunordered float_t double_t M_E M_LOG2E M_LOG10E M_LN2 M_LN10 M_PI M_PI_2 M_PI_4 M_1_PI
M_2_PI M_2_SQRTPI M_SQRT2 M_SQRT1_2 j0 j1 jn y0 y1 yn gamma drem finite significand main errno
NULL EOF EDOM ERANGE EILSEQ assert""".split())

#: Every name a parameter cannot carry unchanged into C (it gets ``_p`` appended).
C_RESERVED = C_KEYWORDS | C_MATH_NAMES


def is_identifier(text) -> bool:
    """True for a name that follows the rule (ASCII letter first, full match, bounded length)."""
    return isinstance(text, str) and len(text) <= MAX_NAME_LENGTH and IDENTIFIER.fullmatch(text) is not None


def describe_name(text) -> str:
    """Why *text* is not a name, in a few words (for error messages).

    >>> describe_name("cart\\n"), describe_name("m\\u0430")
    ('it contains a control character', "it contains the non-ASCII character U+0430 ('а')")
    """
    if not isinstance(text, str):
        return f"it is {type(text).__name__}, not text"
    if not text:
        return "it is empty"
    if len(text) > MAX_NAME_LENGTH:
        return f"it is longer than {MAX_NAME_LENGTH} characters"
    for ch in text:
        if ord(ch) < 32 or ord(ch) == 127:
            return "it contains a control character"
        if ord(ch) > 127:
            return f"it contains the non-ASCII character U+{ord(ch):04X} ({ch!r})"
    if not text[0].isalpha():
        return "it must start with a letter"
    return "use letters, digits and underscores only"
