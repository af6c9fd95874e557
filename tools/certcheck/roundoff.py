"""R13: the round-off bounds of the generated code, checked on their own.

The certificate gives the program lawsmith emits (each instruction, the rationals its rounded
constants stand for), how its inputs follow from a box of coordinates, and per precision
(binary64, binary32) each output's bound with the split tree of its box. This module shows
that the program computes the spec's laws (SymPy, the laws as model.py reads them), that the
box holds every input the code accepts, and re-derives every leaf's bound with its own
arithmetic: numpy vectors of binary64 interval ends over all leaves at once, every result
moved one ulp outward (`numpy.nextafter`), asin/acos/atan/exp/log/sin/cos/tan from mpmath at
80 bits moved two ulps out. The method is the one lawsmith documents (a forward error
analysis in the standard model of IEEE 754 arithmetic, exact values enclosed by the natural
extension cut by the mean-value form around the box's midpoint); a leaf whose bound here
exceeds the stated one (this arithmetic is a little wider) is halved, up to twelve times
and four times as many boxes as the tree has leaves,
before the certificate is rejected.
"""

from fractions import Fraction

import mpmath
import numpy as np
import sympy as sp

import model

INF = np.inf
LIB_ULPS = 2.0
HOLDER = 2.2214415  # above pi/sqrt(2): |asin x - asin y| <= (pi/sqrt(2)) sqrt|x - y| on [-1, 1]
FORMATS = {  # unit round-off, smallest normal exponent, half the smallest subnormal, largest
    "f64": (2.0 ** -53, -1022, 2.0 ** -1075, float(np.finfo(np.float64).max)),
    "f32": (2.0 ** -24, -126, 2.0 ** -150, float(np.finfo(np.float32).max)),
}


class Bad(ValueError):
    """The round-off section does not hold."""


def dn(x): return np.nextafter(x, -INF)
def upv(x): return np.nextafter(x, INF)


def nearest(q, fmt):
    """The value of type `fmt` nearest to the rational q, as a float."""
    d = float(Fraction(q))  # correctly rounded
    return float(np.float32(d)) if fmt == "f32" and abs(d) <= 3.4e38 else d


def inward(lo, hi, fmt):
    """A declared range's ends as the code of that type compares against them."""
    lo, hi = float(Fraction(lo)), float(Fraction(hi))
    if fmt == "f64":
        return lo, hi
    l, h = np.float32(lo), np.float32(hi)
    if float(l) < lo:
        l = np.nextafter(l, np.float32(INF))
    if float(h) > hi:
        h = np.nextafter(h, np.float32(-INF))
    return float(l), float(h)


def half_ulp(m, fmt):
    """Half an ulp of the binade of each magnitude (infinite where it may overflow)."""
    u, emin, eta, big = FORMATS[fmt]
    m = np.asarray(m, dtype=float)
    out = np.full(m.shape, INF)
    ok = np.isfinite(m) & (m <= big)
    e = np.frexp(np.where(ok & (m > 0), m, 1.0))[1] - 1
    out = np.where(ok, np.where(e < emin, eta, np.ldexp(u, e)), out)
    return np.where(ok & (m == 0), 0.0, out)


# intervals: pairs of numpy arrays (lo, hi) over the leaves
def I(lo, hi): return (np.asarray(lo, float), np.asarray(hi, float))
def add(a, b): return (dn(a[0] + b[0]), upv(a[1] + b[1]))
def neg(a): return (-a[1], -a[0])
def sub(a, b): return add(a, neg(b))
def mag(a): return np.where(np.isnan(a[0]) | np.isnan(a[1]), INF, np.maximum(abs(a[0]), abs(a[1])))
def mig(a): return np.where((a[0] <= 0) & (a[1] >= 0), 0.0, np.minimum(abs(a[0]), abs(a[1])))
def hull(a, b): return (np.minimum(a[0], b[0]), np.maximum(a[1], b[1]))
def spread(e): return (-e, e)


def mul(a, b):
    with np.errstate(invalid="ignore", over="ignore"):
        ps = [a[0] * b[0], a[0] * b[1], a[1] * b[0], a[1] * b[1]]
    bad = np.any([np.isnan(p) for p in ps], axis=0)
    lo, hi = dn(np.minimum.reduce(ps)), upv(np.maximum.reduce(ps))
    zero = ((a[0] == 0) & (a[1] == 0)) | ((b[0] == 0) & (b[1] == 0))
    lo, hi = np.where(bad, -INF, lo), np.where(bad, INF, hi)
    return (np.where(zero, 0.0, lo), np.where(zero, 0.0, hi))


def div(a, b):
    holds0 = (b[0] <= 0) & (b[1] >= 0)
    with np.errstate(all="ignore"):
        qs = [a[0] / b[0], a[0] / b[1], a[1] / b[0], a[1] / b[1]]
    bad = holds0 | np.any([np.isnan(q) for q in qs], axis=0)
    return (np.where(bad, -INF, dn(np.minimum.reduce(qs))),
            np.where(bad, INF, upv(np.maximum.reduce(qs))))


def inter(a, b):
    lo, hi = np.maximum(a[0], b[0]), np.minimum(a[1], b[1])
    empty = lo > hi
    return (np.where(empty, a[0], lo), np.where(empty, a[1], hi))


def sqrt_iv(a):
    with np.errstate(invalid="ignore"):
        return (dn(np.sqrt(np.maximum(a[0], 0.0))), upv(np.sqrt(np.maximum(a[1], 0.0))))


def _mono(f, xs, upper):
    """mpmath's f at 80 bits at each point, moved two binary64 ulps out."""
    out = np.empty(len(xs))
    with mpmath.workprec(80):
        for k, x in enumerate(xs):
            if not np.isfinite(x):
                out[k] = INF if upper else -INF
                continue
            v = float(f(mpmath.mpf(float(x))))
            out[k] = v
    step = INF if upper else -INF
    return np.nextafter(np.nextafter(out, step), step)


def call1(name, a):
    if name == "abs":
        lo = np.where(a[0] >= 0, a[0], np.where(a[1] <= 0, -a[1], 0.0))
        return (lo, mag(a))
    if name == "sqrt":
        return sqrt_iv(a)
    if name in ("asin", "acos"):
        lo, hi = np.clip(a[0], -1, 1), np.clip(a[1], -1, 1)
        f = mpmath.asin if name == "asin" else mpmath.acos
        ends = (_mono(f, lo, False), _mono(f, hi, True)) if name == "asin" else \
            (_mono(f, hi, False), _mono(f, lo, True))
        return ends
    if name in ("atan", "exp"):
        f = mpmath.atan if name == "atan" else mpmath.exp
        return (_mono(f, a[0], False), _mono(f, a[1], True))
    if name == "ln":
        ok = a[0] > 0
        return (np.where(ok, _mono(mpmath.log, np.where(ok, a[0], 1.0), False), -INF),
                _mono(mpmath.log, np.maximum(a[1], 1e-300), True))
    if name in ("sin", "cos"):
        lo, hi = np.full(len(a[0]), -1.0), np.full(len(a[0]), 1.0)
        for k in range(len(a[0])):
            if np.isfinite(a[0][k]) and np.isfinite(a[1][k]):
                with mpmath.workprec(80):
                    v = getattr(mpmath.iv, name)(mpmath.iv.mpf([float(a[0][k]), float(a[1][k])]))
                lo[k], hi[k] = max(-1.0, float(v.a)), min(1.0, float(v.b))
        return (dn(dn(lo)), upv(upv(hi)))
    raise Bad(f"the function `{name}` is not checked here")


def slope(name, x):
    """An enclosure of the derivative of a function of one argument over x."""
    one = I(np.ones_like(x[0]), np.ones_like(x[0]))
    if name == "abs":
        s0 = np.where(x[0] >= 0, 1.0, -1.0)
        s1 = np.where(x[1] <= 0, -1.0, 1.0)
        return (s0, s1)
    if name in ("asin", "acos"):
        inside = (x[0] > -1) & (x[1] < 1)
        d = div(one, sqrt_iv(sub(one, mul(x, x))))
        d = (np.where(inside, d[0], -INF), np.where(inside, d[1], INF))
        return neg(d) if name == "acos" else d
    if name == "sqrt":
        pos = x[0] > 0
        d = div(I(0.5 * one[0], 0.5 * one[1]), sqrt_iv(x))
        return (np.where(pos, d[0], -INF), np.where(pos, d[1], INF))
    if name == "exp":
        return call1("exp", x)
    if name == "ln":
        pos = x[0] > 0
        d = div(one, x)
        return (np.where(pos, d[0], -INF), np.where(pos, d[1], INF))
    if name == "atan":
        return div(one, add(one, mul(x, x)))
    if name == "sin":
        return call1("cos", x)
    if name == "cos":
        return neg(call1("sin", x))
    raise Bad(f"the function `{name}` is not checked here")


class Program:
    """The certificate's program, checked against the spec and analysed over leaves."""

    def __init__(self, r, m, prec):
        self.ops, self.inputs, self.outputs = r["program"], r["inputs"], r["outputs"]
        self.rounded = {int(s): Fraction(q) for s, q in r["rounded"]}
        self.fmt = prec["float"]
        self.map = [(float(o), [int(j) for j in js]) for o, js in prec["input_map"]]
        self.box = [(float(lo), float(hi)) for lo, hi in prec["box"]]
        self.m = m

    # the program is the spec's laws -----------------------------------------------------
    def symbolic(self):
        """Each output as a SymPy expression of the inputs (rounded constants as their
        rationals, the asin/acos guards as identities), and each output's final clamp."""
        vals, guards = [], {}
        for k, op in enumerate(self.ops):
            kind = op[0]
            if kind == "const":
                c = float(op[1])
                if k in self.rounded:
                    q = self.rounded[k]
                    # the double nearest to q, and no other
                    if float(q) != c:
                        raise Bad(f"constant {c!r} is not the double nearest to {q}")
                    vals.append(sp.Rational(q.numerator, q.denominator))
                else:
                    vals.append(sp.Rational(Fraction(c).numerator, Fraction(c).denominator))
            elif kind == "input":
                vals.append(self.m.sym(self.inputs[op[1]]))
            elif kind == "neg":
                vals.append(-vals[op[1]])
            elif kind in ("add", "sub", "mul", "div", "pow"):
                a, b = vals[op[1]], vals[op[2]]
                vals.append({"add": a + b, "sub": a - b, "mul": a * b, "div": a / b,
                             "pow": a ** b}[kind])
            elif kind == "call":
                f = {"sin": sp.sin, "cos": sp.cos, "tan": sp.tan, "asin": sp.asin,
                     "acos": sp.acos, "atan": sp.atan, "sqrt": sp.sqrt, "exp": sp.exp,
                     "ln": sp.log, "abs": sp.Abs, "min": sp.Min, "max": sp.Max,
                     "atan2": sp.atan2}[op[1]]
                vals.append(f(*[vals[i] for i in op[2:]]))
            elif kind == "clamp":
                # a guard in the law (asin's argument within [-1, 1]) or an output's clamp
                guards[k] = (float(op[2]), float(op[3]))
                vals.append(vals[op[1]])
            else:
                raise Bad(f"instruction `{kind}` is not checked here")
        return vals, guards

    def matches_spec(self):
        m = self.m
        refs = [n for n, role, _, _ in m.coords if role == "reference"]
        rates = [n for n, role, _, _ in m.coords if role == "rate"]
        signals = [n for n, role, _, _ in m.coords if role == "signal"]
        gains = [n for n, role, _, _ in m.coords if role == "gain"]
        want = list(m.states) + refs + rates + signals + list(m.memory) + gains
        if self.inputs != want:
            raise Bad(f"the program's inputs are not the spec's ({want})")
        vals, guards = self.symbolic()
        params = {m.sym(p): model.R(v) for p, v in m.params.items()}
        laws = [(n, e.xreplace(params), lo, hi) for n, (e, lo, hi) in m.actuators.items()]
        laws += [(n, e.xreplace(params), None, None) for n, e in m.updates.items()]
        if [o[0] for o in self.outputs] != [n for n, _, _, _ in laws]:
            raise Bad("the program's outputs are not the spec's commands and update laws")
        for (name, slot), (n, e, lo, hi) in zip(self.outputs, laws):
            if lo is not None:
                op = self.ops[slot]
                if op[0] != "clamp" or (float(op[2]), float(op[3])) != (float(lo), float(hi)):
                    raise Bad(f"`{name}` is not held within the limits of `{n}`")
            if sp.simplify(sp.together(vals[slot] - e)) != 0:
                raise Bad(f"the program's `{name}` is not the spec's law")
        for k, (lo, hi) in guards.items():
            if k not in [s for _, s in self.outputs] and (lo, hi) != (-1.0, 1.0):
                raise Bad(f"instruction {k} clamps to [{lo}, {hi}], not a guard of asin or acos")
        self.coordinates_hold(refs + rates, signals, gains)

    def coordinates_hold(self, tracked, signals, gains):
        """The box holds every input the code of this precision accepts."""
        m, fmt = self.m, self.fmt
        u = FORMATS[fmt][0]
        ranged = {n: decl for n, role, _, decl in m.coords if role in ("reference", "rate", "signal")}
        expect, maps = [], []
        for n in tracked + signals:
            expect.append(inward(*ranged[n], fmt))
        nr = len(expect)
        for i, (s, v) in enumerate(m.states.items()):
            lo, hi = inward(*model.pair(v["error"], s), fmt)
            h = float(half_ulp(max(abs(lo), abs(hi)), fmt))
            expect.append((lo - h, hi + h))
            if v.get("reference"):
                maps.append((0.0, [tracked.index(v["reference"]), nr + i]))
            else:
                maps.append((nearest(v.get("equilibrium", 0), fmt), [nr + i]))
        maps += [(0.0, [j]) for j in range(nr)]
        rest = [model.pair(v["limits"], n) for n, v in m.memory.items()]
        rest += [decl for n, role, _, decl in m.coords if role == "gain"]
        for r in rest:
            maps.append((0.0, [len(expect)]))
            expect.append(inward(*r, fmt))
        if self.map != maps:
            raise Bad(f"the {fmt} input map is not how the code's inputs follow from the box")
        if len(self.box) != len(expect) or any(not (b[0] <= e[0] and b[1] >= e[1])
                                                for b, e in zip(self.box, expect)):
            raise Bad(f"the {fmt} box does not hold every input the code accepts")

    # the analysis ---------------------------------------------------------------------------
    def leaves(self, tree):
        out, stack, it = [], [list(self.box)], iter(tree)
        while stack:
            b = stack.pop()
            d = next(it, None)
            if d is None:
                raise Bad("the split tree ends before its boxes do")
            if d < 0:
                out.append(b)
                continue
            lo, hi = b[d]
            mid = 0.5 * lo + 0.5 * hi
            if not lo < mid < hi:
                raise Bad("a split of a box too narrow to split")
            l, h = list(b), list(b)
            l[d], h[d] = (lo, mid), (mid, hi)
            stack += [h, l]
        if next(it, None) is not None:
            raise Bad("the split tree has nodes left over")
        return out

    def natural(self, coords, centre=None):
        """Every instruction's exact value over the leaves (with `centre`, the values at the
        midpoints: cut by the mean-value form)."""
        n, L = len(coords), len(coords[0][0])
        xs, gs = [], []
        zero = lambda: [(np.zeros(L), np.zeros(L)) for _ in range(n)]
        for k, op in enumerate(self.ops):
            kind, g = op[0], None
            if kind == "const":
                c = float(op[1])
                h = float(half_ulp(abs(c), "f64")) if k in self.rounded else 0.0
                v = (np.full(L, dn(c - h) if h else c), np.full(L, upv(c + h) if h else c))
                g = zero()
            elif kind == "input":
                off, js = self.map[op[1]]
                v = (np.full(L, off), np.full(L, off))
                g = zero()
                for j in js:
                    v = add(v, coords[j])
                    g[j] = (g[j][0] + 1.0, g[j][1] + 1.0)
            elif kind == "neg":
                v, g = neg(xs[op[1]]), [neg(d) for d in gs[op[1]]]
            elif kind in ("add", "sub"):
                a, b = xs[op[1]], xs[op[2]]
                f = add if kind == "add" else sub
                v, g = f(a, b), [f(p, q) for p, q in zip(gs[op[1]], gs[op[2]])]
            elif kind == "mul":
                a, b = xs[op[1]], xs[op[2]]
                v = mul(a, b)
                g = [add(mul(p, b), mul(q, a)) for p, q in zip(gs[op[1]], gs[op[2]])]
            elif kind == "div":
                a, b = xs[op[1]], xs[op[2]]
                v = div(a, b)
                g = [div(sub(p, mul(v, q)), b) for p, q in zip(gs[op[1]], gs[op[2]])]
            elif kind == "call" and len(op) == 3:
                a = xs[op[2]]
                v = call1(op[1], a)
                s = slope(op[1], a)
                g = [mul(d, s) for d in gs[op[2]]]
            elif kind == "call" and op[1] in ("min", "max"):
                a, b = xs[op[2]], xs[op[3]]
                if op[1] == "min":
                    v = (np.minimum(a[0], b[0]), np.minimum(a[1], b[1]))
                    a_wins, b_wins = a[1] < b[0], b[1] < a[0]
                else:
                    v = (np.maximum(a[0], b[0]), np.maximum(a[1], b[1]))
                    a_wins, b_wins = a[0] > b[1], b[0] > a[1]
                g = [(np.where(a_wins, p[0], np.where(b_wins, q[0], np.minimum(p[0], q[0]))),
                      np.where(a_wins, p[1], np.where(b_wins, q[1], np.maximum(p[1], q[1]))))
                     for p, q in zip(gs[op[2]], gs[op[3]])]
            elif kind == "clamp":
                a = xs[op[1]]
                lo, hi = float(op[2]), float(op[3])
                v = (np.clip(a[0], lo, hi), np.clip(a[1], lo, hi))
                inside, out = (a[0] >= lo) & (a[1] <= hi), (a[1] < lo) | (a[0] > hi)
                g = [(np.where(inside, d[0], np.where(out, 0.0, np.minimum(d[0], 0.0))),
                      np.where(inside, d[1], np.where(out, 0.0, np.maximum(d[1], 0.0))))
                     for d in gs[op[1]]]
            else:
                raise Bad(f"instruction `{kind}` is not analysed here")
            if centre is not None:
                mids, at_mid = centre
                fin = np.all([np.isfinite(d[0]) & np.isfinite(d[1]) for d in g], axis=0)
                form = at_mid[k]
                for d, c, mm in zip(g, coords, mids):
                    form = add(form, mul(d, sub(c, mm)))
                cut = inter(v, form)
                v = (np.where(fin, cut[0], v[0]), np.where(fin, cut[1], v[1]))
            xs.append(v)
            gs.append(g)
        return xs

    def enclose(self, coords):
        mids = [(0.5 * c[0] + 0.5 * c[1],) * 2 for c in coords]
        at_mid = self.natural(mids)
        return self.natural(coords, (mids, at_mid))

    def errors(self, coords):
        """Each output's round-off bound over each leaf."""
        fmt = self.fmt
        u, emin, eta, _ = FORMATS[fmt]
        xs = self.enclose(coords)
        L = len(coords[0][0])
        es = []

        def up2(a, b): return np.where((a == 0) | (b == 0), a + b, upv(a + b))
        def mulup(a, b): return np.where((a == 0) | (b == 0), 0.0, upv(a * b))
        def near(k, e): return mag(add(xs[k], spread(e)))
        def computed(i): return add(xs[i], spread(es[i]))

        def lit(c):
            return float(np.float32(c)) if fmt == "f32" else c

        def rounding(x):
            h = half_ulp(mag(x), fmt)
            return np.where((h != eta) & (mig(x) < 2.0 ** emin), up2(h, np.full(L, eta)), h)

        for k, op in enumerate(self.ops):
            kind = op[0]
            if kind == "const":
                c = float(op[1])
                h = float(half_ulp(abs(c), "f64")) if k in self.rounded else 0.0
                d = abs(lit(c) - c)
                d = float(upv(d)) if d else 0.0
                e = np.full(L, float(upv(d + h)) if d and h else d + h)
            elif kind == "input":
                e = np.zeros(L)
            elif kind == "neg":
                e = es[op[1]]
            elif kind in ("add", "sub"):
                p = up2(es[op[1]], es[op[2]])
                h = half_ulp(near(k, p), fmt)
                e = up2(p, np.where(h == eta, 0.0, h))
            elif kind == "mul":
                a, b = op[1], op[2]
                p = up2(mulup(mag(computed(b)), es[a]), mulup(mag(xs[a]), es[b]))
                x = add(xs[k], spread(p))
                pow2 = any(self.ops[s][0] == "const" and s not in self.rounded
                           and float(self.ops[s][1]) != 0
                           and lit(float(self.ops[s][1])) == float(self.ops[s][1])
                           and np.frexp(abs(float(self.ops[s][1])))[0] == 0.5
                           for s in (a, b))
                exact = (mig(x) >= 2.0 ** emin) & (mag(x) <= FORMATS[fmt][3])
                own = np.where(pow2 & exact, 0.0, rounding(x)) if pow2 \
                    else rounding(x)
                e = up2(p, own)
            elif kind == "div":
                a, b = op[1], op[2]
                mb, mbc = mig(xs[b]), mig(computed(b))
                ok = (mb > 0) & (mbc > 0)
                with np.errstate(all="ignore"):
                    q1 = upv(es[a] / np.where(ok, mbc, 1.0))
                    q2 = upv(mulup(mag(xs[a]), es[b]) / dn(np.where(ok, mb, 1.0) * np.where(ok, mbc, 1.0)))
                p = np.where(ok, up2(q1, q2), INF)
                e = up2(p, rounding(add(xs[k], spread(p))))
            elif kind == "call" and len(op) == 3:
                name, a = op[1], op[2]
                h = computed(a)
                if name in ("asin", "acos"):
                    h = inter(h, (np.full(L, -1.0), np.full(L, 1.0)))
                lip = mulup(mag(slope(name, h)), es[a])
                if name in ("asin", "acos"):
                    lip = np.minimum(lip, mulup(HOLDER, upv(np.sqrt(es[a]))))
                p = np.where(es[a] == 0, 0.0, lip)
                img = near(k, p)
                own = {"abs": np.zeros(L), "sqrt": half_ulp(img, fmt)}.get(
                    name, mulup(2 * LIB_ULPS, half_ulp(img, fmt)))
                e = up2(p, own)
            elif kind == "call" and op[1] in ("min", "max"):
                e = np.maximum(es[op[2]], es[op[3]])
            elif kind == "clamp":
                a, lo, hi = op[1], float(op[2]), float(op[3])
                tl, th = inward(Fraction(lo), Fraction(hi), fmt)

                def end(t, x):
                    d = abs(t - x)
                    return float(upv(upv(d) + half_ulp(abs(x), "f64"))) if d else \
                        float(half_ulp(abs(x), "f64"))
                ends = max(end(tl, lo), end(th, hi))
                c = computed(a)
                e = np.where((c[0] > hi) | (c[1] < lo), ends, up2(es[a], np.full(L, ends)))
            else:
                raise Bad(f"instruction `{kind}` is not analysed here")
            e = np.where(np.isnan(e), INF, e)
            es.append(e)
        return [es[s] for _, s in self.outputs]


def check(cert, m):
    """R13. Returns one line per output: its bound in each precision."""
    r = cert.get("roundoff")
    if r is None:
        return []
    if r.get("lib_ulps") != LIB_ULPS:
        raise Bad("the library functions' error is not the one this check assumes")
    precisions = r["precisions"]
    if [p["float"] for p in precisions] != ["f64", "f32"]:
        raise Bad("not one section per precision (f64, f32)")
    rows = {}
    for prec in precisions:
        p = Program(r, m, prec)
        p.matches_spec()
        bounds = prec["bounds"]
        if [b["output"] for b in bounds] != [o[0] for o in p.outputs]:
            raise Bad("not one bound per output")
        for o, b in enumerate(bounds):
            stated = float(b["bound"])
            boxes = p.leaves(b["tree"])
            budget = 4 * len(boxes)  # boxes this check may add by halving
            for depth in range(13):
                coords = [(np.array([bx[j][0] for bx in boxes]), np.array([bx[j][1] for bx in boxes]))
                          for j in range(len(p.box))]
                bad = [bx for bx, e in zip(boxes, p.errors(coords)[o]) if not e <= stated]
                if not bad:
                    break
                budget -= len(bad)
                if depth == 12 or budget < 0:
                    raise Bad(f"a leaf of `{b['output']}` ({p.fmt}) has a round-off above the "
                              f"stated {stated:e}")
                boxes = [h for bx in bad for h in halves(bx, p.box)]
            rows.setdefault(b["output"], {})[p.fmt] = stated
    return [f"{n} <= {v['f64']:.3e} (f64), <= {v['f32']:.3e} (f32)" for n, v in rows.items()]


def halves(bx, whole):
    """A box halved along its widest coordinate relative to the whole box."""
    widths = [(bx[j][1] - bx[j][0]) / (w[1] - w[0]) if w[1] > w[0] else 0.0
              for j, w in enumerate(whole)]
    j = max(range(len(bx)), key=lambda i: widths[i])
    lo, hi = bx[j]
    mid = 0.5 * lo + 0.5 * hi
    if not lo < mid < hi:
        return [bx]
    a, b = list(bx), list(bx)
    a[j], b[j] = (lo, mid), (mid, hi)
    return [a, b]
