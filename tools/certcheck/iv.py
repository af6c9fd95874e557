"""Sound interval arithmetic on binary64, and SymPy expressions compiled to it.

An interval is a pair (lo, hi) of floats. Every operation rounds outward: its result is
computed in round-to-nearest and moved one ulp out (`math.nextafter`), except where the result
is exact (a zero factor, an error-free sum or product), so the true result for any points of
the operands lies inside. sin, cos, tan, exp and log come from `mpmath.iv` at 53 bits, which
rounds its ends outward itself; the monotone atan, asin and acos are mpmath's values at their
argument's ends, at 80 bits, moved two binary64 ulps out. A division by an interval holding zero, or a function argument
leaving its domain anywhere on the box, raises `Undefined`: nothing is proved there.
"""

import math
from fractions import Fraction

import mpmath
import sympy as sp

INF = math.inf
mpmath.iv.prec = 53
SPLIT = 134217729.0  # 2^27 + 1, Veltkamp's constant for binary64


class Undefined(ArithmeticError):
    """The expression is not defined (or not bounded) everywhere on the box."""


def down(x): return math.nextafter(x, -INF)
def up(x): return math.nextafter(x, INF)
def neg(a): return (-a[1], -a[0])
def vmin(a, b): return (min(a[0], b[0]), min(a[1], b[1]))
def vmax(a, b): return (max(a[0], b[0]), max(a[1], b[1]))
def mid(iv): return 0.5 * iv[0] + 0.5 * iv[1]


def sum_exact(a, b, s):
    """Knuth's TwoSum: is s = fl(a + b) the exact sum?"""
    if not math.isfinite(s):
        return False
    bp = s - a
    return (a - (s - bp)) + (b - bp) == 0.0


def prod_exact(a, b, p):
    """Dekker's TwoProduct: is p = fl(a * b) the exact product?"""
    if a == 0.0 or b == 0.0:
        return True
    if not math.isfinite(p) or abs(p) < 1e-290 or abs(a) > 1e150 or abs(b) > 1e150:
        return False
    c = SPLIT * a
    ah = c - (c - a)
    al = a - ah
    c = SPLIT * b
    bh = c - (c - b)
    bl = b - bh
    return ((ah * bh - p) + ah * bl + al * bh) + al * bl == 0.0


def const(q):
    """The tightest interval of an exact rational."""
    q = Fraction(q)
    f = float(q)  # int / int in CPython is correctly rounded
    if Fraction(f) == q:
        return (f, f)
    return (down(f), f) if Fraction(f) > q else (f, up(f))


def add(a, b):
    lo, hi = a[0] + b[0], a[1] + b[1]
    return (lo if sum_exact(a[0], b[0], lo) else down(lo),
            hi if sum_exact(a[1], b[1], hi) else up(hi))


def _bound(x, y, upward):
    """x*y rounded outward; exact when a factor is zero."""
    p = x * y
    if p != p:
        return 0.0  # 0·∞ counts as 0: the limit bounds need
    if x == 0.0 or y == 0.0:
        return p
    return math.nextafter(p, INF if upward else -INF)


def _pow2(x):
    """±2^k, a factor a product with is exact (short of overflow and underflow)."""
    m = math.frexp(x)[0]
    return (m == 0.5 or m == -0.5) and 1e-150 < abs(x) < 1e150


def mul(a, b):
    a0, a1 = a
    b0, b1 = b
    if a0 == a1 and _pow2(a0) and 1e-140 < abs(b0) < 1e140 and 1e-140 < abs(b1) < 1e140:
        # a constant ±2^k (a sign, a half): exact
        return (a0 * b0, a0 * b1) if a0 > 0.0 else (a0 * b1, a0 * b0)
    if b0 == b1 and a0 != a1:
        return mul(b, a)
    if a0 >= 0.0 and b0 >= 0.0:
        # the common case of squares and gains: two products
        return (_bound(a0, b0, False), _bound(a1, b1, True))
    if a0 == a1 and b0 == b1:
        return (_bound(a0, b0, False), _bound(a0, b0, True))
    pairs = ((a0, b0), (a0, b1), (a1, b0), (a1, b1))
    vals = [x * y for x, y in pairs]
    vals = [0.0 if v != v else v for v in vals]
    vlo, vhi = min(vals), max(vals)
    lo, hi = INF, -INF
    # rounding is monotone: the exact extreme is among the pairs with the extreme nearest
    # product; each of them is bounded on its own
    for (x, y), v in zip(pairs, vals):
        if v == vlo:
            lo = min(lo, _bound(x, y, False))
        if v == vhi:
            hi = max(hi, _bound(x, y, True))
    return (lo, hi)


def div(a, b):
    if b[0] <= 0.0 <= b[1]:
        raise Undefined("division by an interval holding zero")
    qs = [x / y for x in a for y in b]
    if any(q != q for q in qs):
        raise Undefined("an undefined quotient")
    return (down(min(qs)), up(max(qs)))


def _pow_pos(x, n, upward):
    """x^n for x >= 0, rounded down or up, by repeated multiplication."""
    acc = 1.0
    for _ in range(n):
        p = acc * x
        if not prod_exact(acc, x, p):
            p = up(p) if upward else max(0.0, down(p))
        acc = p
    return acc


def powi(a, n):
    if n == 0:
        return (1.0, 1.0)
    if n < 0:
        return div((1.0, 1.0), powi(a, -n))
    lo, hi = a
    if n % 2:
        # odd powers are increasing
        return (_pow_pos(lo, n, False) if lo >= 0.0 else -_pow_pos(-lo, n, True),
                _pow_pos(hi, n, True) if hi >= 0.0 else -_pow_pos(-hi, n, False))
    if lo >= 0.0:
        return (_pow_pos(lo, n, False), _pow_pos(hi, n, True))
    if hi <= 0.0:
        return (_pow_pos(-hi, n, False), _pow_pos(-lo, n, True))
    return (0.0, _pow_pos(max(-lo, hi), n, True))


def sqrt(a):
    if a[0] < 0.0:
        raise Undefined("square root of a negative number")
    lo, hi = math.sqrt(a[0]), math.sqrt(a[1])
    return (lo if lo * lo == a[0] and prod_exact(lo, lo, lo * lo) else max(0.0, down(lo)),
            hi if hi * hi == a[1] and prod_exact(hi, hi, hi * hi) else up(hi))


def _mp(f, a):
    r = f(mpmath.iv.mpf([a[0], a[1]]))
    lo, hi = float(r.a), float(r.b)
    if not (math.isfinite(lo) and math.isfinite(hi)):
        raise Undefined("an unbounded function value")
    # the ends are 53-bit numbers, so exact in binary64; one ulp more costs nothing
    return (down(lo), up(hi))


def _unit(a, name):
    if a[0] < -1.0 or a[1] > 1.0:
        raise Undefined(f"{name} outside [-1, 1]")
    return a


def sin(a): return _mp(mpmath.iv.sin, a)
def cos(a): return _mp(mpmath.iv.cos, a)
def exp(a): return _mp(mpmath.iv.exp, a)


def tan(a):
    # a pole is where cos vanishes: cos must keep one sign on the box
    c = cos(a)
    if c[0] <= 0.0 <= c[1]:
        raise Undefined("tan across a pole")
    return _mp(mpmath.iv.tan, a)


def log(a):
    if a[0] <= 0.0:
        raise Undefined("logarithm of a non-positive number")
    return _mp(mpmath.iv.log, a)


# atan and asin increase, acos decreases
def atan(a): return (_end(mpmath.atan, a[0], 0), _end(mpmath.atan, a[1], 1))
def asin(a): return (_end(mpmath.asin, _unit(a, "asin")[0], 0), _end(mpmath.asin, a[1], 1))
def acos(a): return (_end(mpmath.acos, _unit(a, "acos")[1], 0), _end(mpmath.acos, a[0], 1))


def _end(f, x, upper):
    """f(x) rounded outward at 80 bits, then one binary64 ulp out (mpmath's elementary
    functions are accurate to a few ulps of their working precision)."""
    with mpmath.workprec(80):
        v = float(f(mpmath.mpf(x)))
    return up(up(v)) if upper else down(down(v))


def atan2(y, x):
    # off the closed half-line y = 0, x <= 0 atan2(y, x) = 2*atan(y/(sqrt(x^2 + y^2) + x))
    r = add(sqrt(add(powi(x, 2), powi(y, 2))), x)
    if r[0] <= 0.0:
        raise Undefined("atan2 on or across its cut")
    t = atan(div(y, r))
    return (2.0 * t[0], 2.0 * t[1])


def absv(a):
    if a[0] >= 0.0:
        return a
    if a[1] <= 0.0:
        return neg(a)
    return (0.0, max(-a[0], a[1]))


def sgn(a):
    """The sign over an interval: where the interval holds zero, every value between the
    signs of its ends (the generalized gradient of |u| at u = 0 is [-1, 1])."""
    return (-1.0 if a[0] < 0.0 else 0.0 if a[0] == 0.0 else 1.0,
            1.0 if a[1] > 0.0 else 0.0 if a[1] == 0.0 else -1.0)


FUNCS = {sp.sign: "sgn", sp.sin: "sin", sp.cos: "cos", sp.tan: "tan", sp.exp: "exp", sp.log: "log",
         sp.atan: "atan", sp.asin: "asin", sp.acos: "acos", sp.Abs: "absv"}


class Compiled:
    """Expressions over named coordinates, compiled to one Python function of a box."""

    def __init__(self, exprs, names):
        self.names = list(names)
        index = {n: i for i, n in enumerate(self.names)}
        repl, reduced = sp.cse(exprs, optimizations=None)
        lines, consts = [], {}
        env = {}

        def ref(e):
            if e.is_Symbol:
                if e.name in index:
                    return f"x[{index[e.name]}]"
                if e.name in env:
                    return env[e.name]
                raise Undefined(f"`{e.name}` is not a coordinate")
            if e.is_Rational:
                key = f"C{len(consts)}"
                consts[key] = const(Fraction(int(e.p), int(e.q)))
                return key
            return emit(e)

        def chain(fn, args):
            out = ref(args[0])
            for a in args[1:]:
                out = f"{fn}({out}, {ref(a)})"
            return out

        def emit(e):
            for cls, fn in ((sp.Add, "add"), (sp.Mul, "mul"), (sp.Min, "vmin"), (sp.Max, "vmax")):
                if isinstance(e, cls):
                    return chain(fn, e.args)
            if e.is_Pow:
                b, k = e.args
                if k.is_Integer:
                    return f"powi({ref(b)}, {int(k)})"
                if k.is_Rational and k.q == 2:
                    s = f"sqrt({ref(b)})"
                    return s if k.p == 1 else f"powi({s}, {int(k.p)})"
                return f"exp(mul({ref(k)}, log({ref(b)})))"
            if isinstance(e, sp.atan2):
                return f"atan2({ref(e.args[0])}, {ref(e.args[1])})"
            for cls, name in FUNCS.items():
                if isinstance(e, cls):
                    return f"{name}({ref(e.args[0])})"
            raise Undefined(f"cannot evaluate {type(e).__name__}")

        for k, (s, e) in enumerate(repl):
            t = f"t{k}"
            lines.append(f"    {t} = {ref(e)}")
            env[s.name] = t
        lines.append("    return [" + ", ".join(ref(e) for e in reduced) + "]")
        src = "def f(x):\n" + "\n".join(lines) + "\n"
        scope = dict(globals(), **consts)
        exec(src, scope)
        self.f = scope["f"]

    def __call__(self, box):
        """The enclosures over a box (list of intervals); raises Undefined."""
        out = self.f(box)
        for lo, hi in out:
            if not (lo <= hi) or math.isnan(lo) or math.isnan(hi):
                raise Undefined("no enclosure")
        return out
